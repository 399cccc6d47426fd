// SVG drawing of a dendrogram layout (made by layout.js). Text only through textContent.

import { svg } from "./dom.js";
import { balanceTitle, leafTitle, scaleTitle } from "./labels.js";

/**
 * @typedef {import("./layout.js").DendrogramLayout} DendrogramLayout
 */

/**
 * @typedef {Object} DendrogramState
 * @property {Map<string, {name: string, share: number | null}>} names  display name per balance
 * @property {string} colourBalance   id of the balance colouring the other views ("")
 * @property {string | null} openLeaf id of the leaf open for editing
 * @property {string[]} groupColours  colour per group code
 */

/**
 * The balance dendrogram as an <svg> element.
 * @param {Document} doc
 * @param {DendrogramLayout} lay
 * @param {DendrogramState} state
 * @returns {SVGElement}
 */
export function drawDendrogram(doc, lay, state) {
  const root = svg(doc, "svg", {
    class: "cw-dendrogram",
    "data-role": "dendrogram",
    width: lay.width,
    height: lay.height,
    viewBox: `0 0 ${lay.width} ${lay.height}`,
    role: "group",
    "aria-label": "balance dendrogram",
  });
  root.appendChild(drawScale(doc, lay));
  const links = svg(doc, "g", { class: "cw-links" });
  for (const leaf of lay.leaves) {
    links.appendChild(
      svg(doc, "line", {
        class: "cw-leaf-link",
        x1: leaf.x,
        x2: leaf.x,
        y1: leaf.yTop,
        y2: leaf.yBottom,
      }),
    );
  }
  root.appendChild(links);
  for (const split of lay.splits) root.appendChild(drawBalance(doc, split, state));
  for (const leaf of lay.leaves) root.appendChild(drawLeaf(doc, leaf, state));
  return root;
}

/**
 * The scale bar at the left: a round variance as a vertical bar, its value beside it.
 * @param {Document} doc
 * @param {DendrogramLayout} lay
 * @returns {SVGElement}
 */
function drawScale(doc, lay) {
  const g = svg(doc, "g", { class: "cw-scale", "data-role": "scale" });
  const bar = lay.scaleBar;
  if (!bar) return g;
  g.appendChild(svg(doc, "title", {}, scaleTitle(bar.value)));
  g.appendChild(svg(doc, "line", { class: "cw-scale-line", x1: bar.x, x2: bar.x, y1: bar.y0, y2: bar.y1 }));
  for (const y of [bar.y0, bar.y1]) {
    g.appendChild(svg(doc, "line", { class: "cw-scale-tick", x1: bar.x - 4, x2: bar.x + 4, y1: y, y2: y }));
  }
  g.appendChild(
    svg(
      doc,
      "text",
      { class: "cw-scale-label", "data-role": "scale-value", x: bar.x - 7, y: (bar.y0 + bar.y1) / 2 + 3, "text-anchor": "end" },
      bar.label,
    ),
  );
  g.appendChild(
    svg(doc, "text", { class: "cw-scale-title", x: 4, y: bar.y0 - 5, "text-anchor": "start" }, bar.caption),
  );
  return g;
}

/**
 * One balance: its variance bar, its axis and the statistics on it.
 * @param {Document} doc
 * @param {import("./layout.js").SplitLayout} split
 * @param {DendrogramState} state
 * @returns {SVGElement}
 */
function drawBalance(doc, split, state) {
  const info = state.names.get(split.id);
  const name = info ? info.name : "";
  const active = state.colourBalance === split.id;
  const g = svg(doc, "g", {
    class: active ? "cw-balance cw-active" : "cw-balance",
    "data-role": "balance",
    "data-node-id": split.id,
    "data-focus-key": `balance:${split.id}`,
    tabindex: 0,
    role: "button",
    "aria-pressed": active ? "true" : "false",
  });
  const title = balanceTitle(name, split.variance, info ? info.share : null, split.extended);
  g.setAttribute("aria-label", title);
  g.appendChild(svg(doc, "title", {}, title));
  const y = split.yAxis;
  // wide transparent targets make thin lines easy to click
  g.appendChild(svg(doc, "line", { class: "cw-hit", x1: split.x, x2: split.x, y1: split.yTop, y2: y }));
  g.appendChild(svg(doc, "line", { class: "cw-hit", x1: split.axis.x0, x2: split.axis.x1, y1: y, y2: y }));
  g.appendChild(
    svg(doc, "line", { class: "cw-bar", "data-role": "bar", "data-node-id": split.id, x1: split.x, x2: split.x, y1: split.yTop, y2: split.ySolid }),
  );
  if (split.extended) {
    // drawn longer than the variance so that the marks of the axes above and below stay apart
    g.appendChild(
      svg(doc, "line", { class: "cw-bar-extension", "data-role": "bar-extension", x1: split.x, x2: split.x, y1: split.ySolid, y2: y }),
    );
  }
  g.appendChild(svg(doc, "line", { class: "cw-axis", x1: split.axis.x0, x2: split.axis.x1, y1: y, y2: y }));
  const m = split.marks;
  if (m.whisker) {
    g.appendChild(svg(doc, "line", { class: "cw-whisker", x1: m.whisker[0], x2: m.whisker[1], y1: y, y2: y }));
    for (const wx of m.whisker) {
      g.appendChild(svg(doc, "line", { class: "cw-whisker", x1: wx, x2: wx, y1: y - 3, y2: y + 3 }));
    }
  }
  if (m.box) {
    const [a, b] = m.box;
    g.appendChild(
      svg(doc, "rect", { class: "cw-box", x: Math.min(a, b), y: y - 4, width: Math.abs(b - a), height: 8 }),
    );
  }
  if (m.median !== null) {
    g.appendChild(svg(doc, "line", { class: "cw-median", x1: m.median, x2: m.median, y1: y - 4, y2: y + 4 }));
  }
  if (m.mean !== null) {
    g.appendChild(
      svg(doc, "path", {
        class: "cw-mean",
        "data-role": "mean",
        d: `M ${m.mean} ${y - 5} L ${m.mean + 4} ${y} L ${m.mean} ${y + 5} L ${m.mean - 4} ${y} Z`,
      }),
    );
  }
  g.appendChild(drawSelectionMarks(doc, split));
  for (const gm of m.groups) {
    g.appendChild(
      svg(doc, "circle", {
        class: "cw-group-mean",
        "data-role": "group-mean",
        "data-group": gm.code,
        cx: gm.x,
        cy: y - 9,
        r: 3,
        fill: state.groupColours[gm.code] || "#888888",
      }),
    );
  }
  return g;
}

