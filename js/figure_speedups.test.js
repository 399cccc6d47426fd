// The selection painter (selection_paint.js) and its take-over of a bqplot scatter view
// (scatter_restyle.js), the brush held until release (brush_hold.js) and the anywidget
// hook taking over views (figure_speedups.js), on jsdom's DOM (testdom.js). The reference for every picture is
// written out independently here: each point's inline style is its default style plus the
// style of its state (selected / unselected; nothing when no selection is shown), which is
// what bqplot's scatter means to draw (its own restyle also leaves stale keys behind).
import assert from "node:assert/strict";
import { test } from "node:test";

import { page } from "./testdom.js";
import { DEFAULT_KEYS, paintSelection, selectionStates, styleNormaliser } from "./selection_paint.js";
import { holdBrushUntilRelease } from "./brush_hold.js";
import { forEachView, initialize, uint32Of } from "./figure_speedups.js";
import { speedUpScatter } from "./scatter_restyle.js";

const SVG = "http://www.w3.org/2000/svg";
const SELECTED = { "fill-opacity": "1", stroke: "#111111", "stroke-width": "1.2" };
const FADED = { "fill-opacity": "0.22" };
const PLAIN = { "fill-opacity": "1" };

/** The default style a scatter writes on point i (its colour depends on the point). */
function defaultsOf(i) {
  return { fill: `rgb(${i % 250}, 10, 20)`, stroke: `rgb(${i % 250}, 10, 20)`, opacity: "1", "stroke-width": "1.5" };
}

/** n points drawn with their defaults, and a context restoring them (counting calls). */
function scene(n) {
  const { document } = page();
  const svg = document.createElementNS(SVG, "svg");
  document.body.appendChild(svg);
  const points = [];
  for (let i = 0; i < n; i += 1) {
    const dot = document.createElementNS(SVG, "path");
    for (const [k, v] of Object.entries(defaultsOf(i))) dot.style.setProperty(k, v);
    svg.appendChild(dot);
    points.push(dot);
  }
  const restored = [];
  const ctx = {
    keys: new Set(),
    normalise: styleNormaliser(document),
    restoreDefaults: (/** @type {number[]} */ positions) => {
      restored.push([...positions]);
      for (const i of positions) for (const [k, v] of Object.entries(defaultsOf(i))) points[i].style.setProperty(k, v);
    },
  };
  return { document, points, ctx, restored };
}

/** Inline style of an element as a plain object. */
function inline(el) {
  const out = {};
  for (let k = 0; k < el.style.length; k += 1) {
    const key = el.style.item(k);
    out[key] = el.style.getPropertyValue(key);
  }
  return out;
}

/** What point i must show: defaults, then the style of its state. */
function expected(i, selected, selectedStyle, unselectedStyle) {
  if (selected === null) return defaultsOf(i);
  const style = selected.includes(i) ? selectedStyle : unselectedStyle;
  return { ...defaultsOf(i), ...style };
}

function assertPicture(points, selected, selectedStyle, unselectedStyle) {
  points.forEach((p, i) => {
    assert.deepEqual(inline(p), expected(i, selected, selectedStyle, unselectedStyle), `point ${i}`);
  });
}

test("selectionStates: none shown, selected, unselected; positions out of range ignored", () => {
  assert.deepEqual([...selectionStates(4, null)], [0, 0, 0, 0]);
  assert.deepEqual([...selectionStates(4, new Uint32Array([1, 3, 9]))], [2, 1, 2, 1]);
  assert.deepEqual([...selectionStates(3, [])], [2, 2, 2]);
});

test("a selection shown, then cleared: every key of the selection styles goes away", () => {
  const { points, ctx, restored } = scene(6);
  paintSelection(points, [1, 4], SELECTED, FADED, ctx);
  assertPicture(points, [1, 4], SELECTED, FADED);
  const out = paintSelection(points, null, SELECTED, FADED, ctx);
  assertPicture(points, null, SELECTED, FADED);
  // only the selected points had a default key (stroke) overwritten: only they are redrawn
  assert.deepEqual(restored.at(-1), [1, 4]);
  assert.equal(out.touched, 6);
});

test("from one selection to another only the points whose state changed are touched", () => {
  const { points, ctx } = scene(50);
  paintSelection(points, [1, 2, 3, 4], SELECTED, FADED, ctx);
  const out = paintSelection(points, [3, 4, 5], SELECTED, FADED, ctx);
  assert.equal(out.touched, 3); // 1 and 2 fade, 5 is selected; 3 and 4 stay
  assertPicture(points, [3, 4, 5], SELECTED, FADED);
  assert.equal(paintSelection(points, [3, 4, 5], SELECTED, FADED, ctx).touched, 0);
});

