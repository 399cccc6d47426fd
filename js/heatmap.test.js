// The variation heat map's geometry (heatmap_layout.js) and its render({model, el}) on
// jsdom (testdom.js): names as text, hover readout, click and zoom as trait changes.
import assert from "node:assert/strict";
import { test } from "node:test";

import { click, fakeModel, page } from "./testdom.js";
import { heatValue, render } from "./heatmap.js";
import { MAX_CELL, MIN_CELL, cellAt, formatValue, labelFont, nameRoom, readoutText, zoomStep } from "./heatmap_layout.js";

const HTML_PART = "<img src=x onerror=alert(1)>";
const NAMES = ["SiO2", "Zr", HTML_PART];

/** A float32 little-endian matrix as the kernel sends it (numpy "<f4", row-major). */
function matrixBytes(rows) {
  const flat = rows.flat();
  const view = new DataView(new ArrayBuffer(4 * flat.length));
  flat.forEach((v, k) => view.setFloat32(4 * k, v, true));
  return view;
}

test("cellAt maps a point of the canvas to (row, column), null outside", () => {
  assert.deepEqual(cellAt(0, 0, 10, 3), [0, 0]);
  assert.deepEqual(cellAt(29.9, 10, 10, 3), [1, 2]);
  assert.equal(cellAt(30, 5, 10, 3), null);
  assert.equal(cellAt(-1, 5, 10, 3), null);
  assert.equal(cellAt(5, 5, 0, 3), null);
});

test("zoom steps stay within the limits and move monotonically", () => {
  let cell = MIN_CELL;
  const seen = [cell];
  while (cell < MAX_CELL) {
    const next = zoomStep(cell, 1);
    assert.ok(next > cell);
    cell = next;
    seen.push(cell);
  }
  assert.equal(zoomStep(MAX_CELL, 1), MAX_CELL);
  assert.equal(zoomStep(MIN_CELL, -1), MIN_CELL);
  for (const c of seen.slice(1)) assert.ok(zoomStep(c, -1) < c);
});

test("names are hidden below a readable size and their room is capped", () => {
  assert.equal(labelFont(6), 0);
  assert.ok(labelFont(12) >= 10);
  assert.ok(nameRoom(["a very long part name indeed, longer than the room"], 14) <= 150);
  assert.ok(nameRoom(["Zr"], 14) < nameRoom(["Cr2O3 (as total Cr)"], 14));
});

test("the readout names the log-ratio and its value", () => {
  assert.equal(formatValue(0.123456), "0.123");
  assert.equal(formatValue(Number.NaN), "n/a");
  assert.match(readoutText(NAMES, 0, 1, 0.5), /^var ln\(SiO2 \/ Zr\) = 0\.500/);
  assert.match(readoutText(NAMES, 1, 1, 0), /diagonal/);
});

function setup() {
  const { window, document, el } = page();
  // jsdom draws nothing on a canvas (no 2-D context): the view must work without one
  window.HTMLCanvasElement.prototype.getContext = () => null;
  const values = matrixBytes([
    [0, 0.25, 1.5],
    [0.25, 0, 2],
    [1.5, 2, 0],
  ]);
  const model = fakeModel({ names: NAMES, values, colours: new DataView(new ArrayBuffer(27)), cell_px: 14, picked: [] });
  // the fake model clones with JSON: keep the binary values as the kernel sent them
  const get = model.get;
  model.get = (name) => (name === "values" ? values : get(name));
  const cleanup = render({ model, el });
  const one = (role) => el.querySelector(`[data-role="${role}"]`);
  const mouse = (node, type, x, y) => {
    const event = new window.MouseEvent(type, { bubbles: true, cancelable: true });
    Object.defineProperty(event, "offsetX", { value: x });
    Object.defineProperty(event, "offsetY", { value: y });
    node.dispatchEvent(event);
  };
  return { window, document, el, model, cleanup, one, values, mouse };
}

test("the float32 matrix is read back cell by cell", () => {
  const { values } = setup();
  assert.equal(heatValue(values, 3, 1, 2), 2);
  assert.ok(Math.abs(heatValue(values, 3, 0, 1) - 0.25) < 1e-7);
  assert.ok(Number.isNaN(heatValue(values, 3, 5, 5)));
});

test("part names are text in the row and column strips, markup included", () => {
  const { el, one } = setup();
  const rows = [...one("row-names").children].map((n) => n.textContent);
  const cols = [...one("column-names").children].map((n) => n.textContent);
  assert.deepEqual(rows, NAMES);
  assert.deepEqual(cols, NAMES);
  assert.equal(el.querySelectorAll("img").length, 0, "no element made from a name");
});

test("hovering a cell shows its value; a click sends the pair", () => {
  const { model, one, mouse } = setup();
  const canvas = one("canvas");
  mouse(canvas, "mousemove", 2 * 14 + 3, 1 * 14 + 3); // row 1, column 2
  assert.equal(one("readout").textContent, readoutText(NAMES, 1, 2, 2));
  assert.ok(one("row-names").children[1].classList.contains("cw-heatmap-hot"));
  mouse(canvas, "click", 2 * 14 + 3, 1 * 14 + 3);
  assert.deepEqual(model.sets.at(-1), { name: "picked", value: [1, 2] });
  assert.equal(model.saves, 1);
  mouse(canvas, "click", 3, 3); // a part with itself is no pair: nothing sent
  assert.equal(model.saves, 1);
});

test("zoom buttons change the cell size; small cells hide the names", () => {
  const { model, one } = setup();
  click(one("zoom-in"));
  assert.deepEqual(model.sets.at(-1), { name: "cell_px", value: zoomStep(14, 1) });
  model.kernel({ cell_px: 6 });
  assert.equal(one("row-names").children.length, 0);
  assert.match(one("zoom").textContent, /zoom in/);
  model.kernel({ cell_px: 12 });
  assert.equal(one("row-names").children.length, NAMES.length);
});

test("cleanup removes the listeners and the view", () => {
  const { el, model, cleanup } = setup();
  assert.ok(model.handlerCount() > 0);
  cleanup();
  assert.equal(model.handlerCount(), 0);
  assert.equal(el.children.length, 0);
});
