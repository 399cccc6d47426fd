// The builder's render({model, el}) driven through a small fake DOM (fakedom.js) and a
// fake anywidget model: what the user does becomes the right trait changes and messages.
import assert from "node:assert/strict";
import { test } from "node:test";

import { FakeDocument, FakeEvent, fakeModel } from "./fakedom.js";
import { render, matchStats } from "./widget.js";

const HTML_PART = "<img src=x onerror=alert(1)>";
const PARTS = ["Aa", "Bb", "Cc", HTML_PART];
const ROOT = { id: "n0", parts: PARTS, name: "", children: [] };

function setup(extra = {}) {
  const doc = new FakeDocument();
  const el = doc.createElement("div");
  const model = fakeModel({
    parts: PARTS,
    tree: ROOT,
    stats: [],
    selection_stats: [],
    total_variance: 2.5,
    n_selected: 7,
    n_samples: 40,
    groups: [],
    error: "",
    busy: false,
    progress: "",
    colour_balance: "",
    ...extra,
  });
  const cleanup = render({ model, el });
  const byRole = (role) => el.querySelectorAll(`[data-role="${role}"]`);
  const one = (role) => {
    const found = byRole(role);
    assert.equal(found.length, 1, `one element with data-role=${role}`);
    return found[0];
  };
  return { doc, el, model, cleanup, byRole, one };
}

function key(node, name, mods = {}) {
  return node.dispatchEvent(new FakeEvent("keydown", { key: name, ...mods }));
}

/** The tree of a split of the root, as the kernel would accept it. */
function splitRoot(num) {
  const den = PARTS.filter((p) => !num.includes(p));
  return {
    id: "n0",
    parts: PARTS,
    name: "",
    children: [
      { id: "n1", parts: num, name: "", children: [] },
      { id: "n2", parts: den, name: "", children: [] },
    ],
  };
}

function statsFor(tree, variance = 0.5) {
  return [
    {
      id: tree.id,
      name: `${tree.children[0].parts.join(",")} | ${tree.children[1].parts.join(",")}`,
      default_name: `${tree.children[0].parts.join(",")} | ${tree.children[1].parts.join(",")}`,
      custom_name: "",
      numerator: tree.children[0].parts,
      denominator: tree.children[1].parts,
      variance,
      share: variance / 2.5,
      mean: 0.25,
      q5: -1,
      q25: -0.5,
      q50: 0.2,
      q75: 0.7,
      q95: 1.4,
      groups: [],
    },
  ];
}

test("first render: count, total variance, one leaf, part names as text only", () => {
  const { doc, el, one, byRole } = setup();
  assert.equal(one("n-selected").textContent, "n selected: 7");
  assert.equal(one("total-variance").textContent, "total variance: 2.5");
  assert.equal(one("rows-used").textContent, "", "no n_rows given: nothing is said");
  const leaf = one("leaf");
  assert.equal(leaf.getAttribute("data-node-id"), "n0");
  const labels = byRole("part-label").map((n) => n.textContent);
  assert.ok(labels.some((t) => t.startsWith("<img src=x")), "the markup is shown as text");
  assert.ok(!doc.created.includes("img"), "no element was made from the part name");
  assert.ok(!doc.created.includes("script"));
  assert.ok(el.textContent.includes("no balance yet"));
});

test("click a leaf, toggle a chip, split: the view proposes the tree to the kernel", () => {
  const { model, one, byRole } = setup();
  one("leaf").click();
  const chips = byRole("chip");
  assert.deepEqual(chips.map((c) => c.textContent), PARTS);
  assert.deepEqual(chips.map((c) => c.getAttribute("data-side")), ["numerator", "numerator", "denominator", "denominator"]);
  // move Bb to the denominator side
  chips[1].click();
  const after = byRole("chip");
  const side = (name) => after.find((c) => c.textContent === name).getAttribute("data-side");
  assert.equal(side("Bb"), "denominator");
  assert.equal(one("split-preview").textContent, `new balance: Aa | Bb,Cc,${HTML_PART}`);
  one("apply-split").click();
  const sent = model.sets.filter((s) => s.name === "tree");
  assert.equal(sent.length, 1);
  assert.equal(model.saves, 1);
  const tree = sent[0].value;
  assert.deepEqual(tree.children[0].parts, ["Aa"]);
  assert.deepEqual(tree.children[1].parts, ["Bb", "Cc", HTML_PART]);
  assert.equal(byRole("splitter").length, 0, "the editor closes after the split");
});

