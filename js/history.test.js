// Undo / redo semantics (the usual editor behaviour: a new edit clears the redo steps).
import assert from "node:assert/strict";
import { test } from "node:test";

import { canRedo, canUndo, createHistory, dropPresent, pushState, redo, undo } from "./history.js";

const s = (k) => ({ id: `state${k}` });

test("undo and redo walk back and forth through the edits", () => {
  let h = createHistory(s(0));
  assert.equal(canUndo(h), false);
  h = pushState(h, s(1));
  h = pushState(h, s(2));
  assert.equal(h.present.id, "state2");
  h = undo(h);
  assert.equal(h.present.id, "state1");
  assert.equal(canRedo(h), true);
  h = undo(h);
  assert.equal(h.present.id, "state0");
  assert.equal(canUndo(h), false);
  assert.equal(undo(h), h, "nothing to undo: unchanged");
  h = redo(h);
  h = redo(h);
  assert.equal(h.present.id, "state2");
  assert.equal(canRedo(h), false);
  assert.equal(redo(h), h, "nothing to redo: unchanged");
});

test("a new edit after undo clears the redo steps", () => {
  let h = pushState(pushState(createHistory(s(0)), s(1)), s(2));
  h = undo(h);
  h = pushState(h, s(9));
  assert.equal(canRedo(h), false);
  assert.equal(h.present.id, "state9");
  assert.equal(undo(h).present.id, "state1");
});

test("the cap keeps only the most recent undo steps", () => {
  let h = createHistory(s(0), 3);
  for (let k = 1; k <= 10; k += 1) h = pushState(h, s(k));
  assert.equal(h.past.length, 3);
  assert.deepEqual(h.past.map((x) => x.id), ["state7", "state8", "state9"]);
  let steps = 0;
  while (canUndo(h)) {
    h = undo(h);
    steps += 1;
  }
  assert.equal(steps, 3);
  assert.equal(h.present.id, "state7");
  assert.throws(() => createHistory(s(0), 0));
});

test("histories are immutable: operations return new objects, snapshots are frozen", () => {
  const state = { id: "x", children: [{ id: "y", children: [] }] };
  const h0 = createHistory(s(0));
  const h1 = pushState(h0, state);
  assert.equal(h0.present.id, "state0");
  assert.equal(h0.past.length, 0);
  assert.ok(Object.isFrozen(h1.present));
  assert.ok(Object.isFrozen(h1.present.children[0]));
  assert.throws(() => {
    h1.present.children[0].id = "changed";
  });
  assert.throws(() => h1.past.push(s(5)));
});

test("dropPresent goes back without leaving a redo step (a refused edit)", () => {
  let h = pushState(pushState(createHistory(s(0)), s(1)), s(2));
  h = dropPresent(h);
  assert.equal(h.present.id, "state1");
  assert.equal(canRedo(h), false);
  assert.equal(undo(h).present.id, "state0");
});
