// The balance builder front end: render({model, el}) for anywidget.
//
// The kernel owns the truth: this view proposes a new tree by setting the synced trait
// "tree"; the kernel validates it, updates the shared model and sends the statistics
// back (or sends the last valid tree back with a message in "messages"). Undo / redo keep
// snapshots of the trees here. All text from the data is set with textContent.
//
// Keyboard focus stays in the builder after every action (split, merge, unsplit, undo,
// redo, rename, an automatic partition, a colour toggle): each action names the element
// to focus next (by its data-focus-key), and a redraw puts the focus back on the element
// with the key it had, or on the builder itself when that element is gone or disabled, so
// the next Ctrl+Z still reaches the builder.
//
// Synced traits read here: parts, tree, stats, selection_summary, total_variance,
// n_selected, n_samples, n_rows, groups, messages, busy, progress, colour_balance,
// figure_control (a reference to the kernel's figure-saving control, shown under the
// dendrogram through the page's widget manager). Written here: tree, colour_balance.
// Custom messages sent: {type: "suggest", method}, and the answers to the kernel's
// figure requests (figure.js).

import { canRedo, canUndo, createHistory, dropPresent, pushState, redo, undo } from "./history.js";
import { closestRole, findByAttr, html } from "./dom.js";
import { drawDendrogram, updateSelectionMarks } from "./dendrogram.js";
import { answerFigureRequest } from "./figure.js";
import { defaultBalanceName, rowsUsedText, selectedCountText, totalVarianceText } from "./labels.js";
import { axisRadius, layoutDendrogram } from "./layout.js";
import { drawSuggestMenu, menuStep } from "./menu.js";
import { drawSplitter } from "./splitter.js";
import { createTableSort, drawTable, nextSort, updateSelectionCells } from "./table.js";
import { applySplit, canMerge, canSplit, findNode, findParent, isLeaf, mergeWithSibling, movePart, pendingReady, renameBalance, sameParts, sameTree, splitNodes, startSplit, togglePart, unsplitNode } from "./tree.js";

/**
 * @typedef {import("./tree.js").TreeNode} TreeNode
 * @typedef {import("./tree.js").PendingSplit} PendingSplit
 */

/**
 * The part of the anywidget model used here.
 * @typedef {Object} WidgetModel
 * @property {(name: string) => any} get
 * @property {(name: string, value: any) => void} set
 * @property {() => void} save_changes
 * @property {(content: any, callbacks?: any, buffers?: ArrayBuffer[]) => void} send
 * @property {(event: string, cb: Function) => void} on
 * @property {(event: string, cb: Function) => void} off
 * @property {any} [widget_manager] the page's widget manager (get_model, create_view)
 */

/** Traits whose change redraws the view (the selection's two redraw only their parts). */
const WATCHED = [
  "parts",
  "tree",
  "stats",
  "selection_summary",
  "total_variance",
  "n_selected",
  "n_samples",
  "n_rows",
  "groups",
  "messages",
  "busy",
  "progress",
  "colour_balance",
];

/** What the legend under the dendrogram says. */
export const LEGEND =
  "bar length = variance of the balance (the scale bar at the left gives the length of a round " +
  "variance; a dotted end lengthens a bar too short to read); on each axis: box 25\u201375 %, " +
  "whiskers 5\u201395 %, diamond = mean, tick = median, filled dot below = mean of the selection " +
  "(line: its 25\u201375 %), small dots above = group means; markers lean toward the side that dominates";

/**
 * Keep only the statistics that describe the tree's current splits (an entry sent for an
 * earlier version of a node, with other parts on its sides, is left out).
 * @param {TreeNode} tree
 * @param {any[]} stats
 * @returns {Map<string, any>}
 */
export function matchStats(tree, stats) {
  /** @type {Map<string, any>} */
  const out = new Map();
  const byId = new Map((stats || []).map((s) => [s.id, s]));
  for (const node of splitNodes(tree)) {
    const s = byId.get(node.id);
    if (!s) continue;
    const same = (/** @type {string[]} */ a, /** @type {string[]} */ b) =>
      Array.isArray(a) && a.length === b.length && a.every((p, i) => p === b[i]);
    if (same(s.numerator, node.children[0].parts) && same(s.denominator, node.children[1].parts)) {
      out.set(node.id, s);
    }
  }
  return out;
}

