// Label text of the builder: plain strings (placed with textContent), so markup in a
// part name stays text. DOM-free.
import assert from "node:assert/strict";
import { test } from "node:test";

import {
  NO_VALUE,
  balanceTitle,
  countOf,
  defaultBalanceName,
  formatNumber,
  formatShare,
  leafTitle,
  partsLabel,
  rowsUsedText,
  selectedCountText,
  totalVarianceText,
  truncate,
} from "./labels.js";

const HTML_PART = "<img src=x onerror=alert(1)>";

test("the default balance name has the kernel's form 'num1,num2 | den1,den2'", () => {
  // same form as compwidgets.core.balance_names
  assert.equal(defaultBalanceName(["SiO2", "Al2O3"], ["CaO"]), "SiO2,Al2O3 | CaO");
});

test("a part name with markup comes back unchanged, as plain text", () => {
  assert.equal(defaultBalanceName([HTML_PART], ["B"]), `${HTML_PART} | B`);
  assert.equal(partsLabel([HTML_PART, "B"]), `${HTML_PART}, B`);
  assert.ok(leafTitle([HTML_PART, "B"]).includes(HTML_PART));
  assert.ok(balanceTitle(HTML_PART, 0.5, 0.25).startsWith(`${HTML_PART}: variance 0.5 (25.0 %`));
  assert.ok(balanceTitle("b", 0.5, 0.25, true).includes("lengthened"));
  assert.ok(!balanceTitle("b", 0.5, 0.25).includes("lengthened"));
  // no escaping happens here (textContent does not need it, and escaping would show &lt;)
  assert.ok(!partsLabel([HTML_PART]).includes("&lt;"));
});

test("every count names its unit, singular or plural, with thousands separated", () => {
  assert.equal(selectedCountText(123), "123 rows selected");
  assert.equal(selectedCountText(1), "1 row selected");
  assert.equal(selectedCountText(0), "0 rows selected");
  assert.equal(selectedCountText(undefined), "0 rows selected");
  assert.equal(selectedCountText(1234567), "1,234,567 rows selected");
  assert.equal(countOf(2, "part"), "2 parts");
  assert.equal(countOf(1, "balance"), "1 balance");
  assert.equal(countOf(3, "ratio", "ratios"), "3 ratios");
});

test("numbers: significant digits, exponents for extremes, a dash when missing", () => {
  assert.equal(formatNumber(0.123456), "0.123");
  assert.equal(formatNumber(12.3456), "12.3");
  assert.equal(formatNumber(-2.5), "-2.5");
  assert.equal(formatNumber(0), "0");
  assert.equal(formatNumber(1234567), "1.23e+6");
  assert.equal(formatNumber(0.0000123), "1.23e-5");
  assert.equal(formatNumber(null), NO_VALUE);
  assert.equal(formatNumber(Number.NaN), NO_VALUE);
  assert.equal(formatShare(0.1234), "12.3 %");
  assert.equal(formatShare(null), NO_VALUE);
  assert.equal(totalVarianceText(2.5), "total variance: 2.5");
});

test("truncate keeps short text and cuts long text with an ellipsis", () => {
  assert.equal(truncate("abc", 5), "abc");
  assert.equal(truncate("abcdefgh", 5), "abcd\u2026");
  assert.equal(truncate("abcdefgh", 5).length, 5);
});

test("the rows the statistics leave out are said, and nothing is said when none is", () => {
  assert.equal(
    rowsUsedText(1920, 2000),
    "statistics on 1,920 of 2,000 rows (80 rows missing or zero in an active part)",
  );
  assert.equal(rowsUsedText(2000, 2000), "");
  assert.equal(rowsUsedText(0, 0), "");
});
