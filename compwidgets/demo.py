"""Invented demo data: a stream-sediment survey that never took place.

:func:`stream_sediments` returns a laboratory-style table (text tokens for
below-detection and not-analysed cells, as a real results sheet would carry);
:func:`stream_sediments_clean` returns the same numbers as an all-numeric frame
(below detection -> 0.0, not analysed -> NaN) for benchmarks that skip parsing.

Every catchment, bedrock unit, grid and value here is invented. The numbers
are drawn from a statistical model whose averages were chosen to *look*
geologically plausible; they are not measurements, and nothing derived from
them says anything about a real place, an ore grade or a contamination level.
Real decisions rest on accredited laboratory results and practice.

Model
-----
For each row a catchment is drawn, then a composition from an additive
logistic-normal distribution: the log-parts are normal, ``log x = log m_c + L f
+ e`` (catchment mean ``m_c``, a few shared factors ``f`` with loadings ``L``
giving correlated noise, and independent noise ``e``), and the composition is
closed. This is exactly an alr-normal law with mean
``alr(m_c) = log(m_c[:-1] / m_c[-1])`` and covariance ``H S H^T``, where ``S`` is
the log-space covariance and ``H = [I | -1]`` the alr contrast. The closed
composition is scaled to an analytical total (mostly 98.5-101.5 wt%, about
1 % deliberately outside), majors are rounded to 0.01 wt% and traces to 1 ppm.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import special

__all__ = [
    "BEDROCKS",
    "CATCHMENTS",
    "DEMO_NOTICE",
    "DETECTION_LIMITS",
    "MAJORS",
    "TRACES",
    "stream_sediments",
    "stream_sediments_clean",
]

DEMO_NOTICE: str = (
    "Invented data for demonstration; not a real survey. Catchments, bedrock units, "
    "coordinates and analyses are simulated by compwidgets.demo and must not be used for "
    "any geological, ore-grade or environmental decision."
)

MAJORS: tuple[str, ...] = (
    "SiO2",
    "TiO2",
    "Al2O3",
    "Fe2O3",
    "MnO",
    "MgO",
    "CaO",
    "Na2O",
    "K2O",
    "P2O5",
    "LOI",
)
TRACES: tuple[str, ...] = ("Cr", "Ni", "Zr", "Ba", "Cu", "Zn")
_PARTS = MAJORS + TRACES
_N_MAJ = len(MAJORS)

#: Detection limit per part (name without unit -> limit in the part's own unit:
#: wt% for majors, ppm for traces). Trace cells below their limit are written
#: ``"<limit"`` (e.g. ``"<2"`` for Cu). The majors' limits are listed for
#: completeness: the model keeps majors well above them (a major that would round
#: below its limit is reported at the limit; none did in 10**6 rows for two seeds).
DETECTION_LIMITS: dict[str, float] = {
    **dict.fromkeys(MAJORS, 0.01),
    "Cr": 5.0,
    "Ni": 3.0,
    "Zr": 5.0,
    "Ba": 10.0,
    "Cu": 2.0,
    "Zn": 5.0,
}

#: Invented catchments, in category order, and the invented bedrock each drains.
CATCHMENTS: tuple[str, ...] = (
    "Tormaven Burn",
    "Brackwyn Water",
    "Ellerspoon Gill",
    "Corvastle Beck",
    "Minnowdale Brook",
)
BEDROCKS: tuple[str, ...] = (
    "Tormaven granite",
    "Brackwyn plateau basalt",
    "Ellerspoon shale-limestone",
    "Corvastle serpentinite",
    "Minnowdale sandstone",
)
_WEIGHTS = np.array([0.27, 0.24, 0.21, 0.15, 0.13])

# Catchment mean compositions (rows in the order of CATCHMENTS), chosen to resemble,
# loosely, sediment shed from each rock type. Majors in wt%:
# fmt: off
_MAJOR_MEANS = np.array([
    # SiO2 TiO2  Al2O3 Fe2O3 MnO   MgO   CaO   Na2O  K2O   P2O5  LOI
    [70.0, 0.35, 14.0, 3.0,  0.06, 0.7,  1.2,  2.8,  4.6,  0.12, 2.5],   # granite
    [48.0, 2.2,  14.5, 12.5, 0.18, 6.5,  9.5,  2.6,  0.8,  0.30, 2.5],   # basalt
    [35.0, 0.45, 8.0,  3.5,  0.08, 2.5,  25.0, 0.4,  1.8,  0.12, 23.0],  # shale-limestone
    [41.0, 0.05, 2.0,  8.5,  0.12, 36.0, 1.0,  0.25, 0.10, 0.04, 11.0],  # serpentinite
    [85.0, 0.30, 6.0,  2.0,  0.04, 0.5,  0.6,  0.6,  1.5,  0.06, 2.0],   # sandstone
])
# Traces in ppm:
_TRACE_MEANS = np.array([
    # Cr   Ni    Zr   Ba   Cu  Zn
    [15,   6,    320, 700, 6,  55],
    [250,  120,  160, 250, 90, 110],
    [50,   30,   110, 300, 20, 70],
    [2500, 2000, 10,  15,  15, 55],
    [30,   10,   450, 300, 4,  25],
], dtype=float)
# fmt: on
_MEANS = np.hstack([_MAJOR_MEANS, _TRACE_MEANS])
_TO_WT = np.array([1.0] * _N_MAJ + [1e-4] * len(TRACES))  # ppm -> wt%

# Factor loadings in natural-log units (rows: factors, columns: _PARTS).
_LOADINGS = np.array(
    [
        # mafic input: Fe-Mg-Ti-Cr-Ni-Cu-Zn up, Si-K-Zr down
        [-0.10, 0.25, 0.0, 0.25, 0.20, 0.30, 0.15, -0.05, -0.20, 0.10, 0.0]
        + [0.35, 0.35, -0.15, -0.10, 0.25, 0.20],
        # carbonate and organic matter
        [-0.10, -0.05, -0.05, -0.05, 0.10, 0.10, 0.40, -0.05, -0.05, 0.0, 0.30]
        + [-0.05, -0.05, -0.05, 0.0, 0.05, 0.05],
        # heavy minerals (zircon, rutile, chromite), grows downstream
        [0.05, 0.25, -0.10, 0.10, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0]
        + [0.15, 0.0, 0.45, 0.0, 0.0, 0.0],
        # clay-rich fines
        [-0.10, 0.05, 0.20, 0.10, 0.05, 0.05, 0.0, 0.0, 0.15, 0.05, 0.10]
        + [0.05, 0.05, -0.15, 0.10, 0.10, 0.10],
    ]
)
_UNIQUE_SD = np.array(
    [0.04, 0.08, 0.06, 0.08, 0.15, 0.08, 0.10, 0.12, 0.10, 0.15, 0.08]
    + [0.20, 0.20, 0.20, 0.15, 0.25, 0.20]
)
_FACTOR_SCALE = np.array([1.0, 1.0, 1.0, 0.8, 1.0])  # per catchment
_DOWNSTREAM_TREND = 0.8  # heavy-mineral factor shift across the length of a valley

# Invented local grid (metres from an arbitrary origin): centre, half-length,
# half-width at the mouth, azimuth of the valley axis (radians).
_GEOMETRY = np.array(
    [
        [8_000.0, 22_000.0, 5_500.0, 1_800.0, 0.6],
        [24_000.0, 24_000.0, 6_000.0, 2_200.0, -0.3],
        [20_000.0, 9_000.0, 6_500.0, 2_500.0, 0.1],
        [34_000.0, 12_000.0, 4_500.0, 1_200.0, 1.2],
        [7_000.0, 7_000.0, 5_000.0, 2_000.0, -0.8],
    ]
)

# Rates of the deliberate irregularities.
_P_TOTAL_OFF = 0.01  # analytical total in 96-97.5 or 102-103 wt%
_P_CONTAMINATED = 0.003  # very high Cu and Zn (e.g. scrap metal in the stream bed)
_P_MISWEIGHED = 0.002  # total 86-92 or 108-114 wt%
_P_BLANK = 0.004  # trace cell "" (not analysed)
_P_DASH = 0.002  # trace cell "-" (not analysed)
_P_BDL_WORD = 0.05  # share of below-detection cells written "bdl"
_P_ND_WORD = 0.05  # share of below-detection cells written "n.d."

_TOTAL_SD = 0.5  # wt%, ordinary samples, truncated to +-2.6 sd (98.7-101.3)
_TOTAL_CUT = 2.6

# Codes of the trace-cell status array.
_NUMERIC, _LT, _BDL, _ND, _BLANK, _DASH = range(6)


def _columns() -> list[str]:
    return [f"{p} (wt%)" for p in MAJORS] + [f"{p} (ppm)" for p in TRACES]


def _sample_ids(n: int) -> np.ndarray:
    """``SS-000001`` ... built digit by digit as bytes (no loop over rows)."""
    width = max(6, len(str(n)))
    numbers = np.arange(1, n + 1, dtype=np.int64)
    powers = 10 ** np.arange(width - 1, -1, -1, dtype=np.int64)
    digits = (numbers[:, None] // powers) % 10 + ord("0")
    raw = np.empty((n, width + 3), dtype=np.uint8)
    raw[:, :3] = np.frombuffer(b"SS-", dtype=np.uint8)
    raw[:, 3:] = digits
    return raw.view(f"S{width + 3}").ravel().astype(str)


def _simulate(n: int, seed: int) -> dict[str, np.ndarray]:
    """Draw every random quantity in a fixed order; return numbers and cell status."""
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)):
        raise TypeError(f"n must be an integer, got {n!r}")
    if n < 1:
        raise ValueError(f"n must be at least 1, got {n}")
    n = int(n)
    rng = np.random.default_rng(seed)
    n_parts = len(_PARTS)

    code = rng.choice(len(CATCHMENTS), size=n, p=_WEIGHTS)

    # Position: along-valley coordinate u in [0, 1] (0 = head, 1 = mouth); the
    # valley widens towards the mouth.
    geom = _GEOMETRY[code]
    u = rng.random(n)
    along = (u - 0.5) * 2.0 * geom[:, 2]
    across = rng.standard_normal(n) * geom[:, 3] * (0.3 + 0.7 * u) / 2.0
    cos, sin = np.cos(geom[:, 4]), np.sin(geom[:, 4])
    easting = np.round(geom[:, 0] + along * cos - across * sin)
    northing = np.round(geom[:, 1] + along * sin + across * cos)

    # Logistic-normal composition (log-parts normal, then closed).
    factors = rng.standard_normal((n, _LOADINGS.shape[0]))
    factors *= _FACTOR_SCALE[code][:, None]
    factors[:, 2] += _DOWNSTREAM_TREND * (u - 0.5)
    log_x = rng.standard_normal((n, n_parts))
    log_x *= _UNIQUE_SD
    log_x += np.take(np.log(_MEANS * _TO_WT), code, axis=0)
    log_x += factors @ _LOADINGS
    comp = np.exp(log_x, out=log_x)
    comp *= 100.0 / comp.sum(axis=1, keepdims=True)

    # Irregular rows: one uniform draw decides the kind, so the kinds never overlap.
    kind = rng.random(n)
    off = kind < _P_TOTAL_OFF
    contaminated = (kind >= _P_TOTAL_OFF) & (kind < _P_TOTAL_OFF + _P_CONTAMINATED)
    misweighed = (kind >= _P_TOTAL_OFF + _P_CONTAMINATED) & (
        kind < _P_TOTAL_OFF + _P_CONTAMINATED + _P_MISWEIGHED
    )
    i_cu, i_zn = _PARTS.index("Cu"), _PARTS.index("Zn")
    cu_add = rng.uniform(800.0, 4000.0, n) * 1e-4
    zn_add = rng.uniform(500.0, 3000.0, n) * 1e-4
    comp[contaminated, i_cu] += cu_add[contaminated]
    comp[contaminated, i_zn] += zn_add[contaminated]
    comp[contaminated] *= 100.0 / comp[contaminated].sum(axis=1, keepdims=True)

    # Analytical total: truncated normal for ordinary rows (inverse-CDF draw).
    lo, hi = special.ndtr(-_TOTAL_CUT), special.ndtr(_TOTAL_CUT)
    total = 100.0 + _TOTAL_SD * special.ndtri(rng.uniform(lo, hi, n))
    low_side = rng.random(n) < 0.5
    total_off = np.where(low_side, rng.uniform(96.0, 97.5, n), rng.uniform(102.0, 103.0, n))
    total_mis = np.where(low_side, rng.uniform(86.0, 92.0, n), rng.uniform(108.0, 114.0, n))
    total = np.where(off, total_off, total)
    total = np.where(misweighed, total_mis, total)
    comp *= (total / 100.0)[:, None]

    # Report: majors to 0.01 wt%, traces to 1 ppm; majors never below their limit.
    values = np.empty_like(comp)
    values[:, :_N_MAJ] = np.round(comp[:, :_N_MAJ], 2)
    values[:, _N_MAJ:] = np.round(comp[:, _N_MAJ:] / _TO_WT[_N_MAJ:])
    major_dl = np.array([DETECTION_LIMITS[p] for p in MAJORS])
    np.maximum(values[:, :_N_MAJ], major_dl, out=values[:, :_N_MAJ])

    # Trace cell status: below detection (three spellings) or not analysed.
    trace_dl = np.array([DETECTION_LIMITS[p] for p in TRACES])
    traces = values[:, _N_MAJ:]
    status = np.full(traces.shape, _NUMERIC, dtype=np.int8)
    spelling = rng.random(traces.shape)
    below = traces < trace_dl
    status[below] = _LT
    status[below & (spelling < _P_BDL_WORD)] = _BDL
    status[below & (spelling >= 1.0 - _P_ND_WORD)] = _ND
    missing = rng.random(traces.shape)
    status[missing < _P_BLANK] = _BLANK
    status[(missing >= _P_BLANK) & (missing < _P_BLANK + _P_DASH)] = _DASH

    return {
        "code": code,
        "easting": easting,
        "northing": northing,
        "values": values,
        "status": status,
    }


def _frame(sim: dict[str, np.ndarray], parts: dict[str, np.ndarray]) -> pd.DataFrame:
    n = sim["code"].shape[0]
    data = {
        "sample_id": _sample_ids(n),
        "easting (m)": sim["easting"],
        "northing (m)": sim["northing"],
        "catchment": pd.Categorical.from_codes(sim["code"], categories=list(CATCHMENTS)),
        "bedrock": pd.Categorical.from_codes(sim["code"], categories=list(BEDROCKS)),
        **parts,
    }
    df = pd.DataFrame(data)
    df.attrs["source"] = DEMO_NOTICE
    # the limits travel with the table: read_composition uses them when none are passed
    df.attrs["detection_limits"] = dict(DETECTION_LIMITS)
    return df


def stream_sediments(n: int = 2000, seed: int = 7) -> pd.DataFrame:
    """An invented stream-sediment survey, laid out like a laboratory results sheet.

    **Invented data** (see :data:`DEMO_NOTICE`): five fictional catchments over
    fictional bedrock (a granite upland, a plateau basalt, a shale-limestone
    valley, a serpentinite ridge, a sandstone vale); not a real survey.

    Parameters
    ----------
    n : int
        Number of samples (rows); 1,000,000 is fine for benchmarks.
    seed : int
        Seed for :func:`numpy.random.default_rng`; same ``(n, seed)`` gives an
        identical frame.

    Returns
    -------
    pandas.DataFrame
        Columns ``sample_id`` (``"SS-000001"`` ..., unique), ``easting (m)`` and
        ``northing (m)`` (metres, invented local grid), ``catchment`` and ``bedrock``
        (categorical), majors ``"SiO2 (wt%)"`` ... ``"LOI (wt%)"`` (float64) and
        traces ``"Cr (ppm)"`` ... ``"Zn (ppm)"`` (object: floats mixed with text).
        Trace cells below detection read ``"<x"`` with ``x`` from
        :data:`DETECTION_LIMITS`, or ``"bdl"`` / ``"n.d."``; not-analysed cells
        read ``""`` or ``"-"``. About 1 % of analytical totals lie deliberately
        outside 98.5-101.5 wt%, and about 0.5 % of rows are outliers (very high
        Cu and Zn, or a mis-weighed sample with a total near 90 or 110 wt%).
        ``attrs["source"]`` holds :data:`DEMO_NOTICE` and
        ``attrs["detection_limits"]`` a copy of :data:`DETECTION_LIMITS`, which
        :func:`compwidgets.read_composition` uses when no limits are passed, so
        that ``cw.explore(cw.demo.stream_sediments())`` reads the ``"bdl"`` and
        ``"n.d."`` cells. ``sample_id`` becomes the row labels there.
    """
    sim = _simulate(n, seed)
    columns = _columns()
    values, status = sim["values"], sim["status"]
    parts: dict[str, np.ndarray] = {columns[j]: values[:, j].copy() for j in range(_N_MAJ)}
    for k, part in enumerate(TRACES):
        cells = values[:, _N_MAJ + k].astype(object)
        col_status = status[:, k]
        tokens = {
            _LT: f"<{DETECTION_LIMITS[part]:g}",
            _BDL: "bdl",
            _ND: "n.d.",
            _BLANK: "",
            _DASH: "-",
        }
        for token_code, token in tokens.items():
            cells[col_status == token_code] = token
        parts[columns[_N_MAJ + k]] = cells
    return _frame(sim, parts)


def stream_sediments_clean(n: int = 2000, seed: int = 7) -> pd.DataFrame:
    """The all-numeric twin of :func:`stream_sediments` (**invented data**).

    Same rows and numbers as ``stream_sediments(n, seed)``, with every part
    column float64: below-detection cells (``"<x"``, ``"bdl"``, ``"n.d."``) are
    0.0 and not-analysed cells (``""``, ``"-"``) are NaN. ``attrs`` as for
    :func:`stream_sediments`.
    """
    sim = _simulate(n, seed)
    columns = _columns()
    values, status = sim["values"], sim["status"]
    parts: dict[str, np.ndarray] = {columns[j]: values[:, j].copy() for j in range(_N_MAJ)}
    for k in range(len(TRACES)):
        cells = values[:, _N_MAJ + k].copy()
        col_status = status[:, k]
        cells[(col_status == _LT) | (col_status == _BDL) | (col_status == _ND)] = 0.0
        cells[(col_status == _BLANK) | (col_status == _DASH)] = np.nan
        parts[columns[_N_MAJ + k]] = cells
    return _frame(sim, parts)
