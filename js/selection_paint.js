// Selection styles on the points of a scatter mark, written only where they change.
//
// A point is in one of three states: no selection shown, selected, unselected. Its inline
// style must carry the state's style (nothing for "no selection"); a key of a style the
// state does not set is removed, except the keys the mark's default style writes on every
// point (fill, stroke, opacity, stroke-width): those go back to their default, drawn by
// the caller's restoreDefaults for exactly the points that need it.
//
// Each point remembers the style object last painted on it, so a change of selection
// touches only the points whose state changed, and writes only what the move from the
// old style to the new one changes (a plan per pair of styles, made once per paint). A
// "verify" pass (after the mark's own full restyle, which sets the defaults and the
// state styles but never removes a key) reads every point's inline style instead and
// corrects what differs.

/** The properties a bqplot scatter's default style writes on every point. */
export const DEFAULT_KEYS = new Set(["fill", "stroke", "opacity", "stroke-width"]);

const NO_STYLE = Object.freeze({});

/**
 * A function giving a style value as the browser writes it back (e.g. "#111111" may read
 * back as "rgb(17, 17, 17)"), computed once per key and value on a probe element.
 * @param {Document} document
 * @returns {(key: string, value: unknown) => string}
 */
export function styleNormaliser(document) {
  const probe = document.createElementNS("http://www.w3.org/2000/svg", "g");
  const cache = new Map();
  return (key, value) => {
    const id = `${key}\u0000${value}`;
    let out = cache.get(id);
    if (out === undefined) {
      probe.style.setProperty(key, String(value));
      out = probe.style.getPropertyValue(key);
      probe.style.removeProperty(key);
      cache.set(id, out);
    }
    return out;
  };
}

/**
 * State of each point: 0 no selection shown, 1 selected, 2 unselected.
 * @param {number} n number of points
 * @param {ArrayLike<number> | null | undefined} selected positions (others ignored)
 * @returns {Uint8Array}
 */
export function selectionStates(n, selected) {
  const state = new Uint8Array(n);
  if (selected === null || selected === undefined) return state;
  state.fill(2);
  // a typed array ignores positions out of its range
  for (let k = 0; k < selected.length; k += 1) state[selected[k]] = 1;
  return state;
}

/**
 * What repainting a point from style `before` (null: not known) to style `after` takes:
 * whether its defaults are redrawn first, and the [key, value] writes ("" removes).
 * @param {Record<string, unknown> | null} before
 * @param {Record<string, unknown>} after
 * @param {string[]} keys every key painted so far
 * @param {(key: string, value: unknown) => string} normalise
 * @returns {{restore: boolean, writes: [string, string][]}}
 */
export function repaintPlan(before, after, keys, normalise) {
  let restore = false;
  for (const key of DEFAULT_KEYS) {
    if (!(key in after) && (before === null || key in before)) restore = true;
  }
  /** @type {[string, string][]} */
  const writes = [];
  for (const key of keys) {
    const isDefault = DEFAULT_KEYS.has(key);
    if (key in after) {
      const value = normalise(key, after[key]);
      // a known old value that is the same needs no write (the defaults are not known)
      const known = before !== null && !(isDefault && (restore || !(key in before)));
      const old = known ? (key in before ? normalise(key, before[key]) : "") : null;
      if (old !== value) writes.push([key, value]);
    } else if (!isDefault && (before === null || key in before)) {
      writes.push([key, ""]);
    }
  }
  return { restore, writes };
}

/**
 * Paint the selection styles on the points.
 * @param {ArrayLike<any>} points the points' elements, in data order
 * @param {ArrayLike<number> | null | undefined} selected positions selected; null: none shown
 * @param {Record<string, unknown>} selectedStyle
 * @param {Record<string, unknown>} unselectedStyle
 * @param {{keys: Set<string>, normalise: (key: string, value: unknown) => string,
 *          restoreDefaults: (positions: number[]) => void}} ctx keys: every key painted so
 *   far (it grows: a key left out of both styles is still removed)
 * @param {boolean} [verify] read every point instead of trusting what each remembers
 * @returns {{writes: number, restored: number, touched: number}}
 */
export function paintSelection(points, selected, selectedStyle, unselectedStyle, ctx, verify = false) {
  const n = points.length;
  const byState = [NO_STYLE, selectedStyle || NO_STYLE, unselectedStyle || NO_STYLE];
  for (const style of byState) for (const key of Object.keys(style)) ctx.keys.add(key);
  const keys = [...ctx.keys];
  const state = selectionStates(n, selected);
  return verify
    ? verifyPoints(points, state, byState, keys, ctx.normalise)
    : repaintPoints(points, state, byState, keys, ctx);
}

/** Repaint the points whose remembered style is not their state's (see paintSelection). */
function repaintPoints(points, state, byState, keys, ctx) {
  const plans = new Map(); // old style -> per state, its plan
  const planOf = (before, s) => {
    let row = plans.get(before);
    if (!row) {
      row = [];
      plans.set(before, row);
    }
    if (!row[s]) row[s] = repaintPlan(before, byState[s], keys, ctx.normalise);
    return row[s];
  };
  const restore = [];
  const todo = [];
  for (let i = 0; i < points.length; i += 1) {
    const before = points[i].__cwSelectionPaint;
    const after = byState[state[i]];
    if (before === after) continue;
    todo.push(i);
    if (planOf(before === undefined ? null : before, state[i]).restore) restore.push(i);
  }
  // defaults first, then the new style over them
  if (restore.length) ctx.restoreDefaults(restore);
  let writes = 0;
  for (const i of todo) {
    const point = points[i];
    const before = point.__cwSelectionPaint;
    const plan = planOf(before === undefined ? null : before, state[i]).writes;
    const css = point.style;
    for (let k = 0; k < plan.length; k += 1) {
      const [key, value] = plan[k];
      if (value === "") css.removeProperty(key);
      else css.setProperty(key, value);
    }
    writes += plan.length;
    point.__cwSelectionPaint = byState[state[i]];
  }
  return { writes, restored: restore.length, touched: todo.length };
}

/** Read every point and correct what differs from its state's style (see paintSelection). */
function verifyPoints(points, state, byState, keys, normalise) {
  // per state, what each key must read: a normalised value, or "" (not set)
  const wanted = byState.map((style) =>
    keys.map((key) => (key in style ? normalise(key, style[key]) : "")),
  );
  let writes = 0;
  for (let i = 0; i < points.length; i += 1) {
    const point = points[i];
    const want = wanted[state[i]];
    const css = point.style;
    for (let k = 0; k < keys.length; k += 1) {
      const key = keys[k];
      const value = want[k];
      if (value === "" && DEFAULT_KEYS.has(key)) continue; // its default, drawn by the mark
      if (css.getPropertyValue(key) === value) continue;
      if (value === "") css.removeProperty(key);
      else css.setProperty(key, value);
      writes += 1;
    }
    point.__cwSelectionPaint = byState[state[i]];
  }
  return { writes, restored: 0, touched: points.length };
}
