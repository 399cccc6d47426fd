// Test support for the builder's node tests (never bundled: widget.js does not import it).
// The DOM is jsdom's (a maintained implementation of the DOM and HTML standards, a dev
// dependency in the repository's package.json, installed with `npm ci`): events bubble,
// focus moves, attributes and textContent behave as in a browser, and a string set as
// markup would be parsed, so a test can tell text from markup. The anywidget model is a
// small stand-in that records what the view sets and sends.

import { JSDOM } from "jsdom";

/**
 * A fresh page: its window, document and a container attached to the body.
 * @returns {{window: any, document: Document, el: HTMLElement}}
 */
export function page() {
  const dom = new JSDOM("<!doctype html><html><head></head><body></body></html>", {
    pretendToBeVisual: true,
  });
  const { window } = dom;
  const el = window.document.createElement("div");
  window.document.body.appendChild(el);
  return { window, document: window.document, el };
}

/**
 * Dispatch a keydown as a browser does (bubbling, cancelable); returns false when a
 * listener called preventDefault.
 * @param {Element} node
 * @param {string} key
 * @param {Record<string, boolean>} [mods] ctrlKey, shiftKey, metaKey, altKey
 * @returns {boolean}
 */
export function keydown(node, key, mods = {}) {
  const win = /** @type {any} */ (node.ownerDocument.defaultView);
  return node.dispatchEvent(new win.KeyboardEvent("keydown", { key, bubbles: true, cancelable: true, ...mods }));
}

/**
 * Click an element as a user does: HTML elements through click() (which, as in a browser,
 * does nothing on a disabled control), SVG elements by a bubbling click event.
 * @param {Element} node
 */
export function click(node) {
  const html = /** @type {any} */ (node);
  if (typeof html.click === "function") {
    html.click();
    return;
  }
  const win = /** @type {any} */ (node.ownerDocument.defaultView);
  node.dispatchEvent(new win.MouseEvent("click", { bubbles: true, cancelable: true }));
}

/**
 * Type into a text field as a user does: set the value, then fire input (and change when
 * `commit`).
 * @param {HTMLInputElement} input
 * @param {string} value
 * @param {boolean} [commit]
 */
export function type(input, value, commit = false) {
  const win = /** @type {any} */ (input.ownerDocument.defaultView);
  input.focus();
  input.value = value;
  input.dispatchEvent(new win.Event("input", { bubbles: true }));
  if (commit) input.dispatchEvent(new win.Event("change", { bubbles: true }));
}

/**
 * A drag event carrying a data store (jsdom has no DragEvent / DataTransfer).
 * @param {Element} node
 * @param {string} type
 * @param {{setData: Function, getData: Function, effectAllowed: string, dropEffect: string}} dataTransfer
 * @returns {Event}
 */
export function drag(node, type, dataTransfer) {
  const win = /** @type {any} */ (node.ownerDocument.defaultView);
  const event = new win.Event(type, { bubbles: true, cancelable: true });
  Object.defineProperty(event, "dataTransfer", { value: dataTransfer });
  node.dispatchEvent(event);
  return event;
}

/**
 * A stand-in for the anywidget model: traits, change events, saved changes, messages.
 * @param {Record<string, any>} state
 */
export function fakeModel(state) {
  /** @type {Map<string, Function[]>} */
  const handlers = new Map();
  const values = { ...state };
  const model = {
    /** @type {{name: string, value: any}[]} values set by the view */
    sets: [],
    saves: 0,
    /** @type {{content: any, buffers: any[]}[]} messages sent by the view */
    messages: [],
    /** @param {string} name */
    get: (name) => values[name],
    /** @param {string} name @param {any} value */
    set(name, value) {
      values[name] = value;
      model.sets.push({ name, value: JSON.parse(JSON.stringify(value)) });
    },
    save_changes() {
      model.saves += 1;
    },
    /** @param {any} content @param {any} [_callbacks] @param {any[]} [buffers] */
    send(content, _callbacks, buffers) {
      model.messages.push({ content, buffers: buffers || [] });
    },
    /** Contents of the messages sent, in order. */
    get sent() {
      return model.messages.map((m) => m.content);
    },
    /** @param {string} event @param {Function} fn */
    on(event, fn) {
      handlers.set(event, [...(handlers.get(event) || []), fn]);
    },
    /** @param {string} event @param {Function} fn */
    off(event, fn) {
      handlers.set(
        event,
        (handlers.get(event) || []).filter((f) => f !== fn),
      );
    },
    /** The kernel changes traits (all values first, then the change events, as Backbone). */
    kernel(/** @type {Record<string, any>} */ changes) {
      Object.assign(values, JSON.parse(JSON.stringify(changes)));
      for (const name of Object.keys(changes)) {
        for (const fn of [...(handlers.get(`change:${name}`) || [])]) fn();
      }
    },
    /** The kernel sends a custom message. */
    custom(/** @type {any} */ content, /** @type {any[]} */ buffers = []) {
      for (const fn of [...(handlers.get("msg:custom") || [])]) fn(content, buffers);
    },
    handlerCount() {
      let n = 0;
      for (const list of handlers.values()) n += list.length;
      return n;
    },
  };
  return model;
}
