// Dendrogram layout. The balance dendrogram (Egozcue & Pawlowsky-Glahn 2005): each
// balance's vertical bar is as long as its variance; here the solid part of every bar is
// (a bar too short to read is lengthened by a dotted part). The statistics are invented.
import assert from "node:assert/strict";
import { test } from "node:test";

import { GEOMETRY, axisRadius, balanceAxis, fitScale, labelCorners, layoutDendrogram, roundBelow } from "./layout.js";
import { makeLeaf, splitNode } from "./tree.js";

const close = (a, b, eps = 1e-9) => assert.ok(Math.abs(a - b) <= eps * Math.max(1, Math.abs(b)), `${a} != ${b}`);

/** A complete partition of 4 parts: {A,B} | {C,D}; A | B; C | D. */
function completeTree() {
  let t = splitNode(makeLeaf("n0", ["A", "B", "C", "D"]), "n0", ["A", "B"]);
  t = splitNode(t, t.children[0].id, ["A"]);
  t = splitNode(t, t.children[1].id, ["C"]);
  return t;
}

const VARIANCES = { n0: 0.6, n1: 0.25, n2: 0.15 };

/** Invented statistics of one balance: quantiles -1 < -0.3 < 0.1 < 0.6 < 1.5, two groups. */
function balanceStats(id, variance) {
  return {
    id,
    variance,
    mean: 0.2,
    q5: -1,
    q25: -0.3,
    q50: 0.1,
    q75: 0.6,
    q95: 1.5,
    groups: [
      { code: 0, mean: -0.5 },
      { code: 1, mean: 0.9 },
    ],
  };
}

function stats(tree, variances = VARIANCES) {
  return [tree, tree.children[0], tree.children[1]].map((n) =>
    balanceStats(n.id, variances[n.id === tree.id ? "n0" : n === tree.children[0] ? "n1" : "n2"]),
  );
}

test("solid bar lengths are proportional to the variances and add up along each path", () => {
  const t = completeTree();
  const st = stats(t);
  const lay = layoutDendrogram(t, st, []);
  assert.equal(lay.byLevel, false);
  assert.equal(lay.splits.length, 3);
  for (const split of lay.splits) {
    const s = st.find((x) => x.id === split.id);
    close(split.ySolid - split.yTop, s.variance * lay.scale);
    assert.equal(split.extended, s.variance * lay.scale < GEOMETRY.minBar - 1e-9);
    assert.ok(split.length >= GEOMETRY.minBar - 1e-9);
    close(split.length, Math.max(s.variance * lay.scale, GEOMETRY.minBar));
  }
  // the deepest path fills the room: barRoom + minBar for each level below the first
  const deepest = Math.max(...lay.splits.map((s) => s.yAxis));
  close(deepest - lay.plot.y0, GEOMETRY.barRoom + GEOMETRY.minBar);
  close(lay.plot.y1 - deepest, GEOMETRY.leafGap);
});

test("the scale fits the deepest path: sum over a path of max(v * s, minimum) = room", () => {
  const paths = [
    [1, 0.5],
    [1, 0.01, 0.01],
  ];
  const s = fitScale(paths, 300, 30);
  const drawn = (p) => p.reduce((a, v) => a + Math.max(v * s, 30), 0);
  close(Math.max(...paths.map(drawn)), 300, 1e-6);
  assert.equal(fitScale([[0, 0]], 300, 30), 0, "no positive variance: no scale");
  assert.equal(fitScale([[1, 1, 1]], 60, 30), 0, "the minimum lengths already fill the room");
});

test("a child's bar starts on its parent's axis; leaves sit below the deepest axis", () => {
  const t = completeTree();
  const lay = layoutDendrogram(t, stats(t), []);
  const byId = new Map(lay.splits.map((s) => [s.id, s]));
  const top = byId.get(t.id);
  close(top.yTop, lay.plot.y0);
  assert.equal(top.parent, null);
  for (const child of t.children) {
    const c = byId.get(child.id);
    close(c.yTop, top.yAxis);
    assert.equal(c.parent, t.id);
  }
  for (const leaf of lay.leaves) close(leaf.yBottom, lay.plot.y1);
});

test("leaves take one slot per part, left to right, numerator side first", () => {
  const t = splitNode(makeLeaf("n0", ["A", "B", "C", "D", "E"]), "n0", ["D", "E"]);
  const lay = layoutDendrogram(t, [{ id: t.id, variance: 1 }], []);
  assert.deepEqual(lay.leaves.map((l) => l.parts), [["D", "E"], ["A", "B", "C"]]);
  const xs = lay.leaves.flatMap((l) => l.slots.map((s) => s.x));
  for (let i = 1; i < xs.length; i += 1) close(xs[i] - xs[i - 1], lay.slotWidth);
  close(lay.leaves[0].x1 - lay.leaves[0].x0, 2 * lay.slotWidth);
  close(lay.leaves[1].x1 - lay.leaves[1].x0, 3 * lay.slotWidth);
  close(lay.splits[0].x, (lay.leaves[0].x + lay.leaves[1].x) / 2);
});

