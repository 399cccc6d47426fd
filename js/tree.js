// Pure functions on a balance tree (a sequential binary partition being built).
// No DOM, no maths: every function returns a new tree and never changes its input.
//
// A node is {id, parts, name, children}: a leaf has children [], a split node has
// [numerator, denominator]; "name" is the balance name of a split node ("" = default).
// Parts inside a child keep the order they have in the parent.

/**
 * @typedef {Object} TreeNode
 * @property {string} id
 * @property {string[]} parts
 * @property {string} name
 * @property {TreeNode[]} children
 */

/**
 * @typedef {Object} PendingSplit
 * @property {string} nodeId       the leaf being split
 * @property {string[]} numerator  parts on the numerator (+1) side
 * @property {string[]} denominator parts on the denominator (-1) side
 */

/**
 * A leaf node.
 * @param {string} id
 * @param {string[]} parts
 * @returns {TreeNode}
 */
export function makeLeaf(id, parts) {
  return { id, parts: [...parts], name: "", children: [] };
}

/**
 * True when the node has no children.
 * @param {TreeNode} node
 * @returns {boolean}
 */
export function isLeaf(node) {
  return !node.children || node.children.length === 0;
}

/**
 * Nodes in pre-order (node, numerator subtree, denominator subtree).
 * @param {TreeNode} tree
 * @returns {TreeNode[]}
 */
export function preorder(tree) {
  /** @type {TreeNode[]} */
  const out = [];
  /** @type {TreeNode[]} */
  const stack = [tree];
  while (stack.length) {
    const node = /** @type {TreeNode} */ (stack.pop());
    out.push(node);
    const kids = node.children || [];
    for (let i = kids.length - 1; i >= 0; i -= 1) stack.push(kids[i]);
  }
  return out;
}

/**
 * Split nodes in pre-order: one per SBP row, in row order.
 * @param {TreeNode} tree
 * @returns {TreeNode[]}
 */
export function splitNodes(tree) {
  return preorder(tree).filter((n) => !isLeaf(n));
}

/**
 * Leaves from left to right (numerator side first).
 * @param {TreeNode} tree
 * @returns {TreeNode[]}
 */
export function leafNodes(tree) {
  return preorder(tree).filter(isLeaf);
}

/**
 * The node with this id, or null.
 * @param {TreeNode} tree
 * @param {string} id
 * @returns {TreeNode | null}
 */
export function findNode(tree, id) {
  return preorder(tree).find((n) => n.id === id) || null;
}

/**
 * The parent of the node with this id (null for the root or an unknown id).
 * @param {TreeNode} tree
 * @param {string} id
 * @returns {TreeNode | null}
 */
export function findParent(tree, id) {
  return preorder(tree).find((n) => (n.children || []).some((c) => c.id === id)) || null;
}

/**
 * The other child of the node's parent, or null.
 * @param {TreeNode} tree
 * @param {string} id
 * @returns {TreeNode | null}
 */
export function findSibling(tree, id) {
  const parent = findParent(tree, id);
  if (!parent) return null;
  return parent.children[0].id === id ? parent.children[1] : parent.children[0];
}

/**
 * Copy of the tree with the node `id` replaced by `fn(node)` (the path to it is copied,
 * the other subtrees are shared).
 * @param {TreeNode} node
 * @param {string} id
 * @param {(n: TreeNode) => TreeNode} fn
 * @returns {TreeNode}
 */
function replaceNode(node, id, fn) {
  if (node.id === id) return fn(node);
  if (isLeaf(node)) return node;
  const kids = node.children.map((c) => replaceNode(c, id, fn));
  if (kids.every((c, i) => c === node.children[i])) return node;
  return { ...node, children: kids };
}

/**
 * Fresh ids "n<k>" not used in the tree.
 * @param {TreeNode} tree
 * @param {number} count
 * @returns {string[]}
 */
export function newIds(tree, count) {
  const used = new Set(preorder(tree).map((n) => n.id));
  let k = 0;
  for (const id of used) {
    const m = /^n(\d+)$/.exec(id);
    if (m) k = Math.max(k, Number(m[1]) + 1);
  }
  /** @type {string[]} */
  const out = [];
  while (out.length < count) {
    const id = `n${k}`;
    k += 1;
    if (!used.has(id)) out.push(id);
  }
  return out;
}

/**
 * Can this node be split into these two sides? (a leaf, >= 2 parts, both sides non-empty,
 * the sides a partition of its parts)
 * @param {TreeNode | null} node
 * @param {string[]} [numerator] parts for the numerator side (omit to ask "is it splittable")
 * @returns {boolean}
 */
export function canSplit(node, numerator) {
  if (!node || !isLeaf(node) || node.parts.length < 2) return false;
  if (numerator === undefined) return true;
  const own = new Set(node.parts);
  const num = new Set(numerator);
  if (num.size !== numerator.length) return false;
  for (const p of num) if (!own.has(p)) return false;
  return num.size >= 1 && num.size < own.size;
}

/**
 * Split a leaf: `numerator` parts go to the +1 side, the rest to the -1 side.
 * @param {TreeNode} tree
 * @param {string} id
 * @param {string[]} numerator
 * @returns {TreeNode}
 * @throws {Error} when the split is not possible
 */
export function splitNode(tree, id, numerator) {
  const node = findNode(tree, id);
  if (!canSplit(node, numerator)) {
    throw new Error(`node ${id} cannot be split with numerator [${numerator.join(", ")}]`);
  }
  const num = new Set(numerator);
  const [a, b] = newIds(tree, 2);
  return replaceNode(tree, id, (n) => ({
    ...n,
    name: "",
    children: [
      makeLeaf(a, n.parts.filter((p) => num.has(p))),
      makeLeaf(b, n.parts.filter((p) => !num.has(p))),
    ],
  }));
}

