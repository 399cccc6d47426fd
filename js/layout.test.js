// Dendrogram layout. The balance dendrogram (Egozcue & Pawlowsky-Glahn 2005): each
// balance's vertical bar is as long as its variance, so the bars of a complete partition
// add up to the total variance. The statistics here are invented numbers.
import assert from "node:assert/strict";
import { test } from "node:test";

import { axisRadius, balanceAxis, labelMargin, layoutDendrogram, niceTicks } from "./layout.js";
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
const OPTIONS = { width: 400, height: 300, margin: { top: 10, right: 10, bottom: 40, left: 40 } };

function stats(tree) {
  return [tree, tree.children[0], tree.children[1]].map((n) => ({
    id: n.id,
    variance: VARIANCES[n.id === tree.id ? "n0" : n === tree.children[0] ? "n1" : "n2"],
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
  }));
}

test("bar lengths are proportional to the variances and add up to the total", () => {
  const t = completeTree();
  const st = stats(t);
  const lay = layoutDendrogram(t, st, [], OPTIONS);
  assert.equal(lay.byLevel, false);
  assert.equal(lay.splits.length, 3);
  const total = st.reduce((a, s) => a + s.variance, 0); // = total variance (complete SBP)
  let sum = 0;
  for (const split of lay.splits) {
    const s = st.find((x) => x.id === split.id);
    close(split.length / lay.scale, s.variance);
    sum += split.length / lay.scale;
  }
  close(sum, total);
  // the deepest path fills the plot height, less the gap above the leaves
  close(lay.scale * lay.depth, OPTIONS.height - 10 - 40 - 16);
  const tight = layoutDendrogram(t, st, [], { ...OPTIONS, leafGap: 0 });
  close(tight.scale * tight.depth, OPTIONS.height - 10 - 40);
});

test("a child's bar starts on its parent's axis (cumulative variance)", () => {
  const t = completeTree();
  const lay = layoutDendrogram(t, stats(t), [], OPTIONS);
  const byId = new Map(lay.splits.map((s) => [s.id, s]));
  const top = byId.get(t.id);
  close(top.yTop, lay.plot.y0);
  for (const child of t.children) {
    const c = byId.get(child.id);
    close(c.yTop, top.yAxis);
    close(c.yAxis - top.yAxis, lay.scale * c.variance);
  }
  for (const leaf of lay.leaves) close(leaf.yBottom, lay.plot.y1);
});

test("leaves take one slot per part, left to right, numerator side first", () => {
  let t = splitNode(makeLeaf("n0", ["A", "B", "C", "D", "E"]), "n0", ["D", "E"]);
  const lay = layoutDendrogram(t, [{ id: t.id, variance: 1 }], [], OPTIONS);
  assert.deepEqual(lay.leaves.map((l) => l.parts), [["D", "E"], ["A", "B", "C"]]);
  const xs = lay.leaves.flatMap((l) => l.slots.map((s) => s.x));
  for (let i = 1; i < xs.length; i += 1) assert.ok(xs[i] > xs[i - 1]);
  const slot = (OPTIONS.width - 50) / 5;
  close(lay.leaves[0].x1 - lay.leaves[0].x0, 2 * slot);
  close(lay.leaves[1].x1 - lay.leaves[1].x0, 3 * slot);
  // the split's bar stands in the middle of its children
  close(lay.splits[0].x, (lay.leaves[0].x + lay.leaves[1].x) / 2);
});

test("the value axis is monotone, 0 in the middle, positive toward the numerator side", () => {
  const ax = balanceAxis(100, 300, 2, 0.9);
  const values = [-3, -2, -1, -0.5, 0, 0.25, 1, 2, 3];
  const px = values.map((v) => ax.toPx(v));
  for (let i = 1; i < px.length; i += 1) assert.ok(px[i] <= px[i - 1], "decreasing in the value");
  for (let i = 2; i < px.length - 2; i += 1) assert.ok(px[i] < px[i - 1], "strict inside the range");
  close(ax.toPx(0), 200);
  close(ax.toPx(2), 200 - 90);
  close(ax.toPx(-2), 200 + 90);
  close(ax.toPx(5), ax.toPx(2), 1e-12); // clamped at the ends
  // linear: equal steps in value give equal steps in px
  close(ax.toPx(1) - ax.toPx(0.5), ax.toPx(0.5) - ax.toPx(0));
});

test("marks sit on the axis in the order of their values", () => {
  const t = completeTree();
  const sel = [{ id: t.id, n: 4, mean: -0.2, q25: -0.4, q75: 0.1 }];
  const lay = layoutDendrogram(t, stats(t), sel, OPTIONS);
  const root = lay.splits[0];
  const m = root.marks;
  // positive values lie toward x0 (smaller px): q95 < q75 < mean < q25 < q5 in px
  assert.ok(m.whisker[1] < m.box[1] && m.box[1] < m.mean && m.mean < m.box[0] && m.box[0] < m.whisker[0]);
  assert.ok(m.selection && m.selection.mean > m.mean, "the selection mean (-0.2) is right of the mean (0.2)");
  assert.equal(m.groups.length, 2);
  assert.ok(m.groups[0].x > m.groups[1].x);
  for (const x of [m.mean, ...m.box, ...m.whisker]) {
    assert.ok(x >= Math.min(root.axis.x0, root.axis.x1) && x <= Math.max(root.axis.x0, root.axis.x1));
  }
  // the other balances have no selection entry
  assert.equal(lay.splits[1].marks.selection, null);
});

test("the axis range covers every value placed on it", () => {
  const st = [{ id: "a", variance: 1, mean: 0.1, q5: -2.5, q95: 1.2, groups: [{ code: 0, mean: 3.1 }] }];
  assert.equal(axisRadius(st, [{ id: "a", n: 1, mean: -4, q25: null, q75: null }]), 4);
  assert.equal(axisRadius(st, []), 3.1);
  assert.equal(axisRadius([], []), 1);
});

test("without variances (not yet sent) every bar is one level", () => {
  const t = completeTree();
  const lay = layoutDendrogram(t, [], [], OPTIONS);
  assert.equal(lay.byLevel, true);
  assert.equal(lay.depth, 2);
  for (const s of lay.splits) {
    assert.equal(s.variance, null);
    close(s.length, lay.scale);
    assert.equal(s.marks.mean, null);
  }
  assert.deepEqual(lay.ticks, []);
});

test("an unsplit root is one leaf holding every part", () => {
  const lay = layoutDendrogram(makeLeaf("n0", ["A", "B", "C"]), [], [], OPTIONS);
  assert.equal(lay.splits.length, 0);
  assert.equal(lay.leaves.length, 1);
  assert.equal(lay.leaves[0].slots.length, 3);
});

test("ticks are round numbers from 0 up to the depth; the label margin grows with names", () => {
  assert.deepEqual(niceTicks(0.85, 4), [0, 0.25, 0.5, 0.75]);
  assert.deepEqual(niceTicks(10, 4), [0, 2.5, 5, 7.5, 10]);
  assert.deepEqual(niceTicks(0), [0]);
  assert.ok(labelMargin(["a"]) < labelMargin(["a much longer part name"]));
  assert.ok(labelMargin(["x".repeat(500)]) <= 160);
});