test("the figure grows with the part count and the depth", () => {
  const chain = (n) => fullTree(Array.from({ length: n }, (_, i) => `P${i}`), () => 1);
  const sizes = [4, 8, 16, 24].map((n) => layoutDendrogram(chain(n), [], []));
  for (let i = 1; i < sizes.length; i += 1) {
    assert.ok(sizes[i].width > sizes[i - 1].width);
    assert.ok(sizes[i].height > sizes[i - 1].height);
  }
  assert.ok(sizes[3].width >= 24 * GEOMETRY.slotWidth);
  assert.equal(layoutDendrogram(makeLeaf("n0", ["A", "B"]), [], []).width, GEOMETRY.minWidth);
});

test("the value axis is monotone, 0 in the middle, positive toward the numerator side", () => {
  const ax = balanceAxis(100, 300, 2, 10);
  const values = [-3, -2, -1, -0.5, 0, 0.25, 1, 2, 3];
  const px = values.map((v) => ax.toPx(v));
  for (let i = 1; i < px.length; i += 1) assert.ok(px[i] <= px[i - 1], "decreasing in the value");
  for (let i = 2; i < px.length - 2; i += 1) assert.ok(px[i] < px[i - 1], "strict inside the range");
  close(ax.toPx(0), 200);
  close(ax.toPx(2), 200 - 90); // the half width less the inset
  close(ax.toPx(-2), 200 + 90);
  close(ax.toPx(5), ax.toPx(2), 1e-12); // clamped at the ends
  close(ax.toPx(1) - ax.toPx(0.5), ax.toPx(0.5) - ax.toPx(0));
});

test("marks sit on the axis in the order of their values, inside the axis ends", () => {
  const t = completeTree();
  const sel = [{ id: t.id, n: 4, mean: -0.2, q25: -0.4, q75: 0.1 }];
  const lay = layoutDendrogram(t, stats(t), sel);
  const root = lay.splits[0];
  const m = root.marks;
  assert.ok(m.whisker[1] < m.box[1] && m.box[1] < m.mean && m.mean < m.box[0] && m.box[0] < m.whisker[0]);
  assert.ok(m.selection && m.selection.mean > m.mean, "the selection mean (-0.2) is right of the mean (0.2)");
  assert.equal(m.groups.length, 2);
  assert.ok(m.groups[0].x > m.groups[1].x);
  for (const x of [m.mean, ...m.box, ...m.whisker, m.selection.mean, ...m.groups.map((g) => g.x)]) {
    assert.ok(x >= root.marksBox.x0 + GEOMETRY.markHalf - 1e-9 && x <= root.marksBox.x1 - GEOMETRY.markHalf + 1e-9);
  }
  assert.equal(lay.splits[1].marks.selection, null);
});

test("the axis range covers every value placed on it", () => {
  const st = [{ id: "a", variance: 1, mean: 0.1, q5: -2.5, q95: 1.2, groups: [{ code: 0, mean: 3.1 }] }];
  assert.equal(axisRadius(st, [{ id: "a", n: 1, mean: -4, q25: null, q75: null }]), 4);
  assert.equal(axisRadius(st, []), 3.1);
  assert.equal(axisRadius([], []), 1);
});

test("without variances (not yet sent) every bar is one level and there is no scale bar", () => {
  const t = completeTree();
  const lay = layoutDendrogram(t, [], []);
  assert.equal(lay.byLevel, true);
  assert.equal(lay.scaleBar, null);
  const lengths = lay.splits.map((s) => s.length);
  for (const s of lay.splits) {
    assert.equal(s.variance, null);
    assert.equal(s.extended, false);
    close(s.length, lengths[0]);
    assert.equal(s.marks.mean, null);
  }
});

test("an unsplit root is one leaf holding every part", () => {
  const lay = layoutDendrogram(makeLeaf("n0", ["A", "B", "C"]), [], []);
  assert.equal(lay.splits.length, 0);
  assert.equal(lay.leaves.length, 1);
  assert.equal(lay.leaves[0].slots.length, 3);
});

test("the scale bar stands for a round variance and is as long as that variance draws", () => {
  assert.equal(roundBelow(0.85), 0.5);
  assert.equal(roundBelow(3), 2.5);
  assert.equal(roundBelow(10), 10);
  assert.equal(roundBelow(0.0123), 0.01);
  assert.equal(roundBelow(0), 0);
  const t = completeTree();
  const lay = layoutDendrogram(t, stats(t), []);
  const bar = lay.scaleBar;
  assert.ok(bar && [1, 2, 2.5, 5].some((m) => [1e-3, 1e-2, 0.1, 1, 10].some((p) => Math.abs(bar.value - m * p) < 1e-12)));
  close(bar.y1 - bar.y0, bar.value * lay.scale);
  assert.ok(bar.y1 - bar.y0 <= GEOMETRY.maxScaleBar + 1e-9);
  assert.equal(bar.label, String(bar.value));
});

