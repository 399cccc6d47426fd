// Layout of the balance dendrogram (no DOM): plain objects with pixel positions.
//
// The root is at the top. Each balance (split node) has a vertical bar whose length is
// its variance: the bar starts on its parent's horizontal axis (the root's at the top)
// and ends on its own horizontal axis (the balance dendrogram of Egozcue &
// Pawlowsky-Glahn 2005). The horizontal axis of a balance runs between its two children
// and carries its values: 0 in the middle, positive values toward the numerator side
// (left), negative toward the denominator side. All statistics come from the kernel;
// here they are only placed.
//
// The figure grows with the partition so that nothing overlaps: one slot of
// GEOMETRY.slotWidth px per part, and a bar never shorter than GEOMETRY.minBar px (the
// height of the marks around an axis plus a gap), so an axis and the axes below it never
// touch. A bar whose variance would draw it shorter than that keeps its true length as a
// solid part and is lengthened by a dotted part ("extended"); a scale bar at the left
// gives the px per unit of variance. The height is GEOMETRY.barRoom px for the
// proportional parts plus GEOMETRY.minBar px per further level of the deepest path.

import { formatNumber, truncate } from "./labels.js";
import { isLeaf } from "./tree.js";

/**
 * @typedef {import("./tree.js").TreeNode} TreeNode
 */

/**
 * Per-balance statistics sent by the kernel (only the fields used here).
 * @typedef {Object} BalanceStats
 * @property {string} id
 * @property {number | null} variance
 * @property {number | null} [mean]
 * @property {number | null} [q5]
 * @property {number | null} [q25]
 * @property {number | null} [q50]
 * @property {number | null} [q75]
 * @property {number | null} [q95]
 * @property {{code: number, mean: number | null}[]} [groups]
 */

/**
 * Statistics of the selected samples on one balance.
 * @typedef {Object} SelectionStats
 * @property {string} id
 * @property {number} n
 * @property {number | null} mean
 * @property {number | null} q25
 * @property {number | null} q75
 */

/**
 * @typedef {Object} LayoutOptions
 * @property {number} [slotWidth]  px per part (default GEOMETRY.slotWidth)
 * @property {number} [minWidth]   narrowest figure, px (default GEOMETRY.minWidth)
 * @property {number} [charWidth]  px per character assumed for the part labels
 */

/**
 * An axis-aligned box, px: x0 <= x1, y0 <= y1.
 * @typedef {{x0: number, x1: number, y0: number, y1: number}} Box
 */

/**
 * @typedef {Object} Marks
 * @property {number | null} mean
 * @property {number | null} median
 * @property {[number, number] | null} box      25 % .. 75 %
 * @property {[number, number] | null} whisker  5 % .. 95 %
 * @property {{mean: number | null, box: [number, number] | null} | null} selection
 * @property {{code: number, x: number}[]} groups
 */

/**
 * @typedef {Object} SplitLayout
 * @property {string} id
 * @property {string | null} parent id of the parent balance (null for the root)
 * @property {number} x          position of the vertical bar (middle of the axis)
 * @property {number} yTop       top of the bar (the parent's axis), px
 * @property {number} yAxis      bottom of the bar = this balance's axis, px
 * @property {number} length     drawn bar length, px (>= GEOMETRY.minBar)
 * @property {number} ySolid     end of the solid part: yTop + variance * scale
 * @property {boolean} extended  the bar is drawn longer than its variance (dotted end)
 * @property {number | null} variance
 * @property {{x0: number, x1: number, centre: number, half: number}} axis
 * @property {Marks} marks
 * @property {Box} bar           room of the bar (its widest stroke)
 * @property {Box} band          the axis line with the room of the marks above and below
 * @property {Box} marksBox      where the marks can be (the axis less its ends)
 */

/**
 * @typedef {Object} LabelLayout
 * @property {string} part
 * @property {string} text     the label as drawn (shortened to GEOMETRY.labelChars)
 * @property {number} x        anchor (end of the text), px
 * @property {number} y
 * @property {[number, number][]} corners  the label's room, rotated: four corners
 */

/**
 * @typedef {Object} LeafLayout
 * @property {string} id
 * @property {string[]} parts
 * @property {number} x       middle of the leaf's slots
 * @property {number} x0      left edge of its first slot
 * @property {number} x1      right edge of its last slot
 * @property {number} yTop    the parent's axis (the top of the plot for an unsplit root)
 * @property {number} yBottom the baseline
 * @property {{part: string, x: number}[]} slots
 * @property {LabelLayout[]} labels
 * @property {Box} dot        room of the leaf marker
 */