test("a new unselected style repaints the unselected points (the plain one before a clear)", () => {
  const { points, ctx } = scene(5);
  paintSelection(points, [0], SELECTED, FADED, ctx);
  const out = paintSelection(points, [0], SELECTED, PLAIN, ctx);
  assert.equal(out.touched, 4);
  assertPicture(points, [0], SELECTED, PLAIN);
});

test("a key left out of both styles is still removed", () => {
  const { points, ctx } = scene(4);
  paintSelection(points, [2], SELECTED, FADED, ctx);
  const outline = { "stroke-opacity": "0.5" };
  paintSelection(points, [2], SELECTED, outline, ctx);
  assertPicture(points, [2], SELECTED, outline);
  assert.ok(!points[0].style.getPropertyValue("fill-opacity"));
});

test("a verify pass corrects keys another painter left (no defaults redrawn)", () => {
  const { points, ctx, restored } = scene(4);
  points[3].style.setProperty("fill-opacity", "0.22"); // left by a restyle that never removes
  const out = paintSelection(points, null, SELECTED, FADED, ctx, true);
  assertPicture(points, null, SELECTED, FADED);
  assert.equal(out.writes, 1);
  assert.deepEqual(restored, []);
  // the point remembers "no selection" now; a stale key is still found by the next verify
  paintSelection(points, null, SELECTED, FADED, ctx);
  points[1].style.setProperty("fill-opacity", "0.22");
  assert.equal(paintSelection(points, null, SELECTED, FADED, ctx, true).writes, 1);
  assertPicture(points, null, SELECTED, FADED);
});

test("a point another painter styled (nothing remembered) gets its defaults back first", () => {
  const { points, ctx, restored } = scene(3);
  points[0].style.setProperty("stroke", "#111111");
  points[2].style.setProperty("fill-opacity", "0.22");
  paintSelection(points, null, SELECTED, FADED, ctx);
  assertPicture(points, null, SELECTED, FADED);
  assert.deepEqual(restored, [[0, 1, 2]]);
});

test("colours are compared as the browser writes them back, so nothing is rewritten twice", () => {
  const { points, ctx } = scene(3);
  paintSelection(points, [0], SELECTED, FADED, ctx);
  const again = paintSelection(points, [0], { ...SELECTED }, FADED, ctx); // same values, new object
  assert.equal(again.touched, 1);
  assert.equal(again.writes, 0);
});

