"""Malformed input to compwidgets.core: exact error type and a message naming the place.

Every case asserts the exact exception class (SBPError is a subclass of
CompositionError, so ``type(err) is`` is checked, not only ``isinstance``) and
a regex proving the message names the row label, column name, SBP row or value.
A second part checks that no public function mutates the caller's DataFrame.
"""

from __future__ import annotations

import copy

import numpy as np
import pandas as pd
import pytest

import compwidgets.core as core
from compwidgets.core import CompositionError, SBPError

IDX = ["s1", "s2", "s3"]


def frame(values=None, columns=("a", "b", "c"), index=IDX) -> pd.DataFrame:
    if values is None:
        values = [[0.5, 0.3, 0.2], [0.1, 0.6, 0.3], [0.25, 0.25, 0.5]]
    return pd.DataFrame(values, index=list(index), columns=list(columns))


def with_cell(row, col, value) -> pd.DataFrame:
    df = frame()
    df.loc[row, col] = value
    return df


def text_column() -> pd.DataFrame:
    df = frame()
    df["b"] = ["0.3", "n.d.", "0.25"]
    return df


def all_missing_row() -> pd.DataFrame:
    df = frame()
    df.loc["s2"] = np.nan
    return df


X3 = frame()
X4 = frame(
    [[0.4, 0.3, 0.2, 0.1], [0.1, 0.2, 0.3, 0.4], [0.25, 0.25, 0.25, 0.25]],
    columns=("a", "b", "c", "d"),
)
X_ZERO = frame([[0.5, 0.5, 0.0], [0.2, 0.3, 0.5], [0.4, 0.0, 0.6]])
SBP3_OK = [[1, 1, -1], [1, -1, 0]]

