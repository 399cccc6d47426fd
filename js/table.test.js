// The balance table: group-separation columns and sorting by a column.
import assert from "node:assert/strict";
import { test } from "node:test";

import { click, fakeModel, page } from "./testdom.js";
import { createTableSort, drawTable, formatPValue, nextSort, sortRows } from "./table.js";
import { render } from "./widget.js";

const HOSTILE = "<img src=x onerror=alert(1)>";

/** A table row with the given statistics. */
function row(id, variance, sep) {
  return {
    id,
    name: id === "b" ? HOSTILE : `balance ${id}`,
    customName: "",
    defaultName: `balance ${id}`,
    numerator: ["Aa"],
    denominator: ["Bb"],
    variance,
    share: variance / 10,
    mean: 0,
    selectionMean: null,
    selectionN: 0,
    separation: sep,
  };
}

function sep(f, p, h, between, n = 100, ranked = 100) {
  return { anova_f: f, anova_p: p, kruskal_h: h, kruskal_p: p, kruskal_n: ranked, between_share: between, n };
}

const ROWS = [
  row("a", 1.0, sep(3.0, 0.05, 5.0, 0.1)),
  row("b", 4.0, sep(40.0, 1e-12, 30.0, 0.6)),
  row("c", 2.0, sep(null, null, null, null)),
  row("d", 3.0, sep(12.0, 0, 11.0, 0.3)),
];

const ids = (table) => [...table.querySelectorAll('[data-role="balance-row"]')].map((tr) => tr.getAttribute("data-node-id"));
const headings = (table) => [...table.querySelectorAll("[scope]")].map((th) => th.textContent);

test("with a grouping column the table shows F, H, their p-values and the between share", () => {
  const { document } = page();
  const table = drawTable(document, ROWS, "");
  assert.deepEqual(headings(table), [
    "balance", "numerator", "denominator", "variance", "share", "mean (all)", "mean (selected)",
    "F", "p (F)", "H", "p (H)", "between", "",
  ]);
  const cells = (role) => [...table.querySelectorAll(`[data-role="${role}"]`)].map((c) => c.textContent);
  assert.deepEqual(cells("anova-f"), ["3", "40", "\u2013", "12"]);
  assert.deepEqual(cells("anova-p"), ["0.05", "1.0e-12", "\u2013", "< 1e-300"]);
  assert.deepEqual(cells("kruskal-h"), ["5", "30", "\u2013", "11"]);
  assert.deepEqual(cells("between-share"), ["10.0 %", "60.0 %", "\u2013", "30.0 %"]);
  // a hostile balance name stays text
  assert.equal(table.querySelectorAll("img").length, 0);
  assert.equal(table.querySelector('[data-node-id="b"] input').getAttribute("aria-label"), `name of balance ${HOSTILE}`);
  // no note when every row was ranked
  assert.equal(table.querySelectorAll('[data-role="rank-note"]').length, 0);
});

test("without a grouping column the separation columns are not shown", () => {
  const plain = ROWS.map((r) => ({ ...r, separation: null }));
  const table = drawTable(page().document, plain, "");
  assert.equal(headings(table).includes("F"), false);
  assert.equal(table.querySelectorAll('[data-role="anova-f"]').length, 0);
});

test("a ranked subset is said in a caption", () => {
  const rows = [row("a", 1, sep(3, 0.1, 2, 0.1, 250000, 100000))];
  const table = drawTable(page().document, rows, "");
  const note = table.querySelectorAll('[data-role="rank-note"]');
  assert.equal(note.length, 1);
  assert.equal(note[0].textContent, "H ranks a random 100,000 of the 250,000 rows");
});

test("sorting: largest statistic first, p-values smallest first, missing values last", () => {
  let sort = createTableSort();
  assert.deepEqual(sortRows(ROWS, sort).map((r) => r.id), ["a", "b", "c", "d"]); // tree order
  sort = nextSort(sort, "anova_f");
  assert.deepEqual(sort, { key: "anova_f", descending: true });
  assert.deepEqual(sortRows(ROWS, sort).map((r) => r.id), ["b", "d", "a", "c"]);
  sort = nextSort(sort, "anova_f"); // the same column again: reversed, missing still last
  assert.deepEqual(sortRows(ROWS, sort).map((r) => r.id), ["a", "d", "b", "c"]);
  sort = nextSort(sort, "anova_p");
  assert.deepEqual(sortRows(ROWS, sort).map((r) => r.id), ["d", "b", "a", "c"]);
  sort = nextSort(sort, "variance");
  assert.deepEqual(sortRows(ROWS, sort).map((r) => r.id), ["b", "d", "c", "a"]);
  assert.deepEqual(nextSort(sort, ""), createTableSort());
  assert.deepEqual(nextSort(sort, "no such column"), createTableSort());
  assert.deepEqual(sortRows(ROWS, nextSort(createTableSort(), "between_share")).map((r) => r.id), ["b", "d", "a", "c"]);
});

test("the sorted heading carries aria-sort and an arrow", () => {
  const table = drawTable(page().document, ROWS, "", { key: "kruskal_h", descending: true });
  assert.deepEqual(ids(table), ["b", "d", "a", "c"]);
  const sorted = table.querySelectorAll("[aria-sort]");
  assert.equal(sorted.length, 1);
  assert.equal(sorted[0].getAttribute("aria-sort"), "descending");
  assert.equal(sorted[0].textContent, "H \u25bc");
});

test("p-values that underflowed read as a bound", () => {
  assert.equal(formatPValue(0), "< 1e-300");
  assert.equal(formatPValue(null), "\u2013");
  assert.equal(formatPValue(0.0312), "0.031");
});

test("in the widget a click on a heading sorts, and the order survives a redraw", () => {
  const { el } = page();
  const parts = ["Aa", "Bb", "Cc"];
  const tree = {
    id: "n0", parts, name: "",
    children: [
      { id: "n1", parts: ["Aa", "Bb"], name: "", children: [{ id: "n3", parts: ["Aa"], name: "", children: [] }, { id: "n4", parts: ["Bb"], name: "", children: [] }] },
      { id: "n2", parts: ["Cc"], name: "", children: [] },
    ],
  };
  const stat = (id, num, den, f) => ({
    id, name: id, default_name: id, custom_name: "", numerator: num, denominator: den,
    variance: 1, share: 0.5, mean: 0, n: 10, groups: [], separation: sep(f, 0.01, f, 0.2),
  });
  const model = fakeModel({
    parts, tree, selection_summary: {}, total_variance: 2, n_selected: 0, n_samples: 10, n_rows: 10,
    groups: [], error: "", busy: false, progress: "", colour_balance: "",
    stats: [stat("n0", ["Aa", "Bb"], ["Cc"], 2), stat("n1", ["Aa"], ["Bb"], 9)],
  });
  const cleanup = render({ model, el });
  const table = () => el.querySelector('[data-role="balance-table"]');
  assert.deepEqual(ids(table()), ["n0", "n1"]);
  click(table().querySelector('button[data-sort-key="anova_f"]'));
  assert.deepEqual(ids(table()), ["n1", "n0"]);
  model.kernel({ n_selected: 3 }); // any redraw keeps the order
  assert.deepEqual(ids(table()), ["n1", "n0"]);
  assert.equal(model.sets.length, 0, "sorting sends nothing to the kernel");
  click(table().querySelector('button[data-sort-key=""]'));
  assert.deepEqual(ids(table()), ["n0", "n1"]);
  cleanup();
});
