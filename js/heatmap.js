// The variation heat map front end: render({model, el}) for anywidget.
//
// One canvas draws the D x D matrix from two arrays the kernel sends (the values as
// float32 and their colours as RGB bytes), so 200 parts are one picture, not 40,000
// elements. The part names are text elements (textContent) in sticky strips along the top
// and the left, so they stay in view while the matrix scrolls; the zoom buttons change the
// cell size. Hovering a cell shows its value; clicking it sends the pair to the kernel.
//
// Synced traits read here: names, values, colours, cell_px. Written here: picked, cell_px.

import { clear, html } from "./dom.js";
import { cellAt, labelFont, nameRoom, readoutText, zoomStep } from "./heatmap_layout.js";

/** What the readout says when no cell is hovered. */
const READOUT_IDLE = "Hover a cell for its value; click it to use that pair of parts.";

/**
 * The bytes of a binary trait as a DataView (anywidget hands out a DataView).
 * @param {any} value
 * @returns {DataView}
 */
function viewOf(value) {
  if (value instanceof DataView) return value;
  if (value instanceof ArrayBuffer) return new DataView(value);
  if (value && value.buffer instanceof ArrayBuffer) {
    return new DataView(value.buffer, value.byteOffset || 0, value.byteLength);
  }
  return new DataView(new ArrayBuffer(0));
}

/**
 * Value of cell (row, col) from the float32 (little-endian) matrix the kernel sent.
 * @param {DataView} values
 * @param {number} size
 * @param {number} row
 * @param {number} col
 * @returns {number}
 */
export function heatValue(values, size, row, col) {
  const at = 4 * (row * size + col);
  if (at + 4 > values.byteLength) return Number.NaN;
  return values.getFloat32(at, true);
}

/**
 * @param {{model: any, el: HTMLElement}} ctx
 * @returns {() => void} cleanup
 */
