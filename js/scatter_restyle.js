// Faster selection restyle of a bqplot scatter view (taken over by figure_speedups.js).
//
// On each change of `selected`, bqplot 0.13's scatter rewrites the default style of every
// point (fill, stroke, opacity, stroke-width: four style writes per point) before it
// writes the selected and unselected styles, and it never removes a key of those styles.
// At 2,000 points that is about 15 ms of script per view, and a brush updates four views
// in a row. A view taken over paints its selection with selection_paint.js instead: only
// the selection styles, only on the points whose state changed, keys removed when a
// style no longer sets them (so clearing a selection unfades every point). bqplot's own
// full restyle (new points, colours) still runs, followed by a check of every point's
// selection style. A view is taken over only if it has the methods relied on; otherwise
// bqplot's own code keeps running (the same picture, slower). A view taken over carries
// the attribute data-cw-restyle="fast" on its element.

import { paintSelection, styleNormaliser } from "./selection_paint.js";

/** Methods of a bqplot scatter view this module relies on. */
const NEEDED = [
  "apply_styles", "set_default_style", "listenTo", "stopListening", "update_selected",
];

/**
 * Whether a style object sets anything.
 * @param {unknown} style
 * @returns {boolean}
 */
function sets(style) {
  return Boolean(style) && Object.keys(/** @type {object} */ (style)).length > 0;
}

/**
 * Take over the selection restyle of one bqplot scatter view.
 * @param {any} view a bqplot ScatterBase view (rendered)
 * @returns {boolean} whether the view was taken over
 */
export function speedUpScatter(view) {
  if (!view || view.__cwRestyle) return Boolean(view && view.__cwRestyle);
  const usable = view.model && view.d3el && typeof view.d3el.selectAll === "function"
    && view.el && NEEDED.every((name) => typeof view[name] === "function");
  if (!usable) return false;
  const ctx = {
    keys: new Set(),
    normalise: styleNormaliser(view.el.ownerDocument),
    /** @param {number[]} positions */
    restoreDefaults: (positions) => view.set_default_style(positions),
  };
  // hover styles are bqplot's to draw
  const hoverStyled = () => sets(view.hovered_style) || sets(view.unhovered_style);
  /** @param {boolean} verify */
  const paint = (verify) => paintSelection(
    view.d3el.selectAll(".element").nodes(),
    view.selected_indices,
    view.selected_style || {},
    view.unselected_style || {},
    ctx,
    verify,
  );
  const fullRestyle = view.apply_styles;
  view.apply_styles = function applyStylesThenCheck(...args) {
    const out = fullRestyle.apply(this, args);
    paint(true);
    return out;
  };
  // the selection styles alone; with a hover style set, bqplot's full restyle
  const restyle = () => (hoverStyled() ? view.apply_styles() : paint(false));
  const model = view.model;
  const follow = (event, update) => {
    view.stopListening(model, event);
    view.listenTo(model, event, update);
  };
  follow("change:selected", (_, value) => {
    view.selected_indices = value;
    restyle();
  });
  follow("change:selected_style", (_, value) => {
    view.selected_style = value;
    restyle();
  });
  follow("change:unselected_style", (_, value) => {
    view.unselected_style = value;
    restyle();
  });
  follow("change:hovered_point", (_, value) => {
    view.hovered_index = value === null || value === undefined ? null : [value];
    if (hoverStyled()) view.apply_styles();
  });
  view.__cwRestyle = { restyle };
  paint(true);
  view.el.setAttribute("data-cw-restyle", "fast");
  return true;
}

/**
 * Show a selection on a view taken over, ahead of the mark's own messages (which then
 * find nothing left to change). The selected style stays the view's.
 * @param {any} view
 * @param {ArrayLike<number> | null} selected positions, null: no selection shown
 * @param {Record<string, unknown>} unselectedStyle
 * @returns {boolean} whether the view was one taken over
 */
export function showSelection(view, selected, unselectedStyle) {
  const own = view && view.__cwRestyle;
  if (!own) return false;
  view.selected_indices = selected;
  view.unselected_style = unselectedStyle;
  own.restyle();
  return true;
}
