"""Property test: for random messy tables, the report's counts equal the truth the test built.

Each table is drawn cell by cell from known kinds (plain number, number with
thousands separators, '<limit', below-detection token, zero, blank, missing
token), with an optional sample-id column, a grouping column and a stated
total (some rows planted off by 5 wt%). The test keeps the kind of every cell
and computes, on its own, what the report must count: missing and
below-detection cells by code, parsed text, the rows whose replacement is
possible by the published condition sum(0.65 * DL) < observed total
(Martin-Fernandez et al. 2003), the flags. Units: 1 wt% = 10,000 ppm (common
practice).
"""

from __future__ import annotations

import copy
import re

import numpy as np
import pandas as pd
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from test_intake_catalogue import assert_accounted

from compwidgets.core import CompositionError
from compwidgets.intake import read_composition

ELEMENTS = ["SiO2", "Al2O3", "CaO", "Zr", "Cu", "Ba"]
KINDS = ("number", "grouped", "less", "token", "zero", "blank", "nan", "dash")
LIMIT = 0.5  # in each part's own unit
FRACTION = 0.65  # intake's default share of the limit
TO_WT = {"wt%": 1.0, "ppm": 1e-4}


@st.composite
def messy_tables(draw):
    n = draw(st.integers(2, 10), label="rows")
    k = draw(st.integers(2, 5), label="parts")
    units = draw(st.lists(st.sampled_from(["wt%", "ppm"]), min_size=k, max_size=k))
    kinds = np.array(
        draw(st.lists(st.sampled_from(KINDS + ("number",) * 6), min_size=n * k, max_size=n * k)),
        dtype=object,
    ).reshape(n, k)
    numbers = np.array(
        draw(st.lists(st.floats(1.0, 5000.0), min_size=n * k, max_size=n * k))
    ).reshape(n, k)
    numbers = np.round(numbers, 2)
    numbers[kinds == "grouped"] = np.maximum(numbers[kinds == "grouped"], 1000.0)
    with_id = draw(st.booleans(), label="id column")
    with_site = draw(st.booleans(), label="grouping column")
    with_total = draw(st.booleans(), label="total column")
    # a minority of rows planted off, as in a real table with a few typing errors
    planted = np.zeros(n, dtype=bool)
    planted[draw(st.lists(st.integers(0, n - 1), max_size=(n - 1) // 2, unique=True))] = True
    return n, k, units, kinds, numbers, with_id, with_site, with_total, planted


def _cell(kind: str, x: float):
    return {
        "number": x,
        "grouped": f"{x:,.2f}",
        "less": f"<{LIMIT}",
        "token": "bdl",
        "zero": 0.0,
        "blank": "",
        "nan": np.nan,
        "dash": "-",
    }[kind]


def _build(n, k, units, kinds, numbers, with_id, with_site, with_total, planted):
    data = {}
    if with_site:
        data["site"] = (["creek", "creek", "ridge"] * n)[:n]  # repeats: not an id
    if with_id:
        data["Sample ID"] = [f"Q-{i:03d}" for i in range(n)]
    names = ELEMENTS[:k]
    for j, (name, unit) in enumerate(zip(names, units, strict=True)):
        data[f"{name} ({unit})"] = pd.Series(
            [_cell(kinds[i, j], numbers[i, j]) for i in range(n)], dtype=object
        )
    observed = np.isin(kinds, ["number", "grouped"])
    to_wt = np.array([TO_WT[u] for u in units])
    common = "wt%" if "wt%" in units else "ppm"
    in_common = to_wt / TO_WT[common]
    sums = np.where(observed, numbers, 0.0) @ in_common  # in the common unit
    if with_total:
        data["Total"] = np.round(sums + np.where(planted, 5.0 / TO_WT[common], 0.0), 6)
    return pd.DataFrame(data), names, observed, in_common, common, sums


@settings(max_examples=60, deadline=None)
@given(table=messy_tables())
def test_report_counts_equal_the_truth(table):
    n, k, units, kinds, numbers, with_id, with_site, with_total, planted = table
    df, names, observed, in_common, common, sums = _build(*table)
    before = copy.deepcopy(df)
    empty = np.isin(kinds, ["blank", "nan", "dash"]).all(axis=0)
    if empty.any():
        # a column whose header names a part but which holds no value is refused by name
        column = re.escape(f"{names[int(np.argmax(empty))]} ({units[int(np.argmax(empty))]})")
        with pytest.raises(CompositionError, match=f"column '{column}' names a part"):
            read_composition(df, detection_limits=LIMIT, thousands=",")
        pd.testing.assert_frame_equal(df, before)
        return
    comp = read_composition(df, detection_limits=LIMIT, thousands=",")
    pd.testing.assert_frame_equal(df, before)
    assert_accounted(df, comp)

    report = comp.report
    codes = report["code"].value_counts()

    def count(code):
        return int(codes.get(code, 0))

    # column account: the parts, the row labels, the grouping column, the total
    account = comp.column_account
    assert comp.parts == names
    assert (account["role"] == "part").sum() == k
    assert (comp.values.index.name == "Sample ID") == with_id
    assert list(account.index[account["role"] == "metadata"]) == [
        c for c in ("site", "Total") if c in df.columns
    ]
    assert count("index_detected") == int(with_id)
    assert count("part_unit_header") == k

    # cells, by code
    blank = np.isin(kinds, ["blank", "nan"])
    assert count("missing_blank") == blank.sum()
    assert count("missing_token") == (kinds == "dash").sum()
    assert count("below_less_than") == (kinds == "less").sum()
    assert count("below_token") == (kinds == "token").sum()
    assert count("below_zero") == (kinds == "zero").sum()
    assert count("thousands_separator") == (kinds == "grouped").sum()
    assert (report["action"] == "missing").sum() == (blank | (kinds == "dash")).sum()

    # replacement: possible where the replacements stay below the observed total
    below = np.isin(kinds, ["less", "token", "zero"])
    limits = LIMIT * in_common  # in the common unit
    load = FRACTION * (below * limits).sum(axis=1)
    has_below = below.any(axis=1)
    possible = has_below & (load < sums)
    assert count("replaced_multiplicative") == below[possible].sum()
    assert count("observed_scaled") == possible.sum()
    scaled = report[report["code"] == "observed_scaled"].set_index("row")["value"]
    labels = comp.values.index
    # the published factor: 1 - sum(delta) / c
    rows = np.flatnonzero(possible)
    np.testing.assert_allclose(
        scaled[labels[rows]].to_numpy(), 1 - load[rows] / sums[rows], rtol=1e-12
    )

    # flags, row by row
    no_part = ~observed.any(axis=1)
    missing_any = (blank | (kinds == "dash")).any(axis=1)
    truth = {}
    total_checked = "wt%" in units
    totals_wt = sums * TO_WT[common]
    # a total on the very edge of the window is decided by the last bit of a sum: skip
    assume(not np.isclose(totals_wt, 98.5, rtol=0, atol=1e-9).any())
    assume(not np.isclose(totals_wt, 101.5, rtol=0, atol=1e-9).any())
    for i in range(n):
        row = []
        if no_part[i]:
            row.append("no_part_observed")
        if missing_any[i]:
            row.append("missing_parts")
        if total_checked and not no_part[i] and not (98.5 <= totals_wt[i] <= 101.5):
            row.append("total_outside_window")
        if with_total and planted[i] and not no_part[i]:
            row.append("total_mismatch")
        if has_below[i] and not possible[i]:
            row.append("not_replaced_no_observed" if no_part[i] else "not_replaced_overload")
        if row:
            truth[labels[i]] = ";".join(row)
    assert comp.flags["code"].to_dict() == truth