test("label corners: the text runs down and to the left of its anchor at 40 degrees", () => {
  const [farTop, anchorTop, anchorBottom, farBottom] = labelCorners(100, 50, 70);
  assert.ok(farTop[0] < anchorTop[0] && farTop[1] > anchorTop[1], "the start of the text is lower left");
  // the baseline runs at 40 degrees: rise / run = tan 40 = 0.839 (tan 40 degrees = 0.8391)
  const run = anchorTop[0] - farTop[0];
  const rise = farTop[1] - anchorTop[1];
  close(rise / run, 0.8391, 1e-3);
  close(Math.hypot(run, rise), 70, 1e-3);
  close(Math.hypot(anchorBottom[0] - anchorTop[0], anchorBottom[1] - anchorTop[1]), GEOMETRY.labelAscent + GEOMETRY.labelDescent, 1e-3);
  assert.ok(farBottom[1] > farTop[1]);
});

// ---------------------------------------------------------------- no overlap up to 24 parts

/** The leaf holding exactly `parts` (or with id `id`). */
function findLeaf(tree, id, parts) {
  const stack = [tree];
  while (stack.length) {
    const n = stack.pop();
    if (!n.children.length && (id ? n.id === id : n.parts.join() === parts.join())) return n;
    stack.push(...n.children);
  }
  return null;
}

/** A small deterministic generator (a linear congruential one, Numerical Recipes constants). */
function lcg(seed) {
  let s = seed >>> 0;
  return () => {
    s = (Math.imul(1664525, s) + 1013904223) >>> 0;
    return s / 2 ** 32;
  };
}

/** A complete partition of `parts`, each group cut where `cut(m)` says (1 <= cut < m). */
function fullTree(parts, cut) {
  let tree = makeLeaf("n0", parts);
  const todo = ["n0"];
  while (todo.length) {
    const id = todo.pop();
    const leaf = findLeaf(tree, id);
    if (!leaf || leaf.parts.length < 2) continue;
    const k = cut(leaf.parts.length);
    tree = splitNode(tree, id, leaf.parts.slice(0, k));
    const node = (function find(n) {
      if (n.id === id) return n;
      for (const c of n.children) {
        const f = find(c);
        if (f) return f;
      }
      return null;
    })(tree);
    todo.push(node.children[0].id, node.children[1].id);
  }
  return tree;
}

/** Split nodes of a tree, pre-order. */
function splitsOf(tree) {
  const out = [];
  (function walk(n) {
    if (n.children.length) {
      out.push(n);
      n.children.forEach(walk);
    }
  })(tree);
  return out;
}

const SHAPES = {
  "chain, one part peeled at a time": () => 1,
  "chain peeled from the other side": (m) => m - 1,
  halving: (m) => Math.floor(m / 2),
};

const VARIANCE_PATTERNS = {
  "one large, the rest tiny": (k) => (k === 0 ? 5 : 1e-6),
  "equal": () => 0.3,
  "geometric": (k) => 0.5 ** k,
};

/** Strict overlap of two boxes (touching edges do not count; 0.01 px of rounding allowed). */
const boxesOverlap = (a, b) => a.x0 < b.x1 - 0.01 && b.x0 < a.x1 - 0.01 && a.y0 < b.y1 - 0.01 && b.y0 < a.y1 - 0.01;

/** Corners of a box, for the polygon test. */
const cornersOf = (b) => [[b.x0, b.y0], [b.x1, b.y0], [b.x1, b.y1], [b.x0, b.y1]];

/** Convex polygons overlap unless an edge normal of one of them separates them (SAT). */
function polygonsOverlap(p, q) {
  for (const poly of [p, q]) {
    for (let i = 0; i < poly.length; i += 1) {
      const [x1, y1] = poly[i];
      const [x2, y2] = poly[(i + 1) % poly.length];
      const nx = y2 - y1;
      const ny = x1 - x2;
      const proj = (pts) => pts.map(([x, y]) => x * nx + y * ny);
      const a = proj(p);
      const b = proj(q);
      const len = Math.hypot(nx, ny);
      if (Math.max(...a) <= Math.min(...b) + 0.01 * len || Math.max(...b) <= Math.min(...a) + 0.01 * len) return false;
    }
  }
  return true;
}

