"""The options of :func:`read_composition`, checked once before any file is read."""

from __future__ import annotations

import math
from collections.abc import Hashable, Iterable, Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..core import CompositionError
from ..units import canonical_unit

#: Text read as "below the detection limit" (case-insensitive, stripped).
#: "n.d." and "nd" are read as "not detected" (not as "no data").
DEFAULT_BELOW_TOKENS = ("bdl", "b.d.l.", "<dl", "<lod", "nd", "n.d.", "not detected")
#: Text read as a missing value (case-insensitive, stripped).
DEFAULT_MISSING_TOKENS = ("", "-", "--", "na", "n.a.", "nan", "null", "none", "not analysed")
#: Replacement strategies for values below detection.
REPLACEMENTS = ("multiplicative", "simple", "none")
#: Thousands separators that can be read (``thousands=``).
THOUSANDS_SEPARATORS = (",", ".", " ", "'", "\u00a0", "\u202f")
#: Default largest difference between a stated total and the sum of the parts, in wt%.
DEFAULT_TOTAL_TOLERANCE = 0.5


@dataclass(frozen=True)
class Tokens:
    """Below-detection and missing-value tokens, lower-cased, and the numeric ones."""

    below: frozenset
    missing: frozenset
    below_numbers: tuple
    missing_numbers: tuple
    below_given: tuple
    missing_given: tuple


@dataclass(frozen=True)
class Options:
    """Every option of :func:`read_composition`, checked."""

    parts: list | None
    units: Mapping | None
    default_unit: str
    default_canonical: str
    common_unit: str | None
    convert: Mapping | None
    detection_limits: object
    replacement: str
    fraction: float
    negative_is_below_detection: bool
    total_window: tuple[float, float]
    check_total: bool
    total_tolerance: float | None
    decimal: str
    thousands: str | None
    sheet_name: int | str
    tokens: Tokens
    index_col: Hashable | None | bool
    sep: str | None


def _token_set(tokens, name: str) -> tuple[tuple[str, ...], frozenset]:
    if isinstance(tokens, str):
        tokens = (tokens,)
    try:
        given = tuple(tokens)
    except TypeError:
        raise CompositionError(f"{name} must be a list of strings, got {tokens!r}") from None
    bad = [t for t in given if not isinstance(t, str)]
    if bad:
        raise CompositionError(f"{name} must hold strings; got {bad[0]!r}")
    return given, frozenset(t.strip().lower() for t in given)


def _numeric_tokens(tokens: frozenset) -> tuple[float, ...]:
    """Tokens that are numbers (e.g. '-999'): they match cells by value."""
    values = pd.to_numeric(pd.Series(sorted(tokens), dtype=object), errors="coerce")
    values = values.to_numpy(dtype=float)
    return tuple(float(v) for v in values[np.isfinite(values)])


def make_tokens(below_tokens, missing_tokens) -> Tokens:
    below_given, below = _token_set(below_tokens, "below_tokens")
    missing_given, missing = _token_set(missing_tokens, "missing_tokens")
    both = sorted(below & missing)
    if both:
        raise CompositionError(
            f"token(s) {both!r} are in both below_tokens and missing_tokens; "
            "each token must mean one thing"
        )
    return Tokens(
        below,
        missing,
        _numeric_tokens(below),
        _numeric_tokens(missing),
        below_given,
        missing_given,
    )


def _check_fraction(fraction) -> float:
    if isinstance(fraction, bool) or not isinstance(fraction, (int, float, np.number)):
        raise CompositionError(
            f"fraction must be a number strictly between 0 and 1, got {fraction!r}"
        )
    if not 0 < float(fraction) < 1:
        raise CompositionError(f"fraction must lie strictly between 0 and 1, got {fraction!r}")
    return float(fraction)


def _check_window(total_window) -> tuple[float, float]:
    try:
        lo, hi = (float(x) for x in total_window)
    except (TypeError, ValueError):
        raise CompositionError(
            f"total_window must be two numbers (low, high) in wt%, got {total_window!r}"
        ) from None
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo >= hi:
        raise CompositionError(
            f"total_window must satisfy low < high (finite, in wt%), got {total_window!r}"
        )
    return lo, hi


def _check_tolerance(total_tolerance) -> float | None:
    if total_tolerance is None:
        return None
    ok = not isinstance(total_tolerance, bool) and isinstance(
        total_tolerance, (int, float, np.number)
    )
    if not ok or not (math.isfinite(float(total_tolerance)) and float(total_tolerance) >= 0):
        raise CompositionError(
            "total_tolerance must be a number >= 0 (wt%, absolute) or None (no comparison), "
            f"got {total_tolerance!r}"
        )
    return float(total_tolerance)


def _check_index_col(index_col):
    if index_col is True:
        raise CompositionError(
            "index_col=True is not an option: name the column (or its position), leave it "
            "None to detect a sample-id column, or pass False for no index column"
        )
    if index_col is None or index_col is False:
        return index_col
    if isinstance(index_col, (list, tuple)):
        raise CompositionError(
            f"index_col must name one column, got {index_col!r}; several label columns "
            "can be joined into one before reading"
        )
    return index_col


def _check_parts(parts) -> list | None:
    if parts is None:
        return None
    if isinstance(parts, (str, bytes)) or not isinstance(parts, Iterable):
        parts = [parts]
    return list(parts)


def make_options(
    *,
    parts,
    units,
    default_unit,
    common_unit,
    convert,
    detection_limits,
    replacement,
    fraction,
    negative_is_below_detection,
    total_window,
    check_total,
    total_tolerance,
    decimal,
    thousands,
    sheet_name,
    below_tokens,
    missing_tokens,
    index_col,
    sep,
) -> Options:
    """Check every option (so that no file is read for a bad call)."""
    if replacement not in REPLACEMENTS:
        raise CompositionError(
            f"replacement must be one of {', '.join(map(repr, REPLACEMENTS))}, got {replacement!r}"
        )
    if decimal not in (".", ","):
        raise CompositionError(f"decimal must be '.' or ',', got {decimal!r}")
    if thousands is not None:
        if thousands not in THOUSANDS_SEPARATORS:
            raise CompositionError(
                f"thousands must be one of {', '.join(map(repr, THOUSANDS_SEPARATORS))} "
                f"or None, got {thousands!r}"
            )
        if thousands == decimal:
            raise CompositionError(
                f"thousands={thousands!r} is also the decimal mark; they must differ"
            )
    if convert is not None and not isinstance(convert, Mapping):
        raise CompositionError(f"convert must be a dict part -> formula, got {convert!r}")
    if units is not None and not isinstance(units, Mapping):
        raise CompositionError(f"units must be a dict column -> unit, got {type(units).__name__}")
    return Options(
        parts=_check_parts(parts),
        units=units,
        default_unit=default_unit,
        default_canonical=canonical_unit(default_unit, where="default_unit"),
        common_unit=common_unit,
        convert=convert,
        detection_limits=detection_limits,
        replacement=replacement,
        fraction=_check_fraction(fraction),
        negative_is_below_detection=bool(negative_is_below_detection),
        total_window=_check_window(total_window),
        check_total=bool(check_total),
        total_tolerance=_check_tolerance(total_tolerance),
        decimal=decimal,
        thousands=thousands,
        sheet_name=sheet_name,
        tokens=make_tokens(below_tokens, missing_tokens),
        index_col=_check_index_col(index_col),
        sep=sep,
    )
