// The table of balances beside the dendrogram. Text only through textContent.
// With a grouping column it also shows how well each balance separates the groups
// (statistics from the kernel), and its numeric columns sort on a click of their heading.

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
 * @property {Separation | null} [separation]  group separation (null: no grouping column)
 */

/**
 * Group separation along one balance, as sent by the kernel (core.separation).
 * @typedef {Object} Separation
 * @property {number | null} anova_f
 * @property {number | null} anova_p
 * @property {number | null} kruskal_h
 * @property {number | null} kruskal_p
 * @property {number | null} kruskal_n  rows ranked for H
 * @property {number | null} between_share
 * @property {number} n                 rows with a value and a group
 */

/**
 * The table's sort order: a column key ("" = the order of the tree) and its direction.
 * The widget keeps one per view, so the order survives a redraw.
 * @typedef {{key: string, descending: boolean}} TableSort
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

/** Headings of the group-separation columns, shown when the model has a grouping column. */
export const SEPARATION_COLUMNS = ["F", "p (F)", "H", "p (H)", "between"];

/**
 * Sortable columns: heading -> [key, value of a row, sorted largest first on the first click].
 * @type {Record<string, [string, (row: BalanceRow) => number | null | undefined, boolean]>}
 */
const SORTABLE = {
  variance: ["variance", (row) => row.variance, true],
  share: ["share", (row) => row.share, true],
  F: ["anova_f", (row) => row.separation?.anova_f, true],
  "p (F)": ["anova_p", (row) => row.separation?.anova_p, false],
  H: ["kruskal_h", (row) => row.separation?.kruskal_h, true],
  "p (H)": ["kruskal_p", (row) => row.separation?.kruskal_p, false],
  between: ["between_share", (row) => row.separation?.between_share, true],
};

/** Tooltips of the separation headings. */
const SEPARATION_TIPS = {
  F: "one-way analysis of variance of the balance between the groups (F statistic)",
  "p (F)": "p-value of F: the chance of so large an F if every group had the same mean",
  H: "Kruskal-Wallis rank test of the balance between the groups (H statistic)",
  "p (H)": "p-value of H: the chance of so large an H if every group had the same distribution",
  between: "share of the balance's variation that lies between the groups (eta squared)",
};

/** @returns {TableSort} the order of the tree */
export function createTableSort() {
  return { key: "", descending: true };
}

/**
 * The rows in the table's order: the tree's order, or by a column (missing values last,
 * ties in the tree's order).
 * @param {BalanceRow[]} rows  pre-order
 * @param {TableSort} sort
 * @returns {BalanceRow[]}
 */
export function sortRows(rows, sort) {
  const column = Object.values(SORTABLE).find(([key]) => key === sort.key);
  if (!column) return rows.slice();
  const value = column[1];
  const sign = sort.descending ? -1 : 1;
  return rows
    .map((row, i) => ({ row, i, v: value(row) }))
    .sort((a, b) => {
      const ma = typeof a.v !== "number" || !Number.isFinite(a.v);
      const mb = typeof b.v !== "number" || !Number.isFinite(b.v);
      if (ma || mb) return ma === mb ? a.i - b.i : ma ? 1 : -1;
      return a.v === b.v ? a.i - b.i : sign * (a.v - b.v);
    })
    .map((x) => x.row);
}

/**
 * A p-value for display ("< 1e-300" where it underflowed to 0).
 * @param {number | null | undefined} p
 * @returns {string}
 */
export function formatPValue(p) {
  if (p === 0) return "< 1e-300";
  return formatNumber(p, 2);
}

/**
 * The sort order after a click on the heading of column `key`: a new column sorts in its
 * natural direction (largest first for statistics, smallest first for p-values), the same
 * column again reverses, and "" (the balance heading) goes back to the tree's order.
 * @param {TableSort} sort
 * @param {string} key
 * @returns {TableSort}
 */
export function nextSort(sort, key) {
  const column = Object.values(SORTABLE).find(([k]) => k === key);
  if (!column) return createTableSort();
  if (sort.key === key) return { key, descending: !sort.descending };
  return { key, descending: column[2] };
}

/**
 * The balance table, its rows in the order `sort` gives (the widget changes the order
 * with `nextSort` when a sortable heading, data-role "sort", is clicked).
 * @param {Document} doc
 * @param {BalanceRow[]} rows  pre-order
 * @param {string} colourBalance id of the balance colouring the other views ("")
 * @param {TableSort} [sort]
 * @returns {HTMLElement}
 */
