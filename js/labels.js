// Text of every label the builder shows. Pure functions returning plain strings:
// callers put them in the DOM with textContent only, never as markup.

/** Shown for a number that is not available. */
export const NO_VALUE = "\u2013";

/**
 * Default balance name, the same form the kernel uses: "num1,num2 | den1,den2".
 * @param {string[]} numerator
 * @param {string[]} denominator
 * @returns {string}
 */
export function defaultBalanceName(numerator, denominator) {
  return `${numerator.join(",")} | ${denominator.join(",")}`;
}

/**
 * Label of a node's group of parts ("a, b, c").
 * @param {string[]} parts
 * @returns {string}
 */
export function partsLabel(parts) {
  return parts.map(String).join(", ");
}

/**
 * Shorten a text to at most `max` characters (an ellipsis marks the cut).
 * @param {string} text
 * @param {number} max
 * @returns {string}
 */
export function truncate(text, max) {
  const s = String(text);
  if (max < 1 || s.length <= max) return s;
  return `${s.slice(0, Math.max(0, max - 1))}\u2026`;
}

/**
 * A number for display, or a dash when it is missing or not finite.
 * @param {number | null | undefined} x
 * @param {number} [digits] significant digits
 * @returns {string}
 */
export function formatNumber(x, digits = 3) {
  if (x === null || x === undefined || typeof x !== "number" || !Number.isFinite(x)) {
    return NO_VALUE;
  }
  if (x === 0) return "0";
  const a = Math.abs(x);
  if (a >= 1e5 || a < 1e-3) return x.toExponential(digits - 1);
  return Number(x.toPrecision(digits)).toString();
}

/**
 * A share (0..1) as a percentage.
 * @param {number | null | undefined} share
 * @returns {string}
 */
export function formatShare(share) {
  if (share === null || share === undefined || !Number.isFinite(share)) return NO_VALUE;
  return `${(100 * share).toFixed(1)} %`;
}

/**
 * A count with its unit: "1 row", "3 rows", "1 balance", "2 parts".
 * @param {number} n
 * @param {string} unit singular
 * @param {string} [plural]
 * @returns {string}
 */
export function countOf(n, unit, plural = `${unit}s`) {
  const k = Math.max(0, Math.trunc(Number(n) || 0));
  return `${k.toLocaleString("en-US")} ${k === 1 ? unit : plural}`;
}

/**
 * The count of selected rows, e.g. "123 rows selected".
 * @param {number} n
 * @returns {string}
 */
export function selectedCountText(n) {
  return `${countOf(n, "row")} selected`;
}

/**
 * Which rows the statistics use, when some rows are left out ("" when none is).
 * @param {number} nUsed rows complete in the active parts
 * @param {number} nRows rows of the table
 * @returns {string}
 */
export function rowsUsedText(nUsed, nRows) {
  const used = Math.max(0, Math.trunc(Number(nUsed) || 0));
  const rows = Math.max(0, Math.trunc(Number(nRows) || 0));
  if (rows === 0 || used >= rows) return "";
  return `statistics on ${used.toLocaleString("en-US")} of ${countOf(rows, "row")} (${countOf(rows - used, "row")} missing or zero in an active part)`;
}

/**
 * The total variance line.
 * @param {number | null | undefined} total
 * @returns {string}
 */
export function totalVarianceText(total) {
  return `total variance: ${formatNumber(total)}`;
}

/**
 * Accessible description of a leaf in the dendrogram.
 * @param {string[]} parts
 * @returns {string}
 */
export function leafTitle(parts) {
  if (parts.length < 2) return `part ${parts[0] ?? ""} (a single part is not split)`;
  return `group of ${parts.length} parts: ${partsLabel(parts)} (click to split)`;
}

/**
 * Tooltip (and accessible name) of a balance in the dendrogram.
 * @param {string} name
 * @param {number | null | undefined} variance
 * @param {number | null | undefined} share
 * @param {boolean} [extended] the bar is drawn longer than its variance
 * @returns {string}
 */
export function balanceTitle(name, variance, share, extended = false) {
  const note = extended ? "; its bar is lengthened (dotted end) to stay readable" : "";
  return `${name}: variance ${formatNumber(variance)} (${formatShare(share)} of the total)${note}; click to colour the other views by this balance`;
}

/**
 * Tooltip of the dendrogram's scale bar.
 * @param {number} value
 * @returns {string}
 */
export function scaleTitle(value) {
  return `scale: this bar is as long as a balance of variance ${formatNumber(value)}`;
}