test("random sequences of selections and styles always give the reference picture", () => {
  // a small seeded generator (mulberry32), so a failure repeats
  let seed = 20261202;
  const random = () => {
    seed = (seed + 0x6d2b79f5) | 0;
    let t = Math.imul(seed ^ (seed >>> 15), 1 | seed);
    t = (t + Math.imul(t ^ (t >>> 7), 61 | t)) ^ t;
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
  const styles = [FADED, PLAIN, { "fill-opacity": "0.4", stroke: "#333333" }];
  // the last one drops a default key (stroke-width) of SELECTED but keeps another (stroke)
  const selectedStyles = [SELECTED, { "fill-opacity": "1" }, { "fill-opacity": "1", stroke: "#111111" }];
  const { points, ctx } = scene(40);
  for (let step = 0; step < 200; step += 1) {
    const shown = random() < 0.8;
    const selected = shown ? points.map((_, i) => i).filter(() => random() < random()) : null;
    const sel = selectedStyles[Math.floor(random() * selectedStyles.length)];
    const unsel = styles[Math.floor(random() * styles.length)];
    paintSelection(points, selected, sel, unsel, ctx);
    assertPicture(points, selected, sel, unsel);
  }
});

test("DEFAULT_KEYS are what a bqplot scatter's default style writes", () => {
  // source: bqplot 0.13.1's Scatter.set_default_style, read in its bundled front end
  // (share/jupyter/nbextensions/bqplot/index.js): fill, stroke, opacity, stroke-width
  assert.deepEqual([...DEFAULT_KEYS].sort(), ["fill", "opacity", "stroke", "stroke-width"]);
});

/** A stand-in for a bqplot scatter view: Backbone-style listeners, d3el, its restyles. */
function fakeScatterView(n) {
  const { document, points } = scene(n);
  const listeners = [];
  const model = { views: {} };
  const view = {
    model,
    el: document.createElementNS(SVG, "g"),
    selected_indices: null,
    selected_style: SELECTED,
    unselected_style: FADED,
    hovered_style: {},
    unhovered_style: {},
    fullRestyles: 0,
    d3el: { selectAll: (sel) => ({ nodes: () => (sel === ".element" ? points : []) }) },
    listenTo(obj, event, fn) { listeners.push({ obj, event, fn }); },
    stopListening(obj, event) {
      for (let k = listeners.length - 1; k >= 0; k -= 1) {
        if (listeners[k].obj === obj && listeners[k].event === event) listeners.splice(k, 1);
      }
    },
    update_selected(_, value) { this.selected_indices = value; this.apply_styles(); },
    apply_styles() {
      // bqplot's own: defaults on every point, then the state styles (never removes a key)
      this.fullRestyles += 1;
      this.set_default_style(points.map((_, i) => i));
      if (this.selected_indices) {
        points.forEach((p, i) => {
          const style = [...this.selected_indices].includes(i) ? this.selected_style : this.unselected_style;
          for (const [k, v] of Object.entries(style)) p.style.setProperty(k, v);
        });
      }
    },
    set_default_style(positions) {
      for (const i of positions) for (const [k, v] of Object.entries(defaultsOf(i))) points[i].style.setProperty(k, v);
    },
  };
  view.listenTo(model, "change:selected", view.update_selected);
  const fire = (event, value) => {
    for (const l of listeners.filter((x) => x.obj === model && x.event === event)) l.fn.call(view, model, value);
  };
  return { view, points, listeners, fire };
}

test("speedUpScatter: a selection change paints the selection only, the picture is bqplot's", () => {
  const { view, points, listeners, fire } = fakeScatterView(30);
  assert.equal(speedUpScatter(view), true);
  assert.equal(view.el.getAttribute("data-cw-restyle"), "fast");
  assert.equal(listeners.filter((l) => l.event === "change:selected").length, 1);
  const before = view.fullRestyles;
  fire("change:selected", new Uint32Array([2, 7]));
  assert.equal(view.fullRestyles, before, "no full restyle on a selection change");
  assertPicture(points, [2, 7], SELECTED, FADED);
  fire("change:unselected_style", PLAIN);
  assertPicture(points, [2, 7], SELECTED, PLAIN);
  fire("change:selected", null);
  assertPicture(points, null, SELECTED, PLAIN);
  // bqplot's full restyle (new points, colours) still runs, and stale keys are checked away
  view.selected_indices = new Uint32Array([1]);
  view.apply_styles();
  view.selected_indices = null;
  points[5].style.setProperty("fill-opacity", "0.22");
  view.apply_styles();
  assertPicture(points, null, SELECTED, PLAIN);
  assert.equal(speedUpScatter(view), true, "a second take-over is a no-op");
  assert.equal(listeners.filter((l) => l.event === "change:selected").length, 1);
});

test("speedUpScatter leaves a view alone when it lacks what it relies on", () => {
  const { view, listeners } = fakeScatterView(3);
  delete view.set_default_style;
  const count = listeners.length;
  assert.equal(speedUpScatter(view), false);
  assert.equal(listeners.length, count);
  assert.equal(view.el.getAttribute("data-cw-restyle"), null);
});

test("with a hover style set, bqplot's full restyle keeps drawing the selection", () => {
  const { view, points, fire } = fakeScatterView(4);
  view.hovered_style = { opacity: "0.5" };
  speedUpScatter(view);
  const before = view.fullRestyles;
  fire("change:selected", new Uint32Array([0]));
  assert.equal(view.fullRestyles, before + 1);
  assertPicture(points, [0], SELECTED, FADED);
});

test("forEachView reaches the views a model has and those made later", async () => {
  const model = { views: { a: Promise.resolve({ name: "view a" }) } };
  const seen = [];
  forEachView(model, (v) => seen.push(v.name));
  model.views.b = Promise.resolve({ name: "view b" });
  await new Promise((r) => setTimeout(r, 0));
  assert.deepEqual(seen.sort(), ["view a", "view b"]);
  delete model.views.b;
  assert.deepEqual(Object.keys(model.views), ["a"]);
  const again = [];
  const onView = (v) => again.push(v.name);
  forEachView(model, onView); // a second follower (a helper made again) sees every view too
  forEachView(model, onView); // the same follower twice: once
  model.views.c = Promise.resolve({ name: "view c" });
  await new Promise((r) => setTimeout(r, 0));
  assert.deepEqual(again.sort(), ["view a", "view c"]);
  assert.deepEqual(seen.sort(), ["view a", "view b", "view c"]);
});

/** A stand-in for a bqplot brush view: the model's `brushing` and the saves of touch(). */
function fakeBrushView() {
  const { document } = page();
  const values = { brushing: false };
  const model = { views: {}, get: (name) => values[name], set: (name, v) => { values[name] = v; } };
  const view = { model, el: document.createElementNS(SVG, "g"), saves: [] };
  view.touch = function touch() { this.saves.push({ ...values }); };
  // bqplot 0.13's BrushSelector: start, moves, end (brushing false before its last touch)
  view.drag = (moves) => {
    model.set("brushing", true);
    view.touch();
    for (const m of moves) { model.set("selected_x", m); view.touch(); }
    model.set("brushing", false);
    view.touch();
  };
  return view;
}

test("a brush taken over sends one message per drag, with its end", () => {
  const view = fakeBrushView();
  view.drag([[0, 1], [0, 2]]);
  assert.equal(view.saves.length, 4, "bqplot's own: start, each move, end");
  view.saves = [];
  assert.equal(holdBrushUntilRelease(view), true);
  assert.equal(view.el.getAttribute("data-cw-brush"), "at-release");
  view.drag([[0, 1], [0, 2], [0, 3]]);
  assert.deepEqual(view.saves, [{ brushing: false, selected_x: [0, 3] }]);
  view.touch(); // outside a drag every touch goes through
  assert.equal(view.saves.length, 2);
  assert.equal(holdBrushUntilRelease(view), true, "a second take-over is a no-op");
  view.drag([[1, 2]]);
  assert.equal(view.saves.length, 3);
  assert.equal(holdBrushUntilRelease({ model: null }), false);
});

test("initialize takes over the views of the marks and brushes the kernel names", async () => {
  const { view, fire, points } = fakeScatterView(5);
  const brush = fakeBrushView();
  const models = { abc: view.model, br: brush.model };
  view.model.views.v1 = Promise.resolve(view);
  brush.model.views.v1 = Promise.resolve(brush);
  const handlers = [];
  const refs = { marks: ["IPY_MODEL_abc", "IPY_MODEL_missing"], brushes: ["IPY_MODEL_br"] };
  const widget = {
    get: (name) => refs[name],
    on: (event, fn) => handlers.push([event, fn]),
    off: () => {},
    widget_manager: {
      get_model: (id) => (id in models ? Promise.resolve(models[id]) : Promise.reject(new Error(id))),
    },
  };
  const cleanup = initialize({ model: widget });
  assert.equal(typeof cleanup, "function");
  await new Promise((r) => setTimeout(r, 0));
  assert.equal(view.el.getAttribute("data-cw-restyle"), "fast");
  assert.equal(brush.el.getAttribute("data-cw-brush"), "at-release");
  fire("change:selected", new Uint32Array([4]));
  assertPicture(points, [4], SELECTED, FADED);
  // the kernel's one message for every mark: painted at once, before the marks' own
  const custom = handlers.filter(([event]) => event === "msg:custom").map(([, fn]) => fn);
  assert.equal(custom.length, 1);
  const positions = new DataView(new ArrayBuffer(9), 1, 8); // unaligned, as buffers may be
  positions.setUint32(0, 1, true);
  positions.setUint32(4, 3, true);
  const before = view.fullRestyles;
  custom[0]({
    kind: "selections",
    marks: [
      { mark: "IPY_MODEL_abc", selected: 0, unselected_style: FADED },
      { mark: "IPY_MODEL_missing", selected: null, unselected_style: {} },
    ],
  }, [positions]);
  assertPicture(points, [1, 3], SELECTED, FADED);
  assert.deepEqual([...view.selected_indices], [1, 3]);
  assert.equal(view.fullRestyles, before);
  custom[0]({
    kind: "selections",
    marks: [{ mark: "IPY_MODEL_abc", selected: null, unselected_style: PLAIN }],
  }, []);
  assertPicture(points, null, SELECTED, PLAIN);
  custom[0]({ kind: "something else" }, []); // other messages are not this hook's
  assertPicture(points, null, SELECTED, PLAIN);
});

test("uint32Of reads little-endian values at any offset", () => {
  const bytes = new Uint8Array([9, 1, 0, 0, 0, 0, 1, 0, 0]);
  assert.deepEqual([...uint32Of(new DataView(bytes.buffer, 1, 8))], [1, 256]);
  assert.deepEqual([...uint32Of(bytes.subarray(1))], [1, 256]);
});