/** Traits of the selection: their change redraws only what depends on the selection. */
const SELECTION_TRAITS = ["selection_summary", "n_selected"];

/**
 * The per-balance statistics of the selection, one entry per balance, from the columns
 * the kernel sends (`{ids, n, mean, q25, q75}`; `{}` when there are none).
 * @param {any} summary
 * @returns {{id: string, n: number, mean: number | null, q25: number | null, q75: number | null}[]}
 */
export function selectionEntries(summary) {
  if (!summary || !Array.isArray(summary.ids)) return [];
  const at = (/** @type {string} */ key, /** @type {number} */ i) =>
    Array.isArray(summary[key]) && typeof summary[key][i] === "number" ? summary[key][i] : null;
  return summary.ids.map((/** @type {string} */ id, /** @type {number} */ i) => ({
    id: String(id),
    n: Number(summary.n) || 0,
    mean: at("mean", i),
    q25: at("q25", i),
    q75: at("q75", i),
  }));
}

/**
 * Is this element a text field, list or other control that handles its own keys?
 * @param {Element} node
 * @returns {boolean}
 */
function typesText(node) {
  const tag = node.tagName;
  return tag === "INPUT" || tag === "TEXTAREA" || tag === "SELECT" || node.getAttribute("contenteditable") === "true";
}

/**
 * Put a view made by the widget manager into `host`, as Lumino's Widget.attach does: the
 * before-attach and after-attach messages let the view and its children know they are
 * shown (ipywidgets' views fill in their text only then).
 * @param {any} view
 * @param {HTMLElement} host
 */
function attachView(view, host) {
  const lumino = view.luminoWidget || view.pWidget;
  const message = (/** @type {string} */ type) => ({ type, isConflatable: false, conflate: () => false });
  if (lumino && typeof lumino.processMessage === "function") {
    lumino.processMessage(message("before-attach"));
    host.replaceChildren(view.el);
    lumino.processMessage(message("after-attach"));
  } else {
    host.replaceChildren(view.el);
    if (typeof view.trigger === "function") view.trigger("displayed");
  }
}

/**
 * Render the builder into `el`; returns the cleanup function.
 * @param {{model: WidgetModel, el: HTMLElement}} ctx
 * @returns {() => void}
 */