CASES = [
    # ---- reading the table
    (
        "text-column",
        lambda: core.clr(text_column()),
        CompositionError,
        r"column 'b' is not numeric \(e\.g\. value 'n\.d\.'\)",
    ),
    (
        "bool-column",
        lambda: core.clr(frame().assign(c=[True, False, True])),
        CompositionError,
        r"column 'c' is not numeric \(e\.g\. value True\)",
    ),
    (
        "string-argument",
        lambda: core.clr("0.2,0.8"),
        TypeError,
        r"X: expected an array-like of numbers, got str",
    ),
    (
        "none-argument",
        lambda: core.perturb(X3, None),
        TypeError,
        r"Y: expected an array-like of numbers, got NoneType",
    ),
    (
        "list-of-text",
        lambda: core.ilr([[0.2, "x", 0.5]]),
        CompositionError,
        r"X: cannot read as numbers.*'x'",
    ),
    (
        "all-missing-row",
        lambda: core.clr(all_missing_row()),
        CompositionError,
        r"NaN or inf.*rows 's2'.*first: row 's2', column 'a'",
    ),
    (
        "nan-cell",
        lambda: core.clr(with_cell("s3", "b", np.nan)),
        CompositionError,
        r"NaN or inf.*row 's3', column 'b', value nan",
    ),
    (
        "inf-cell",
        lambda: core.ilr(with_cell("s1", "c", np.inf)),
        CompositionError,
        r"NaN or inf.*row 's1', column 'c', value inf",
    ),
    (
        "nan-cell-closure",
        lambda: core.closure(with_cell("s2", "a", np.nan)),
        CompositionError,
        r"row 's2', column 'a'",
    ),
    (
        "duplicate-columns",
        lambda: core.clr(frame(columns=("a", "b", "a"))),
        CompositionError,
        r"duplicate part names 'a'",
    ),
    (
        "one-part-clr",
        lambda: core.clr(frame([[1.0], [2.0], [3.0]], columns=("a",))),
        CompositionError,
        r"1 part\(s\) given; at least 2 are needed",
    ),
    ("empty-frame", lambda: core.clr(pd.DataFrame()), CompositionError, r"X: empty input"),
    (
        "empty-frame-with-columns",
        lambda: core.closure(pd.DataFrame(columns=["a", "b"])),
        CompositionError,
        r"X: empty input \(shape \(0, 2\)\)",
    ),
    ("empty-array", lambda: core.clr(np.array([])), CompositionError, r"X: empty input"),
    (
        "3-d-array",
        lambda: core.clr(np.ones((2, 3, 4))),
        CompositionError,
        r"expected shape \(D,\) or \(n, D\), got an array of shape \(2, 3, 4\)",
    ),
    # ---- non-positive values for log-ratios
    (
        "zero-clr",
        lambda: core.clr(with_cell("s2", "b", 0.0)),
        CompositionError,
        r"zero or negative.*row 's2', column 'b', value 0\.0",
    ),
    (
        "negative-ilr",
        lambda: core.ilr(with_cell("s3", "c", -0.2)),
        CompositionError,
        r"zero or negative.*row 's3', column 'c', value -0\.2",
    ),
    (
        "zero-alr",
        lambda: core.alr(with_cell("s1", "a", 0.0)),
        CompositionError,
        r"zero or negative.*row 's1', column 'a'",
    ),
    (
        "zero-array-position",
        lambda: core.clr(np.array([[1.0, 2.0], [3.0, 0.0]])),
        CompositionError,
        r"row 1, column 1, value 0\.0",
    ),
    (
        "zero-variation-matrix",
        lambda: core.variation_matrix(X_ZERO),
        CompositionError,
        r"2 cell\(s\); rows 's1', 's3', columns 'b', 'c'",
    ),
    (
        "zero-distance-Y",
        lambda: core.aitchison_distance(X3, X_ZERO),
        CompositionError,
        r"Y: zero or negative.*row 's1', column 'c'",
    ),
    (
        "negative-closure",
        lambda: core.closure(with_cell("s2", "c", -1.0)),
        CompositionError,
        r"negative values.*row 's2', column 'c', value -1\.0",
    ),
    (
        "zero-sum-row-closure",
        lambda: core.closure(frame([[0, 0, 0], [1, 2, 3], [1, 1, 1]])),
        CompositionError,
        r"rows 's1' sum to zero",
    ),
    (
        "one-row-variation",
        lambda: core.variation_matrix([0.2, 0.3, 0.5]),
        CompositionError,
        r"variation_matrix: needs at least 2 rows, got 1",
    ),
    # ---- detection limits and multiplicative replacement
    (
        "dl-wrong-length",
        lambda: core.multiplicative_replacement(X_ZERO, [0.1, 0.1]),
        CompositionError,
        r"2 values given for 3 parts \('a', 'b', 'c'\)",
    ),
    (
        "dl-unknown-part",
        lambda: core.multiplicative_replacement(X_ZERO, {"b": 0.1, "zz": 1}),
        CompositionError,
        r"unknown part\(s\) 'zz'",
    ),
    (
        "dl-cell-shape",
        lambda: core.multiplicative_replacement(X_ZERO, np.ones((2, 3))),
        CompositionError,
        r"shape \(2, 3\) does not match the data \(3, 3\)",
    ),
    (
        "dl-missing-for-zero",
        lambda: core.multiplicative_replacement(X_ZERO, {"c": 0.01}),
        CompositionError,
        r"no positive detection limit.*row 's3', column 'b'",
    ),
    (
        "dl-zero-for-zero",
        lambda: core.multiplicative_replacement(X_ZERO, [0.1, 0.1, 0.0]),
        CompositionError,
        r"no positive detection limit.*row 's1', column 'c'",
    ),
    (
        "dl-text",
        lambda: core.multiplicative_replacement(X_ZERO, ["a", "b", "c"]),
        CompositionError,
        r"detection limits: cannot read as numbers.*'a'",
    ),
    (
        "dl-too-large",
        lambda: core.multiplicative_replacement(X_ZERO, 10.0),
        CompositionError,
        r"rows 's1', 's3': the replacement values add up",
    ),
    (
        "fraction-above-one",
        lambda: core.multiplicative_replacement(X_ZERO, 0.1, fraction=1.5),
        CompositionError,
        r"fraction must lie strictly between 0 and 1, got 1\.5",
    ),
    (
        "fraction-zero",
        lambda: core.multiplicative_replacement(X_ZERO, 0.1, fraction=0),
        CompositionError,
        r"strictly between 0 and 1, got 0",
    ),
    (
        "below-wrong-shape",
        lambda: core.multiplicative_replacement(X_ZERO, 0.1, below=np.zeros((3, 2))),
        CompositionError,
        r"below: shape \(3, 2\) does not match the data \(3, 3\)",
    ),
    (
        "negative-replacement",
        lambda: core.multiplicative_replacement(with_cell("s2", "a", -0.1), 0.1),
        CompositionError,
        r"negative value -0\.1 at row 's2', column 'a'",
    ),
    # ---- SBPs
    ("sbp-1d", lambda: core.validate_sbp([1, -1]), SBPError, r"expected a 2-D matrix"),
    (
        "sbp-ragged",
        lambda: core.balances(X3, [[1, -1, 0], [1, -1]]),
        SBPError,
        r"SBP: cannot read as a matrix",
    ),
    (
        "sbp-wrong-parts",
        lambda: core.balances(X3, [[1, -1, 0, 0], [1, 0, -1, 0]]),
        SBPError,
        r"SBP: 2 rows for 4 parts|SBP has 4 parts but the data have 3",
    ),
    (
        "sbp-too-many-rows",
        lambda: core.balances(X3, SBP3_OK + [[0, 1, -1]]),
        SBPError,
        r"SBP: 3 rows for 3 parts; .* exactly D-1 = 2 rows",
    ),
    (
        "sbp-value-2",
        lambda: core.balances(X3, [[1, 1, -1], [2, -1, 0]]),
        SBPError,
        r"SBP row 2: value 2\.0 for 'a'",
    ),
    (
        "sbp-nan",
        lambda: core.validate_sbp([[1, 1, -1], [1, np.nan, 0]]),
        SBPError,
        r"SBP row 2: value nan for 'part 2'",
    ),
    (
        "sbp-no-minus-side",
        lambda: core.balances(X3, [[1, 1, 1], [1, -1, 0]]),
        SBPError,
        r"SBP row 1: no part on the -1 side",
    ),
    (
        "sbp-no-plus-side",
        lambda: core.validate_sbp([[1, 1, -1], [-1, -1, 0]]),
        SBPError,
        r"SBP row 2: no part on the \+1 side",
    ),
    (
        "sbp-first-row-leaves-part",
        lambda: core.balances(X4, [[1, 1, -1, 0], [1, -1, 0, 0], [0, 0, 1, -1]]),
        SBPError,
        r"SBP row 1: parts \{d\} are in no group",
    ),
    (
        "sbp-splits-unmade-group",
        lambda: core.balances(X4, [[1, 1, -1, -1], [0, 1, -1, 0], [1, -1, 0, 0]]),
        SBPError,
        r"SBP row 2: splits \{b, c\}, which is not one group made by the rows above",
    ),
    (
        "sbp-repeats-split",
        lambda: core.validate_sbp([[1, 1, -1, -1], [1, -1, 0, 0], [-1, 1, 0, 0]]),
        SBPError,
        r"SBP row 3: splits \{part 1, part 2\}",
    ),
    (
        "sbp-frame-parts-mismatch",
        lambda: core.balances(X3, pd.DataFrame(SBP3_OK, columns=["a", "b", "zz"])),
        SBPError,
        r"column\(s\) 'zz' are not among the parts; part\(s\) 'c' have no column",
    ),
    (
        "sbp-names-wrong-length",
        lambda: core.balances(X3, SBP3_OK, names=["only"]),
        SBPError,
        r"1 balance names given for 2 balances",
    ),
    # ---- ilr bases and inverses
    (
        "basis-not-orthonormal",
        lambda: core.ilr(X3, [[1, -1, 0], [1, 0, -1]]),
        CompositionError,
        r"ilr basis: rows 1 and 1 are not orthonormal|rows 1 and 2",
    ),
    (
        "basis-not-contrast",
        lambda: core.ilr(X3, [[1.0, 0, 0], [0, 1.0, 0]]),
        CompositionError,
        r"ilr basis: row 1 does not sum to zero",
    ),
    (
        "basis-wrong-shape",
        lambda: core.ilr(X3, core.default_basis(4)),
        CompositionError,
        r"ilr basis: expected shape \(2, 3\) for 3 parts, got \(3, 4\)",
    ),
    (
        "basis-text",
        lambda: core.ilr(X3, "helmert"),
        CompositionError,
        r"ilr basis: cannot read as a matrix of numbers",
    ),
    (
        "ilr-inv-parts-length",
        lambda: core.ilr_inv(core.ilr(X3), parts=["a", "b"]),
        CompositionError,
        r"ilr_inv: 2 part names given for 3 parts",
    ),
    (
        "ilr-inv-nan",
        lambda: core.ilr_inv(with_cell("s2", "b", np.nan)),
        CompositionError,
        r"Y: missing or non-finite.*row 's2', column 'b'",
    ),
    (
        "default-basis-one-part",
        lambda: core.default_basis(1),
        CompositionError,
        r"default_basis: need at least 2 parts, got 1",
    ),
    # ---- alr
    (
        "alr-unknown-denominator",
        lambda: core.alr(X3, denominator="zz"),
        CompositionError,
        r"alr: unknown denominator part 'zz'; parts are \['a', 'b', 'c'\]",
    ),
    (
        "alr-denominator-out-of-range",
        lambda: core.alr(X3, denominator=3),
        CompositionError,
        r"alr: denominator position 3 out of range for 3 parts",
    ),
    (
        "alr-inv-name-without-parts",
        lambda: core.alr_inv(core.alr(X3), denominator="c"),
        CompositionError,
        r"alr_inv: denominator 'c' must be a position, or a name in parts",
    ),
    # ---- perturbation, powering, distances
    (
        "perturb-part-count",
        lambda: core.perturb(X3, [0.2, 0.3, 0.1, 0.4]),
        CompositionError,
        r"X has 3 parts but Y has 4",
    ),
    (
        "perturb-part-names",
        lambda: core.perturb(X3, frame(columns=("a", "b", "zz"))),
        CompositionError,
        r"X and Y name different parts: \['a', 'b', 'c'\] vs \['a', 'b', 'zz'\]",
    ),
    (
        "distance-row-count",
        lambda: core.aitchison_distance(X3, X3.iloc[:2]),
        CompositionError,
        r"X has 3 rows but Y has 2",
    ),
    (
        "power-exponent-length",
        lambda: core.power(X3, [1.0, 2.0]),
        CompositionError,
        r"power: 2 exponents given for 3 rows",
    ),
    (
        "power-exponent-text",
        lambda: core.power(X3, "two"),
        TypeError,
        r"power: the exponent must be numbers, got 'two'",
    ),
    (
        "power-exponent-nan",
        lambda: core.power(X3, np.nan),
        CompositionError,
        r"power: the exponent must be finite",
    ),
    # ---- subcompositions and amalgamations
    (
        "subcomposition-unknown-part",
        lambda: core.subcomposition(X3, ["a", "zz"]),
        CompositionError,
        r"unknown part 'zz'; known parts are 'a', 'b', 'c'",
    ),
    (
        "subcomposition-one-part",
        lambda: core.subcomposition(X3, ["a"]),
        CompositionError,
        r"subcomposition: needs at least 2 parts, got \['a'\]",
    ),
    (
        "subcomposition-position-out-of-range",
        lambda: core.subcomposition(X3, [0, 5]),
        CompositionError,
        r"part position 5 is out of range for 3 parts",
    ),
    (
        "subcomposition-part-twice",
        lambda: core.subcomposition(X3, ["a", "a"]),
        CompositionError,
        r"a part is named twice in \['a', 'a'\]",
    ),
    (
        "subcomposition-zero-row",
        lambda: core.subcomposition(frame([[0, 0, 1], [1, 2, 3], [1, 1, 1]]), ["a", "b"]),
        CompositionError,
        r"rows 's1' sum to zero",
    ),
    (
        "amalgamate-overlap",
        lambda: core.amalgamate(X4, {"g1": ["a", "b"], "g2": ["b", "c"]}),
        CompositionError,
        r"part 'b' is in both 'g1' and 'g2'",
    ),
    (
        "amalgamate-unknown-member",
        lambda: core.amalgamate(X4, {"g1": ["a", "zz"]}),
        CompositionError,
        r"unknown member of 'g1' 'zz'",
    ),
    (
        "amalgamate-name-clash",
        lambda: core.amalgamate(X4, {"c": ["a", "b"]}),
        CompositionError,
        r"new name\(s\) \['c'\] already name a kept part",
    ),
    (
        "amalgamate-empty-group",
        lambda: core.amalgamate(X4, {"g1": []}),
        CompositionError,
        r"group 'g1' needs a list of member parts",
    ),
    (
        "amalgamate-string-group",
        lambda: core.amalgamate(X4, {"g1": "ab"}),
        CompositionError,
        r"group 'g1' needs a list of member parts",
    ),
    (
        "amalgamate-no-groups",
        lambda: core.amalgamate(X4, {}),
        CompositionError,
        r"amalgamate: no groups given",
    ),
    (
        "amalgamate-blank-name",
        lambda: core.amalgamate(X4, {" ": ["a"]}),
        CompositionError,
        r"group name ' ' must be a non-empty string",
    ),
    # ---- closure
    (
        "closure-negative-total",
        lambda: core.closure(X3, -1),
        CompositionError,
        r"closure: total must be a positive number, got -1",
    ),
    (
        "closure-nan-total",
        lambda: core.closure(X3, np.nan),
        CompositionError,
        r"closure: total must be a positive number, got nan",
    ),
    (
        "closure-text-total",
        lambda: core.closure(X3, "100"),
        TypeError,
        r"closure: total must be a number, got '100'",
    ),
]