/**
 * Undo a split: the node's whole subtree collapses back to one leaf (same id and parts).
 * @param {TreeNode} tree
 * @param {string} id
 * @returns {TreeNode}
 * @throws {Error} for an unknown id or a leaf
 */
export function unsplitNode(tree, id) {
  const node = findNode(tree, id);
  if (!node || isLeaf(node)) throw new Error(`node ${id} is not split`);
  return replaceNode(tree, id, (n) => makeLeaf(n.id, n.parts));
}

/**
 * Can the leaf `id` be merged with its sibling (both children of the parent are leaves)?
 * @param {TreeNode} tree
 * @param {string} id
 * @returns {boolean}
 */
export function canMerge(tree, id) {
  const node = findNode(tree, id);
  const sibling = findSibling(tree, id);
  return Boolean(node && sibling && isLeaf(node) && isLeaf(sibling));
}

/**
 * Merge the leaf `id` with its sibling leaf: undo their parent's split.
 * @param {TreeNode} tree
 * @param {string} id
 * @returns {TreeNode}
 * @throws {Error} when the sibling is not a leaf
 */
export function mergeWithSibling(tree, id) {
  if (!canMerge(tree, id)) throw new Error(`node ${id} has no sibling leaf to merge with`);
  const parent = /** @type {TreeNode} */ (findParent(tree, id));
  return unsplitNode(tree, parent.id);
}

/**
 * Rename the balance of a split node ("" or blank = the default name).
 * @param {TreeNode} tree
 * @param {string} id
 * @param {string} name
 * @returns {TreeNode}
 * @throws {Error} for an unknown id or a leaf
 */
export function renameBalance(tree, id, name) {
  const node = findNode(tree, id);
  if (!node || isLeaf(node)) throw new Error(`node ${id} is not a balance`);
  const clean = String(name).trim();
  if (clean === node.name) return tree;
  return replaceNode(tree, id, (n) => ({ ...n, name: clean }));
}

/**
 * Open a leaf for splitting: the first half of its parts starts on the numerator side.
 * @param {TreeNode} node
 * @returns {PendingSplit}
 */
export function startSplit(node) {
  const half = Math.ceil(node.parts.length / 2);
  return {
    nodeId: node.id,
    numerator: node.parts.slice(0, half),
    denominator: node.parts.slice(half),
  };
}

/**
 * Put a part on one side of a pending split (the order of the node's parts is kept).
 * @param {PendingSplit} pending
 * @param {string} part
 * @param {"numerator" | "denominator"} side
 * @param {string[]} order the node's parts, in their order
 * @returns {PendingSplit}
 */
export function movePart(pending, part, side, order) {
  const all = new Set([...pending.numerator, ...pending.denominator]);
  if (!all.has(part)) return pending;
  const num = new Set(pending.numerator);
  if (side === "numerator") num.add(part);
  else num.delete(part);
  const known = order.filter((p) => all.has(p));
  return {
    nodeId: pending.nodeId,
    numerator: known.filter((p) => num.has(p)),
    denominator: known.filter((p) => !num.has(p)),
  };
}

/**
 * Move a part to the other side of a pending split.
 * @param {PendingSplit} pending
 * @param {string} part
 * @param {string[]} order the node's parts, in their order
 * @returns {PendingSplit}
 */
export function togglePart(pending, part, order) {
  const side = pending.numerator.includes(part) ? "denominator" : "numerator";
  return movePart(pending, part, side, order);
}

/**
 * Side of a part in a pending split, or null.
 * @param {PendingSplit} pending
 * @param {string} part
 * @returns {"numerator" | "denominator" | null}
 */
export function sideOf(pending, part) {
  if (pending.numerator.includes(part)) return "numerator";
  if (pending.denominator.includes(part)) return "denominator";
  return null;
}

/**
 * Can the pending split be applied to the tree?
 * @param {TreeNode} tree
 * @param {PendingSplit | null} pending
 * @returns {boolean}
 */
export function pendingReady(tree, pending) {
  if (!pending) return false;
  return canSplit(findNode(tree, pending.nodeId), pending.numerator);
}

/**
 * Apply a pending split.
 * @param {TreeNode} tree
 * @param {PendingSplit} pending
 * @returns {TreeNode}
 */
export function applySplit(tree, pending) {
  return splitNode(tree, pending.nodeId, pending.numerator);
}

/**
 * Structural equality of two trees (ids, parts in order, names, shape).
 * @param {TreeNode | null | undefined} a
 * @param {TreeNode | null | undefined} b
 * @returns {boolean}
 */
export function sameTree(a, b) {
  if (a === b) return true;
  if (!a || !b) return false;
  if (a.id !== b.id || (a.name || "") !== (b.name || "")) return false;
  if (a.parts.length !== b.parts.length || a.parts.some((p, i) => p !== b.parts[i])) return false;
  const ka = a.children || [];
  const kb = b.children || [];
  if (ka.length !== kb.length) return false;
  return ka.every((c, i) => sameTree(c, kb[i]));
}

/**
 * Do the two trees hold the same set of parts at the root?
 * @param {TreeNode | null | undefined} a
 * @param {TreeNode | null | undefined} b
 * @returns {boolean}
 */
export function sameParts(a, b) {
  if (!a || !b) return false;
  const pa = new Set(a.parts);
  return pa.size === b.parts.length && b.parts.every((p) => pa.has(p));
}
