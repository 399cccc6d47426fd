// Geometry and text of the variation heat map (pure functions, no DOM): which cell is under
// the pointer, how big the cells and the labels are, what the readout says. Every number
// shown comes from the kernel; this file only places and formats it.

/** Smallest and largest cell size, px (the zoom buttons step between them). */
export const MIN_CELL = 4;
export const MAX_CELL = 32;
/** Cells smaller than this hide the part names (they would not be readable). */
export const MIN_LABELLED_CELL = 9;
/** Widest room for the row names on the left, px. */
export const MAX_NAME_WIDTH = 150;
/** Room allowed per character of a part name (11 px text), px. */
export const CHAR_PX = 7;

/**
 * Cell (row, column) under a point of the canvas, or null outside the matrix.
 * @param {number} x px from the canvas's left edge
 * @param {number} y px from its top edge
 * @param {number} cell cell size, px
 * @param {number} size number of parts
 * @returns {[number, number] | null}
 */
export function cellAt(x, y, cell, size) {
  if (!(cell > 0) || !(size > 0) || x < 0 || y < 0) return null;
  const col = Math.floor(x / cell);
  const row = Math.floor(y / cell);
  if (row >= size || col >= size) return null;
  return [row, col];
}

/** Cell sizes the zoom steps through, px. */
export const ZOOM_STEPS = [4, 5, 6, 7, 8, 9, 10, 12, 14, 16, 18, 20, 24, 28, 32];

/**
 * The next cell size of a zoom step (in or out), kept within MIN_CELL .. MAX_CELL.
 * @param {number} cell
 * @param {number} direction +1 (bigger) or -1 (smaller)
 * @returns {number}
 */
export function zoomStep(cell, direction) {
  if (direction > 0) {
    const next = ZOOM_STEPS.find((s) => s > cell);
    return next === undefined ? MAX_CELL : next;
  }
  const smaller = ZOOM_STEPS.filter((s) => s < cell);
  return smaller.length ? smaller[smaller.length - 1] : MIN_CELL;
}

/**
 * Font size of the part names for a cell size (0 when they are hidden).
 * @param {number} cell
 * @returns {number}
 */
export function labelFont(cell) {
  if (cell < MIN_LABELLED_CELL) return 0;
  return Math.min(12, cell - 1);
}

/**
 * Room for the names along one side: the longest name's width, capped.
 * @param {string[]} names
 * @param {number} cell
 * @returns {number} px (a small strip when names are hidden)
 */
export function nameRoom(names, cell) {
  const font = labelFont(cell);
  if (font === 0) return 6;
  const longest = names.reduce((m, n) => Math.max(m, String(n).length), 1);
  return Math.min(MAX_NAME_WIDTH, Math.ceil(longest * CHAR_PX * (font / 11)) + 8);
}

/**
 * A value as text: 3 significant digits, "n/a" when missing.
 * @param {number | null | undefined} value
 * @returns {string}
 */
export function formatValue(value) {
  if (value === null || value === undefined || !Number.isFinite(value)) return "n/a";
  if (value === 0) return "0";
  return value.toPrecision(3);
}

/**
 * The readout of a hovered cell.
 * @param {string[]} names
 * @param {number} row
 * @param {number} col
 * @param {number} value
 * @returns {string}
 */
export function readoutText(names, row, col, value) {
  const a = names[row];
  const b = names[col];
  if (row === col) return `${a}: the diagonal (a part with itself) is 0`;
  return `var ln(${a} / ${b}) = ${formatValue(value)}  (click to use this pair)`;
}