export function render({ model, el }) {
  const doc = el.ownerDocument;
  const root = html(doc, "div", { class: "cw-heatmap", "data-role": "heatmap" });
  const bar = html(doc, "div", { class: "cw-heatmap-bar" });
  const zoomOut = html(
    doc,
    "button",
    { class: "cw-heatmap-button", type: "button", "data-role": "zoom-out", title: "smaller cells" },
    "\u2212",
  );
  const zoomIn = html(
    doc,
    "button",
    { class: "cw-heatmap-button", type: "button", "data-role": "zoom-in", title: "larger cells" },
    "+",
  );
  const zoomText = html(doc, "span", { class: "cw-heatmap-note", "data-role": "zoom" });
  const readout = html(doc, "div", { class: "cw-heatmap-readout", "data-role": "readout" }, READOUT_IDLE);
  const scroller = html(doc, "div", { class: "cw-heatmap-scroll", "data-role": "scroll" });
  const grid = html(doc, "div", { class: "cw-heatmap-grid" });
  const corner = html(doc, "div", { class: "cw-heatmap-corner" });
  const top = html(doc, "div", { class: "cw-heatmap-top", "data-role": "column-names" });
  const left = html(doc, "div", { class: "cw-heatmap-left", "data-role": "row-names" });
  const canvas = /** @type {HTMLCanvasElement} */ (
    html(doc, "canvas", { class: "cw-heatmap-canvas", "data-role": "canvas" })
  );
  bar.appendChild(zoomOut);
  bar.appendChild(zoomIn);
  bar.appendChild(zoomText);
  grid.appendChild(corner);
  grid.appendChild(top);
  grid.appendChild(left);
  grid.appendChild(canvas);
  scroller.appendChild(grid);
  root.appendChild(bar);
  root.appendChild(scroller);
  root.appendChild(readout);
  el.appendChild(root);

  /** The matrix drawn at one pixel per cell (scaled up when painted). */
  let picture = /** @type {HTMLCanvasElement | null} */ (null);
  /** @type {[number, number] | null} */
  let hovered = null;

  const state = () => {
    const names = /** @type {string[]} */ (model.get("names") || []);
    return { names, size: names.length, cell: Number(model.get("cell_px")) || 12 };
  };

  function paintPicture(size) {
    const rgb = viewOf(model.get("colours"));
    picture = null;
    if (!size || rgb.byteLength < 3 * size * size || !doc.createElement) return;
    const off = /** @type {HTMLCanvasElement} */ (doc.createElement("canvas"));
    const ctx = off.getContext ? off.getContext("2d") : null;
    if (!ctx) return;
    off.width = size;
    off.height = size;
    const image = ctx.createImageData(size, size);
    for (let k = 0; k < size * size; k += 1) {
      image.data[4 * k] = rgb.getUint8(3 * k);
      image.data[4 * k + 1] = rgb.getUint8(3 * k + 1);
      image.data[4 * k + 2] = rgb.getUint8(3 * k + 2);
      image.data[4 * k + 3] = 255;
    }
    ctx.putImageData(image, 0, 0);
    picture = off;
  }

  function paintCanvas() {
    const { size, cell } = state();
    const ctx = canvas.getContext ? canvas.getContext("2d") : null;
    if (!ctx) return;
    const side = size * cell;
    const ratio = (doc.defaultView && doc.defaultView.devicePixelRatio) || 1;
    if (canvas.width !== Math.round(side * ratio)) canvas.width = Math.round(side * ratio);
    if (canvas.height !== Math.round(side * ratio)) canvas.height = Math.round(side * ratio);
    canvas.style.width = `${side}px`;
    canvas.style.height = `${side}px`;
    ctx.setTransform(ratio, 0, 0, ratio, 0, 0);
    ctx.clearRect(0, 0, side, side);
    if (picture) {
      ctx.imageSmoothingEnabled = false;
      ctx.drawImage(picture, 0, 0, side, side);
    }
    if (cell >= 8) {
      // thin gaps between cells, so that neighbours of the same colour stay apart
      ctx.strokeStyle = "rgba(255, 255, 255, 0.7)";
      ctx.lineWidth = 1;
      ctx.beginPath();
      for (let k = 1; k < size; k += 1) {
        ctx.moveTo(k * cell + 0.5, 0);
        ctx.lineTo(k * cell + 0.5, side);
        ctx.moveTo(0, k * cell + 0.5);
        ctx.lineTo(side, k * cell + 0.5);
      }
      ctx.stroke();
    }
    if (hovered) {
      const [row, col] = hovered;
      ctx.strokeStyle = "#1f5d8a";
      ctx.lineWidth = 2;
      ctx.strokeRect(col * cell + 1, row * cell + 1, cell - 2, cell - 2);
    }
  }

  function placeNames() {
    const { names, size, cell } = state();
    const font = labelFont(cell);
    const room = nameRoom(names, cell);
    grid.style.gridTemplateColumns = `${room}px ${size * cell}px`;
    grid.style.gridTemplateRows = `${room}px ${size * cell}px`;
    clear(top);
    clear(left);
    zoomText.textContent = font
      ? `${size} parts, cells of ${cell} px`
      : `${size} parts, cells of ${cell} px: zoom in (+) to read the names`;
    zoomIn.toggleAttribute("disabled", cell >= 32);
    zoomOut.toggleAttribute("disabled", cell <= 4);
    if (!font) return;
    names.forEach((name, k) => {
      const text = String(name);
      const colName = html(doc, "div", { class: "cw-heatmap-name", "data-index": k, title: text }, text);
      colName.style.width = `${cell}px`;
      colName.style.height = `${room}px`;
      colName.style.fontSize = `${font}px`;
      colName.style.lineHeight = `${cell}px`;
      top.appendChild(colName);
      const rowName = html(doc, "div", { class: "cw-heatmap-name", "data-index": k, title: text }, text);
      rowName.style.height = `${cell}px`;
      rowName.style.width = `${room}px`;
      rowName.style.fontSize = `${font}px`;
      rowName.style.lineHeight = `${cell}px`;
      left.appendChild(rowName);
    });
  }

  function markNames() {
    const pair = hovered || [-1, -1];
    for (const [strip, index] of [
      [left, pair[0]],
      [top, pair[1]],
    ]) {
      strip.childNodes.forEach((/** @type {any} */ node, /** @type {number} */ k) => {
        if (node.classList) {
          if (k === index) node.classList.add("cw-heatmap-hot");
          else node.classList.remove("cw-heatmap-hot");
        }
      });
    }
  }

  function redraw() {
    const { size } = state();
    hovered = null;
    paintPicture(size);
    placeNames();
    paintCanvas();
    readout.textContent = READOUT_IDLE;
  }

  /** @param {any} event */
  function cellOf(event) {
    const { size, cell } = state();
    return cellAt(Number(event.offsetX), Number(event.offsetY), cell, size);
  }

  /** @param {any} event */
  const onMove = (event) => {
    const at = cellOf(event);
    const same = at && hovered && at[0] === hovered[0] && at[1] === hovered[1];
    if (same || (!at && !hovered)) return;
    hovered = at;
    if (at) {
      const { names, size } = state();
      const value = heatValue(viewOf(model.get("values")), size, at[0], at[1]);
      readout.textContent = readoutText(names, at[0], at[1], value);
    } else {
      readout.textContent = READOUT_IDLE;
    }
    markNames();
    paintCanvas();
  };
  const onLeave = () => {
    if (!hovered) return;
    hovered = null;
    readout.textContent = READOUT_IDLE;
    markNames();
    paintCanvas();
  };
  /** @param {any} event */
  const onClick = (event) => {
    const at = cellOf(event);
    if (!at || at[0] === at[1]) return;
    model.set("picked", [at[0], at[1]]);
    model.save_changes();
  };
  /** @param {number} direction */
  const zoom = (direction) => () => {
    const { cell } = state();
    const next = zoomStep(cell, direction);
    if (next === cell) return;
    model.set("cell_px", next);
    model.save_changes();
  };
  const onZoomIn = zoom(1);
  const onZoomOut = zoom(-1);

  canvas.addEventListener("mousemove", onMove);
  canvas.addEventListener("mouseleave", onLeave);
  canvas.addEventListener("click", onClick);
  zoomIn.addEventListener("click", onZoomIn);
  zoomOut.addEventListener("click", onZoomOut);
  const onLayout = () => {
    placeNames();
    paintCanvas();
  };
  const watched = [
    ["change:names", redraw],
    ["change:colours", redraw],
    ["change:values", redraw],
    ["change:cell_px", onLayout],
  ];
  for (const [event, fn] of watched) model.on(event, fn);
  redraw();

  return () => {
    for (const [event, fn] of watched) model.off(event, fn);
    canvas.removeEventListener("mousemove", onMove);
    canvas.removeEventListener("mouseleave", onLeave);
    canvas.removeEventListener("click", onClick);
    zoomIn.removeEventListener("click", onZoomIn);
    zoomOut.removeEventListener("click", onZoomOut);
    root.remove();
  };
}
