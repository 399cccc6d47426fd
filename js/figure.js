// The dendrogram as a figure file: a standalone SVG document (styles written out as
// presentation attributes, nothing interactive, table text only as text nodes) and its
// PNG at 1x, 2x or 4x. The kernel asks for a figure with a custom message
// {type: "figure-request", id, format, scale}; the view answers
// {type: "figure", id, format, scale, width, height} with the file's bytes as the one
// buffer, or {type: "figure", id, error} when it cannot make it.

import { SVG_NS } from "./dom.js";

/** Styles copied from the page (computed) onto each element of the figure. */
export const FIGURE_STYLES = Object.freeze([
  "fill",
  "fill-opacity",
  "stroke",
  "stroke-width",
  "stroke-dasharray",
  "stroke-linecap",
  "stroke-opacity",
  "opacity",
  "font-family",
  "font-size",
  "font-weight",
  "font-style",
]);

/** Attributes kept in the figure: geometry only (never text from the table). */
const GEOMETRY_ATTRIBUTES = new Set([
  "x",
  "y",
  "x1",
  "x2",
  "y1",
  "y2",
  "cx",
  "cy",
  "r",
  "width",
  "height",
  "d",
  "transform",
  "text-anchor",
  "viewBox",
]);

/** Elements left out of the figure: tooltips and the transparent click targets. */
const LEFT_OUT = /(^|\s)cw-(hit|leaf-hit)(\s|$)/;

/** Formats a view can make. */
export const FIGURE_FORMATS = Object.freeze(["svg", "png"]);

/**
 * A standalone SVG document of a drawn <svg> element.
 * @param {SVGSVGElement | Element} live the dendrogram as shown (styles are read from it)
 * @param {{background?: string}} [options]
 * @returns {{text: string, width: number, height: number}}
 */
export function figureSvg(live, options = {}) {
  const doc = /** @type {Document} */ (live.ownerDocument);
  const win = /** @type {Window & typeof globalThis} */ (doc.defaultView);
  const width = Number(live.getAttribute("width")) || 0;
  const height = Number(live.getAttribute("height")) || 0;
  const out = /** @type {Element} */ (copyNode(doc, win, live));
  out.setAttribute("width", String(width));
  out.setAttribute("height", String(height));
  out.setAttribute("viewBox", `0 0 ${width} ${height}`);
  const paper = doc.createElementNS(SVG_NS, "rect");
  paper.setAttribute("width", String(width));
  paper.setAttribute("height", String(height));
  paper.setAttribute("fill", options.background || "#ffffff");
  out.insertBefore(paper, out.firstChild);
  const text = new win.XMLSerializer().serializeToString(out);
  return { text: `<?xml version="1.0" encoding="UTF-8"?>\n${text}\n`, width, height };
}

/**
 * Copy of an element for the figure (null when it is left out): geometry attributes,
 * computed styles as attributes, child elements and text nodes.
 * @param {Document} doc
 * @param {Window} win
 * @param {Element} live
 * @returns {Element | null}
 */
function copyNode(doc, win, live) {
  const tag = live.localName;
  if (tag === "title" || LEFT_OUT.test(live.getAttribute("class") || "")) return null;
  const copy = doc.createElementNS(SVG_NS, tag);
  for (const attr of Array.from(live.attributes)) {
    if (GEOMETRY_ATTRIBUTES.has(attr.name)) copy.setAttribute(attr.name, attr.value);
  }
  const style = win.getComputedStyle(live);
  for (const name of FIGURE_STYLES) {
    const value = style.getPropertyValue(name).trim();
    if (value && !(name === "font-family" && tag !== "text" && tag !== "svg")) {
      copy.setAttribute(name, value);
    }
  }
  for (const child of Array.from(live.childNodes)) {
    if (child.nodeType === 3) {
      copy.appendChild(doc.createTextNode(child.textContent || ""));
    } else if (child.nodeType === 1) {
      const inner = copyNode(doc, win, /** @type {Element} */ (child));
      if (inner) copy.appendChild(inner);
    }
  }
  return copy;
}

/**
 * The PNG of an SVG document, `scale` times its size (browser only: needs a canvas).
 * @param {Window & typeof globalThis} win
 * @param {{text: string, width: number, height: number}} figure
 * @param {number} scale
 * @returns {Promise<{bytes: ArrayBuffer, width: number, height: number}>}
 */
export function figurePng(win, figure, scale) {
  const width = Math.round(figure.width * scale);
  const height = Math.round(figure.height * scale);
  return new Promise((resolve, reject) => {
    const canvas = win.document.createElement("canvas");
    canvas.width = width;
    canvas.height = height;
    let context = null;
    try {
      context = canvas.getContext("2d");
    } catch (_err) {
      context = null;
    }
    if (!context) {
      reject(new Error("this browser cannot draw the PNG (no canvas)"));
      return;
    }
    const ctx = context;
    const url = win.URL.createObjectURL(new win.Blob([figure.text], { type: "image/svg+xml" }));
    const image = new win.Image();
    image.onload = () => {
      win.URL.revokeObjectURL(url);
      ctx.drawImage(image, 0, 0, width, height);
      canvas.toBlob((blob) => {
        if (!blob) reject(new Error("the browser made no PNG"));
        else blob.arrayBuffer().then((bytes) => resolve({ bytes, width, height }), reject);
      }, "image/png");
    };
    image.onerror = () => {
      win.URL.revokeObjectURL(url);
      reject(new Error("the browser could not draw the SVG"));
    };
    image.src = url;
  });
}

/**
 * Answer one figure request of the kernel.
 * @param {{send: (content: any, callbacks?: any, buffers?: ArrayBuffer[]) => void}} model
 * @param {Element | null} live the drawn dendrogram
 * @param {{id?: unknown, format?: unknown, scale?: unknown}} request
 * @returns {Promise<void>}
 */
export async function answerFigureRequest(model, live, request) {
  const id = String(request.id ?? "");
  const format = String(request.format ?? "");
  const scale = Number(request.scale);
  const fail = (/** @type {string} */ error) => model.send({ type: "figure", id, error });
  if (!FIGURE_FORMATS.includes(format)) return fail(`unknown figure format ${format}`);
  if (!live) return fail("the dendrogram is not drawn");
  try {
    const figure = figureSvg(live);
    const win = /** @type {Window & typeof globalThis} */ (live.ownerDocument.defaultView);
    if (format === "svg") {
      const bytes = new TextEncoder().encode(figure.text).buffer;
      model.send({ type: "figure", id, format, scale: 1, width: figure.width, height: figure.height }, undefined, [bytes]);
      return;
    }
    if (!(scale > 0 && scale <= 8)) return fail(`scale ${request.scale} is not between 1 and 8`);
    const png = await figurePng(win, figure, scale);
    model.send({ type: "figure", id, format, scale, width: png.width, height: png.height }, undefined, [png.bytes]);
  } catch (err) {
    fail(String(/** @type {Error} */ (err).message || err));
  }
}
