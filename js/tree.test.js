// Tree edits of the balance builder (node's built-in test runner: node --test js/).
// The tree format is the project's contract (compwidgets/core/tree.py): children[0] is
// the numerator (+1) side, children[1] the denominator (-1) side, rows in pre-order.
import assert from "node:assert/strict";
import { test } from "node:test";

import {
  applySplit,
  canMerge,
  canSplit,
  findNode,
  findParent,
  isLeaf,
  leafNodes,
  makeLeaf,
  mergeWithSibling,
  movePart,
  newIds,
  pendingReady,
  preorder,
  renameBalance,
  sameParts,
  sameTree,
  sideOf,
  splitNode,
  splitNodes,
  startSplit,
  togglePart,
  unsplitNode,
} from "./tree.js";

const PARTS = ["A", "B", "C", "D", "E"];
const root = () => makeLeaf("n0", PARTS);

/** Every node's children partition its parts (the SBP rule, written out here). */
function assertValid(tree) {
  const ids = new Set();
  for (const node of preorder(tree)) {
    assert.ok(!ids.has(node.id), `id ${node.id} used twice`);
    ids.add(node.id);
    if (isLeaf(node)) continue;
    assert.equal(node.children.length, 2);
    const [a, b] = node.children;
    assert.ok(a.parts.length > 0 && b.parts.length > 0);
    assert.deepEqual([...a.parts, ...b.parts].sort(), [...node.parts].sort());
  }
}

test("split puts the numerator parts in children[0] and the rest in children[1]", () => {
  const t = splitNode(root(), "n0", ["B", "D"]);
  assert.equal(t.children.length, 2);
  assert.deepEqual(t.children[0].parts, ["B", "D"]);
  assert.deepEqual(t.children[1].parts, ["A", "C", "E"]);
  assert.equal(t.name, "");
  assertValid(t);
});

test("split does not change its input tree", () => {
  const before = root();
  const copy = JSON.parse(JSON.stringify(before));
  splitNode(before, "n0", ["A"]);
  assert.deepEqual(before, copy);
});

test("split refuses an empty side, a part not in the node, a one-part leaf and a split node", () => {
  const t = root();
  assert.throws(() => splitNode(t, "n0", []));
  assert.throws(() => splitNode(t, "n0", PARTS));
  assert.throws(() => splitNode(t, "n0", ["Z"]));
  const t2 = splitNode(t, "n0", ["A"]);
  const single = t2.children[0].id;
  assert.throws(() => splitNode(t2, single, ["A"]));
  assert.throws(() => splitNode(t2, "n0", ["B"]), "an already split node cannot be split again");
  assert.equal(canSplit(findNode(t2, single)), false);
  assert.equal(canSplit(findNode(t2, t2.children[1].id)), true);
});

test("new ids are unique and never reuse an id of the tree", () => {
  let t = root();
  t = splitNode(t, "n0", ["A", "B"]);
  t = splitNode(t, t.children[1].id, ["C"]);
  t = splitNode(t, t.children[0].id, ["A"]);
  const ids = preorder(t).map((n) => n.id);
  assert.equal(new Set(ids).size, ids.length);
  const fresh = newIds(t, 3);
  assert.equal(new Set(fresh).size, 3);
  for (const id of fresh) assert.ok(!ids.includes(id));
  // ids that are not of the form n<k> are left alone
  const odd = { id: "root", parts: ["A", "B"], name: "", children: [] };
  assert.deepEqual(newIds(odd, 2), ["n0", "n1"]);
  assertValid(t);
});

test("unsplit collapses the whole subtree to one leaf with the same id and parts", () => {
  let t = splitNode(root(), "n0", ["A", "B"]);
  const den = t.children[1].id;
  t = splitNode(t, den, ["C"]);
  t = splitNode(t, findNode(t, den).children[1].id, ["D"]);
  assert.equal(splitNodes(t).length, 3);
  const u = unsplitNode(t, den);
  const node = findNode(u, den);
  assert.ok(isLeaf(node));
  assert.deepEqual(node.parts, ["C", "D", "E"]);
  assert.equal(splitNodes(u).length, 1);
  assert.throws(() => unsplitNode(u, den), "a leaf cannot be unsplit");
  assertValid(u);
});