export function render({ model, el }) {
  const doc = el.ownerDocument;
  const root = html(doc, "div", {
    class: "cw-builder",
    "data-role": "builder",
    "data-lm-suppress-shortcuts": "true",
    role: "region",
    "aria-label": "balance builder",
    tabindex: -1, // the place the keyboard focus goes when the focused element disappears
  });

  // ---- skeleton
  const toolbar = html(doc, "div", { class: "cw-toolbar", role: "toolbar", "aria-label": "partition actions" });
  /**
   * @param {string} role
   * @param {string} text
   * @param {string} title
   * @param {string} keys
   */
  const button = (role, text, title, keys) =>
    html(
      doc,
      "button",
      { type: "button", class: "cw-button", "data-role": role, "data-focus-key": role, title, "aria-keyshortcuts": keys },
      text,
    );
  const undoButton = button("undo", "undo", "undo the last change (Ctrl+Z)", "Control+Z");
  const redoButton = button("redo", "redo", "redo (Ctrl+Shift+Z or Ctrl+Y)", "Control+Shift+Z Control+Y");
  const menu = drawSuggestMenu(doc);
  const totalLine = html(doc, "span", { class: "cw-info", "data-role": "total-variance" });
  const countLine = html(doc, "span", { class: "cw-info", "data-role": "n-selected" });
  const rowsLine = html(doc, "span", { class: "cw-info", "data-role": "rows-used" });
  for (const b of [undoButton, redoButton, menu.box, totalLine, countLine, rowsLine]) toolbar.appendChild(b);
  const progressLine = html(doc, "div", { class: "cw-progress", "data-role": "progress", "aria-live": "polite" });
  const errorLine = html(doc, "div", { class: "cw-error", "data-role": "error", role: "alert" });
  const main = html(doc, "div", { class: "cw-main" });
  const figureColumn = html(doc, "div", { class: "cw-figure-column" });
  const figure = html(doc, "div", { class: "cw-figure", "data-role": "figure" });
  const saveSlot = html(doc, "div", { class: "cw-figure-save", "data-role": "figure-save" });
  figureColumn.appendChild(figure);
  figureColumn.appendChild(saveSlot);
  const panel = html(doc, "div", { class: "cw-panel" });
  const editor = html(doc, "div", { class: "cw-editor", "data-role": "editor" });
  const tableBox = html(doc, "div", { class: "cw-table-box" });
  panel.appendChild(editor);
  panel.appendChild(tableBox);
  main.appendChild(figureColumn);
  main.appendChild(panel);
  const legend = html(doc, "div", { class: "cw-legend", "data-role": "legend" }, LEGEND);
  for (const part of [toolbar, progressLine, errorLine, main, legend]) root.appendChild(part);
  el.appendChild(root);

  // ---- state
  /** @type {{history: import("./history.js").History<TreeNode>, openLeaf: string | null, pending: PendingSplit | null, dragIndex: number | null, localError: string, focusNext: string | null, menuOpen: boolean, draft: {key: string, value: string} | null, tableSort: import("./table.js").TableSort}} */
  const state = {
    history: createHistory(model.get("tree")),
    openLeaf: null,
    pending: null,
    dragIndex: null,
    localError: "",
    focusNext: null, // data-focus-key of the element an action wants focused after the redraw
    menuOpen: false,
    draft: null, // a balance name being typed: {key, value}
    tableSort: createTableSort(),
    /** @type {{tree: TreeNode, stats: any, matched: any[], radius: number} | null} */
    drawn: null, // what the last full drawing was made from (a selection change redraws less)
  };
  const present = () => state.history.present;

  /** Send the present tree to the kernel. */
  function sendTree() {
    model.set("tree", JSON.parse(JSON.stringify(present())));
    model.save_changes();
  }

  /**
   * Record an edit, send it and redraw; then focus the element keyed `focusAfter`.
   * @param {() => TreeNode} edit
   * @param {(next: TreeNode) => string | null} [focusAfter]
   */
  function commit(edit, focusAfter) {
    let next;
    try {
      next = edit();
    } catch (err) {
      state.localError = String(/** @type {Error} */ (err).message || err);
      paint();
      return;
    }
    state.localError = "";
    if (sameTree(next, present())) return;
    state.history = pushState(state.history, next);
    closeEditor();
    sendTree();
    state.focusNext = focusAfter ? focusAfter(next) : null;
    paint();
  }

  function closeEditor() {
    state.openLeaf = null;
    state.pending = null;
    state.dragIndex = null;
  }

  /** @param {string} id */
  function openLeaf(id) {
    const node = findNode(present(), id);
    if (!node || !isLeaf(node)) return;
    state.openLeaf = id;
    state.pending = canSplit(node) ? startSplit(node) : null;
  }

  /** Close the editor when its leaf is gone or no longer a leaf. */
  function checkEditor() {
    if (!state.openLeaf) return;
    const node = findNode(present(), state.openLeaf);
    if (!node || !isLeaf(node)) closeEditor();
    else if (state.pending) {
      const known = new Set(node.parts);
      const all = [...state.pending.numerator, ...state.pending.denominator];
      if (all.length !== known.size || !all.every((p) => known.has(p))) state.pending = startSplit(node);
    }
  }

  // ---- focus
  /**
   * Where the focus is, when it is in the builder (null: elsewhere on the page).
   * @typedef {{key: string | null, keep: boolean, start?: number | null, end?: number | null}} SavedFocus
   * @returns {SavedFocus | null}
   */
  function captureFocus() {
    const active = /** @type {HTMLElement | null} */ (doc.activeElement);
    if (!active || !root.contains(active)) return null;
    // the figure control is not redrawn here: its focus is left alone
    if (active === root || saveSlot.contains(active)) return { key: null, keep: true };
    const key = active.getAttribute("data-focus-key");
    if (key && active.tagName === "INPUT") {
      const box = /** @type {HTMLInputElement} */ (active);
      return { key, keep: false, start: box.selectionStart, end: box.selectionEnd };
    }
    return { key, keep: false };
  }

  /** @param {Element | null} node */
  function canTakeFocus(node) {
    return Boolean(node && node.isConnected && !node.hasAttribute("disabled") && !node.closest("[hidden]"));
  }

  /** @param {SavedFocus | null} saved */
  function restoreFocus(saved) {
    const wanted = state.focusNext;
    state.focusNext = null;
    if (!wanted && (!saved || saved.keep)) {
      if (saved && !root.contains(doc.activeElement)) root.focus({ preventScroll: true });
      return;
    }
    const key = wanted || /** @type {SavedFocus} */ (saved).key;
    const target = key ? findByAttr(root, "data-focus-key", key) : null;
    if (!target || !canTakeFocus(target)) {
      root.focus({ preventScroll: true });
      return;
    }
    if (doc.activeElement !== target) target.focus();
    const draft = state.draft;
    if (draft && draft.key === key && target.tagName === "INPUT") {
      // a name being typed survives the redraw (the input is a new element)
      const box = /** @type {HTMLInputElement} */ (target);
      box.value = draft.value;
      const end = draft.value.length;
      try {
        box.setSelectionRange(saved?.start ?? end, saved?.end ?? end);
      } catch (_err) {
        // some input types do not support a selection range
      }
    }
  }

  // ---- drawing
  function paint() {
    const saved = captureFocus();
    const tree = present();
    const rawStats = model.get("stats");
    const stats = matchStats(tree, rawStats || []);
    const selection = selectionEntries(model.get("selection_summary")).filter((s) => stats.has(s.id));
    const groups = model.get("groups") || [];
    const colourBalance = model.get("colour_balance") || "";
    const busy = Boolean(model.get("busy"));

    // toolbar
    undoButton.toggleAttribute("disabled", !canUndo(state.history));
    redoButton.toggleAttribute("disabled", !canRedo(state.history));
    // aria-disabled, not disabled: the button keeps the focus while the kernel works
    menu.trigger.setAttribute("aria-disabled", busy ? "true" : "false");
    menu.trigger.setAttribute("aria-expanded", state.menuOpen ? "true" : "false");
    menu.popup.toggleAttribute("hidden", !state.menuOpen);
    totalLine.textContent = totalVarianceText(model.get("total_variance"));
    countLine.textContent = selectedCountText(model.get("n_selected") || 0);
    rowsLine.textContent = rowsUsedText(model.get("n_samples"), model.get("n_rows"));
    rowsLine.toggleAttribute("hidden", !rowsLine.textContent);
    progressLine.textContent = busy ? String(model.get("progress") || "computing\u2026") : "";
    progressLine.toggleAttribute("hidden", !busy);
    const message = String(model.get("messages") || state.localError || "");
    errorLine.textContent = message;
    errorLine.toggleAttribute("hidden", !message);

    // dendrogram
    const matched = [...stats.values()];
    const lay = layoutDendrogram(tree, matched, selection);
    state.drawn = lay.byLevel ? null : { tree, stats: rawStats, matched, radius: axisRadius(matched, selection) };
    /** @type {Map<string, {name: string, share: number | null}>} */
    const names = new Map();
    const rows = splitNodes(tree).map((node) => {
      const s = stats.get(node.id);
      const sel = selection.find((/** @type {any} */ x) => x.id === node.id);
      const fallback = defaultBalanceName(node.children[0].parts, node.children[1].parts);
      const name = s ? String(s.name) : node.name || fallback;
      names.set(node.id, { name, share: s ? s.share : null });
      return {
        id: node.id,
        name,
        customName: node.name || "",
        defaultName: s ? String(s.default_name) : fallback,
        numerator: node.children[0].parts,
        denominator: node.children[1].parts,
        variance: s ? s.variance : null,
        share: s ? s.share : null,
        mean: s ? s.mean : null,
        selectionMean: sel ? sel.mean : null,
        selectionN: sel ? sel.n : 0,
        separation: s ? s.separation || null : null,
      };
    });
    const svgNode = drawDendrogram(doc, lay, {
      names,
      colourBalance,
      openLeaf: state.openLeaf,
      groupColours: groups.map((/** @type {any} */ g) => String(g.colour)),
    });
    figure.replaceChildren(svgNode);
    if (lay.byLevel && lay.splits.length) {
      figure.appendChild(html(doc, "div", { class: "cw-note" }, "waiting for the variances from the kernel\u2026"));
    }

    // editor
    const open = state.openLeaf ? findNode(tree, state.openLeaf) : null;
    if (open) {
      editor.replaceChildren(
        drawSplitter(doc, {
          node: open,
          pending: state.pending,
          ready: pendingReady(tree, state.pending),
          mergeable: canMerge(tree, open.id),
        }),
      );
    } else {
      editor.replaceChildren(
        html(doc, "div", { class: "cw-hint" }, "click a group of parts in the dendrogram to split it"),
      );
    }

    // table
    tableBox.replaceChildren(drawTable(doc, rows, colourBalance, state.tableSort));
    restoreFocus(saved);
  }

  /**
   * A selection change: the count, the selection's marks on the axes and its column in
   * the table; the full drawing only when the axes' range changes with it (or the tree or
   * the statistics changed since the last drawing).
   */
  function paintSelection() {
    countLine.textContent = selectedCountText(model.get("n_selected") || 0);
    const drawn = state.drawn;
    const svgNode = figure.querySelector('svg[data-role="dendrogram"]');
    const table = tableBox.querySelector('[data-role="balance-table"]');
    if (!drawn || drawn.tree !== present() || drawn.stats !== model.get("stats") || !svgNode || !table) {
      paint();
      return;
    }
    const ids = new Set(drawn.matched.map((s) => s.id));
    const selection = selectionEntries(model.get("selection_summary")).filter((s) => ids.has(s.id));
    if (axisRadius(drawn.matched, selection) !== drawn.radius) {
      paint(); // the axes' range moves: every mark moves
      return;
    }
    if (!updateSelectionMarks(svgNode, layoutDendrogram(drawn.tree, drawn.matched, selection))) {
      paint();
      return;
    }
    updateSelectionCells(table, new Map(selection.map((s) => [s.id, s])));
  }

  // ---- kernel -> view
  function onTree() {
    const incoming = model.get("tree");
    if (!incoming || !Array.isArray(incoming.parts)) return;
    const h = state.history;
    if (!sameTree(incoming, h.present)) {
      if (!sameParts(incoming, h.present)) {
        state.history = createHistory(incoming);
        closeEditor();
      } else if (canUndo(h) && sameTree(incoming, h.past[h.past.length - 1])) {
        state.history = dropPresent(h); // the kernel refused the last edit
      } else {
        state.history = pushState(h, incoming); // a suggestion or an outside change: undoable
      }
      checkEditor();
    }
    paint();
  }

  /** @type {[string, Function][]} */
  const modelHandlers = WATCHED.map((name) => [
    `change:${name}`,
    name === "tree" ? onTree : SELECTION_TRAITS.includes(name) ? paintSelection : paint,
  ]);

  /**
   * Custom messages of the kernel: figure requests.
   * @param {any} content
   */
  function onCustom(content) {
    if (content && content.type === "figure-request") {
      answerFigureRequest(model, figure.querySelector('svg[data-role="dendrogram"]'), content);
    }
  }
  modelHandlers.push(["msg:custom", onCustom]);
  for (const [event, fn] of modelHandlers) model.on(event, fn);

  // ---- the figure control (an ipywidgets view made by the page's widget manager)
  /** @type {{remove?: () => void} | null} */
  let controlView = null;
  let disposed = false;
  async function showFigureControl() {
    const ref = model.get("figure_control");
    const manager = model.widget_manager;
    if (typeof ref !== "string" || !ref || !manager || typeof manager.get_model !== "function") return;
    try {
      const child = await manager.get_model(ref.replace(/^IPY_MODEL_/, ""));
      const view = await manager.create_view(child, {});
      if (disposed) {
        view.remove();
        return;
      }
      controlView = view;
      attachView(view, saveSlot);
    } catch (err) {
      saveSlot.textContent = `the figure control could not be shown: ${String(/** @type {Error} */ (err).message || err)}`;
    }
  }

  // ---- view -> kernel
  /**
   * @param {string} id
   * @param {boolean} [fromDendrogram] keep the focus on that balance of the dendrogram
   */
  function toggleColour(id, fromDendrogram = false) {
    const current = model.get("colour_balance") || "";
    model.set("colour_balance", current === id ? "" : id);
    model.save_changes();
    if (fromDendrogram) state.focusNext = `balance:${id}`;
    paint();
  }

  /** @param {boolean} open @param {number} [focusIndex] entry to focus (-1: the button) */
  function setMenu(open, focusIndex = -1) {
    state.menuOpen = open;
    menu.trigger.setAttribute("aria-expanded", open ? "true" : "false");
    menu.popup.toggleAttribute("hidden", !open);
    if (open && focusIndex >= 0) menu.items[focusIndex].focus();
    else if (!open && focusIndex === -1 && menu.box.contains(doc.activeElement)) menu.trigger.focus();
  }

  /** @param {string} method */
  function suggest(method) {
    setMenu(false, -1);
    menu.trigger.focus();
    if (model.get("busy")) return; // one automatic partition at a time
    state.localError = "";
    model.send({ type: "suggest", method });
  }

  /**
   * Focus a chip by side and row (rows clamp to the column).
   * @param {string} side
   * @param {number} row
   */
  function focusChip(side, row) {
    const chips = Array.from(root.querySelectorAll('[data-role="chip"]')).filter(
      (c) => c.getAttribute("data-side") === side,
    );
    if (!chips.length) return;
    const k = Math.max(0, Math.min(chips.length - 1, row));
    /** @type {HTMLElement} */ (chips[k]).focus();
  }

  /** Move the part with this index of the open leaf to `side` (or toggle when side is null).
   * @param {number} index
   * @param {"numerator" | "denominator" | null} side
   */
  function moveChip(index, side) {
    const node = state.openLeaf ? findNode(present(), state.openLeaf) : null;
    if (!node || !state.pending) return;
    const part = node.parts[index];
    if (part === undefined) return;
    state.pending = side
      ? movePart(state.pending, part, side, node.parts)
      : togglePart(state.pending, part, node.parts);
    state.focusNext = `chip:${index}`;
    paint();
  }

  /** @param {Element} input */
  function applyName(input) {
    const id = input.getAttribute("data-node-id") || "";
    const node = findNode(present(), id);
    if (!node || isLeaf(node)) return;
    const value = /** @type {HTMLInputElement} */ (input).value;
    state.draft = null;
    if (value.trim() === (node.name || "")) return;
    commit(() => renameBalance(present(), id, value), () => `name:${id}`);
  }

  /** @param {string} id */
  function showLeaf(id) {
    openLeaf(id);
    state.focusNext = state.pending ? null : "cancel-split";
    paint();
    if (state.pending) focusChip("numerator", 0);
  }

  /** @param {string} id the open leaf, or "" */
  function cancelSplit(id) {
    closeEditor();
    state.focusNext = id ? `leaf:${id}` : null;
    paint();
  }

  /** Click actions by data-role, tried in this order (inner elements first).
   * @type {[string, (hit: Element) => void][]} */
  const clickActions = [
    ["chip", (hit) => moveChip(Number(hit.getAttribute("data-part-index")), null)],
    ["name-input", () => {}],
    ["unsplit", (hit) => {
      const id = hit.getAttribute("data-node-id") || "";
      commit(() => unsplitNode(present(), id), () => `leaf:${id}`);
    }],
    ["leaf", (hit) => showLeaf(hit.getAttribute("data-node-id") || "")],
    ["balance", (hit) => toggleColour(hit.getAttribute("data-node-id") || "", true)],
    ["balance-row", (hit) => toggleColour(hit.getAttribute("data-node-id") || "")],
    ["sort", (hit) => {
      state.tableSort = nextSort(state.tableSort, hit.getAttribute("data-sort-key") || "");
      paint();
    }],
    ["apply-split", () => {
      const pending = state.pending;
      if (pending) commit(() => applySplit(present(), pending), () => `balance:${pending.nodeId}`);
    }],
    ["cancel-split", () => cancelSplit(state.openLeaf || "")],
    ["merge", () => {
      const id = state.openLeaf;
      const parent = id ? findParent(present(), id) : null;
      if (id && parent) commit(() => mergeWithSibling(present(), id), () => `leaf:${parent.id}`);
    }],
    ["undo", () => doUndo(true)],
    ["redo", () => doRedo(true)],
    ["suggest", (hit) => suggest(hit.getAttribute("data-method") || "")],
    ["suggest-open", () => {
      if (state.menuOpen || model.get("busy")) setMenu(false);
      else setMenu(true, 0);
    }],
  ];

  /** @param {MouseEvent} event */
  function onClick(event) {
    if (saveSlot.contains(/** @type {Node} */ (event.target))) return;
    if (state.menuOpen && !menu.box.contains(/** @type {Node} */ (event.target))) setMenu(false, -2);
    for (const [role, action] of clickActions) {
      const hit = closestRole(event.target, root, role);
      if (hit) {
        action(hit);
        return;
      }
    }
  }

  /**
   * Focus after undo / redo from a toolbar button: that button while it still works, else
   * the other one, else the builder.
   * @param {string} here
   * @param {boolean} stillHere
   * @param {string} other
   * @param {boolean} otherWorks
   */
  const afterHistory = (here, stillHere, other, otherWorks) => (stillHere ? here : otherWorks ? other : null);

  /** @param {boolean} [fromButton] */
  function doUndo(fromButton = false) {
    if (!canUndo(state.history)) return;
    state.history = undo(state.history);
    state.draft = null;
    checkEditor();
    sendTree();
    if (fromButton) state.focusNext = afterHistory("undo", canUndo(state.history), "redo", canRedo(state.history));
    paint();
  }

  /** @param {boolean} [fromButton] */
  function doRedo(fromButton = false) {
    if (!canRedo(state.history)) return;
    state.history = redo(state.history);
    state.draft = null;
    checkEditor();
    sendTree();
    if (fromButton) state.focusNext = afterHistory("redo", canRedo(state.history), "undo", canUndo(state.history));
    paint();
  }

  /**
   * Ctrl+Z, Ctrl+Shift+Z and Ctrl+Y: undo / redo; true when the key was one of them.
   * @param {KeyboardEvent} event
   * @returns {boolean}
   */
  function historyKey(event) {
    const key = event.key;
    if (!(event.ctrlKey || event.metaKey) || event.altKey) return false;
    const z = key === "z" || key === "Z";
    const y = key === "y" || key === "Y";
    if (!z && !y) return false;
    event.preventDefault();
    event.stopPropagation();
    if (y || event.shiftKey) doRedo();
    else doUndo();
    return true;
  }

  /** @param {KeyboardEvent} event */
  function onKeydown(event) {
    const target = /** @type {Element} */ (event.target);
    const key = event.key;
    if (saveSlot.contains(target)) {
      // the figure control's own fields keep their keys; its button passes undo / redo on
      if (!typesText(target)) historyKey(event);
      return;
    }
    const input = closestRole(target, root, "name-input");
    if (input) {
      const node = findNode(present(), input.getAttribute("data-node-id") || "");
      const typed = /** @type {HTMLInputElement} */ (input).value.trim() !== (node ? node.name || "" : "");
      // nothing typed since the last rename: Ctrl+Z undoes the rename itself
      if (!typed && historyKey(event)) return;
      if (key === "Enter") {
        event.preventDefault();
        applyName(input);
      } else if (key === "Escape") {
        event.preventDefault();
        /** @type {HTMLInputElement} */ (input).value = node ? node.name || "" : "";
        state.draft = null;
      }
      event.stopPropagation(); // typing in the name must not reach notebook shortcuts
      return;
    }
    if (historyKey(event)) return;
    if (menu.box.contains(target)) {
      const items = menu.items;
      const current = items.indexOf(/** @type {HTMLElement} */ (target));
      const next = menuStep(key, current, items.length);
      if (next !== null && (current >= 0 || key === "ArrowDown" || key === "ArrowUp")) {
        event.preventDefault();
        event.stopPropagation();
        setMenu(true, next);
        return;
      }
      if (key === "Escape" && state.menuOpen) {
        event.preventDefault();
        event.stopPropagation();
        setMenu(false);
        return;
      }
      if (key === "Tab" && state.menuOpen) setMenu(false, -2);
      return; // Enter and Space click the focused button
    }
    if (key === "Escape" && state.openLeaf) {
      event.preventDefault();
      event.stopPropagation();
      cancelSplit(state.openLeaf);
      return;
    }
    const chip = closestRole(target, root, "chip");
    if (chip) {
      const side = chip.getAttribute("data-side") || "numerator";
      const row = Number(chip.getAttribute("data-row"));
      let handled = true;
      if (key === "ArrowDown") focusChip(side, row + 1);
      else if (key === "ArrowUp") focusChip(side, row - 1);
      else if (key === "ArrowLeft") focusChip("numerator", row);
      else if (key === "ArrowRight") focusChip("denominator", row);
      else handled = false; // Enter and Space click the button: the click handler toggles
      if (handled) {
        event.preventDefault();
        event.stopPropagation();
      }
      return;
    }
    if (key === "Enter" || key === " ") {
      const leaf = closestRole(target, root, "leaf");
      const balance = closestRole(target, root, "balance");
      if (leaf) {
        event.preventDefault();
        event.stopPropagation();
        showLeaf(leaf.getAttribute("data-node-id") || "");
      } else if (balance) {
        event.preventDefault();
        event.stopPropagation();
        toggleColour(balance.getAttribute("data-node-id") || "", true);
      }
    }
  }

  /** @param {FocusEvent} event */
  function onFocusOut(event) {
    const into = /** @type {Node | null} */ (event.relatedTarget);
    if (state.menuOpen && !(into && menu.box.contains(into))) setMenu(false, -2);
  }

  /** @param {Event} event */
  function onInput(event) {
    const input = closestRole(event.target, root, "name-input");
    if (input) state.draft = { key: `name:${input.getAttribute("data-node-id")}`, value: /** @type {HTMLInputElement} */ (input).value };
  }

  /** @param {Event} event */
  function onChange(event) {
    const input = closestRole(event.target, root, "name-input");
    if (input) applyName(input);
  }

  /** @param {DragEvent} event */
  function onDragStart(event) {
    const chip = closestRole(event.target, root, "chip");
    if (!chip) return;
    const index = Number(chip.getAttribute("data-part-index"));
    state.dragIndex = index;
    if (event.dataTransfer) {
      event.dataTransfer.setData("text/plain", String(index));
      event.dataTransfer.effectAllowed = "move";
    }
    chip.classList.add("cw-dragging");
  }

  /** @param {DragEvent} event */
  function onDragOver(event) {
    const side = closestRole(event.target, root, "side");
    if (!side || state.dragIndex === null) return;
    event.preventDefault();
    if (event.dataTransfer) event.dataTransfer.dropEffect = "move";
    side.classList.add("cw-drop-target");
  }

  /** @param {DragEvent} event */
  function onDragLeave(event) {
    const side = closestRole(event.target, root, "side");
    const into = closestRole(/** @type {Element | null} */ (event.relatedTarget), root, "side");
    if (side && side !== into) side.classList.remove("cw-drop-target");
  }

  /** @param {DragEvent} event */
  function onDrop(event) {
    const side = closestRole(event.target, root, "side");
    if (!side) return;
    event.preventDefault();
    let index = state.dragIndex;
    if (index === null && event.dataTransfer) {
      const raw = event.dataTransfer.getData("text/plain");
      index = /^\d+$/.test(raw) ? Number(raw) : null;
    }
    state.dragIndex = null;
    const where = side.getAttribute("data-side") === "denominator" ? "denominator" : "numerator";
    if (index !== null) moveChip(index, where);
  }

  function onDragEnd() {
    if (state.dragIndex !== null) {
      state.dragIndex = null;
      paint();
    }
  }

  /** @type {[string, EventListener][]} */
  const domHandlers = [
    ["click", /** @type {EventListener} */ (onClick)],
    ["keydown", /** @type {EventListener} */ (onKeydown)],
    ["focusout", /** @type {EventListener} */ (onFocusOut)],
    ["input", onInput],
    ["change", onChange],
    ["dragstart", /** @type {EventListener} */ (onDragStart)],
    ["dragover", /** @type {EventListener} */ (onDragOver)],
    ["dragleave", /** @type {EventListener} */ (onDragLeave)],
    ["drop", /** @type {EventListener} */ (onDrop)],
    ["dragend", onDragEnd],
  ];
  for (const [type, fn] of domHandlers) root.addEventListener(type, fn);

  paint();
  showFigureControl();

  return () => {
    disposed = true;
    for (const [type, fn] of domHandlers) root.removeEventListener(type, fn);
    for (const [event, fn] of modelHandlers) model.off(event, fn);
    if (controlView && typeof controlView.remove === "function") controlView.remove();
    controlView = null;
    root.remove();
  };
}
