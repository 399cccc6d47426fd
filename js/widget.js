// The balance builder front end: render({model, el}) for anywidget.
//
// The kernel owns the truth: this view proposes a new tree by setting the synced trait
// "tree"; the kernel validates it, updates the shared model and sends the statistics
// back (or sends the last valid tree back with a message in "error"). Undo / redo keep
// snapshots of the trees here. All text from the data is set with textContent.
//
// Synced traits read here: parts, tree, stats, selection_stats, total_variance,
// n_selected, n_samples, n_rows, groups, error, busy, progress, colour_balance.
// Written here: tree, colour_balance. Custom message sent: {type: "suggest", method}.

import { canRedo, canUndo, createHistory, dropPresent, pushState, redo, undo } from "./history.js";
import { closestRole, findByAttr, html } from "./dom.js";
import { drawDendrogram } from "./dendrogram.js";
import { defaultBalanceName, rowsUsedText, selectedCountText, totalVarianceText } from "./labels.js";
import { labelMargin, layoutDendrogram } from "./layout.js";
import { drawSplitter } from "./splitter.js";
import { createTableSort, drawTable, nextSort } from "./table.js";
import { applySplit, canMerge, canSplit, findNode, isLeaf, mergeWithSibling, movePart, pendingReady, renameBalance, sameParts, sameTree, splitNodes, startSplit, togglePart, unsplitNode } from "./tree.js";

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
 * @property {(content: any) => void} send
 * @property {(event: string, cb: Function) => void} on
 * @property {(event: string, cb: Function) => void} off
 */

/** Traits whose change redraws the view. */
const WATCHED = [
  "parts",
  "tree",
  "stats",
  "selection_stats",
  "total_variance",
  "n_selected",
  "n_samples",
  "n_rows",
  "groups",
  "error",
  "busy",
  "progress",
  "colour_balance",
];

