// The builder's render({model, el}) on jsdom (a standards DOM, see testdom.js) with a fake
// anywidget model: what the user does becomes the right trait changes and messages, the
// keyboard focus stays in the builder, every control has an accessible name.
import assert from "node:assert/strict";
import { test } from "node:test";

import { click, drag, fakeModel, keydown, page, type } from "./testdom.js";
import { render, matchStats, selectionEntries } from "./widget.js";

const HTML_PART = "<img src=x onerror=alert(1)>";
const PARTS = ["Aa", "Bb", "Cc", HTML_PART];
const ROOT = { id: "n0", parts: PARTS, name: "", children: [] };

function setup(extra = {}) {
  const { window, document, el } = page();
  const model = fakeModel({
    parts: PARTS,
    tree: ROOT,
    stats: [],
    selection_summary: {},
    total_variance: 2.5,
    n_selected: 7,
    n_samples: 40,
    groups: [],
    messages: "",
    busy: false,
    progress: "",
    colour_balance: "",
    ...extra,
  });
  const cleanup = render({ model, el });
  const byRole = (role) => [...el.querySelectorAll(`[data-role="${role}"]`)];
  const one = (role) => {
    const found = byRole(role);
    assert.equal(found.length, 1, `one element with data-role=${role}`);
    return found[0];
  };
  const active = () => document.activeElement;
  const builder = el.querySelector('[data-role="builder"]');
  return { window, document, el, model, cleanup, byRole, one, active, builder };
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

/** Open the root leaf and apply the split the editor proposes (first half | second half). */
function splitByKeyboard(t) {
  const leaf = t.one("leaf");
  leaf.focus();
  keydown(leaf, "Enter");
  t.one("apply-split").focus();
  click(t.one("apply-split"));
}

test("first render: counts with their units, total variance, one leaf, part names as text only", () => {
  const { el, one, byRole } = setup();
  assert.equal(one("n-selected").textContent, "7 rows selected");
  assert.equal(one("total-variance").textContent, "total variance: 2.5");
  assert.equal(one("rows-used").textContent, "", "no n_rows given: nothing is said");
  const leaf = one("leaf");
  assert.equal(leaf.getAttribute("data-node-id"), "n0");
  const labels = byRole("part-label").map((n) => n.textContent);
  assert.ok(labels.some((text) => text.startsWith("<img src=x")), "the markup is shown as text");
  assert.ok(leaf.getAttribute("aria-label").includes(HTML_PART), "in full in the leaf's name");
  // jsdom parses markup set as HTML: no element may have come from the part name
  assert.equal(el.querySelectorAll("img, script").length, 0);
  assert.ok(el.textContent.includes("no balance yet"));
});

test("click a leaf, toggle a chip, split: the view proposes the tree to the kernel", () => {
  const { model, one, byRole } = setup();
  click(one("leaf"));
  const chips = byRole("chip");
  assert.deepEqual(chips.map((c) => c.textContent), PARTS);
  assert.deepEqual(chips.map((c) => c.getAttribute("data-side")), ["numerator", "numerator", "denominator", "denominator"]);
  click(chips[1]); // move Bb to the denominator side
  const after = byRole("chip");
  const side = (name) => after.find((c) => c.textContent === name).getAttribute("data-side");
  assert.equal(side("Bb"), "denominator");
  assert.equal(one("split-preview").textContent, `new balance: Aa | Bb,Cc,${HTML_PART}`);
  click(one("apply-split"));
  const sent = model.sets.filter((s) => s.name === "tree");
  assert.equal(sent.length, 1);
  assert.equal(model.saves, 1);
  const tree = sent[0].value;
  assert.deepEqual(tree.children[0].parts, ["Aa"]);
  assert.deepEqual(tree.children[1].parts, ["Bb", "Cc", HTML_PART]);
  assert.equal(byRole("splitter").length, 0, "the editor closes after the split");
});

test("the split button is disabled while a side is empty, and a disabled button does nothing", () => {
  const { model, one, byRole } = setup();
  click(one("leaf"));
  for (const chip of byRole("chip").filter((c) => c.getAttribute("data-side") === "denominator")) {
    click(byRole("chip").find((c) => c.textContent === chip.textContent));
  }
  assert.ok(one("apply-split").disabled);
  assert.equal(one("split-preview").textContent, "each side needs at least one part");
  click(one("apply-split")); // the DOM does not dispatch clicks on disabled buttons
  assert.equal(model.sets.length, 0);
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
  const other = splitRoot(["Aa"]);
  assert.equal(matchStats(other, statsFor(tree)).size, 0);
  assert.equal(matchStats(tree, statsFor(tree)).size, 1);
});

test("a refused edit: the kernel sends the old tree back, the error shows, no undo step is left", () => {
  const t = setup();
  splitByKeyboard(t);
  assert.equal(t.one("undo").disabled, false);
  t.model.kernel({ tree: ROOT, messages: "change refused: a reason <b>not bold</b>." });
  assert.equal(t.one("error").textContent, "change refused: a reason <b>not bold</b>.");
  assert.equal(t.el.querySelectorAll("b").length, 0);
  assert.equal(t.one("error").hidden, false);
  assert.ok(t.one("undo").disabled, "the refused state was dropped");
  assert.ok(t.one("redo").disabled);
  // the new balance the focus went to is gone: the focus stays in the builder
  assert.ok(t.builder.contains(t.active()), `focus on ${t.active().tagName}`);
});

test("undo and redo (buttons and Ctrl+Z / Ctrl+Shift+Z / Ctrl+Y) send the trees again", () => {
  const { model, one, builder } = setup();
  click(one("leaf"));
  click(one("apply-split"));
  const split = model.sets.at(-1).value;
  click(one("undo"));
  assert.deepEqual(model.sets.at(-1).value, ROOT);
  click(one("redo"));
  assert.deepEqual(model.sets.at(-1).value, split);
  assert.equal(keydown(builder, "z", { ctrlKey: true }), false, "the key is taken by the builder");
  assert.deepEqual(model.sets.at(-1).value, ROOT);
  keydown(builder, "Z", { ctrlKey: true, shiftKey: true });
  assert.deepEqual(model.sets.at(-1).value, split);
  keydown(builder, "z", { metaKey: true });
  keydown(builder, "y", { ctrlKey: true });
  assert.deepEqual(model.sets.at(-1).value, split);
});

test("a tree from the kernel (an automatic partition) becomes an undoable step", () => {
  const { model, one } = setup();
  const tree = splitRoot(["Cc"]);
  model.kernel({ tree, stats: statsFor(tree) });
  assert.equal(one("undo").disabled, false);
  click(one("undo"));
  assert.deepEqual(model.sets.at(-1).value, ROOT);
});

test("new active parts from the kernel start a fresh history", () => {
  const { model, one } = setup();
  click(one("leaf"));
  click(one("apply-split"));
  model.kernel({ parts: ["Aa", "Bb"], tree: { id: "n0", parts: ["Aa", "Bb"], name: "", children: [] } });
  assert.ok(one("undo").disabled);
});

test("keyboard: Enter opens a leaf, arrows move between chips, Escape cancels", () => {
  const { active, one, byRole } = setup();
  const leaf = one("leaf");
  leaf.focus();
  keydown(leaf, "Enter");
  assert.equal(byRole("splitter").length, 1);
  assert.equal(active().getAttribute("data-role"), "chip");
  assert.equal(active().textContent, "Aa");
  keydown(active(), "ArrowDown");
  assert.equal(active().textContent, "Bb");
  keydown(active(), "ArrowRight");
  assert.equal(active().getAttribute("data-side"), "denominator");
  assert.equal(active().textContent, HTML_PART);
  keydown(active(), "ArrowLeft");
  assert.equal(active().getAttribute("data-side"), "numerator");
  click(active()); // Enter / Space on a focused button is a click: the chip changes side, keeps focus
  assert.equal(active().getAttribute("data-side"), "denominator");
  keydown(active(), "Escape");
  assert.equal(byRole("splitter").length, 0);
  assert.equal(active().getAttribute("data-role"), "leaf");
});

test("drag and drop moves a chip to the other column", () => {
  const { one, byRole } = setup();
  click(one("leaf"));
  const chip = byRole("chip").find((c) => c.textContent === "Aa");
  const data = new Map();
  const dataTransfer = { setData: (k, v) => data.set(k, v), getData: (k) => data.get(k) || "", effectAllowed: "", dropEffect: "" };
  drag(chip, "dragstart", dataTransfer);
  const target = byRole("side").find((s) => s.getAttribute("data-side") === "denominator");
  assert.ok(drag(target, "dragover", dataTransfer).defaultPrevented, "the column accepts the drop");
  drag(target, "drop", dataTransfer);
  const moved = byRole("chip").find((c) => c.textContent === "Aa");
  assert.equal(moved.getAttribute("data-side"), "denominator");
});

test("clicking a balance row or bar toggles the colour balance", () => {
  const { model, one } = setup();
  const tree = splitRoot(["Aa", "Bb"]);
  model.kernel({ tree, stats: statsFor(tree) });
  click(one("balance-row"));
  assert.equal(model.sets.at(-1).name, "colour_balance");
  assert.equal(model.sets.at(-1).value, "n0");
  click(one("bar"));
  assert.equal(model.sets.at(-1).value, "");
});

test("rename: Enter applies the name; clicks in the input do not toggle colour; Ctrl+Z undoes it", () => {
  const t = setup();
  const tree = splitRoot(["Aa", "Bb"]);
  t.model.kernel({ tree, stats: statsFor(tree) });
  let input = t.one("name-input");
  assert.equal(input.placeholder, "Aa,Bb | Cc," + HTML_PART);
  click(input);
  assert.equal(t.model.sets.length, 0);
  type(input, "  first balance ");
  keydown(input, "Enter");
  const sent = t.model.sets.at(-1);
  assert.equal(sent.name, "tree");
  assert.equal(sent.value.name, "first balance");
  input = t.one("name-input");
  assert.equal(t.active(), input, "the focus stays in the (redrawn) name field");
  // the kernel confirms: still there
  t.model.kernel({ tree: sent.value, stats: statsFor(sent.value) });
  assert.equal(t.active(), t.one("name-input"));
  // nothing typed since: Ctrl+Z undoes the rename
  keydown(t.active(), "z", { ctrlKey: true });
  assert.equal(t.model.sets.at(-1).value.name, "");
  assert.equal(t.one("name-input").value, "");
  assert.ok(t.builder.contains(t.active()));
});

test("a name being typed survives a redraw from the kernel; Ctrl+Z there is left to the field", () => {
  const t = setup();
  const tree = splitRoot(["Aa", "Bb"]);
  t.model.kernel({ tree, stats: statsFor(tree) });
  type(t.one("name-input"), "half typed");
  t.model.kernel({ n_selected: 3 }); // a redraw
  assert.equal(t.active(), t.one("name-input"));
  assert.equal(t.one("name-input").value, "half typed");
  const before = t.model.sets.length;
  assert.equal(keydown(t.active(), "z", { ctrlKey: true }), true, "not prevented: the field's own undo");
  assert.equal(t.model.sets.length, before);
});

test("unsplit and merge send the collapsed tree", () => {
  const { model, one, byRole } = setup();
  const tree = splitRoot(["Aa", "Bb"]);
  model.kernel({ tree, stats: statsFor(tree) });
  click(one("unsplit"));
  assert.deepEqual(model.sets.at(-1).value, ROOT);
  model.kernel({ tree, stats: statsFor(tree) });
  click(byRole("leaf")[0]);
  click(one("merge"));
  assert.deepEqual(model.sets.at(-1).value.children, []);
});

test("focus stays in the builder after every action, so the next Ctrl+Z works", () => {
  const t = setup();
  const inBuilder = (what) => assert.ok(t.builder.contains(t.active()), `${what}: focus on ${t.active().outerHTML.slice(0, 60)}`);
  // split: the focus goes to the new balance in the dendrogram
  splitByKeyboard(t);
  inBuilder("split");
  assert.equal(t.active().getAttribute("data-role"), "balance");
  assert.equal(t.active().getAttribute("data-node-id"), "n0");
  const split = t.model.sets.at(-1).value;
  t.model.kernel({ tree: split, stats: statsFor(split) }); // the kernel's answer redraws
  assert.equal(t.active().getAttribute("data-focus-key"), "balance:n0");
  // Ctrl+Z right away undoes the split; the balance is gone, the focus is on the builder
  keydown(t.active(), "z", { ctrlKey: true });
  assert.deepEqual(t.model.sets.at(-1).value, ROOT);
  inBuilder("undo by key");
  // Ctrl+Shift+Z redoes it, from wherever the focus now is
  keydown(t.active(), "z", { ctrlKey: true, shiftKey: true });
  assert.deepEqual(t.model.sets.at(-1).value, split);
  inBuilder("redo by key");
  // the undo button: it is the last step, so the button gets disabled and redo takes the focus
  t.one("undo").focus();
  click(t.one("undo"));
  assert.equal(t.active(), t.one("redo"));
  click(t.one("redo"));
  assert.equal(t.active(), t.one("undo"), "redo has no step left: undo takes the focus");
  // unsplit from the table: the focus goes to the leaf that came back
  t.model.kernel({ tree: split, stats: statsFor(split) });
  t.one("unsplit").focus();
  click(t.one("unsplit"));
  assert.equal(t.active().getAttribute("data-focus-key"), "leaf:n0");
  keydown(t.active(), "z", { ctrlKey: true });
  assert.deepEqual(t.model.sets.at(-1).value, split);
  inBuilder("undo after unsplit");
  // merge: the focus goes to the merged leaf
  t.model.kernel({ tree: split, stats: statsFor(split) });
  click(t.byRole("leaf")[0]);
  t.one("merge").focus();
  click(t.one("merge"));
  assert.equal(t.active().getAttribute("data-focus-key"), "leaf:n0");
  // a colour toggle by keyboard keeps the focus on its balance
  keydown(t.active(), "z", { ctrlKey: true });
  t.model.kernel({ tree: split, stats: statsFor(split) });
  const bar = t.one("balance");
  bar.focus();
  keydown(bar, "Enter");
  assert.equal(t.active().getAttribute("data-focus-key"), "balance:n0");
});

test("one control offers the automatic partitions, with their method names and what they do", () => {
  const t = setup();
  const open = t.one("suggest-open");
  const popup = t.one("suggest-popup");
  assert.equal(popup.hidden, true);
  assert.equal(open.getAttribute("aria-haspopup"), "menu");
  assert.equal(open.getAttribute("aria-expanded"), "false");
  const items = t.byRole("suggest");
  assert.deepEqual(items.map((i) => i.getAttribute("data-method")), ["principal", "ward"]);
  assert.deepEqual(items.map((i) => i.getAttribute("role")), ["menuitem", "menuitem"]);
  const names = items.map((i) => i.querySelector(".cw-menu-name").textContent);
  assert.deepEqual(names, ["principal balances", "Ward clustering of parts"]);
  for (const item of items) assert.ok(item.querySelector(".cw-menu-note").textContent.length > 20, "a one-line explanation");
  assert.equal(t.byRole("suggest-menu")[0].getAttribute("id"), open.getAttribute("aria-controls"));
  // keyboard: ArrowDown opens on the first entry, arrows wrap, Escape goes back to the button
  open.focus();
  keydown(open, "ArrowDown");
  assert.equal(popup.hidden, false);
  assert.equal(open.getAttribute("aria-expanded"), "true");
  assert.equal(t.active(), items[0]);
  keydown(t.active(), "ArrowDown");
  assert.equal(t.active(), items[1]);
  keydown(t.active(), "ArrowDown");
  assert.equal(t.active(), items[0]);
  keydown(t.active(), "ArrowUp");
  assert.equal(t.active(), items[1]);
  keydown(t.active(), "Escape");
  assert.equal(popup.hidden, true);
  assert.equal(t.active(), open);
  // a click opens it; picking an entry sends the request, closes the menu, focus on the button
  click(open);
  assert.equal(t.active(), items[0]);
  click(items[1]);
  assert.deepEqual(t.model.sent, [{ type: "suggest", method: "ward" }]);
  assert.equal(popup.hidden, true);
  assert.equal(t.active(), open);
  click(open);
  click(items[0]);
  assert.deepEqual(t.model.sent.at(-1), { type: "suggest", method: "principal" });
  // a click elsewhere in the builder closes an open menu
  click(open);
  click(t.one("legend"));
  assert.equal(popup.hidden, true);
});

test("while the kernel works the menu button keeps the focus, says it is unavailable and sends nothing", () => {
  const t = setup();
  const open = t.one("suggest-open");
  click(open);
  click(t.byRole("suggest")[0]);
  assert.equal(t.active(), open);
  t.model.kernel({ busy: true, progress: "principal balances: 1.0 of 3 balances found (33 %)" });
  assert.equal(t.one("progress").textContent, "principal balances: 1.0 of 3 balances found (33 %)");
  assert.equal(open.getAttribute("aria-disabled"), "true");
  assert.equal(t.active(), open, "not disabled, so the focus is not lost");
  click(open);
  assert.equal(t.one("suggest-popup").hidden, true, "does not open while busy");
  const tree = splitRoot(["Cc"]);
  t.model.kernel({ busy: false, progress: "", tree, stats: statsFor(tree) });
  assert.ok(t.one("progress").hidden);
  assert.equal(open.getAttribute("aria-disabled"), "false");
  assert.equal(t.active(), open);
  keydown(t.active(), "z", { ctrlKey: true }); // the automatic partition is undone
  assert.deepEqual(t.model.sets.at(-1).value, ROOT);
  assert.equal(t.model.sent.length, 1);
});

/**
 * The accessible name of an element, by the rules that apply to these controls (accname
 * 1.2, from memory): aria-labelledby, aria-label, a label element, the text content of a
 * button-like element, title as the last resort.
 */
function accessibleName(node) {
  const doc = node.ownerDocument;
  const by = node.getAttribute("aria-labelledby");
  if (by) return by.split(/\s+/).map((id) => doc.getElementById(id)?.textContent || "").join(" ").trim();
  const label = node.getAttribute("aria-label");
  if (label && label.trim()) return label.trim();
  if (node.labels && node.labels.length) return [...node.labels].map((l) => l.textContent).join(" ").trim();
  const role = node.getAttribute("role");
  if (node.tagName === "BUTTON" || role === "button" || role === "menuitem") {
    const text = node.textContent.trim();
    if (text) return text;
  }
  return (node.getAttribute("title") || "").trim();
}

test("every control has an accessible name", () => {
  const t = setup({ n_rows: 50 });
  const tree = splitRoot(["Aa", "Bb"]);
  t.model.kernel({ tree, stats: statsFor(tree) });
  click(t.byRole("leaf")[0]); // the editor with its chips and buttons
  click(t.one("suggest-open")); // the menu entries
  const controls = t.el.querySelectorAll("button, input, select, textarea, [tabindex], [role=button], [role=menuitem]");
  assert.ok(controls.length >= 12, `${controls.length} controls`);
  for (const node of controls) {
    if (node.getAttribute("tabindex") === "-1" && !node.getAttribute("role")) continue;
    assert.ok(accessibleName(node), `no accessible name: ${node.outerHTML.slice(0, 120)}`);
  }
  // the name of the dendrogram's balance says which balance it is
  assert.ok(accessibleName(t.one("balance")).startsWith("Aa,Bb | Cc,"));
});

test("a figure request is answered with a standalone SVG holding the table text only as text", () => {
  const t = setup({ groups: [{ code: 0, name: "g", colour: "#336699" }] });
  const tree = splitRoot(["Aa", "Bb"]);
  t.model.kernel({ tree, stats: statsFor(tree) });
  t.model.custom({ type: "figure-request", id: "r1", format: "svg", scale: 2 });
  return new Promise((resolve) => setTimeout(resolve, 0)).then(() => {
    const reply = t.model.messages.find((m) => m.content.type === "figure");
    assert.ok(reply, "an answer was sent");
    assert.equal(reply.content.id, "r1");
    assert.equal(reply.content.error, undefined);
    assert.equal(reply.buffers.length, 1);
    const text = new TextDecoder().decode(reply.buffers[0]);
    const doc = new t.window.DOMParser().parseFromString(text, "image/svg+xml");
    assert.equal(doc.getElementsByTagName("parsererror").length, 0, "well-formed XML");
    const svgRoot = doc.documentElement;
    assert.equal(svgRoot.localName, "svg");
    assert.equal(svgRoot.namespaceURI, "http://www.w3.org/2000/svg");
    assert.equal(Number(svgRoot.getAttribute("width")), reply.content.width);
    // every part name is the text of a <text> element, and in no attribute
    const texts = [...doc.getElementsByTagName("text")].map((n) => n.textContent);
    for (const part of PARTS) assert.ok(texts.some((text) => text.startsWith(part.slice(0, 12))), `${part} drawn`);
    for (const node of doc.getElementsByTagName("*")) {
      for (const attr of node.attributes) {
        assert.ok(!PARTS.some((p) => attr.value.includes(p) && p.length > 2), `${attr.name}="${attr.value}"`);
        assert.ok(!/^(on|aria-|data-|role$|tabindex$|class$|style$)/.test(attr.name), `kept ${attr.name}`);
      }
      assert.ok(!["title", "script", "foreignObject"].includes(node.localName), `kept <${node.localName}>`);
    }
    // nothing interactive was copied (no click targets), the live figure is unchanged
    assert.equal(doc.getElementsByTagName("rect")[0].getAttribute("fill"), "#ffffff", "a white background");
    assert.ok(t.el.querySelector('svg[data-role="dendrogram"] [data-role="balance"]'));
  });
});

test("a PNG request where no canvas exists is answered with a reason, and bad requests too", () => {
  const t = setup();
  t.model.custom({ type: "figure-request", id: "p1", format: "png", scale: 2 });
  t.model.custom({ type: "figure-request", id: "p2", format: "pdf", scale: 1 });
  return new Promise((resolve) => setTimeout(resolve, 20)).then(() => {
    const replies = new Map(t.model.messages.filter((m) => m.content.type === "figure").map((m) => [m.content.id, m]));
    assert.match(replies.get("p1").content.error, /canvas/);
    assert.equal(replies.get("p1").buffers.length, 0);
    assert.match(replies.get("p2").content.error, /unknown figure format pdf/);
  });
});

test("the figure control made by the page's widget manager is shown under the dendrogram", async () => {
  const { window, el } = page();
  const made = [];
  const viewEl = window.document.createElement("div");
  viewEl.setAttribute("class", "stand-in-control");
  const manager = {
    get_model: async (id) => ({ id }),
    create_view: async (child) => {
      const view = {
        el: viewEl,
        child,
        removed: false,
        messages: [],
        remove() {
          this.removed = true;
        },
      };
      // a Lumino widget: it hears that it is attached, after its node is in the page
      view.luminoWidget = { processMessage: (m) => view.messages.push([m.type, viewEl.isConnected]) };
      made.push(view);
      return view;
    },
  };
  const model = fakeModel({ parts: PARTS, tree: ROOT, stats: [], selection_summary: {}, figure_control: "IPY_MODEL_abc123" });
  model.widget_manager = manager;
  const cleanup = render({ model, el });
  await new Promise((resolve) => setTimeout(resolve, 0));
  assert.equal(made.length, 1);
  assert.deepEqual(made[0].child, { id: "abc123" });
  assert.equal(el.querySelector('[data-role="figure-save"]').firstChild, viewEl);
  assert.deepEqual(made[0].messages, [
    ["before-attach", false],
    ["after-attach", true],
  ]);
  cleanup();
  assert.equal(made[0].removed, true);
});

test("cleanup removes the view and stops reacting to the page and the kernel", () => {
  const { model, el, cleanup, builder, one } = setup();
  const leaf = one("leaf");
  assert.ok(model.handlerCount() > 0);
  cleanup();
  assert.equal(model.handlerCount(), 0);
  assert.equal(el.childNodes.length, 0);
  click(leaf);
  keydown(builder, "z", { ctrlKey: true });
  assert.equal(model.sets.length, 0);
  assert.equal(builder.querySelectorAll('[data-role="chip"]').length, 0, "no editor opened");
});

test("the toolbar says how many rows the statistics leave out, naming the unit of every count", () => {
  const { one } = setup({ n_samples: 37, n_rows: 40, n_selected: 1 });
  assert.equal(one("rows-used").textContent, "statistics on 37 of 40 rows (3 rows missing or zero in an active part)");
  assert.equal(one("rows-used").hidden, false);
  assert.equal(one("n-selected").textContent, "1 row selected");
});

test("a selection change redraws only the selection's marks, cells and count", () => {
  const tree = splitRoot(["Aa", "Bb"]);
  const t = setup({ tree, stats: statsFor(tree) });
  const balance = t.one("balance");
  const tableRow = t.one("balance-row");
  const nameInput = t.one("name-input");
  nameInput.focus();
  const summary = (mean, q25, q75, n = 12) => ({ ids: ["n0"], n, mean: [mean], q25: [q25], q75: [q75] });
  t.model.kernel({ selection_summary: summary(0.1, -0.2, 0.4), n_selected: 12 });
  // the balance, the table row and the focused name field are the elements drawn before
  assert.equal(t.one("balance"), balance);
  assert.equal(t.one("balance-row"), tableRow);
  assert.equal(t.active(), nameInput);
  const dot = balance.querySelector('[data-role="selection-mean"]');
  assert.ok(dot, "the selection's mean is drawn on the axis");
  const cell = tableRow.querySelector('[data-role="selection-mean"]');
  const firstText = cell.textContent;
  assert.notEqual(firstText, "\u2013");
  assert.equal(t.one("n-selected").textContent, "12 rows selected");
  const cx = Number(dot.getAttribute("cx"));

  t.model.kernel({ selection_summary: summary(0.6, 0.3, 0.65, 5), n_selected: 5 });
  assert.equal(t.one("balance"), balance);
  const moved = balance.querySelector('[data-role="selection-mean"]');
  assert.notEqual(Number(moved.getAttribute("cx")), cx, "another mean, another place");
  assert.notEqual(tableRow.querySelector('[data-role="selection-mean"]').textContent, firstText);
  assert.equal(t.one("n-selected").textContent, "5 rows selected");

  // no selected rows: the marks and the cell are emptied, nothing else is redrawn
  t.model.kernel({ selection_summary: summary(null, null, null, 0), n_selected: 0 });
  assert.equal(t.one("balance"), balance);
  assert.equal(balance.querySelector('[data-role="selection-mean"]'), null);
  assert.equal(tableRow.querySelector('[data-role="selection-mean"]').textContent, "\u2013");

  // a selection beyond the axes' range rescales every mark: a full redraw
  t.model.kernel({ selection_summary: summary(4.0, 3.5, 4.5), n_selected: 3 });
  assert.notEqual(t.one("balance"), balance);
  assert.ok(t.one("balance").querySelector('[data-role="selection-mean"]'));
  t.cleanup();
});

test("selectionEntries reads the kernel's columns", () => {
  assert.deepEqual(selectionEntries({}), []);
  assert.deepEqual(selectionEntries({ ids: ["n0", "n3"], n: 4, mean: [0.5, null], q25: [0, null], q75: [1, null] }), [
    { id: "n0", n: 4, mean: 0.5, q25: 0, q75: 1 },
    { id: "n3", n: 4, mean: null, q25: null, q75: null },
  ]);
});