/**
 * @typedef {Object} ScaleBar
 * @property {number} value   variance the bar stands for
 * @property {string} label   the value as written left of the bar
 * @property {string} caption written above the bar
 * @property {number} x
 * @property {number} y0
 * @property {number} y1
 * @property {Box} box        room of the bar, its ticks, its value and its caption
 */

/**
 * @typedef {Object} DendrogramLayout
 * @property {number} width
 * @property {number} height
 * @property {{x0: number, x1: number, y0: number, y1: number}} plot
 * @property {number} slotWidth
 * @property {number} scale      px per unit of variance of the solid bars (0: no scale)
 * @property {boolean} byLevel   true when some variance was missing: bars are one level each
 * @property {number} radius     value at either end of every balance axis
 * @property {SplitLayout[]} splits   pre-order
 * @property {LeafLayout[]} leaves    left to right
 * @property {ScaleBar | null} scaleBar
 */

/** Sizes of the dendrogram, px (font sizes as in builder.css). */
export const GEOMETRY = Object.freeze({
  /** Horizontal room per part. */
  slotWidth: 40,
  /** Narrowest figure. */
  minWidth: 360,
  /** Room above the root's axis marks. */
  top: 18,
  /** Room right of the last slot. */
  right: 16,
  /** Room left of the first slot (the scale bar); more when the first label needs it. */
  left: 64,
  /** Marks above an axis: group means at -9 px, radius 3, with their outline. */
  markUp: 13,
  /** Marks below an axis: the selection's mean at +9 px, radius 3.5, with room. */
  markDown: 13,
  /** Half the widest mark (the leaf / selection dots and the mean's diamond), px. */
  markHalf: 5,
  /** Half the widest bar stroke (6 px when active or hovered). */
  barHalf: 3,
  /** Shortest drawn bar: the marks below one axis and above the next, plus a gap. */
  minBar: 32,
  /** Height shared by the solid (proportional) parts along the deepest path. */
  barRoom: 240,
  /** From the deepest axis down to the leaves. */
  leafGap: 24,
  /** Leaf marker radius (a splittable group). */
  leafDot: 4.5,
  /** Part labels: offset below the leaves, font size, ascent and descent, px. */
  labelDrop: 14,
  labelFont: 11,
  labelAscent: 9,
  labelDescent: 3,
  /** Average px per character of a part label (generous: capitals and digits). */
  charWidth: 7,
  /** Longest part label drawn, in characters (the full name is in the tooltip). */
  labelChars: 18,
  /** Longest scale bar, px. */
  maxScaleBar: 120,
});

/** Caption of the scale bar. */
export const SCALE_CAPTION = "variance";

/** cos and sin of the 40 degrees at which part labels are written. */
const COS_40 = 0.766;
const SIN_40 = 0.6428;

/** The marks stay this far inside the ends of an axis (where the child bars start). */
const AXIS_INSET = GEOMETRY.markHalf + GEOMETRY.barHalf + 1;

/**
 * @param {unknown} x
 * @returns {x is number}
 */
function finite(x) {
  return typeof x === "number" && Number.isFinite(x);
}

/**
 * The value axis of one balance: value -> px between the children's positions.
 * Positive values go toward `x0` (the numerator side); values beyond +-radius are clamped;
 * the marks stay `inset` px inside the ends, where the children's bars start.
 * @param {number} x0 numerator-side end
 * @param {number} x1 denominator-side end
 * @param {number} radius value shown at the ends
 * @param {number} [inset] px kept free at each end
 * @returns {{x0: number, x1: number, centre: number, half: number, toPx: (v: number) => number}}
 */
export function balanceAxis(x0, x1, radius, inset = AXIS_INSET) {
  const centre = (x0 + x1) / 2;
  const half = Math.max(0, Math.abs(x1 - x0) / 2 - inset);
  const r = radius > 0 ? radius : 1;
  const dir = x1 >= x0 ? -1 : 1;
  return {
    x0,
    x1,
    centre,
    half,
    toPx(v) {
      const t = Math.max(-1, Math.min(1, v / r));
      return centre + dir * t * half;
    },
  };
}

