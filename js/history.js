// Undo / redo of tree edits: an immutable stack of tree snapshots.
// Every function returns a new history; snapshots are frozen so no edit can change them.

/**
 * @template T
 * @typedef {Object} History
 * @property {T[]} past     older states, oldest first
 * @property {T} present    the current state
 * @property {T[]} future   states undone, next redo first
 * @property {number} cap   most states kept in `past`
 */

/** Default number of undo steps kept. */
export const HISTORY_CAP = 100;

/**
 * Deep-freeze a plain JSON-like value (returns it).
 * @template T
 * @param {T} value
 * @returns {T}
 */
export function deepFreeze(value) {
  if (value && typeof value === "object" && !Object.isFrozen(value)) {
    Object.freeze(value);
    for (const v of Object.values(value)) deepFreeze(v);
  }
  return value;
}

/**
 * A history holding one state.
 * @template T
 * @param {T} initial
 * @param {number} [cap]
 * @returns {History<T>}
 */
export function createHistory(initial, cap = HISTORY_CAP) {
  if (!(cap >= 1)) throw new Error(`history cap must be at least 1, got ${cap}`);
  return Object.freeze({
    past: Object.freeze([]),
    present: deepFreeze(initial),
    future: Object.freeze([]),
    cap,
  });
}

/**
 * Record a new state after an edit: the old present goes to `past` (oldest dropped past
 * the cap) and the redo states are cleared.
 * @template T
 * @param {History<T>} h
 * @param {T} state
 * @returns {History<T>}
 */
export function pushState(h, state) {
  const past = [...h.past, h.present];
  while (past.length > h.cap) past.shift();
  return Object.freeze({
    past: Object.freeze(past),
    present: deepFreeze(state),
    future: Object.freeze([]),
    cap: h.cap,
  });
}

/**
 * @template T
 * @param {History<T>} h
 * @returns {boolean}
 */
export function canUndo(h) {
  return h.past.length > 0;
}

/**
 * @template T
 * @param {History<T>} h
 * @returns {boolean}
 */
export function canRedo(h) {
  return h.future.length > 0;
}

/**
 * Step back (unchanged when there is nothing to undo).
 * @template T
 * @param {History<T>} h
 * @returns {History<T>}
 */
export function undo(h) {
  if (!canUndo(h)) return h;
  return Object.freeze({
    past: Object.freeze(h.past.slice(0, -1)),
    present: h.past[h.past.length - 1],
    future: Object.freeze([h.present, ...h.future]),
    cap: h.cap,
  });
}

/**
 * Step forward again (unchanged when there is nothing to redo).
 * @template T
 * @param {History<T>} h
 * @returns {History<T>}
 */
export function redo(h) {
  if (!canRedo(h)) return h;
  return Object.freeze({
    past: Object.freeze([...h.past, h.present]),
    present: h.future[0],
    future: Object.freeze(h.future.slice(1)),
    cap: h.cap,
  });
}

/**
 * Drop the present state and go back to the previous one without keeping a redo step
 * (used when the kernel refused the last edit).
 * @template T
 * @param {History<T>} h
 * @returns {History<T>}
 */
export function dropPresent(h) {
  if (!canUndo(h)) return h;
  return Object.freeze({
    past: Object.freeze(h.past.slice(0, -1)),
    present: h.past[h.past.length - 1],
    future: h.future,
    cap: h.cap,
  });
}