@pytest.mark.parametrize("call, error, pattern", [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_malformed_input_raises_a_clear_error(call, error, pattern):
    with pytest.raises(error, match=pattern) as info:
        call()
    assert type(info.value) is error


def test_catalogue_is_large_and_ids_are_unique():
    ids = [c[0] for c in CASES]
    assert len(ids) >= 25
    assert len(set(ids)) == len(ids)


def test_composition_errors_are_value_errors():
    # Callers can catch ValueError; SBPError is a CompositionError.
    assert issubclass(CompositionError, ValueError)
    assert issubclass(SBPError, CompositionError)


def test_long_listings_are_cut():
    # Many offending cells: the message lists a few rows and says how many more.
    X = np.ones((12, 3))
    X[:, 1] = 0.0
    with pytest.raises(CompositionError, match=r"rows 0, 1, 2, 3, 4 and 7 more"):
        core.clr(X)


# --------------------------------------------------------------------------------------
# The caller's DataFrame is never mutated.


def sample_frame() -> pd.DataFrame:
    return pd.DataFrame(
        {"a": [0.5, 0.1, 0.25, 0.3], "b": [0.3, 0.6, 0.25, 0.3], "c": [0.2, 0.3, 0.5, 0.4]},
        index=pd.Index(["s1", "s2", "s3", "s4"], name="sample"),
    )


def zero_frame() -> pd.DataFrame:
    df = sample_frame()
    df.loc["s2", "c"] = 0.0
    return df


def sbp_frame() -> pd.DataFrame:
    return pd.DataFrame(SBP3_OK, columns=["c", "b", "a"])  # matched by name


CALLS = {
    "closure": lambda X: core.closure(X, 100),
    "perturb": lambda X: core.perturb(X, X),
    "power": lambda X: core.power(X, 2.0),
    "aitchison_inner": lambda X: core.aitchison_inner(X, X),
    "aitchison_norm": core.aitchison_norm,
    "aitchison_distance": lambda X: core.aitchison_distance(X, X.iloc[::-1]),
    "clr": core.clr,
    "clr_inv": core.clr_inv,
    "alr": lambda X: core.alr(X, denominator="b"),
    "alr_inv": core.alr_inv,
    "ilr": core.ilr,
    "ilr_inv": lambda X: core.ilr_inv(X.iloc[:, :2]),
    "balances": lambda X: core.balances(X, sbp_frame()),
    "center": core.center,
    "clr_covariance": core.clr_covariance,
    "total_variance": core.total_variance,
    "variation_matrix": core.variation_matrix,
    "subcomposition": lambda X: core.subcomposition(X, ["c", "a"]),
    "amalgamate": lambda X: core.amalgamate(X, {"ab": ["a", "b"]}),
}


@pytest.mark.parametrize("call", CALLS.values(), ids=CALLS.keys())
def test_public_functions_do_not_mutate_the_dataframe(call):
    df = sample_frame()
    before = copy.deepcopy(df)
    out = call(df)
    pd.testing.assert_frame_equal(df, before)
    # Changing the result does not reach back into the caller's data either.
    if isinstance(out, pd.DataFrame):
        out.iloc[:, :] = -123.0
    elif isinstance(out, pd.Series):
        out.iloc[:] = -123.0
    pd.testing.assert_frame_equal(df, before)


def test_multiplicative_replacement_does_not_mutate_data_limits_or_mask():
    df = zero_frame()
    limits = pd.Series({"a": 0.01, "b": 0.01, "c": 0.02})
    cell_limits = pd.DataFrame(0.02, index=df.index, columns=df.columns)
    below = df == 0
    copies = [copy.deepcopy(o) for o in (df, limits, cell_limits, below)]
    out = core.multiplicative_replacement(df, limits)
    core.multiplicative_replacement(df, cell_limits, below=below)
    core.multiplicative_replacement(df, [0.01, 0.01, 0.02], total=1.0)
    out.iloc[:, :] = -1.0
    pd.testing.assert_frame_equal(df, copies[0])
    pd.testing.assert_series_equal(limits, copies[1])
    pd.testing.assert_frame_equal(cell_limits, copies[2])
    pd.testing.assert_frame_equal(below, copies[3])


def test_failing_calls_do_not_mutate_the_dataframe():
    df = zero_frame()
    before = copy.deepcopy(df)
    for call in (core.clr, core.ilr, core.alr, core.variation_matrix, core.center):
        with pytest.raises(CompositionError):
            call(df)
    pd.testing.assert_frame_equal(df, before)


def test_array_input_is_not_mutated_and_results_do_not_share_memory():
    X = sample_frame().to_numpy()
    before = X.copy()
    for call in (core.closure, core.clr, core.power, core.clr_inv, core.alr_inv):
        out = call(X) if call is not core.power else call(X, 1.0)
        assert not np.shares_memory(out, X)
        out[...] = -1.0
    np.testing.assert_array_equal(X, before)
    Z = core.multiplicative_replacement(X, 0.01)
    assert not np.shares_memory(Z, X)
    np.testing.assert_array_equal(X, before)