/**
 * Largest absolute value among the statistics placed on the axes (1 when there is none).
 * @param {BalanceStats[]} stats
 * @param {SelectionStats[]} selection
 * @returns {number}
 */
export function axisRadius(stats, selection) {
  let r = 0;
  const take = (/** @type {unknown} */ v) => {
    if (finite(v)) r = Math.max(r, Math.abs(v));
  };
  for (const s of stats) {
    [s.mean, s.q5, s.q25, s.q50, s.q75, s.q95].forEach(take);
    for (const g of s.groups || []) take(g.mean);
  }
  for (const s of selection) [s.mean, s.q25, s.q75].forEach(take);
  return r > 0 ? r : 1;
}

/**
 * The largest round number (1, 2, 2.5 or 5 times a power of ten) not above `max`.
 * @param {number} max
 * @returns {number} 0 when `max` is not a positive finite number
 */
export function roundBelow(max) {
  if (!(max > 0) || !Number.isFinite(max)) return 0;
  let mag = 1;
  while (mag * 10 <= max) mag *= 10;
  while (mag > max) mag /= 10;
  const step = [5, 2.5, 2, 1].map((m) => m * mag).find((s) => s <= max * (1 + 1e-12)) || mag;
  return Number(step.toPrecision(12));
}

/**
 * Four corners of a part label written at 40 degrees, ending at (x, y) (text-anchor end,
 * rotate(-40 x y)): the text runs down and to the left of its anchor.
 * @param {number} x
 * @param {number} y
 * @param {number} length text length, px
 * @returns {[number, number][]}
 */
export function labelCorners(x, y, length) {
  const { labelAscent: up, labelDescent: down } = GEOMETRY;
  // text frame -> page: along the text (1, 0) -> (cos, -sin); down (0, 1) -> (sin, cos)
  const at = (/** @type {number} */ u, /** @type {number} */ v) =>
    /** @type {[number, number]} */ ([x + u * COS_40 + v * SIN_40, y - u * SIN_40 + v * COS_40]);
  return [at(-length, -up), at(0, -up), at(0, down), at(-length, down)];
}

/**
 * Root-to-leaf paths of split nodes (each path lists the split nodes on it, top first).
 * @param {TreeNode} tree
 * @returns {TreeNode[][]}
 */
function splitPaths(tree) {
  /** @type {TreeNode[][]} */
  const out = [];
  (function walk(/** @type {TreeNode} */ node, /** @type {TreeNode[]} */ above) {
    if (isLeaf(node)) {
      out.push(above);
      return;
    }
    for (const child of node.children) walk(child, [...above, node]);
  })(tree, []);
  return out;
}

/**
 * Px per unit of variance such that the deepest path, each bar drawn at least `minBar`
 * long, is `height` px: the solution of max over paths of sum(max(v * s, minBar)) = height
 * (the left side grows with s; found by bisection).
 * @param {number[][]} paths variances along each root-to-leaf path
 * @param {number} height
 * @param {number} minBar
 * @returns {number} 0 when no variance is positive or the minimum lengths fill `height`
 */
export function fitScale(paths, height, minBar) {
  const drawn = (/** @type {number} */ s) =>
    paths.reduce((m, p) => Math.max(m, p.reduce((a, v) => a + Math.max(v * s, minBar), 0)), 0);
  const widest = paths.reduce((m, p) => Math.max(m, p.reduce((a, v) => a + v, 0)), 0);
  if (!(widest > 0) || drawn(0) >= height) return 0;
  let lo = 0;
  let hi = height / widest; // here the solid parts alone fill the height
  for (let k = 0; k < 60; k += 1) {
    const mid = (lo + hi) / 2;
    if (drawn(mid) > height) hi = mid;
    else lo = mid;
  }
  return lo;
}

/**
 * Lay out the dendrogram; its size follows from the tree (part count, depth, labels).
 * @param {TreeNode} tree
 * @param {BalanceStats[]} stats one entry per split node (matched by id)
 * @param {SelectionStats[]} selection one entry per split node (matched by id), may be empty
 * @param {LayoutOptions} [options]
 * @returns {DendrogramLayout}
 */
