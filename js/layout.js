// Layout of the balance dendrogram (no DOM): plain objects with pixel positions.
//
// The root is at the top. Each balance (split node) has a vertical bar whose length is
// its variance: the bar starts on its parent's horizontal axis (the root's at the top)
// and ends on its own horizontal axis, so the bars add up to the sum of the balance
// variances, i.e. the total variance for a complete partition (the balance dendrogram of
// Egozcue & Pawlowsky-Glahn 2005). The horizontal axis of a balance runs between its two
// children and carries its values: 0 in the middle, positive values toward the numerator
// side (left), negative toward the denominator side. All statistics come from the kernel;
// here they are only placed.

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
 * @property {number} width
 * @property {number} height
 * @property {{top: number, right: number, bottom: number, left: number}} [margin]
 * @property {number} [axisFill] share of the half-distance between the children used by
 *   the value axis (default 0.9)
 * @property {number} [leafGap] px between the deepest balance axis and the leaves (default 16)
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
 * @property {number} x          position of the vertical bar (middle of the axis)
 * @property {number} yTop       top of the bar (the parent's axis), px
 * @property {number} yAxis      bottom of the bar = this balance's axis, px
 * @property {number} length     bar length, px
 * @property {number | null} variance
 * @property {number} depth      cumulative variance (or level) down to this axis
 * @property {{x0: number, x1: number, centre: number, half: number}} axis
 * @property {Marks} marks
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
 */

/**
 * @typedef {Object} DendrogramLayout
 * @property {number} width
 * @property {number} height
 * @property {{x0: number, x1: number, y0: number, y1: number}} plot
 * @property {number} scale      px per unit of variance (0 when nothing to scale); the
 *   deepest axis lies `leafGap` px above the leaves (plot.y1)
 * @property {number} depth      largest cumulative variance (or level count) of a leaf
 * @property {boolean} byLevel   true when some variance was missing: bars are one level each
 * @property {number} radius     value at either end of every balance axis
 * @property {SplitLayout[]} splits   pre-order
 * @property {LeafLayout[]} leaves    left to right
 * @property {{value: number, y: number}[]} ticks  variance scale
 */

/** sin(40 degrees): vertical extent per unit length of a label written at 40 degrees. */
const SIN_40 = 0.6428;

const DEFAULT_MARGIN = { top: 16, right: 16, bottom: 90, left: 48 };

/**
 * @param {unknown} x
 * @returns {x is number}
 */
function finite(x) {
  return typeof x === "number" && Number.isFinite(x);
}

/**
 * The value axis of one balance: value -> px between the children's positions.
 * Positive values go toward `x0` (the numerator side); values beyond +-radius are clamped.
 * @param {number} x0 numerator-side end
 * @param {number} x1 denominator-side end
 * @param {number} radius value shown at the ends
 * @param {number} [fill] share of the half width used
 * @returns {{x0: number, x1: number, centre: number, half: number, toPx: (v: number) => number}}
 */
export function balanceAxis(x0, x1, radius, fill = 0.9) {
  const centre = (x0 + x1) / 2;
  const half = (Math.abs(x1 - x0) / 2) * fill;
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
 * Round tick values from 0 to `max` (about `count` of them).
 * @param {number} max
 * @param {number} [count]
 * @returns {number[]}
 */
export function niceTicks(max, count = 4) {
  if (!(max > 0) || !Number.isFinite(max)) return [0];
  const raw = max / count;
  let mag = 1;
  while (mag * 10 <= raw) mag *= 10;
  while (mag > raw) mag /= 10;
  const step = [1, 2, 2.5, 5, 10].map((m) => m * mag).find((s) => s >= raw) || 10 * mag;
  const out = [];
  for (let k = 0; k * step <= max * (1 + 1e-9); k += 1) out.push(Number((k * step).toPrecision(12)));
  return out;
}

/**
 * Bottom margin (px) for part labels written at 40 degrees below the leaves.
 * @param {string[]} parts
 * @param {number} [charWidth] average px per character
 * @returns {number}
 */
export function labelMargin(parts, charWidth = 6.5) {
  const longest = parts.reduce((m, p) => Math.max(m, String(p).length), 0);
  return Math.round(Math.min(160, 24 + longest * charWidth * SIN_40));
}

/**
 * Lay out the dendrogram.
 * @param {TreeNode} tree
 * @param {BalanceStats[]} stats one entry per split node (matched by id)
 * @param {SelectionStats[]} selection one entry per split node (matched by id), may be empty
 * @param {LayoutOptions} options
 * @returns {DendrogramLayout}
 */
export function layoutDendrogram(tree, stats, selection, options) {
  const margin = { ...DEFAULT_MARGIN, ...(options.margin || {}) };
  const plot = {
    x0: margin.left,
    x1: options.width - margin.right,
    y0: margin.top,
    y1: options.height - margin.bottom,
  };
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
  const slotWidth = (plot.x1 - plot.x0) / Math.max(1, slotCount);
  const slotX = (/** @type {number} */ k) => plot.x0 + (k + 0.5) * slotWidth;

  // Depth (in variance units, or levels when a variance is missing).
  const splitList = [];
  (function collect(/** @type {TreeNode} */ node) {
    if (!isLeaf(node)) {
      splitList.push(node);
      node.children.forEach(collect);
    }
  })(tree);
  const byLevel = splitList.some((n) => !finite(byId.get(n.id)?.variance));
  const step = (/** @type {TreeNode} */ n) => {
    if (byLevel) return 1;
    const v = /** @type {number} */ (byId.get(n.id)?.variance);
    return Math.max(0, v);
  };

  /** @type {Map<string, {x: number, depth: number}>} */
  const anchor = new Map();
  /** @type {Map<string, number>} */
  const topDepth = new Map();
  let maxDepth = 0;
  (function place(/** @type {TreeNode} */ node, /** @type {number} */ top) {
    topDepth.set(node.id, top);
    if (isLeaf(node)) {
      const slot = /** @type {{node: TreeNode, first: number}} */ (
        leafSlots.find((l) => l.node === node)
      );
      const x = (slotX(slot.first) + slotX(slot.first + node.parts.length - 1)) / 2;
      anchor.set(node.id, { x, depth: top });
      maxDepth = Math.max(maxDepth, top);
      return;
    }
    const depth = top + step(node);
    node.children.forEach((c) => place(c, depth));
    const a = /** @type {{x: number}} */ (anchor.get(node.children[0].id));
    const b = /** @type {{x: number}} */ (anchor.get(node.children[1].id));
    anchor.set(node.id, { x: (a.x + b.x) / 2, depth });
    maxDepth = Math.max(maxDepth, depth);
  })(tree, 0);

  const gap = Math.max(0, Math.min(options.leafGap ?? 16, (plot.y1 - plot.y0) / 2));
  const scale = maxDepth > 0 ? (plot.y1 - gap - plot.y0) / maxDepth : 0;
  const yOf = (/** @type {number} */ d) => plot.y0 + d * scale;
  const radius = axisRadius(stats, selection);

  /** @type {SplitLayout[]} */
  const splits = splitList.map((node) => {
    const own = /** @type {{x: number, depth: number}} */ (anchor.get(node.id));
    const a = /** @type {{x: number}} */ (anchor.get(node.children[0].id));
    const b = /** @type {{x: number}} */ (anchor.get(node.children[1].id));
    const ax = balanceAxis(a.x, b.x, radius, options.axisFill ?? 0.9);
    const s = byId.get(node.id);
    const sel = selById.get(node.id);
    const px = (/** @type {unknown} */ v) => (finite(v) ? ax.toPx(v) : null);
    const pair = (/** @type {unknown} */ lo, /** @type {unknown} */ hi) =>
      finite(lo) && finite(hi) ? /** @type {[number, number]} */ ([ax.toPx(lo), ax.toPx(hi)]) : null;
    const top = /** @type {number} */ (topDepth.get(node.id));
    return {
      id: node.id,
      x: own.x,
      yTop: yOf(top),
      yAxis: yOf(own.depth),
      length: yOf(own.depth) - yOf(top),
      variance: s && finite(s.variance) ? s.variance : null,
      depth: own.depth,
      axis: { x0: ax.x0, x1: ax.x1, centre: ax.centre, half: ax.half },
      marks: {
        mean: px(s?.mean),
        median: px(s?.q50),
        box: pair(s?.q25, s?.q75),
        whisker: pair(s?.q5, s?.q95),
        selection:
          sel && sel.n > 0 ? { mean: px(sel.mean), box: pair(sel.q25, sel.q75) } : null,
        groups: (s?.groups || [])
          .filter((g) => finite(g.mean))
          .map((g) => ({ code: g.code, x: ax.toPx(/** @type {number} */ (g.mean)) })),
      },
    };
  });

  /** @type {LeafLayout[]} */
  const leaves = leafSlots.map(({ node, first }) => ({
    id: node.id,
    parts: [...node.parts],
    x: /** @type {{x: number}} */ (anchor.get(node.id)).x,
    x0: plot.x0 + first * slotWidth,
    x1: plot.x0 + (first + node.parts.length) * slotWidth,
    yTop: yOf(/** @type {number} */ (topDepth.get(node.id))),
    yBottom: plot.y1,
    slots: node.parts.map((part, i) => ({ part, x: slotX(first + i) })),
  }));

  const ticks = byLevel || scale === 0 ? [] : niceTicks(maxDepth).map((value) => ({ value, y: yOf(value) }));

  return {
    width: options.width,
    height: options.height,
    plot,
    scale,
    depth: maxDepth,
    byLevel,
    radius,
    splits,
    leaves,
    ticks,
  };
}