export function drawTable(doc, rows, colourBalance, sort = createTableSort()) {
  const grouped = rows.some((row) => row.separation);
  const titles = grouped
    ? [...TABLE_COLUMNS.slice(0, -1), ...SEPARATION_COLUMNS, ...TABLE_COLUMNS.slice(-1)]
    : TABLE_COLUMNS;
  const table = html(doc, "table", { class: "cw-table", "data-role": "balance-table" });
  const ranked = rows.find(
    (row) => row.separation && row.separation.kruskal_n !== null && row.separation.kruskal_n < row.separation.n,
  );
  if (ranked && ranked.separation) {
    const { kruskal_n: k, n } = ranked.separation;
    const count = (/** @type {number | null} */ x) => Number(x).toLocaleString("en-US");
    table.appendChild(
      html(doc, "caption", { class: "cw-note", "data-role": "rank-note" }, `H ranks a random ${count(k)} of the ${count(n)} rows`),
    );
  }
  const head = html(doc, "thead");
  const tr = html(doc, "tr");
  for (const title of titles) tr.appendChild(drawHeading(doc, title, sort));
  head.appendChild(tr);
  table.appendChild(head);
  const body = html(doc, "tbody");
  if (!rows.length) {
    const empty = html(doc, "tr", { class: "cw-empty" });
    empty.appendChild(
      html(doc, "td", { colspan: titles.length }, "no balance yet: click a group of parts to split it"),
    );
    body.appendChild(empty);
  }
  for (const row of sortRows(rows, sort)) body.appendChild(drawRow(doc, row, colourBalance === row.id, grouped));
  table.appendChild(body);
  return table;
}

/**
 * A column heading; sortable ones hold a button (keyboard and screen readers reach it).
 * @param {Document} doc
 * @param {string} title
 * @param {TableSort} sort
 * @returns {HTMLElement}
 */
function drawHeading(doc, title, sort) {
  const column = SORTABLE[title];
  const tip = SEPARATION_TIPS[/** @type {keyof typeof SEPARATION_TIPS} */ (title)];
  const th = html(doc, "th", { scope: "col", title: tip || null });
  if (!column && title !== "balance") {
    th.textContent = title;
    return th;
  }
  const key = column ? column[0] : "";
  const on = key !== "" && key === sort.key;
  if (on) th.setAttribute("aria-sort", sort.descending ? "descending" : "ascending");
  th.appendChild(
    html(
      doc,
      "button",
      {
        type: "button",
        class: "cw-sort",
        "data-role": "sort",
        "data-sort-key": key,
        "data-focus-key": `sort:${key}`,
        title: column ? `sort by ${title}` : "back to the order of the tree",
      },
      on ? `${title} ${sort.descending ? "\u25bc" : "\u25b2"}` : title,
    ),
  );
  return th;
}

/**
 * The text of a "mean (selected)" cell.
 * @param {number} n  selected rows with a value
 * @param {number | null} mean
 * @returns {string}
 */
function selectionMeanText(n, mean) {
  return n > 0 ? formatNumber(mean) : NO_VALUE;
}

/**
 * Put new selection means into a drawn table; nothing else of it changes (the column
 * does not sort, so the order stays).
 * @param {Element} table  the table of drawTable
 * @param {Map<string, {n: number, mean: number | null}>} selection  by balance id
 */
export function updateSelectionCells(table, selection) {
  for (const tr of table.querySelectorAll('[data-role="balance-row"]')) {
    const cell = tr.querySelector('[data-role="selection-mean"]');
    if (!cell) continue;
    const sel = selection.get(tr.getAttribute("data-node-id") || "");
    const text = selectionMeanText(sel ? sel.n : 0, sel ? sel.mean : null);
    if (cell.textContent !== text) cell.textContent = text;
  }
}

/**
 * @param {Document} doc
 * @param {BalanceRow} row
 * @param {boolean} active
 * @param {boolean} grouped  show the separation columns
 * @returns {HTMLElement}
 */
function drawRow(doc, row, active, grouped) {
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
  input.title = row.customName || row.defaultName; // the whole name on hover (the field is narrow)
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
      selectionMeanText(row.selectionN, row.selectionMean),
    ),
  );
  if (grouped) {
    const sep = row.separation || null;
    const cells = [
      ["anova-f", formatNumber(sep ? sep.anova_f : null)],
      ["anova-p", formatPValue(sep ? sep.anova_p : null)],
      ["kruskal-h", formatNumber(sep ? sep.kruskal_h : null)],
      ["kruskal-p", formatPValue(sep ? sep.kruskal_p : null)],
      ["between-share", formatShare(sep ? sep.between_share : null)],
    ];
    for (const [role, text] of cells) tr.appendChild(html(doc, "td", { class: "cw-num", "data-role": role }, text));
  }
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
