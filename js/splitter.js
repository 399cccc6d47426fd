// The split editor: the parts of the open leaf as chips in two columns.
// A chip is a focusable button: a click, Enter or Space moves it to the other side;
// chips can also be dragged between the columns. Text only through textContent.

import { html } from "./dom.js";
import { defaultBalanceName, partsLabel } from "./labels.js";

/**
 * @typedef {import("./tree.js").TreeNode} TreeNode
 * @typedef {import("./tree.js").PendingSplit} PendingSplit
 */

/** Wording of the two sides. */
export const SIDE_TITLES = {
  numerator: "numerator side (+)",
  denominator: "denominator side (\u2212)",
};

/**
 * @typedef {Object} EditorState
 * @property {TreeNode} node           the open leaf
 * @property {PendingSplit | null} pending null for a leaf that cannot be split
 * @property {boolean} ready           the pending split can be applied
 * @property {boolean} mergeable       the leaf's sibling is a leaf too
 */

/**
 * The editor panel for the open leaf.
 * @param {Document} doc
 * @param {EditorState} st
 * @returns {HTMLElement}
 */
export function drawSplitter(doc, st) {
  const box = html(doc, "div", {
    class: "cw-splitter",
    "data-role": "splitter",
    "data-node-id": st.node.id,
    role: "group",
    "aria-label": "split a group of parts",
  });
  box.appendChild(html(doc, "div", { class: "cw-splitter-title" }, `group: ${partsLabel(st.node.parts)}`));
  if (st.pending) {
    const hint = "move parts between the sides (click, Enter or Space, or drag); arrows move between chips; Escape cancels";
    box.appendChild(html(doc, "div", { class: "cw-hint" }, hint));
    const cols = html(doc, "div", { class: "cw-sides" });
    for (const side of /** @type {const} */ (["numerator", "denominator"])) {
      cols.appendChild(drawSide(doc, st.node, st.pending, side));
    }
    box.appendChild(cols);
    const preview = st.ready
      ? `new balance: ${defaultBalanceName(st.pending.numerator, st.pending.denominator)}`
      : "each side needs at least one part";
    box.appendChild(html(doc, "div", { class: "cw-preview", "data-role": "split-preview" }, preview));
  } else {
    box.appendChild(html(doc, "div", { class: "cw-hint" }, "a single part cannot be split"));
  }
  const buttons = html(doc, "div", { class: "cw-buttons" });
  if (st.pending) {
    buttons.appendChild(
      html(
        doc,
        "button",
        {
          type: "button",
          class: "cw-button cw-primary",
          "data-role": "apply-split",
          "data-focus-key": "apply-split",
          disabled: !st.ready,
        },
        "split",
      ),
    );
  }
  if (st.mergeable) {
    buttons.appendChild(
      html(
        doc,
        "button",
        {
          type: "button",
          class: "cw-button",
          "data-role": "merge",
          "data-focus-key": "merge",
          title: "join this group with its neighbour (undo their split)",
        },
        "merge with sibling",
      ),
    );
  }
  buttons.appendChild(
    html(doc, "button", { type: "button", class: "cw-button", "data-role": "cancel-split", "data-focus-key": "cancel-split" }, "cancel"),
  );
  box.appendChild(buttons);
  return box;
}

/**
 * One column of chips.
 * @param {Document} doc
 * @param {TreeNode} node
 * @param {PendingSplit} pending
 * @param {"numerator" | "denominator"} side
 * @returns {HTMLElement}
 */
function drawSide(doc, node, pending, side) {
  const col = html(doc, "div", {
    class: `cw-side cw-side-${side}`,
    "data-role": "side",
    "data-side": side,
  });
  col.appendChild(html(doc, "div", { class: "cw-side-title" }, SIDE_TITLES[side]));
  const list = html(doc, "div", { class: "cw-chips", role: "list" });
  const here = side === "numerator" ? pending.numerator : pending.denominator;
  const other = side === "numerator" ? "denominator" : "numerator";
  here.forEach((part, row) => {
    const index = node.parts.indexOf(part);
    list.appendChild(
      html(
        doc,
        "button",
        {
          type: "button",
          class: "cw-chip",
          "data-role": "chip",
          "data-part-index": index,
          "data-side": side,
          "data-row": row,
          "data-focus-key": `chip:${index}`,
          draggable: "true",
          role: "listitem",
          "aria-label": `${part}, on the ${side} side; press to move to the ${other} side`,
        },
        part,
      ),
    );
  });
  if (!here.length) list.appendChild(html(doc, "div", { class: "cw-drop-hint" }, "drop parts here"));
  col.appendChild(list);
  return col;
}