test("the split button is disabled while a side is empty", () => {
  const { one, byRole } = setup();
  one("leaf").click();
  for (const chip of byRole("chip").filter((c) => c.getAttribute("data-side") === "denominator")) {
    byRole("chip").find((c) => c.textContent === chip.textContent).click();
  }
  assert.ok(one("apply-split").hasAttribute("disabled"));
  assert.equal(one("split-preview").textContent, "each side needs at least one part");
});

test("kernel statistics fill the table and the dendrogram; stale statistics are ignored", () => {
  const { model, one, byRole } = setup();
  const tree = splitRoot(["Aa", "Bb"]);
  model.kernel({ tree, stats: statsFor(tree, 0.5) });
  assert.equal(one("variance").textContent, "0.5");
  assert.equal(one("share").textContent, "20.0 %");
  assert.equal(one("numerator").textContent, "Aa, Bb");
  assert.equal(one("denominator").textContent, `Cc, ${HTML_PART}`);
  assert.equal(byRole("balance").length, 1);
  assert.equal(byRole("leaf").length, 2);
  // statistics of another split of the same node id do not describe this tree
  const other = splitRoot(["Aa"]);
  assert.equal(matchStats(other, statsFor(tree)).size, 0);
  assert.equal(matchStats(tree, statsFor(tree)).size, 1);
});

test("a refused edit: the kernel sends the old tree back, the error shows, no undo step is left", () => {
  const { model, one } = setup();
  one("leaf").click();
  one("apply-split").click();
  assert.equal(one("undo").hasAttribute("disabled"), false);
  model.kernel({ tree: ROOT, error: "change refused: a reason <b>not bold</b>." });
  assert.equal(one("error").textContent, "change refused: a reason <b>not bold</b>.");
  assert.equal(one("error").hasAttribute("hidden"), false);
  assert.ok(one("undo").hasAttribute("disabled"), "the refused state was dropped");
  assert.ok(one("redo").hasAttribute("disabled"));
});

test("undo and redo (buttons and Ctrl+Z / Ctrl+Shift+Z) send the trees again", () => {
  const { model, one, el } = setup();
  one("leaf").click();
  one("apply-split").click();
  const split = model.sets.at(-1).value;
  one("undo").click();
  assert.deepEqual(model.sets.at(-1).value, ROOT);
  one("redo").click();
  assert.deepEqual(model.sets.at(-1).value, split);
  const root = el.firstChild;
  const prevented = !key(root, "z", { ctrlKey: true });
  assert.ok(prevented);
  assert.deepEqual(model.sets.at(-1).value, ROOT);
  key(root, "Z", { ctrlKey: true, shiftKey: true });
  assert.deepEqual(model.sets.at(-1).value, split);
});

test("a tree from the kernel (a suggestion) becomes an undoable step", () => {
  const { model, one } = setup();
  const tree = splitRoot(["Cc"]);
  model.kernel({ tree, stats: statsFor(tree) });
  assert.equal(one("undo").hasAttribute("disabled"), false);
  one("undo").click();
  assert.deepEqual(model.sets.at(-1).value, ROOT);
});

test("new active parts from the kernel start a fresh history", () => {
  const { model, one } = setup();
  one("leaf").click();
  one("apply-split").click();
  model.kernel({ parts: ["Aa", "Bb"], tree: { id: "n0", parts: ["Aa", "Bb"], name: "", children: [] } });
  assert.ok(one("undo").hasAttribute("disabled"));
});

test("keyboard: Enter opens a leaf, arrows move between chips, Escape cancels", () => {
  const { doc, one, byRole } = setup();
  const leaf = one("leaf");
  key(leaf, "Enter");
  assert.equal(byRole("splitter").length, 1);
  const first = doc.activeElement;
  assert.equal(first.getAttribute("data-role"), "chip");
  assert.equal(first.textContent, "Aa");
  key(first, "ArrowDown");
  assert.equal(doc.activeElement.textContent, "Bb");
  key(doc.activeElement, "ArrowRight");
  assert.equal(doc.activeElement.getAttribute("data-side"), "denominator");
  assert.equal(doc.activeElement.textContent, HTML_PART);
  key(doc.activeElement, "ArrowLeft");
  assert.equal(doc.activeElement.getAttribute("data-side"), "numerator");
  // Enter / Space on a focused button is a click: the chip changes side and keeps focus
  doc.activeElement.click();
  assert.equal(doc.activeElement.getAttribute("data-side"), "denominator");
  key(doc.activeElement, "Escape");
  assert.equal(byRole("splitter").length, 0);
  assert.equal(doc.activeElement.getAttribute("data-role"), "leaf");
});