/** Every pair of drawn things that overlaps, described (empty when none does). */
function overlaps(lay) {
  const found = [];
  const splits = lay.splits;
  for (let i = 0; i < splits.length; i += 1) {
    for (let j = 0; j < splits.length; j += 1) {
      const a = splits[i];
      const b = splits[j];
      if (i < j && boxesOverlap(a.band, b.band)) found.push(`marks of ${a.id} and ${b.id}`);
      if (i < j && boxesOverlap(a.bar, b.bar)) found.push(`bars of ${a.id} and ${b.id}`);
      if (i === j) continue;
      // a child's bar starts on its parent's axis (a joint), away from the parent's marks
      const against = b.parent === a.id ? a.marksBox : a.band;
      if (boxesOverlap(b.bar, against)) found.push(`bar of ${b.id} and marks of ${a.id}`);
    }
  }
  const labels = lay.leaves.flatMap((l) => l.labels);
  for (let i = 0; i < labels.length; i += 1) {
    for (let j = i + 1; j < labels.length; j += 1) {
      if (polygonsOverlap(labels[i].corners, labels[j].corners)) found.push(`labels ${labels[i].part} and ${labels[j].part}`);
    }
    const others = [
      ...splits.flatMap((s) => [s.band, s.bar]),
      ...lay.leaves.map((l) => l.dot),
      ...(lay.scaleBar ? [lay.scaleBar.box] : []),
    ];
    for (const box of others) {
      if (polygonsOverlap(labels[i].corners, cornersOf(box))) found.push(`label ${labels[i].part} and a mark`);
    }
    for (const [x, y] of labels[i].corners) {
      if (x < 0 || y < 0 || x > lay.width || y > lay.height) found.push(`label ${labels[i].part} outside the figure`);
    }
  }
  for (const s of splits) {
    for (const leaf of lay.leaves) if (boxesOverlap(s.band, leaf.dot)) found.push(`marks of ${s.id} and leaf ${leaf.id}`);
    if (lay.scaleBar && (boxesOverlap(s.band, lay.scaleBar.box) || boxesOverlap(s.bar, lay.scaleBar.box))) {
      found.push(`scale bar and ${s.id}`);
    }
    const b = s.band;
    if (b.x0 < 0 || b.y0 < 0 || b.x1 > lay.width || b.y1 > lay.height) found.push(`marks of ${s.id} outside`);
  }
  if (lay.scaleBar) {
    const b = lay.scaleBar.box;
    if (b.x0 < 0 || b.y0 < 0 || b.x1 > lay.width) found.push("scale bar outside the figure");
  }
  return found;
}

test("the checks above do see overlaps (a control: two bars squeezed together)", () => {
  const t = fullTree(["A", "B", "C", "D"], SHAPES.halving);
  const lay = layoutDendrogram(t, splitsOf(t).map((n) => ({ id: n.id, variance: 1 })), []);
  const squeezed = { ...lay, splits: lay.splits.map((s) => ({ ...s, band: { ...s.band, y0: lay.plot.y0, y1: lay.plot.y1 } })) };
  assert.ok(overlaps(squeezed).length > 0);
  const a = labelCorners(100, 100, 60);
  assert.ok(polygonsOverlap(a, labelCorners(108, 100, 60)), "labels 8 px apart overlap");
  assert.ok(!polygonsOverlap(a, labelCorners(100 + GEOMETRY.slotWidth, 100, 60)), "one slot apart they do not");
});

test("no two balance bars, marks or labels overlap, for every part count from 2 to 24", () => {
  const rand = lcg(20240611);
  let checked = 0;
  for (let n = 2; n <= 24; n += 1) {
    const shapes = { ...SHAPES, random: (m) => 1 + Math.floor(rand() * (m - 1)) };
    for (const [shapeName, cut] of Object.entries(shapes)) {
      for (const nameLength of [1, 6, 30]) {
        const parts = Array.from({ length: n }, (_, i) => `${"Xx".repeat(nameLength).slice(0, Math.max(1, nameLength - 2))}${i}`);
        const tree = fullTree(parts, cut);
        const nodes = splitsOf(tree);
        assert.equal(nodes.length, n - 1, "a complete partition");
        const patterns = { ...VARIANCE_PATTERNS, random: () => 1e-4 + rand() };
        for (const [patternName, variance] of Object.entries(patterns)) {
          const st = nodes.map((node, k) => balanceStats(node.id, variance(k)));
          const sel = nodes.map((node) => ({ id: node.id, n: 3, mean: 0.3, q25: 0, q75: 0.5 }));
          const lay = layoutDendrogram(tree, st, sel);
          const bad = overlaps(lay);
          assert.deepEqual(bad, [], `${n} parts, ${shapeName}, names of ${nameLength}, ${patternName}`);
          for (const s of lay.splits) assert.ok(s.length >= GEOMETRY.minBar - 1e-9);
          checked += 1;
        }
      }
    }
  }
  assert.equal(checked, 23 * 4 * 3 * 4);
});