export function layoutDendrogram(tree, stats, selection, options = {}) {
  const G = GEOMETRY;
  const charWidth = options.charWidth ?? G.charWidth;
  /** @type {Map<string, BalanceStats>} */
  const byId = new Map(stats.map((s) => [s.id, s]));
  /** @type {Map<string, SelectionStats>} */
  const selById = new Map(selection.map((s) => [s.id, s]));

  // Slots: one per part, left to right, leaves in order.
  /** @type {{node: TreeNode, first: number}[]} */
  const leafSlots = [];
  let slotCount = 0;
  (function walk(/** @type {TreeNode} */ node) {
    if (isLeaf(node)) {
      leafSlots.push({ node, first: slotCount });
      slotCount += node.parts.length;
    } else node.children.forEach(walk);
  })(tree);
  const allParts = leafSlots.flatMap((l) => l.node.parts);
  const texts = allParts.map((p) => truncate(p, G.labelChars));
  const textPx = texts.map((t) => t.length * charWidth);
  const longest = textPx.reduce((m, w) => Math.max(m, w), 0);

  // Vertical: bar lengths.
  const splitList = [];
  (function collect(/** @type {TreeNode} */ node) {
    if (!isLeaf(node)) {
      splitList.push(node);
      node.children.forEach(collect);
    }
  })(tree);
  const byLevel = splitList.some((n) => !finite(byId.get(n.id)?.variance));
  const varianceOf = (/** @type {TreeNode} */ n) =>
    byLevel ? 1 : Math.max(0, /** @type {number} */ (byId.get(n.id)?.variance));
  const paths = splitPaths(tree).map((p) => p.map(varianceOf));
  const levels = paths.reduce((m, p) => Math.max(m, p.length), 0);
  const room = levels ? G.barRoom + G.minBar * (levels - 1) : 0;
  const scale = levels ? fitScale(paths, room, G.minBar) : 0;
  const lengthOf = (/** @type {TreeNode} */ n) => Math.max(varianceOf(n) * scale, G.minBar);

  // The scale bar: a round variance drawn at most maxScaleBar px long, its value at its left.
  const scaleValue = byLevel || scale === 0 ? 0 : roundBelow(Math.min(G.maxScaleBar, G.barRoom / 2) / scale);
  const scaleLabel = scaleValue > 0 ? formatNumber(scaleValue, 2) : "";
  const scaleLabelPx = scaleLabel.length * charWidth;

  // Horizontal: the first label reaches left of its slot; the figure is at least minWidth.
  let slotWidth = options.slotWidth ?? G.slotWidth;
  const firstReach = (textPx[0] || 0) * COS_40 + G.labelAscent * SIN_40 - 3;
  const left = Math.ceil(Math.max(G.left, firstReach - slotWidth / 2 + 4, scaleLabelPx + 34));
  const minWidth = options.minWidth ?? G.minWidth;
  if (left + G.right + slotWidth * slotCount < minWidth) {
    slotWidth = (minWidth - left - G.right) / Math.max(1, slotCount);
  }
  const width = Math.ceil(left + G.right + slotWidth * slotCount);
  const slotX = (/** @type {number} */ k) => left + (k + 0.5) * slotWidth;

  const y0 = G.top;
  /** @type {Map<string, {x: number, y: number}>} */
  const anchor = new Map();
  /** @type {Map<string, number>} */
  const topOf = new Map();
  /** @type {Map<string, string | null>} */
  const parentOf = new Map();
  let deepest = y0;
  (function place(/** @type {TreeNode} */ node, /** @type {number} */ top, /** @type {string | null} */ parent) {
    topOf.set(node.id, top);
    parentOf.set(node.id, parent);
    if (isLeaf(node)) {
      const slot = /** @type {{node: TreeNode, first: number}} */ (leafSlots.find((l) => l.node === node));
      anchor.set(node.id, { x: (slotX(slot.first) + slotX(slot.first + node.parts.length - 1)) / 2, y: top });
      return;
    }
    const y = top + lengthOf(node);
    deepest = Math.max(deepest, y);
    node.children.forEach((c) => place(c, y, node.id));
    const a = /** @type {{x: number}} */ (anchor.get(node.children[0].id));
    const b = /** @type {{x: number}} */ (anchor.get(node.children[1].id));
    anchor.set(node.id, { x: (a.x + b.x) / 2, y });
  })(tree, y0, null);

  const yLeaves = splitList.length ? deepest + G.leafGap : y0 + G.leafGap;
  const labelDepth = G.labelDrop + longest * SIN_40 + G.labelDescent * COS_40;
  const height = Math.ceil(yLeaves + labelDepth + 6);
  const radius = axisRadius(stats, selection);

  /** @type {SplitLayout[]} */
  const splits = splitList.map((node) => {
    const own = /** @type {{x: number, y: number}} */ (anchor.get(node.id));
    const a = /** @type {{x: number}} */ (anchor.get(node.children[0].id));
    const b = /** @type {{x: number}} */ (anchor.get(node.children[1].id));
    const ax = balanceAxis(a.x, b.x, radius);
    const s = byId.get(node.id);
    const sel = selById.get(node.id);
    const px = (/** @type {unknown} */ v) => (finite(v) ? ax.toPx(v) : null);
    const pair = (/** @type {unknown} */ lo, /** @type {unknown} */ hi) =>
      finite(lo) && finite(hi) ? /** @type {[number, number]} */ ([ax.toPx(lo), ax.toPx(hi)]) : null;
    const top = /** @type {number} */ (topOf.get(node.id));
    const solid = byLevel ? own.y - top : Math.min(own.y - top, varianceOf(node) * scale);
    const lo = Math.min(ax.x0, ax.x1);
    const hi = Math.max(ax.x0, ax.x1);
    const band = { y0: own.y - G.markUp, y1: own.y + G.markDown };
    return {
      id: node.id,
      parent: /** @type {string | null} */ (parentOf.get(node.id)),
      x: own.x,
      yTop: top,
      yAxis: own.y,
      length: own.y - top,
      ySolid: top + solid,
      extended: !byLevel && solid < own.y - top - 1e-9,
      variance: s && finite(s.variance) ? s.variance : null,
      axis: { x0: ax.x0, x1: ax.x1, centre: ax.centre, half: ax.half },
      marks: {
        mean: px(s?.mean),
        median: px(s?.q50),
        box: pair(s?.q25, s?.q75),
        whisker: pair(s?.q5, s?.q95),
        selection: sel && sel.n > 0 ? { mean: px(sel.mean), box: pair(sel.q25, sel.q75) } : null,
        groups: (s?.groups || [])
          .filter((g) => finite(g.mean))
          .map((g) => ({ code: g.code, x: ax.toPx(/** @type {number} */ (g.mean)) })),
      },
      bar: { x0: own.x - G.barHalf, x1: own.x + G.barHalf, y0: top, y1: own.y },
      band: { x0: lo, x1: hi, ...band },
      marksBox: { x0: ax.centre - ax.half - G.markHalf, x1: ax.centre + ax.half + G.markHalf, ...band },
    };
  });

  let k = 0;
  /** @type {LeafLayout[]} */
  const leaves = leafSlots.map(({ node, first }) => {
    const x = /** @type {{x: number}} */ (anchor.get(node.id)).x;
    const slots = node.parts.map((part, i) => ({ part, x: slotX(first + i) }));
    const labels = slots.map((slot) => {
      const text = texts[k];
      const length = textPx[k];
      k += 1;
      const lx = slot.x + 3;
      const ly = yLeaves + G.labelDrop;
      return { part: slot.part, text, x: lx, y: ly, corners: labelCorners(lx, ly, length) };
    });
    return {
      id: node.id,
      parts: [...node.parts],
      x,
      x0: left + first * slotWidth,
      x1: left + (first + node.parts.length) * slotWidth,
      yTop: /** @type {number} */ (topOf.get(node.id)),
      yBottom: yLeaves,
      slots,
      labels,
      dot: { x0: x - G.leafDot - 1, x1: x + G.leafDot + 1, y0: yLeaves - G.leafDot - 1, y1: yLeaves + G.leafDot + 1 },
    };
  });

  /** @type {ScaleBar | null} */
  let scaleBar = null;
  if (scaleValue > 0) {
    const x = left - 20;
    const y1 = y0 + scaleValue * scale;
    const caption = SCALE_CAPTION.length * charWidth * 0.9; // drawn at 10 px
    scaleBar = {
      value: scaleValue,
      label: scaleLabel,
      caption: SCALE_CAPTION,
      x,
      y0,
      y1,
      box: { x0: x - 8 - scaleLabelPx, x1: Math.max(x + 4, 4 + caption), y0: y0 - 14, y1: y1 + 2 },
    };
  }

  return {
    width,
    height,
    plot: { x0: left, x1: width - G.right, y0, y1: yLeaves },
    slotWidth,
    scale,
    byLevel,
    radius,
    splits,
    leaves,
    scaleBar,
  };
}
