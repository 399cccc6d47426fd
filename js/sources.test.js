// Source rules of the builder's front end, checked on the files themselves:
// - data reach the DOM as text only: no innerHTML / outerHTML / insertAdjacentHTML /
//   document.write / eval anywhere in js/;
// - no balance maths in JS (the kernel computes): no logarithms, roots, exponentials.
import assert from "node:assert/strict";
import { readFileSync, readdirSync } from "node:fs";
import { dirname, join } from "node:path";
import { test } from "node:test";
import { fileURLToPath } from "node:url";

const HERE = dirname(fileURLToPath(import.meta.url));
const SOURCES = readdirSync(HERE).filter((f) => f.endsWith(".js") && !f.endsWith(".test.js"));

/** Text without comments (so the rules can be named in comments). */
function strip(text) {
  return text.replace(/\/\*[\s\S]*?\*\//g, "").replace(/(^|[^:"'`])\/\/.*$/gm, "$1");
}

/** Source text of a file without comments. */
function code(file) {
  return strip(readFileSync(join(HERE, file), "utf8"));
}

test("the widget's modules are all scanned", () => {
  for (const f of ["widget.js", "tree.js", "layout.js", "dom.js", "dendrogram.js", "table.js", "splitter.js", "menu.js", "figure.js"]) {
    assert.ok(SOURCES.includes(f), `${f} missing`);
  }
});

test("no HTML parsing of strings anywhere in the front end", () => {
  const banned = [/innerHTML/, /outerHTML/, /insertAdjacentHTML/, /document\.write/, /\beval\s*\(/, /new\s+Function\s*\(/, /DOMParser/, /createContextualFragment/];
  for (const file of SOURCES) {
    const text = readFileSync(join(HERE, file), "utf8"); // comments included: stricter
    for (const re of banned) assert.ok(!re.test(text), `${file} uses ${re}`);
  }
});

test("no balance maths in the front end (logs, roots, exponentials belong to the kernel)", () => {
  const banned = [/Math\.log/, /Math\.sqrt/, /Math\.exp/, /Math\.pow/, /\*\*/];
  for (const file of SOURCES) {
    const text = code(file);
    for (const re of banned) assert.ok(!re.test(text), `${file} uses ${re}`);
  }
});

test("comment stripping removes comments only, so the maths scan still sees code", () => {
  assert.equal(strip("a = 1; // Math.log here").includes("Math.log"), false);
  assert.equal(strip("/* Math.sqrt */ b = 2;").includes("Math.sqrt"), false);
  assert.equal(strip("c = Math.log(2); // note").includes("Math.log"), true);
  assert.equal(strip('d = "http://x"; e = Math.exp(1);').includes("Math.exp"), true);
});
