// The table of balances beside the dendrogram. Text only through textContent.

import { html } from "./dom.js";
import { NO_VALUE, formatNumber, formatShare, partsLabel } from "./labels.js";

/**
 * One row of the table, as sent by the kernel (stats) plus the selection mean.
 * @typedef {Object} BalanceRow
 * @property {string} id
 * @property {string} name          display name
 * @property {string} customName    the user's name ("" = default)
 * @property {string} defaultName
 * @property {string[]} numerator
 * @property {string[]} denominator
 * @property {number | null} variance
 * @property {number | null} share
 * @property {number | null} mean
 * @property {number | null} selectionMean
 * @property {number} selectionN
 */

/** Column headings. */
export const TABLE_COLUMNS = [
  "balance",
  "numerator",
  "denominator",
  "variance",
  "share",
  "mean (all)",
  "mean (selected)",
  "",
];

/**
 * The balance table.
 * @param {Document} doc
 * @param {BalanceRow[]} rows  pre-order
 * @param {string} colourBalance id of the balance colouring the other views ("")
 * @returns {HTMLElement}
 */
export function drawTable(doc, rows, colourBalance) {
  const table = html(doc, "table", { class: "cw-table", "data-role": "balance-table" });
  const head = html(doc, "thead");
  const tr = html(doc, "tr");
  for (const title of TABLE_COLUMNS) tr.appendChild(html(doc, "th", { scope: "col" }, title));
  head.appendChild(tr);
  table.appendChild(head);
  const body = html(doc, "tbody");
  if (!rows.length) {
    const empty = html(doc, "tr", { class: "cw-empty" });
    empty.appendChild(
      html(doc, "td", { colspan: TABLE_COLUMNS.length }, "no balance yet: click a group of parts to split it"),
    );
    body.appendChild(empty);
  }
  for (const row of rows) body.appendChild(drawRow(doc, row, colourBalance === row.id));
  table.appendChild(body);
  return table;
}

/**
 * @param {Document} doc
 * @param {BalanceRow} row
 * @param {boolean} active
 * @returns {HTMLElement}
 */
function drawRow(doc, row, active) {
  const tr = html(doc, "tr", {
    class: active ? "cw-row cw-active" : "cw-row",
    "data-role": "balance-row",
    "data-node-id": row.id,
    "aria-selected": active ? "true" : "false",
    title: "click to colour the other views by this balance",
  });
  const nameCell = html(doc, "td", { class: "cw-name-cell" });
  const input = /** @type {HTMLInputElement} */ (
    html(doc, "input", {
      class: "cw-name",
      type: "text",
      "data-role": "name-input",
      "data-node-id": row.id,
      "data-focus-key": `name:${row.id}`,
      "aria-label": `name of balance ${row.name}`,
      spellcheck: "false",
    })
  );
  input.value = row.customName;
  input.placeholder = row.defaultName;
  nameCell.appendChild(input);
  tr.appendChild(nameCell);
  tr.appendChild(html(doc, "td", { class: "cw-parts", "data-role": "numerator" }, partsLabel(row.numerator)));
  tr.appendChild(html(doc, "td", { class: "cw-parts", "data-role": "denominator" }, partsLabel(row.denominator)));
  tr.appendChild(html(doc, "td", { class: "cw-num", "data-role": "variance" }, formatNumber(row.variance)));
  tr.appendChild(html(doc, "td", { class: "cw-num", "data-role": "share" }, formatShare(row.share)));
  tr.appendChild(html(doc, "td", { class: "cw-num", "data-role": "mean" }, formatNumber(row.mean)));
  tr.appendChild(
    html(
      doc,
      "td",
      { class: "cw-num cw-sel", "data-role": "selection-mean" },
      row.selectionN > 0 ? formatNumber(row.selectionMean) : NO_VALUE,
    ),
  );
  const actions = html(doc, "td", { class: "cw-actions" });
  actions.appendChild(
    html(
      doc,
      "button",
      {
        type: "button",
        class: "cw-button cw-small",
        "data-role": "unsplit",
        "data-node-id": row.id,
        "data-focus-key": `unsplit:${row.id}`,
        title: "undo this split and every split below it",
      },
      "unsplit",
    ),
  );
  tr.appendChild(actions);
  return tr;
}