test("merge joins two sibling leaves; it is refused when the sibling is split", () => {
  let t = splitNode(root(), "n0", ["A", "B"]);
  const [num, den] = t.children.map((c) => c.id);
  t = splitNode(t, den, ["C"]);
  assert.equal(canMerge(t, num), false, "the sibling of the numerator leaf is split");
  assert.throws(() => mergeWithSibling(t, num));
  const [c, rest] = findNode(t, den).children.map((x) => x.id);
  assert.equal(canMerge(t, c), true);
  const m = mergeWithSibling(t, rest);
  assert.ok(isLeaf(findNode(m, den)));
  assert.deepEqual(findNode(m, den).parts, ["C", "D", "E"]);
  assert.equal(findNode(m, c), null);
  assert.equal(canMerge(m, "n0"), false, "the root has no sibling");
});

test("rename sets the balance name (trimmed); blank means the default; leaves refuse", () => {
  const t = splitNode(root(), "n0", ["A"]);
  const r = renameBalance(t, "n0", "  major vs rest ");
  assert.equal(r.name, "major vs rest");
  assert.equal(renameBalance(r, "n0", "   ").name, "");
  assert.equal(renameBalance(r, "n0", "major vs rest"), r, "no change gives the same tree");
  assert.throws(() => renameBalance(t, t.children[0].id, "x"));
  assert.equal(t.name, "", "the input is unchanged");
});

test("pending split: toggle and move keep the node's part order; ready needs both sides", () => {
  const node = root();
  let p = startSplit(node);
  assert.deepEqual(p.numerator, ["A", "B", "C"]);
  assert.deepEqual(p.denominator, ["D", "E"]);
  p = togglePart(p, "A", node.parts);
  assert.equal(sideOf(p, "A"), "denominator");
  assert.deepEqual(p.denominator, ["A", "D", "E"]);
  p = movePart(p, "E", "numerator", node.parts);
  assert.deepEqual(p.numerator, ["B", "C", "E"]);
  p = movePart(p, "E", "numerator", node.parts);
  assert.deepEqual(p.numerator, ["B", "C", "E"], "moving to the same side changes nothing");
  assert.equal(movePart(p, "Z", "numerator", node.parts), p, "unknown parts are ignored");
  assert.equal(pendingReady(node, p), true);
  for (const part of ["B", "C", "E"]) p = togglePart(p, part, node.parts);
  assert.deepEqual(p.numerator, []);
  assert.equal(pendingReady(node, p), false);
  p = togglePart(p, "C", node.parts);
  const t = applySplit(node, p);
  assert.deepEqual(t.children[0].parts, ["C"]);
  assert.deepEqual(t.children[1].parts, ["A", "B", "D", "E"]);
});

test("find helpers and pre-order / leaf order", () => {
  let t = splitNode(root(), "n0", ["A", "B"]);
  t = splitNode(t, t.children[0].id, ["B"]);
  const order = preorder(t).map((n) => n.parts.join(""));
  assert.deepEqual(order, ["ABCDE", "AB", "B", "A", "CDE"]);
  assert.deepEqual(leafNodes(t).map((n) => n.parts.join("")), ["B", "A", "CDE"]);
  assert.equal(findParent(t, t.children[0].children[1].id).id, t.children[0].id);
  assert.equal(findParent(t, "n0"), null);
  assert.equal(findNode(t, "nope"), null);
});

test("sameTree compares structure, ids, names and part order; sameParts only the root set", () => {
  const a = splitNode(root(), "n0", ["A"]);
  const b = JSON.parse(JSON.stringify(a));
  assert.ok(sameTree(a, b));
  b.children[1].parts = [...b.children[1].parts].reverse();
  assert.ok(!sameTree(a, b));
  assert.ok(!sameTree(a, renameBalance(a, "n0", "x")));
  assert.ok(!sameTree(a, root()));
  assert.ok(sameParts(a, root()));
  assert.ok(sameParts(makeLeaf("x", ["E", "D", "C", "B", "A"]), root()));
  assert.ok(!sameParts(makeLeaf("x", ["A", "B"]), root()));
});
