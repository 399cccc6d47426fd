// Speed-ups of a view's bqplot figure in the page: initialize({model}) for anywidget.
//
// The widget is never displayed: the hook runs when its model is created in the page. It
// takes over every view (now and later) of the marks and brushes the kernel names:
// scatter marks restyle a selection the fast way (scatter_restyle.js), brushes send their
// rectangle when the drag ends (brush_hold.js). One widget serves every view of a model:
// on a selection change the kernel sends it the `selected` of all their marks in one
// message (before the marks' own), painted here in one task, so the browser draws one
// frame for all the views instead of one between each two.
//
// Synced traits read here: marks, brushes (references "IPY_MODEL_<id>" of bqplot models).
// Message from the kernel: {kind: "selections", marks: [{mark, selected (index of its
// buffer of uint32 positions, or null), unselected_style}]}.

import { holdBrushUntilRelease } from "./brush_hold.js";
import { showSelection, speedUpScatter } from "./scatter_restyle.js";

/**
 * Call `onView` for every view of a widget model, those it has and those made later.
 * Several callers may follow one model (e.g. a helper made again): each gets every view.
 * @param {any} model a widget model (its `views` maps ids to promises of views)
 * @param {(view: any) => void} onView
 */
export function forEachView(model, onView) {
  if (!model || typeof model.views !== "object" || model.views === null) return;
  const take = (promise, callbacks) => {
    Promise.resolve(promise).then(
      (view) => {
        if (view) for (const fn of callbacks) fn(view);
      },
      () => {},
    );
  };
  if (!model.__cwOnView) {
    model.__cwOnView = [];
    const views = model.views;
    model.views = new Proxy(views, {
      set(target, key, value) {
        target[key] = value;
        take(value, model.__cwOnView);
        return true;
      },
    });
  }
  if (model.__cwOnView.includes(onView)) return;
  model.__cwOnView.push(onView);
  for (const key of Object.keys(model.views)) take(model.views[key], [onView]);
}

/**
 * Little-endian uint32 values of a message buffer (any alignment).
 * @param {any} buffer a DataView, an ArrayBuffer or a typed array
 * @returns {Uint32Array}
 */
export function uint32Of(buffer) {
  const view = buffer instanceof DataView
    ? buffer
    : buffer instanceof ArrayBuffer
      ? new DataView(buffer)
      : new DataView(buffer.buffer, buffer.byteOffset || 0, buffer.byteLength);
  const out = new Uint32Array(Math.floor(view.byteLength / 4));
  for (let k = 0; k < out.length; k += 1) out[k] = view.getUint32(4 * k, true);
  return out;
}

/**
 * anywidget hook: take over the views of every mark and brush the kernel names, and
 * paint the selections the kernel sends for all of them at once.
 * @param {{model: any}} args
 * @returns {() => void} cleanup
 */
export function initialize({ model }) {
  const manager = model.widget_manager;
  /** @param {unknown} ref "IPY_MODEL_<id>" */
  const idOf = (ref) => String(ref).replace(/^IPY_MODEL_/, "");
  const started = new Set();
  /** @type {Map<string, Set<any>>} scatter views taken over, by mark id */
  const scatterViews = new Map();
  /**
   * Follow the views of each widget a trait names, once per widget.
   * @param {string} trait
   * @param {(id: string) => (view: any) => void} onView what to do with a view of widget id
   */
  const follow = (trait, onView) => {
    for (const ref of model.get(trait) || []) {
      const id = idOf(ref);
      if (started.has(id) || !manager) continue;
      started.add(id);
      Promise.resolve(manager.get_model(id)).then(
        (widget) => forEachView(widget, onView(id)),
        () => {},
      );
    }
  };
  /** @param {string} id */
  const scatterTaken = (id) => (/** @type {any} */ view) => {
    if (!speedUpScatter(view)) return;
    if (!scatterViews.has(id)) scatterViews.set(id, new Set());
    scatterViews.get(id).add(view);
    view.once?.("remove", () => scatterViews.get(id)?.delete(view));
  };
  const attach = () => {
    follow("marks", scatterTaken);
    follow("brushes", () => holdBrushUntilRelease);
  };
  /** @param {any} content @param {any[]} buffers */
  const onMessage = (content, buffers) => {
    if (!content || content.kind !== "selections") return;
    for (const entry of content.marks || []) {
      const views = scatterViews.get(idOf(entry.mark));
      if (!views || !views.size) continue;
      const selected = entry.selected === null || entry.selected === undefined
        ? null
        : uint32Of(buffers[entry.selected]);
      for (const view of views) {
        showSelection(view, selected, entry.unselected_style || {});
      }
    }
  };
  model.on("change:marks", attach);
  model.on("change:brushes", attach);
  model.on("msg:custom", onMessage);
  attach();
  return () => {
    model.off("change:marks", attach);
    model.off("change:brushes", attach);
    model.off("msg:custom", onMessage);
  };
}
