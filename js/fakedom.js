// A very small stand-in for the browser DOM, for the node tests of widget.js only (not
// bundled: the widget never imports it). It implements just what the builder uses, has no
// HTML parser at all (so markup in data can only ever be text here), and records every
// element created so tests can check that no element came from data.

/**
 * @param {FakeNode} node
 * @param {string} selector "[attr]" or '[attr="value"]', optionally prefixed by a tag name
 * @returns {boolean}
 */
function matches(node, selector) {
  const m = /^([a-zA-Z]*)\[([^\]=]+)(?:="([^"]*)")?\]$/.exec(selector.trim());
  if (!m) throw new Error(`fakedom: unsupported selector ${selector}`);
  const [, tag, attr, value] = m;
  if (tag && node.tagName !== tag.toUpperCase()) return false;
  if (!node.hasAttribute(attr)) return false;
  return value === undefined || node.getAttribute(attr) === value;
}

export class FakeEvent {
  /**
   * @param {string} type
   * @param {Record<string, any>} [init]
   */
  constructor(type, init = {}) {
    this.type = type;
    this.target = null;
    this.defaultPrevented = false;
    this.propagationStopped = false;
    this.key = init.key;
    this.ctrlKey = Boolean(init.ctrlKey);
    this.metaKey = Boolean(init.metaKey);
    this.shiftKey = Boolean(init.shiftKey);
    this.relatedTarget = init.relatedTarget || null;
    this.dataTransfer = init.dataTransfer || null;
  }

  preventDefault() {
    this.defaultPrevented = true;
  }

  stopPropagation() {
    this.propagationStopped = true;
  }
}

export class FakeNode {
  /**
   * @param {FakeDocument} doc
   * @param {string} tag
   * @param {string | null} ns
   */
  constructor(doc, tag, ns) {
    this.ownerDocument = doc;
    this.nodeType = 1;
    this.tagName = ns ? tag : tag.toUpperCase();
    this.namespaceURI = ns;
    /** @type {FakeNode[]} */
    this.childNodes = [];
    /** @type {FakeNode | null} */
    this.parentNode = null;
    /** @type {Map<string, string>} */
    this.attributes = new Map();
    /** @type {Map<string, Function[]>} */
    this.listeners = new Map();
    this._text = "";
    /** inline style properties set by a view (plain values, never parsed) */
    this.style = {};
    this.value = "";
    this.placeholder = "";
    this.selectionStart = 0;
    this.selectionEnd = 0;
    const node = this;
    this.classList = {
      add: (/** @type {string} */ c) => node._classes(c, true),
      remove: (/** @type {string} */ c) => node._classes(c, false),
      contains: (/** @type {string} */ c) => (node.getAttribute("class") || "").split(/\s+/).includes(c),
    };
  }

  /** @param {string} c @param {boolean} on */
  _classes(c, on) {
    const set = new Set((this.getAttribute("class") || "").split(/\s+/).filter(Boolean));
    if (on) set.add(c);
    else set.delete(c);
    this.setAttribute("class", [...set].join(" "));
  }

  get firstChild() {
    return this.childNodes[0] || null;
  }

  get children() {
    return this.childNodes;
  }

  /** @param {string} name @param {any} value */
  setAttribute(name, value) {
    this.attributes.set(name, String(value));
  }

  /** @param {string} name */
  getAttribute(name) {
    return this.attributes.has(name) ? /** @type {string} */ (this.attributes.get(name)) : null;
  }

  /** @param {string} name */
  hasAttribute(name) {
    return this.attributes.has(name);
  }

  /** @param {string} name */
  removeAttribute(name) {
    this.attributes.delete(name);
  }

  /** @param {string} name @param {boolean} [force] */
  toggleAttribute(name, force) {
    const on = force === undefined ? !this.hasAttribute(name) : force;
    if (on) this.setAttribute(name, "");
    else this.removeAttribute(name);
    return on;
  }

  /** @param {FakeNode} child */
  appendChild(child) {
    if (child.parentNode) child.parentNode.removeChild(child);
    child.parentNode = this;
    this.childNodes.push(child);
    return child;
  }

  /** @param {FakeNode} child */
  removeChild(child) {
    const i = this.childNodes.indexOf(child);
    if (i < 0) throw new Error("fakedom: not a child");
    this.childNodes.splice(i, 1);
    child.parentNode = null;
    return child;
  }

  /** @param {...FakeNode} nodes */
  replaceChildren(...nodes) {
    while (this.childNodes.length) this.removeChild(this.childNodes[0]);
    for (const n of nodes) this.appendChild(n);
  }

  remove() {
    if (this.parentNode) this.parentNode.removeChild(this);
  }

  /** @param {FakeNode | null} other */
  contains(other) {
    for (let n = other; n; n = n.parentNode) if (n === this) return true;
    return false;
  }

  get textContent() {
    return this._text + this.childNodes.map((c) => c.textContent).join("");
  }

  set textContent(value) {
    this.replaceChildren();
    this._text = String(value);
  }

  /** @param {string} selector */
  querySelectorAll(selector) {
    /** @type {FakeNode[]} */
    const out = [];
    const walk = (/** @type {FakeNode} */ n) => {
      for (const c of n.childNodes) {
        if (matches(c, selector)) out.push(c);
        walk(c);
      }
    };
    walk(this);
    return out;
  }

  /** @param {string} selector */
  querySelector(selector) {
    return this.querySelectorAll(selector)[0] || null;
  }

  /** @param {string} type @param {Function} fn */
  addEventListener(type, fn) {
    const list = this.listeners.get(type) || [];
    list.push(fn);
    this.listeners.set(type, list);
  }

  /** @param {string} type @param {Function} fn */
  removeEventListener(type, fn) {
    const list = this.listeners.get(type) || [];
    this.listeners.set(
      type,
      list.filter((f) => f !== fn),
    );
  }

  /** Number of listeners on this node. */
  listenerCount() {
    let n = 0;
    for (const list of this.listeners.values()) n += list.length;
    return n;
  }

  /** Dispatch with bubbling to the ancestors. @param {FakeEvent} event */
  dispatchEvent(event) {
    event.target = this;
    for (let n = /** @type {FakeNode | null} */ (this); n && !event.propagationStopped; n = n.parentNode) {
      for (const fn of [...(n.listeners.get(event.type) || [])]) fn(event);
    }
    return !event.defaultPrevented;
  }

  focus() {
    this.ownerDocument.activeElement = this;
  }

  /** @param {number} a @param {number} b */
  setSelectionRange(a, b) {
    this.selectionStart = a;
    this.selectionEnd = b;
  }

  /** A click, as a browser does it: nothing for a disabled button. */
  click() {
    if (this.hasAttribute("disabled")) return;
    this.dispatchEvent(new FakeEvent("click"));
  }
}

export class FakeDocument {
  constructor() {
    /** @type {FakeNode | null} */
    this.activeElement = null;
    /** @type {string[]} tag names of every element created */
    this.created = [];
  }

  /** @param {string} tag */
  createElement(tag) {
    this.created.push(tag.toLowerCase());
    return new FakeNode(this, tag, null);
  }

  /** @param {string} ns @param {string} tag */
  createElementNS(ns, tag) {
    this.created.push(tag);
    return new FakeNode(this, tag, ns);
  }
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
    /** @type {any[]} */
    sent: [],
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
    /** @param {any} content */
    send(content) {
      model.sent.push(content);
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
    handlerCount() {
      let n = 0;
      for (const list of handlers.values()) n += list.length;
      return n;
    },
  };
  return model;
}
