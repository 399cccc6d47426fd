"""Checks of compwidgets.core against sources outside the project.

Each check names its source: a general-purpose library (scipy, numpy), a
published definition worked by hand in the test, or a fact of the trade
("common practice"). The small compositions are invented for these tests.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pandas as pd
import pytest
from conftest import PROPERTY_SETTINGS, positive_compositions
from hypothesis import given
from hypothesis import strategies as st
from scipy.linalg import helmert
from scipy.spatial.distance import pdist
from scipy.stats import gmean

import compwidgets.core as core

TOL = {"rtol": 1e-10, "atol": 1e-12}


def clr_by_gmean(X: np.ndarray) -> np.ndarray:
    """clr(x) = ln(x / g(x)) with g the geometric mean from scipy.stats.gmean."""
    return np.log(X / gmean(X, axis=1, keepdims=True))


# --------------------------------------------------------------------------------------
# scipy.stats.gmean


@PROPERTY_SETTINGS
@given(positive_compositions())
def test_center_is_closed_column_geometric_mean(X):
    # Source: scipy.stats.gmean; the centre is the closed geometric mean of each part
    # (Aitchison 1986).
    g = gmean(X, axis=0)
    np.testing.assert_allclose(core.center(X), g / g.sum(), **TOL)


@PROPERTY_SETTINGS
@given(positive_compositions())
def test_clr_matches_log_over_scipy_gmean(X):
    # Source: scipy.stats.gmean; clr(x)_i = ln(x_i / g(x)) (Aitchison 1986).
    np.testing.assert_allclose(core.clr(X), clr_by_gmean(X), rtol=1e-9, atol=1e-10)


# --------------------------------------------------------------------------------------
# scipy.linalg.helmert


@pytest.mark.parametrize("D", range(2, 11))
def test_default_basis_is_reversed_negated_helmert(D):
    # Source: scipy.linalg.helmert(D) (full=False) gives D-1 orthonormal contrasts; the
    # order and sign documented in transforms.default_basis is -helmert(D)[::-1, ::-1].
    np.testing.assert_allclose(core.default_basis(D), -helmert(D)[::-1, ::-1], **TOL)


@pytest.mark.parametrize("D", [2, 3, 5, 8])
def test_pivot_sbp_has_the_pivot_basis_as_contrasts(D):
    # Source: scipy.linalg.helmert(D) (full=False), reversed and negated as in
    # test_default_basis_is_reversed_negated_helmert: the contrasts of the pivot SBP
    # (part i against the parts after it) are that basis
    sbp = core.pivot_sbp(D)
    assert sbp.dtype == np.int8 and sbp.shape == (D - 1, D)
    np.testing.assert_allclose(core.sbp_basis(sbp), -helmert(D)[::-1, ::-1], **TOL)
    with pytest.raises(core.SBPError, match="at least 2 parts"):
        core.pivot_sbp(1)


@PROPERTY_SETTINGS
@given(positive_compositions())
def test_helmert_basis_gives_the_same_ilr_distances(X):
    # Source: scipy.linalg.helmert rows as an orthonormal contrast basis; any such basis
    # keeps Aitchison distances (Egozcue et al. 2003).
    H = helmert(X.shape[1])
    Y = X[::-1]
    d_helmert = np.linalg.norm(core.ilr(X, H) - core.ilr(Y, H), axis=1)
    d_default = np.linalg.norm(core.ilr(X) - core.ilr(Y), axis=1)
    np.testing.assert_allclose(d_helmert, d_default, rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(d_helmert, core.aitchison_distance(X, Y), rtol=1e-9, atol=1e-9)
    # ilr with the Helmert basis is clr projected on the Helmert rows (numpy).
    np.testing.assert_allclose(core.ilr(X, H), clr_by_gmean(X) @ H.T, rtol=1e-9, atol=1e-9)


# --------------------------------------------------------------------------------------
# scipy.spatial.distance.pdist


@PROPERTY_SETTINGS
@given(positive_compositions(max_rows=12))
def test_pairwise_aitchison_distance_matches_pdist_of_clr(X):
    # Source: scipy.spatial.distance.pdist (Euclidean) on clr coordinates computed with
    # scipy.stats.gmean; the Aitchison distance is the Euclidean distance of clr
    # (Aitchison 1986).
    expected = pdist(clr_by_gmean(X))
    n = X.shape[0]
    got = [core.aitchison_distance(X[i], X[j]) for i in range(n) for j in range(i + 1, n)]
    np.testing.assert_allclose(got, expected, rtol=1e-9, atol=1e-9)


@PROPERTY_SETTINGS
@given(positive_compositions(max_rows=5))
def test_aitchison_distance_log_ratio_form(X):
    # Source: Aitchison (1986) form of the distance, from memory:
    # d^2(x, y) = 1/(2D) sum_i sum_j (ln(x_i/x_j) - ln(y_i/y_j))^2.
    Y = X[::-1]
    D = X.shape[1]
    LX = np.log(X)[:, :, None] - np.log(X)[:, None, :]
    LY = np.log(Y)[:, :, None] - np.log(Y)[:, None, :]
    expected = np.sqrt(((LX - LY) ** 2).sum(axis=(1, 2)) / (2 * D))
    np.testing.assert_allclose(core.aitchison_distance(X, Y), expected, rtol=1e-9, atol=1e-9)


# --------------------------------------------------------------------------------------
# numpy: variation matrix, clr covariance, total variance


@PROPERTY_SETTINGS
@given(positive_compositions(max_parts=6))
def test_variation_matrix_entries_are_log_ratio_variances(X):
    # Source: numpy.var(ddof=1) of ln(x_i / x_j) computed cell by cell; definition
    # T_ij = var(ln(x_i/x_j)) (Aitchison 1986).
    D = X.shape[1]
    expected = np.array(
        [[np.var(np.log(X[:, i] / X[:, j]), ddof=1) for j in range(D)] for i in range(D)]
    )
    np.testing.assert_allclose(core.variation_matrix(X), expected, rtol=1e-8, atol=1e-9)


def test_variation_matrix_of_a_nearly_constant_ratio_is_its_direct_variance():
    # Two strongly varying parts (sd of ln x 3) in nearly constant ratio (sd of the
    # log-ratio 1e-7, so T_01 is about 1e-14). Source: numpy.var(ddof=1) of
    # ln(x_0 / x_1) computed directly, and the variance of the noise that made the ratio.
    rng = np.random.default_rng(1)
    n = 2_000
    log_a = 3.0 * rng.standard_normal(n)
    noise = 1e-7 * rng.standard_normal(n)
    X = np.exp(np.column_stack([log_a, log_a + 0.3 + noise, rng.standard_normal(n)]))
    direct = np.var(np.log(X[:, 0] / X[:, 1]), ddof=1)
    T = core.variation_matrix(X)
    assert T[0, 1] == T[1, 0]
    assert T[0, 1] == pytest.approx(direct, rel=1e-9)
    assert T[0, 1] == pytest.approx(np.var(noise, ddof=1), rel=1e-6)
    # the same case through var(ln x_i) + var(ln x_j) - 2 cov is off by 100 % (numpy)
    C = np.cov(np.log(X), rowvar=False, ddof=1)
    shortcut = C[0, 0] + C[1, 1] - 2 * C[0, 1]
    assert abs(shortcut - direct) > 0.5 * direct


@pytest.mark.parametrize("log_ratio_sd", [1e-8, 1e-6, 1e-4, 3e-3, 3e-2, 0.3, 3.0])
def test_variation_matrix_is_precise_at_every_conditioning(log_ratio_sd):
    # Pairs from far below to far above the switch to the direct formula
    # (core.stats.DIRECT_SHARE): every entry is the log-ratio variance to 1e-10 relative,
    # or to the rounding of the ratio itself when that is larger (a relative error of
    # about 1e-16 in x_i / x_j moves a log-ratio of sd s by 1e-16 / s of its spread; even
    # var ln(x_i / x_j) and var ln(x_j / x_i) differ by that much).
    # Source: numpy.var(ddof=1) of ln(x_i / x_j), cell by cell.
    rng = np.random.default_rng(int(1e3 * log_ratio_sd) + 5)
    n, D = 5_000, 5
    base = 3.0 * rng.standard_normal((n, 1)) + 4.0
    L = base + log_ratio_sd * rng.standard_normal((n, D)) + np.arange(D)
    X = np.exp(L)
    expected = np.array(
        [[np.var(np.log(X[:, i] / X[:, j]), ddof=1) for j in range(D)] for i in range(D)]
    )
    T = core.variation_matrix(X)
    np.testing.assert_allclose(T, expected, rtol=max(1e-10, 4e-16 / log_ratio_sd), atol=0)
    assert np.all(T >= 0) and np.all(np.diag(T) == 0)


@PROPERTY_SETTINGS
@given(positive_compositions())
def test_clr_covariance_is_numpy_cov_of_clr(X):
    # Source: numpy.cov(ddof=1) of clr coordinates computed with scipy.stats.gmean.
    expected = np.cov(clr_by_gmean(X), rowvar=False, ddof=1)
    np.testing.assert_allclose(core.clr_covariance(X), expected, rtol=1e-8, atol=1e-9)


@PROPERTY_SETTINGS
@given(positive_compositions())
def test_total_variance_is_sum_of_variation_matrix_over_2D(X):
    # Source: totvar = sum_ij T_ij / (2D) (Aitchison 1986, from memory), with T computed
    # by numpy.var(ddof=1) here, and = trace of numpy.cov of clr.
    D = X.shape[1]
    T = np.array([[np.var(np.log(X[:, i] / X[:, j]), ddof=1) for j in range(D)] for i in range(D)])
    tv = core.total_variance(X)
    assert isinstance(tv, float)
    np.testing.assert_allclose(tv, T.sum() / (2 * D), rtol=1e-8, atol=1e-9)
    np.testing.assert_allclose(
        tv, np.trace(np.cov(clr_by_gmean(X), rowvar=False, ddof=1)), rtol=1e-8, atol=1e-9
    )


def test_variances_use_ddof_one():
    # Common practice in this package (documented DDOF = 1): divisor n - 1.
    X = np.array([[1.0, 1.0], [1.0, math.e**2]])
    # ln(x1/x2) = 0 and -2: mean -1, squared deviations 1 + 1 = 2, divided by n-1 = 1.
    assert core.DDOF == 1
    assert core.variation_matrix(X)[0, 1] == pytest.approx(2.0)


# --------------------------------------------------------------------------------------
# Balances worked by hand (Egozcue et al. 2003; Egozcue & Pawlowsky-Glahn 2005)

SBP4 = [[1, 1, -1, -1], [1, -1, 0, 0], [0, 0, 1, -1]]


def test_balances_of_four_parts_worked_by_hand():
    # Source: balance formula b = sqrt(r s / (r + s)) ln(g(x+) / g(x-)), Egozcue &
    # Pawlowsky-Glahn (2005); composition invented for the test.
    a, b, c, d = 2.0, 3.0, 5.0, 7.0
    b1 = math.sqrt(2 * 2 / 4) * math.log(math.sqrt(a * b) / math.sqrt(c * d))
    b2 = math.sqrt(1 * 1 / 2) * math.log(a / b)
    b3 = math.sqrt(1 * 1 / 2) * math.log(c / d)
    got = core.balances([a, b, c, d], SBP4)
    assert got.shape == (3,)
    np.testing.assert_allclose(got, [b1, b2, b3], **TOL)
    # Scaling the composition changes nothing.
    np.testing.assert_allclose(core.balances([10 * a, 10 * b, 10 * c, 10 * d], SBP4), got, **TOL)
    # The same numbers come from ilr with the SBP basis.
    np.testing.assert_allclose(core.ilr([a, b, c, d], core.sbp_basis(SBP4)), got, **TOL)


def test_sbp_basis_of_three_against_two_typed_by_hand():
    # Source: contrast coefficients +sqrt(s / (r (r + s))) and -sqrt(r / (s (r + s)))
    # (Egozcue & Pawlowsky-Glahn 2005); values typed out for r = 3, s = 2 etc.
    sbp = [
        [1, 1, 1, -1, -1],  # r = 3, s = 2
        [1, -1, -1, 0, 0],  # r = 1, s = 2
        [0, 1, -1, 0, 0],  # r = 1, s = 1
        [0, 0, 0, -1, 1],  # r = 1, s = 1, numerator last
    ]
    p32 = math.sqrt(2 / (3 * 5))
    m32 = -math.sqrt(3 / (2 * 5))
    p12 = math.sqrt(2 / (1 * 3))
    m12 = -math.sqrt(1 / (2 * 3))
    h = math.sqrt(1 / 2)
    expected = [
        [p32, p32, p32, m32, m32],
        [p12, m12, m12, 0, 0],
        [0, h, -h, 0, 0],
        [0, 0, 0, -h, h],
    ]
    np.testing.assert_allclose(core.sbp_basis(sbp), expected, **TOL)


def test_balance_of_three_against_two_by_hand():
    # Source: balance formula of Egozcue & Pawlowsky-Glahn (2005), r = 3, s = 2.
    x = [1.0, 4.0, 2.0, 8.0, 0.5]
    sbp = [[1, 1, 1, -1, -1], [1, -1, -1, 0, 0], [0, 1, -1, 0, 0], [0, 0, 0, 1, -1]]
    g_num = (1.0 * 4.0 * 2.0) ** (1 / 3)
    g_den = math.sqrt(8.0 * 0.5)
    expected_b1 = math.sqrt(3 * 2 / 5) * math.log(g_num / g_den)
    expected_b2 = math.sqrt(1 * 2 / 3) * math.log(1.0 / math.sqrt(4.0 * 2.0))
    got = core.balances(x, sbp)
    assert got[0] == pytest.approx(expected_b1, rel=1e-12)
    assert got[1] == pytest.approx(expected_b2, rel=1e-12)
    assert got[2] == pytest.approx(math.sqrt(1 / 2) * math.log(4.0 / 2.0), rel=1e-12)
    assert got[3] == pytest.approx(math.sqrt(1 / 2) * math.log(8.0 / 0.5), rel=1e-12)


def test_first_default_ilr_coordinate_is_balance_of_part_one_against_the_rest():
    # Source: balance formula (Egozcue & Pawlowsky-Glahn 2005) with r = 1, s = D - 1,
    # which is the first row of the documented default basis.
    x = [3.0, 1.0, 2.0, 6.0]
    g_rest = (1.0 * 2.0 * 6.0) ** (1 / 3)
    assert core.ilr(x)[0] == pytest.approx(math.sqrt(3 / 4) * math.log(3.0 / g_rest), rel=1e-12)
    # Last coordinate: part D-1 against part D.
    assert core.ilr(x)[-1] == pytest.approx(math.sqrt(1 / 2) * math.log(2.0 / 6.0), rel=1e-12)


def test_clr_and_alr_worked_by_hand():
    # Source: definitions of clr and alr (Aitchison 1986); numbers invented.
    x = [1.0, 2.0, 4.0]
    g = (1.0 * 2.0 * 4.0) ** (1 / 3)  # = 2
    np.testing.assert_allclose(
        core.clr(x), [math.log(1 / g), math.log(2 / g), math.log(4 / g)], **TOL
    )
    np.testing.assert_allclose(core.alr(x), [math.log(1 / 4), math.log(2 / 4)], **TOL)
    np.testing.assert_allclose(
        core.alr(x, denominator=0), [math.log(2 / 1), math.log(4 / 1)], **TOL
    )
    np.testing.assert_allclose(core.closure(x, 100), [100 / 7, 200 / 7, 400 / 7], **TOL)
    np.testing.assert_allclose(core.perturb(x, [4.0, 2.0, 1.0]), [1 / 3, 1 / 3, 1 / 3], **TOL)
    np.testing.assert_allclose(core.power(x, 2), [1 / 21, 4 / 21, 16 / 21], **TOL)


# --------------------------------------------------------------------------------------
# Multiplicative replacement worked by hand (Martin-Fernandez, Barcelo-Vidal &
# Pawlowsky-Glahn 2003): x_ij = delta_ij if zero, else x_ij (1 - sum_k delta_ik / c).


def test_multiplicative_replacement_worked_by_hand():
    # Source: Martin-Fernandez et al. (2003) formula; closed data, c = 1, invented numbers.
    X = np.array([[0.6, 0.3, 0.0, 0.1], [0.5, 0.0, 0.5, 0.0]])
    dl = [0.01, 0.02, 0.02, 0.04]
    # Row 1: delta_3 = 0.65 * 0.02 = 0.013; factor 1 - 0.013 = 0.987.
    # Row 2: delta_2 = 0.65 * 0.02 = 0.013, delta_4 = 0.65 * 0.04 = 0.026;
    #        factor 1 - 0.039 = 0.961.
    expected = np.array(
        [
            [0.6 * 0.987, 0.3 * 0.987, 0.013, 0.1 * 0.987],
            [0.5 * 0.961, 0.013, 0.5 * 0.961, 0.026],
        ]
    )
    got = core.multiplicative_replacement(X, dl)
    np.testing.assert_allclose(got, expected, **TOL)
    assert core.DEFAULT_FRACTION == 0.65  # value proposed in the cited paper (from memory)


def test_multiplicative_replacement_in_percent_with_explicit_total():
    # Source: Martin-Fernandez et al. (2003) formula with closure constant c = 100.
    X = pd.DataFrame(
        {"Fe": [70.0, 40.0], "Mn": [0.0, 35.0], "Zn": [30.0, 25.0]}, index=["core7", "core9"]
    )
    got = core.multiplicative_replacement(X, {"Mn": 0.5, "Fe": 1.0, "Zn": 1.0}, 0.5, total=100)
    # Row core7: delta = 0.5 * 0.5 = 0.25; factor 1 - 0.25 / 100 = 0.9975.
    expected = pd.DataFrame(
        {"Fe": [70 * 0.9975, 40.0], "Mn": [0.25, 35.0], "Zn": [30 * 0.9975, 25.0]},
        index=["core7", "core9"],
    )
    pd.testing.assert_frame_equal(got, expected, rtol=1e-12)


def test_multiplicative_replacement_uses_the_given_total_not_the_row_sum():
    # Martin-Fernandez et al. (2003) formula with c = 100 on rows whose observed parts
    # sum to less (the other 10 wt% are parts not in the table): the factor is
    # 1 - delta / c with c = 100, not 1 - delta / 90. Worked by hand.
    X = pd.DataFrame({"Fe": [60.0, 55.0], "Mn": [0.0, 5.0], "Zn": [30.0, 0.0]}, index=["a", "b"])
    got = core.multiplicative_replacement(X, {"Mn": 0.5, "Fe": 1.0, "Zn": 2.0}, 0.5, total=100)
    # row a: delta = 0.25, factor 1 - 0.25/100 = 0.9975; row b: delta = 1.0, factor 0.99
    expected = pd.DataFrame(
        {"Fe": [60 * 0.9975, 55 * 0.99], "Mn": [0.25, 5 * 0.99], "Zn": [30 * 0.9975, 1.0]},
        index=["a", "b"],
    )
    pd.testing.assert_frame_equal(got, expected, rtol=1e-12)
    # without total= each row keeps its own observed sum (90 and 60) instead
    own = core.multiplicative_replacement(X, {"Mn": 0.5, "Fe": 1.0, "Zn": 2.0}, 0.5)
    np.testing.assert_allclose(own.sum(axis=1), [90.0, 60.0], rtol=1e-12)


def test_multiplicative_replacement_with_below_mask():
    # Martin-Fernandez, Barcelo-Vidal & Pawlowsky-Glahn (2003), worked by hand: cells
    # flagged "below" are replaced even when they hold a number (here a reported value
    # under the limit); observed total c = 0.7 + 0.2 = 0.9 by default, delta = 0.65 * 0.01.
    X = np.array([[0.7, 0.2, 0.001]])
    below = np.array([[False, False, True]])
    got = core.multiplicative_replacement(X, 0.01, below=below)
    factor = 1 - 0.0065 / 0.9
    np.testing.assert_allclose(got, [[0.7 * factor, 0.2 * factor, 0.0065]], **TOL)


# --------------------------------------------------------------------------------------
# Form of the results: DataFrame in -> DataFrame out; (D,) in -> 1-D out.

PARTS = ["sand", "silt", "clay", "gravel"]
INDEX = pd.Index(["pit_a", "pit_b", "pit_c"], name="site")


@pytest.fixture
def df():
    return pd.DataFrame(
        [[40.0, 30.0, 20.0, 10.0], [25.0, 25.0, 45.0, 5.0], [10.0, 60.0, 20.0, 10.0]],
        index=INDEX,
        columns=PARTS,
    )


CLR_NAMES = [f"clr({p})" for p in PARTS]

FRAME_CASES = {
    "closure": (lambda X: core.closure(X), PARTS),
    "perturb": (lambda X: core.perturb(X, [1, 2, 3, 4]), PARTS),
    "power": (lambda X: core.power(X, 0.5), PARTS),
    "clr": (core.clr, CLR_NAMES),
    "clr_inv": (lambda X: core.clr_inv(core.clr(X)), PARTS),
    "alr": (core.alr, ["ln(sand/gravel)", "ln(silt/gravel)", "ln(clay/gravel)"]),
    "alr_denominator_name": (
        lambda X: core.alr(X, denominator="silt"),
        ["ln(sand/silt)", "ln(clay/silt)", "ln(gravel/silt)"],
    ),
    "alr_inv": (lambda X: core.alr_inv(core.alr(X), parts=PARTS), PARTS),
    "ilr": (core.ilr, ["ilr1", "ilr2", "ilr3"]),
    "ilr_named": (lambda X: core.ilr(X, names=["u", "v", "w"]), ["u", "v", "w"]),
    "ilr_inv": (lambda X: core.ilr_inv(core.ilr(X), parts=PARTS), PARTS),
    "balances": (
        lambda X: core.balances(X, SBP4),
        ["sand,silt | clay,gravel", "sand | silt", "clay | gravel"],
    ),
    "subcomposition": (lambda X: core.subcomposition(X, ["clay", "sand"]), ["clay", "sand"]),
    "subcomposition_positions": (lambda X: core.subcomposition(X, [2, 0]), ["clay", "sand"]),
    "amalgamate": (
        lambda X: core.amalgamate(X, {"fines": ["silt", "clay"]}),
        ["fines", "sand", "gravel"],
    ),
    "amalgamate_positions": (
        lambda X: core.amalgamate(X, {"fines": [1, 2]}),
        ["fines", "sand", "gravel"],
    ),
    "multiplicative_replacement": (lambda X: core.multiplicative_replacement(X, 1.0), PARTS),
}


@pytest.mark.parametrize("func, columns", FRAME_CASES.values(), ids=FRAME_CASES.keys())
def test_dataframe_in_dataframe_out(df, func, columns):
    out = func(df)
    assert isinstance(out, pd.DataFrame)
    pd.testing.assert_index_equal(out.index, df.index)
    assert list(out.columns) == columns


#: Cases that select parts by name, which an unlabelled array does not have.
BY_NAME = {"alr_denominator_name", "subcomposition", "amalgamate"}
POSITIONAL_CASES = {k: v for k, v in FRAME_CASES.items() if k not in BY_NAME}


@pytest.mark.parametrize("func, columns", POSITIONAL_CASES.values(), ids=POSITIONAL_CASES.keys())
def test_one_composition_in_one_dimension_out(df, func, columns):
    x = df.to_numpy()[0]
    out = func(x)
    assert isinstance(out, np.ndarray)
    assert out.shape == (len(columns),)
    # The same numbers as the first row of the DataFrame result.
    np.testing.assert_allclose(out, func(df).to_numpy()[0], **TOL)


@pytest.mark.parametrize("func, columns", FRAME_CASES.values(), ids=FRAME_CASES.keys())
def test_one_labelled_composition_in_series_out(df, func, columns):
    out = func(df.iloc[0])
    assert isinstance(out, pd.Series)
    assert list(out.index) == columns


def test_row_values_come_back_as_series_with_the_index(df):
    for out in (
        core.aitchison_norm(df),
        core.aitchison_distance(df, df.iloc[::-1].to_numpy()),
        core.aitchison_inner(df, df.iloc[0]),
    ):
        assert isinstance(out, pd.Series)
        pd.testing.assert_index_equal(out.index, df.index)
    x, y = df.to_numpy()[0], df.to_numpy()[1]
    for value in (
        core.aitchison_norm(x),
        core.aitchison_distance(x, y),
        core.aitchison_inner(x, y),
    ):
        assert isinstance(value, float)


def test_one_row_frame_against_many_rows_broadcasts(df):
    # A one-row table is applied to every row of the other argument.
    one = df.iloc[:1]
    many = df.to_numpy()
    d = core.aitchison_distance(one, many)
    np.testing.assert_allclose(
        d, np.linalg.norm(clr_by_gmean(many) - clr_by_gmean(many[:1]), axis=1)
    )
    p = core.perturb(one, many)
    np.testing.assert_allclose(p, (many * many[:1]) / (many * many[:1]).sum(axis=1, keepdims=True))
    np.testing.assert_allclose(
        core.aitchison_inner(one, many), (clr_by_gmean(many) * clr_by_gmean(many[:1])).sum(axis=1)
    )


def test_statistics_are_labelled_by_part(df):
    centre = core.center(df)
    assert isinstance(centre, pd.Series)
    assert list(centre.index) == PARTS
    T = core.variation_matrix(df)
    assert list(T.index) == PARTS and list(T.columns) == PARTS
    C = core.clr_covariance(df)
    assert list(C.index) == CLR_NAMES and list(C.columns) == CLR_NAMES
    assert isinstance(core.total_variance(df), float)
    # Unlabelled input gives plain arrays.
    assert isinstance(core.variation_matrix(df.to_numpy()), np.ndarray)
    assert isinstance(core.center(df.to_numpy()), np.ndarray)


def test_balances_match_sbp_frame_columns_by_name(df):
    # An SBP given as a DataFrame is matched to the data by part name, not position.
    sbp = pd.DataFrame(SBP4, columns=PARTS)
    shuffled = sbp[["gravel", "clay", "sand", "silt"]]
    pd.testing.assert_frame_equal(core.balances(df, shuffled), core.balances(df, sbp))


def test_amalgamation_sums_in_the_input_unit(df):
    out = core.amalgamate(df, {"fines": ["silt", "clay"], "coarse": ["sand", "gravel"]})
    np.testing.assert_allclose(out["fines"], df["silt"] + df["clay"])
    np.testing.assert_allclose(out["coarse"], df["sand"] + df["gravel"])
    assert list(out.columns) == ["fines", "coarse"]
    out = core.amalgamate(df, {"fines": ["silt", "clay"]}, keep_rest=False)
    assert list(out.columns) == ["fines"]


@PROPERTY_SETTINGS
@given(positive_compositions(), st.floats(0.5, 1e6))
def test_closure_rows_sum_to_total(X, total):
    out = core.closure(X, total)
    np.testing.assert_allclose(out.sum(axis=1), total, rtol=1e-12)
    np.testing.assert_allclose(out / X, (out / X)[:, :1] * np.ones_like(X), rtol=1e-12)


# --------------------------------------------------------------------------------------
# Closure at the edges of the float range, against exact rational arithmetic
# (Python's fractions module on the very same floats).


def _exact_closure(row, total=1) -> list[float]:
    values = [v if isinstance(v, Fraction) else Fraction(float(v)) for v in row]
    whole = sum(values)
    return [float(total * v / whole) for v in values]


BIG = np.finfo(float).max


@pytest.mark.parametrize(
    "row",
    [
        [BIG, BIG / 2, BIG / 4],  # the plain sum overflows to inf
        [BIG, BIG, 1e300],
        [1e308, 1e308, 1e308, 1e308],
        [1e-320, 3e-320, 5e-324],  # subnormal parts
        [2.0, 1.0, 1.0],  # an ordinary row among them
    ],
)
def test_closure_near_the_float_limits_matches_exact_arithmetic(row):
    X = np.array([row, [2.0, 1.0, 1.0, 4.0][: len(row)]])
    got = core.closure(X)
    np.testing.assert_allclose(got[0], _exact_closure(row), rtol=1e-14)
    np.testing.assert_allclose(got[1], _exact_closure(X[1]), rtol=1e-14)
    np.testing.assert_allclose(core.closure(X, 100)[0], _exact_closure(row, 100), rtol=1e-14)
    sub = core.subcomposition(X, [0, 1])
    np.testing.assert_allclose(sub[0], _exact_closure(row[:2]), rtol=1e-14)
    # the ternary projection closes the same way (a point of the triangle, not NaN)
    if len(row) == 3:
        from compwidgets.core import ternary

        x, y = ternary.ternary_to_xy(X[:1])
        assert np.isfinite(x).all() and np.isfinite(y).all()


def test_perturbation_beyond_the_float_range_matches_exact_arithmetic():
    # Products of the parts overflow (1e300 * 1e300) or underflow; the closed result
    # must still be the exact one (fractions module on the same floats).
    X = np.array([[1e300, 1e300, 1.0], [1e-300, 1.0, 1e-200]])
    Y = np.array([[1e300, 1.0, 2.0], [1e-300, 1e-100, 1.0]])
    got = core.perturb(X, Y)
    for x, y, g in zip(X, Y, got, strict=True):
        exact = _exact_closure([Fraction(a) * Fraction(b) for a, b in zip(x, y, strict=True)])
        np.testing.assert_allclose(g, exact, rtol=1e-10, atol=0)
