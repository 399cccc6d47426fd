// DOM helpers. Text from the data goes in through textContent only; attributes are set
// with setAttribute (never event-handler or URL attributes from data).

/** The SVG namespace. */
export const SVG_NS = "http://www.w3.org/2000/svg";

/** Attributes the helpers refuse: handlers and URLs never come from here. */
const FORBIDDEN = /^(on|href$|src$|xlink:href$|srcdoc$|formaction$|style$)/i;

/**
 * @typedef {Record<string, string | number | boolean | null | undefined>} Attrs
 */

/**
 * @param {Element} node
 * @param {Attrs} attrs
 */
function setAttrs(node, attrs) {
  for (const [key, value] of Object.entries(attrs)) {
    if (FORBIDDEN.test(key)) throw new Error(`attribute ${key} is not set by these helpers`);
    if (value === null || value === undefined || value === false) continue;
    node.setAttribute(key, value === true ? "" : String(value));
  }
}

/**
 * An HTML element with attributes and optional text (as textContent).
 * @param {Document} doc
 * @param {string} tag
 * @param {Attrs} [attrs]
 * @param {string} [text]
 * @returns {HTMLElement}
 */
export function html(doc, tag, attrs = {}, text) {
  const node = doc.createElement(tag);
  setAttrs(node, attrs);
  if (text !== undefined) node.textContent = text;
  return node;
}

/**
 * An SVG element with attributes and optional text (as textContent).
 * @param {Document} doc
 * @param {string} tag
 * @param {Attrs} [attrs]
 * @param {string} [text]
 * @returns {SVGElement}
 */
export function svg(doc, tag, attrs = {}, text) {
  const node = /** @type {SVGElement} */ (doc.createElementNS(SVG_NS, tag));
  setAttrs(node, attrs);
  if (text !== undefined) node.textContent = text;
  return node;
}

/**
 * Remove every child of a node.
 * @param {Element} node
 */
export function clear(node) {
  while (node.firstChild) node.removeChild(node.firstChild);
}

/**
 * The closest ancestor (or self) of `target` carrying data-role, inside `root`.
 * @param {EventTarget | null} target
 * @param {Element} root
 * @returns {Element | null}
 */
export function roleTarget(target, root) {
  let node = /** @type {Node | null} */ (target);
  while (node && node !== root) {
    if (node.nodeType === 1 && /** @type {Element} */ (node).hasAttribute("data-role")) {
      return /** @type {Element} */ (node);
    }
    node = node.parentNode;
  }
  return null;
}

/**
 * The element of `root` whose attribute `name` equals `value` (compared as text, so no
 * selector escaping is needed).
 * @param {Element} root
 * @param {string} name
 * @param {string} value
 * @returns {HTMLElement | null}
 */
export function findByAttr(root, name, value) {
  for (const node of root.querySelectorAll(`[${name}]`)) {
    if (node.getAttribute(name) === value) return /** @type {HTMLElement} */ (node);
  }
  return null;
}

/**
 * The closest ancestor (or self) of `target` with data-role = `role`, inside `root`.
 * @param {EventTarget | null} target
 * @param {Element} root
 * @param {string} role
 * @returns {Element | null}
 */
export function closestRole(target, root, role) {
  let node = /** @type {Node | null} */ (target);
  while (node && node !== root) {
    if (node.nodeType === 1 && /** @type {Element} */ (node).getAttribute("data-role") === role) {
      return /** @type {Element} */ (node);
    }
    node = node.parentNode;
  }
  return null;
}