/** Height of the plot area above the part labels, px. */
const PLOT_HEIGHT = 260;
/** Horizontal room per part, px. */
const SLOT_WIDTH = 44;

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
  });

  // ---- skeleton
  const toolbar = html(doc, "div", { class: "cw-toolbar", role: "toolbar" });
  /**
   * @param {string} role
   * @param {string} text
   * @param {string} title
   * @param {Record<string, string>} [extra]
   */
  const button = (role, text, title, extra = {}) =>
    html(
      doc,
      "button",
      {
        type: "button",
        class: "cw-button",
        "data-role": role,
        "data-focus-key": `btn:${role}:${extra["data-method"] || ""}`,
        title,
        ...extra,
      },
      text,
    );
  const undoButton = button("undo", "undo", "undo the last change (Ctrl+Z)");
  const redoButton = button("redo", "redo", "redo (Ctrl+Shift+Z)");
  const principalButton = button(
    "suggest",
    "suggest: principal balances",
    "each group split by its balance of largest variance",
    { "data-method": "principal" },
  );
  const wardButton = button("suggest", "suggest: Ward clustering", "parts clustered by Ward's method", {
    "data-method": "ward",
  });
  const totalLine = html(doc, "span", { class: "cw-info", "data-role": "total-variance" });
  const countLine = html(doc, "span", { class: "cw-info", "data-role": "n-selected" });
  const rowsLine = html(doc, "span", { class: "cw-info", "data-role": "rows-used" });
  for (const b of [undoButton, redoButton, principalButton, wardButton, totalLine, countLine, rowsLine]) toolbar.appendChild(b);
  const progressLine = html(doc, "div", { class: "cw-progress", "data-role": "progress", "aria-live": "polite" });
  const errorLine = html(doc, "div", { class: "cw-error", "data-role": "error", role: "alert" });
  const main = html(doc, "div", { class: "cw-main" });
  const figure = html(doc, "div", { class: "cw-figure", "data-role": "figure" });
  const panel = html(doc, "div", { class: "cw-panel" });
  const editor = html(doc, "div", { class: "cw-editor", "data-role": "editor" });
  const tableBox = html(doc, "div", { class: "cw-table-box" });
  panel.appendChild(editor);
  panel.appendChild(tableBox);
  main.appendChild(figure);
  main.appendChild(panel);
  const legend = html(
    doc,
    "div",
    { class: "cw-legend", "data-role": "legend" },
    "bar length = variance of the balance; on each axis: box 25\u201375 %, whiskers 5\u201395 %, " +
      "diamond = mean, tick = median, filled dot below = mean of the selection (line: its 25\u201375 %), " +
      "small dots above = group means; markers lean toward the side that dominates",
  );
  for (const part of [toolbar, progressLine, errorLine, main, legend]) root.appendChild(part);
  el.appendChild(root);

  // ---- state
  /** @type {{history: import("./history.js").History<TreeNode>, openLeaf: string | null, pending: PendingSplit | null, dragIndex: number | null, localError: string, tableSort: import("./table.js").TableSort}} */
  const state = {
    history: createHistory(model.get("tree")),
    openLeaf: null,
    pending: null,
    dragIndex: null,
    localError: "",
    tableSort: createTableSort(),
  };
  const present = () => state.history.present;

  /** Send the present tree to the kernel. */
  function sendTree() {
    model.set("tree", JSON.parse(JSON.stringify(present())));
    model.save_changes();
  }

  /**
   * Record an edit, send it and redraw.
   * @param {() => TreeNode} edit
   */
  function commit(edit) {
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

  // ---- drawing
  /** @returns {{key: string, value?: string, start?: number | null, end?: number | null} | null} */
  function captureFocus() {
    const active = /** @type {HTMLElement | null} */ (doc.activeElement);
    if (!active || !root.contains(active)) return null;
    const key = active.getAttribute("data-focus-key");
    if (!key) return null;
    if (active.tagName === "INPUT") {
      const box = /** @type {HTMLInputElement} */ (active);
      return { key, value: box.value, start: box.selectionStart, end: box.selectionEnd };
    }
    return { key };
  }

  /** @param {{key: string, value?: string, start?: number | null, end?: number | null} | null} saved */
  function restoreFocus(saved) {
    if (!saved) return;
    const target = findByAttr(root, "data-focus-key", saved.key);
    if (!target) return;
    target.focus();
    if (saved.value !== undefined && target.tagName === "INPUT") {
      const box = /** @type {HTMLInputElement} */ (target);
      box.value = saved.value;
      try {
        box.setSelectionRange(saved.start ?? saved.value.length, saved.end ?? saved.value.length);
      } catch (_err) {
        // some input types do not support a selection range
      }
    }
  }

  function paint() {
    const saved = captureFocus();
    const tree = present();
    const stats = matchStats(tree, model.get("stats") || []);
    const selection = (model.get("selection_stats") || []).filter((/** @type {any} */ s) => stats.has(s.id));
    const groups = model.get("groups") || [];
    const colourBalance = model.get("colour_balance") || "";
    const busy = Boolean(model.get("busy"));

    // toolbar
    undoButton.toggleAttribute("disabled", !canUndo(state.history));
    redoButton.toggleAttribute("disabled", !canRedo(state.history));
    principalButton.toggleAttribute("disabled", busy);
    wardButton.toggleAttribute("disabled", busy);
    totalLine.textContent = totalVarianceText(model.get("total_variance"));
    countLine.textContent = selectedCountText(model.get("n_selected") || 0);
    rowsLine.textContent = rowsUsedText(model.get("n_samples"), model.get("n_rows"));
    rowsLine.toggleAttribute("hidden", !rowsLine.textContent);
    progressLine.textContent = busy ? String(model.get("progress") || "computing\u2026") : "";
    progressLine.toggleAttribute("hidden", !busy);
    const message = String(model.get("error") || state.localError || "");
    errorLine.textContent = message;
    errorLine.toggleAttribute("hidden", !message);

    // dendrogram
    const parts = tree.parts;
    const bottom = labelMargin(parts);
    const width = Math.max(360, 64 + SLOT_WIDTH * parts.length);
    const lay = layoutDendrogram(tree, [...stats.values()], selection, {
      width,
      height: PLOT_HEIGHT + bottom,
      margin: { top: 18, right: 16, bottom, left: 48 },
    });
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
  const modelHandlers = WATCHED.map((name) => [`change:${name}`, name === "tree" ? onTree : paint]);
  for (const [event, fn] of modelHandlers) model.on(event, fn);

  // ---- view -> kernel
  /** @param {string} id */
  function toggleColour(id) {
    const current = model.get("colour_balance") || "";
    model.set("colour_balance", current === id ? "" : id);
    model.save_changes();
    paint();
  }

  /** @param {string} method */
  function suggest(method) {
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

  /** @param {string} key */
  function focusKey(key) {
    const target = findByAttr(root, "data-focus-key", key);
    if (target) target.focus();
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
    paint();
    focusKey(`chip:${index}`);
  }

  /** @param {Element} input */
  function applyName(input) {
    const id = input.getAttribute("data-node-id") || "";
    const node = findNode(present(), id);
    if (!node || isLeaf(node)) return;
    const value = /** @type {HTMLInputElement} */ (input).value;
    if (value.trim() === (node.name || "")) return;
    commit(() => renameBalance(present(), id, value));
  }

  /** Click actions by data-role, tried in this order (inner elements first).
   * @type {[string, (hit: Element) => void][]} */
  const clickActions = [
    ["chip", (hit) => moveChip(Number(hit.getAttribute("data-part-index")), null)],
    ["name-input", () => {}],
    ["unsplit", (hit) => {
      const id = hit.getAttribute("data-node-id") || "";
      commit(() => unsplitNode(present(), id));
    }],
    ["leaf", (hit) => {
      openLeaf(hit.getAttribute("data-node-id") || "");
      paint();
      if (state.pending) focusChip("numerator", 0);
    }],
    ["balance", (hit) => toggleColour(hit.getAttribute("data-node-id") || "")],
    ["balance-row", (hit) => toggleColour(hit.getAttribute("data-node-id") || "")],
    ["sort", (hit) => {
      state.tableSort = nextSort(state.tableSort, hit.getAttribute("data-sort-key") || "");
      paint();
    }],
    ["apply-split", () => {
      const pending = state.pending;
      if (pending) commit(() => applySplit(present(), pending));
    }],
    ["cancel-split", () => {
      const id = state.openLeaf;
      closeEditor();
      paint();
      if (id) focusKey(`leaf:${id}`);
    }],
    ["merge", () => {
      const id = state.openLeaf;
      if (id) commit(() => mergeWithSibling(present(), id));
    }],
    ["undo", () => doUndo()],
    ["redo", () => doRedo()],
    ["suggest", (hit) => suggest(hit.getAttribute("data-method") || "")],
  ];

  /** @param {MouseEvent} event */
  function onClick(event) {
    for (const [role, action] of clickActions) {
      const hit = closestRole(event.target, root, role);
      if (hit) {
        action(hit);
        return;
      }
    }
  }

  function doUndo() {
    if (!canUndo(state.history)) return;
    state.history = undo(state.history);
    checkEditor();
    sendTree();
    paint();
  }

  function doRedo() {
    if (!canRedo(state.history)) return;
    state.history = redo(state.history);
    checkEditor();
    sendTree();
    paint();
  }

  /** @param {KeyboardEvent} event */
  function onKeydown(event) {
    const target = /** @type {Element} */ (event.target);
    const key = event.key;
    const input = closestRole(target, root, "name-input");
    if (input) {
      if (key === "Enter") {
        event.preventDefault();
        applyName(input);
      } else if (key === "Escape") {
        event.preventDefault();
        const node = findNode(present(), input.getAttribute("data-node-id") || "");
        /** @type {HTMLInputElement} */ (input).value = node ? node.name || "" : "";
      }
      event.stopPropagation(); // typing in the name must not reach notebook shortcuts
      return;
    }
    const mod = event.ctrlKey || event.metaKey;
    if (mod && (key === "z" || key === "Z")) {
      event.preventDefault();
      event.stopPropagation();
      if (event.shiftKey) doRedo();
      else doUndo();
      return;
    }
    if (mod && (key === "y" || key === "Y")) {
      event.preventDefault();
      event.stopPropagation();
      doRedo();
      return;
    }
    if (key === "Escape" && state.openLeaf) {
      event.preventDefault();
      event.stopPropagation();
      const id = state.openLeaf;
      closeEditor();
      paint();
      focusKey(`leaf:${id}`);
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
        openLeaf(leaf.getAttribute("data-node-id") || "");
        paint();
        if (state.pending) focusChip("numerator", 0);
        else focusKey("cancel-split");
      } else if (balance) {
        event.preventDefault();
        event.stopPropagation();
        toggleColour(balance.getAttribute("data-node-id") || "");
      }
    }
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
    ["change", onChange],
    ["dragstart", /** @type {EventListener} */ (onDragStart)],
    ["dragover", /** @type {EventListener} */ (onDragOver)],
    ["dragleave", /** @type {EventListener} */ (onDragLeave)],
    ["drop", /** @type {EventListener} */ (onDrop)],
    ["dragend", onDragEnd],
  ];
  for (const [type, fn] of domHandlers) root.addEventListener(type, fn);

  paint();

  return () => {
    for (const [type, fn] of domHandlers) root.removeEventListener(type, fn);
    for (const [event, fn] of modelHandlers) model.off(event, fn);
    root.remove();
  };
}