/**
 * The marks of the selection under one balance's axis (mean and 25-75 % line), in their
 * own group so that a selection change replaces them alone.
 * @param {Document} doc
 * @param {import("./layout.js").SplitLayout} split
 * @returns {SVGElement}
 */
function drawSelectionMarks(doc, split) {
  const g = svg(doc, "g", { class: "cw-selection-marks", "data-role": "selection-marks", "data-node-id": split.id });
  const sel = split.marks.selection;
  if (!sel) return g;
  const ys = split.yAxis + 9;
  if (sel.box) {
    const [a, b] = sel.box;
    g.appendChild(svg(doc, "line", { class: "cw-sel-spread", x1: a, x2: b, y1: ys, y2: ys }));
  }
  if (sel.mean !== null) {
    g.appendChild(
      svg(doc, "circle", { class: "cw-sel-mean", "data-role": "selection-mean", cx: sel.mean, cy: ys, r: 3.5 }),
    );
  }
  return g;
}

/**
 * Redraw only the selection marks of a drawn dendrogram, from a new layout of the same
 * tree on the same axes (the caller checks that nothing else moved).
 * @param {SVGElement} root  the <svg> of drawDendrogram
 * @param {DendrogramLayout} lay
 * @returns {boolean} false when a balance of the layout is not in the drawing
 */
export function updateSelectionMarks(root, lay) {
  const doc = root.ownerDocument;
  /** @type {Map<string, Element>} */
  const drawn = new Map();
  for (const g of root.querySelectorAll('[data-role="selection-marks"]')) {
    drawn.set(g.getAttribute("data-node-id") || "", g);
  }
  if (drawn.size !== lay.splits.length) return false;
  for (const split of lay.splits) {
    const old = drawn.get(split.id);
    if (!old) return false;
    const fresh = drawSelectionMarks(doc, split);
    if (!sameMarks(old, fresh)) old.replaceWith(fresh);
  }
  return true;
}

/**
 * Do two groups of marks draw the same (same children, same attributes)?
 * @param {Element} a
 * @param {Element} b
 */
function sameMarks(a, b) {
  if (a.children.length !== b.children.length) return false;
  for (let i = 0; i < a.children.length; i += 1) {
    const x = a.children[i];
    const y = b.children[i];
    if (x.tagName !== y.tagName || x.attributes.length !== y.attributes.length) return false;
    for (const attr of x.attributes) if (y.getAttribute(attr.name) !== attr.value) return false;
  }
  return true;
}

/**
 * One leaf: a marker with its parts' labels underneath.
 * @param {Document} doc
 * @param {import("./layout.js").LeafLayout} leaf
 * @param {DendrogramState} state
 * @returns {SVGElement}
 */
function drawLeaf(doc, leaf, state) {
  const splittable = leaf.parts.length >= 2;
  let cls = "cw-leaf";
  if (splittable) cls += " cw-splittable";
  if (state.openLeaf === leaf.id) cls += " cw-open";
  const g = svg(doc, "g", {
    class: cls,
    "data-role": "leaf",
    "data-node-id": leaf.id,
    "data-focus-key": `leaf:${leaf.id}`,
    tabindex: 0,
    role: "button",
    "aria-label": leafTitle(leaf.parts),
  });
  g.appendChild(svg(doc, "title", {}, leafTitle(leaf.parts)));
  const y = leaf.yBottom;
  g.appendChild(
    svg(doc, "rect", { class: "cw-leaf-hit", x: leaf.x0 + 1, y: y - 8, width: Math.max(2, leaf.x1 - leaf.x0 - 2), height: 30 }),
  );
  if (splittable) {
    const a = leaf.slots[0].x;
    const b = leaf.slots[leaf.slots.length - 1].x;
    g.appendChild(svg(doc, "path", { class: "cw-bracket", d: `M ${a} ${y + 4} L ${a} ${y} L ${b} ${y} L ${b} ${y + 4}` }));
  }
  g.appendChild(svg(doc, "circle", { class: "cw-leaf-dot", cx: leaf.x, cy: y, r: splittable ? 4.5 : 3 }));
  for (const label of leaf.labels) {
    g.appendChild(
      svg(
        doc,
        "text",
        {
          class: "cw-part-label",
          "data-role": "part-label",
          x: label.x,
          y: label.y,
          "text-anchor": "end",
          transform: `rotate(-40 ${label.x} ${label.y})`,
        },
        label.text,
      ),
    );
  }
  return g;
}
