// The "automatic partition" control: one button that opens a short menu of the automatic
// partitions the kernel can make, each entry with its method's name and a one-line
// explanation. Keyboard: Enter, Space or ArrowDown on the button opens the menu on its
// first entry (ArrowUp: on the last); ArrowUp / ArrowDown / Home / End move between the
// entries; Enter or Space picks one; Escape closes the menu and goes back to the button.
// The DOM is built here; widget.js wires the events. Text only through textContent.

import { html } from "./dom.js";

/** The automatic partitions, in menu order (the kernel knows them by `method`). */
export const SUGGESTIONS = Object.freeze([
  Object.freeze({
    method: "principal",
    name: "principal balances",
    note: "each group of parts is split where its balance has the largest variance",
  }),
  Object.freeze({
    method: "ward",
    name: "Ward clustering of parts",
    note: "parts whose ratios stay nearly constant are grouped first (Ward's method on the clr columns)",
  }),
]);

/** Text of the button that opens the menu. */
export const MENU_LABEL = "automatic partition";

/** Said under the entries: what picking one does. */
export const MENU_FOOT = "replaces the partition shown; undo (Ctrl+Z) brings it back";

let menuCount = 0;

/**
 * @typedef {Object} SuggestMenu
 * @property {HTMLElement} box      wraps the button and the popup
 * @property {HTMLElement} trigger  the button that opens the menu
 * @property {HTMLElement} popup    the menu and its foot note (hidden while closed)
 * @property {HTMLElement[]} items  one menu entry per suggestion
 */

/**
 * The menu button with its (closed) menu.
 * @param {Document} doc
 * @returns {SuggestMenu}
 */
export function drawSuggestMenu(doc) {
  menuCount += 1;
  // unique on the page even when several copies of this module are loaded
  const menuId = `cw-suggest-menu-${menuCount}-${Math.random().toString(36).slice(2, 8)}`;
  const footId = `${menuId}-foot`;
  const box = html(doc, "div", { class: "cw-menu-wrap", "data-role": "suggest-box" });
  const trigger = html(doc, "button", {
    type: "button",
    class: "cw-button cw-menu-button",
    "data-role": "suggest-open",
    "data-focus-key": "suggest-open",
    "aria-haspopup": "menu",
    "aria-expanded": "false",
    "aria-controls": menuId,
    title: `replace the partition by an automatic one: ${SUGGESTIONS.map((s) => s.name).join(" or ")}`,
  });
  trigger.appendChild(html(doc, "span", {}, MENU_LABEL));
  trigger.appendChild(html(doc, "span", { class: "cw-menu-caret", "aria-hidden": "true" }, " \u25be"));
  const popup = html(doc, "div", { class: "cw-menu-popup", "data-role": "suggest-popup", hidden: true });
  const list = html(doc, "div", {
    class: "cw-menu",
    id: menuId,
    role: "menu",
    "aria-label": "automatic partitions",
    "aria-describedby": footId,
    "data-role": "suggest-menu",
  });
  const items = SUGGESTIONS.map((s) => {
    const item = html(doc, "button", {
      type: "button",
      class: "cw-menu-item",
      role: "menuitem",
      tabindex: -1,
      "data-role": "suggest",
      "data-method": s.method,
      "data-focus-key": `suggest:${s.method}`,
    });
    item.appendChild(html(doc, "span", { class: "cw-menu-name" }, s.name));
    item.appendChild(html(doc, "span", { class: "cw-menu-note" }, s.note));
    list.appendChild(item);
    return item;
  });
  popup.appendChild(list);
  popup.appendChild(html(doc, "div", { class: "cw-menu-foot", id: footId }, MENU_FOOT));
  box.appendChild(trigger);
  box.appendChild(popup);
  return { box, trigger, popup, items };
}

/**
 * Index of the entry a key moves to (null: the key does not move in the menu).
 * @param {string} key
 * @param {number} current index of the focused entry (-1: none)
 * @param {number} count number of entries
 * @returns {number | null}
 */
export function menuStep(key, current, count) {
  if (count < 1) return null;
  if (key === "ArrowDown") return current < 0 ? 0 : (current + 1) % count;
  if (key === "ArrowUp") return current < 0 ? count - 1 : (current - 1 + count) % count;
  if (key === "Home") return 0;
  if (key === "End") return count - 1;
  return null;
}