test("drag and drop moves a chip to the other column", () => {
  const { one, byRole } = setup();
  one("leaf").click();
  const chip = byRole("chip").find((c) => c.textContent === "Aa");
  const data = new Map();
  const dataTransfer = { setData: (k, v) => data.set(k, v), getData: (k) => data.get(k) || "", effectAllowed: "", dropEffect: "" };
  chip.dispatchEvent(new FakeEvent("dragstart", { dataTransfer }));
  const target = byRole("side").find((s) => s.getAttribute("data-side") === "denominator");
  const over = new FakeEvent("dragover", { dataTransfer });
  target.dispatchEvent(over);
  assert.ok(over.defaultPrevented, "the column accepts the drop");
  target.dispatchEvent(new FakeEvent("drop", { dataTransfer }));
  const moved = byRole("chip").find((c) => c.textContent === "Aa");
  assert.equal(moved.getAttribute("data-side"), "denominator");
});

test("clicking a balance row or bar toggles the colour balance", () => {
  const { model, one } = setup();
  const tree = splitRoot(["Aa", "Bb"]);
  model.kernel({ tree, stats: statsFor(tree) });
  one("balance-row").click();
  assert.equal(model.sets.at(-1).name, "colour_balance");
  assert.equal(model.sets.at(-1).value, "n0");
  one("bar").click();
  assert.equal(model.sets.at(-1).value, "");
});

test("rename: Enter applies the name to the tree; clicks in the input do not toggle colour", () => {
  const { model, one } = setup();
  const tree = splitRoot(["Aa", "Bb"]);
  model.kernel({ tree, stats: statsFor(tree) });
  const input = one("name-input");
  assert.equal(input.placeholder, "Aa,Bb | Cc," + HTML_PART);
  input.click();
  assert.equal(model.sets.length, 0);
  input.value = "  first balance ";
  key(input, "Enter");
  const sent = model.sets.at(-1);
  assert.equal(sent.name, "tree");
  assert.equal(sent.value.name, "first balance");
});

test("unsplit and merge send the collapsed tree", () => {
  const { model, one, byRole } = setup();
  const tree = splitRoot(["Aa", "Bb"]);
  model.kernel({ tree, stats: statsFor(tree) });
  one("unsplit").click();
  assert.deepEqual(model.sets.at(-1).value, ROOT);
  model.kernel({ tree, stats: statsFor(tree) });
  byRole("leaf")[0].click();
  one("merge").click();
  assert.deepEqual(model.sets.at(-1).value.children, []);
});

test("suggestion buttons send a request; busy disables them and shows the progress", () => {
  const { model, byRole, one } = setup();
  const [principal, ward] = byRole("suggest");
  principal.click();
  ward.click();
  assert.deepEqual(model.sent, [
    { type: "suggest", method: "principal" },
    { type: "suggest", method: "ward" },
  ]);
  model.kernel({ busy: true, progress: "principal balances: 1.0 of 3 balances found (33 %)" });
  assert.equal(one("progress").textContent, "principal balances: 1.0 of 3 balances found (33 %)");
  assert.ok(byRole("suggest").every((b) => b.hasAttribute("disabled")));
  model.kernel({ busy: false, progress: "" });
  assert.ok(one("progress").hasAttribute("hidden"));
});

test("cleanup removes every listener and the view", () => {
  const { model, el, cleanup } = setup();
  const root = el.firstChild;
  assert.ok(model.handlerCount() > 0 && root.listenerCount() > 0);
  cleanup();
  assert.equal(model.handlerCount(), 0);
  assert.equal(root.listenerCount(), 0);
  assert.equal(el.childNodes.length, 0);
});

test("the toolbar says how many rows the statistics leave out", () => {
  const { one } = setup({ n_samples: 37, n_rows: 40 });
  assert.equal(one("rows-used").textContent, "statistics on 37 of 40 rows (3 missing or zero in an active part)");
  assert.equal(one("rows-used").getAttribute("hidden"), null);
});
