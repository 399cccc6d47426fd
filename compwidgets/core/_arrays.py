"""Turning array-likes into checked float matrices and back.

Every public function of :mod:`compwidgets.core` goes through :func:`as_table`
so that input checks, error messages and the DataFrame-in/DataFrame-out rule
live in one place.
"""

from __future__ import annotations

from collections.abc import Hashable, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

#: How many offending rows/columns an error message lists before "...".
MAX_LISTED = 5


class CompositionError(ValueError):
    """Raised for input that is not a valid composition (names the place)."""


def _listing(items: Sequence, total: int | None = None) -> str:
    shown = [repr(i) if isinstance(i, str) else str(i) for i in list(items)[:MAX_LISTED]]
    more = (total if total is not None else len(items)) - len(shown)
    return ", ".join(shown) + (f" and {more} more" if more > 0 else "")


@dataclass
class Table:
    """A checked 2-D float matrix with the labels needed to wrap results.

    Attributes
    ----------
    values : ndarray of shape (n, D)
    index : pandas.Index or None
        Row labels when the input was a DataFrame (or Series for one row).
    columns : pandas.Index or None
        Part names when the input was labelled.
    single : bool
        True when the input was one composition of shape (D,).
    """

    values: np.ndarray
    index: pd.Index | None
    columns: pd.Index | None
    single: bool
    name: str = "X"

    @property
    def labelled(self) -> bool:
        return self.columns is not None

    def row_labels(self, positions: np.ndarray) -> list:
        """Original labels of the rows at ``positions`` (or the positions)."""
        if self.index is None:
            return [int(p) for p in positions]
        return list(self.index[positions])

    def column_labels(self, positions: np.ndarray) -> list:
        if self.columns is None:
            return [int(p) for p in positions]
        return list(self.columns[positions])

    def part_names(self) -> list[str]:
        """Names of the parts, or ``x1..xD`` for unlabelled input."""
        if self.columns is None:
            return [f"x{j + 1}" for j in range(self.values.shape[1])]
        return [str(c) for c in self.columns]

    def wrap(self, values: np.ndarray, columns: Sequence[Hashable] | None = None):
        """Return ``values`` in the caller's form (DataFrame, Series or array).

        ``values`` has shape (n, k) for a matrix result or (n,) for one number
        per row. ``columns`` names the k output columns (default: the input's).
        """
        values = np.asarray(values)
        if values.ndim == 1:  # one number per row
            if self.single:
                return float(values[0])
            if self.index is not None:
                return pd.Series(values, index=self.index.copy())
            return values
        if columns is None:
            columns = self.columns
        if self.single:
            row = values[0]
            if self.labelled:
                return pd.Series(row, index=pd.Index(columns))
            return row
        if self.labelled or self.index is not None:
            if columns is None:
                columns = self.part_names()
            return pd.DataFrame(values, index=self.index.copy(), columns=pd.Index(columns))
        return values


def as_table(X, name: str = "X", min_parts: int = 1, *, copy: bool = True) -> Table:
    """Check ``X`` and return it as a :class:`Table` (never a view of ``X`` by default).

    Parameters
    ----------
    X : array-like, DataFrame or Series
        One composition of shape (D,) or a matrix of shape (n, D).
    name : str
        How error messages call the argument.
    min_parts : int
        Smallest number of parts accepted.
    copy : bool, default True
        False: ``values`` may share memory with ``X`` (a float64 array or a
        frame of one float block); for callers that only read it.

    Raises
    ------
    TypeError
        ``X`` is not array-like.
    CompositionError
        Empty input, duplicate part names, non-numeric cells, too few parts.
    """
    index = columns = None
    single = False
    if isinstance(X, pd.DataFrame):
        if X.size == 0:
            raise CompositionError(f"{name}: empty input (shape {X.shape}); nothing to compute")
        dup = X.columns[X.columns.duplicated()].unique()
        if len(dup):
            raise CompositionError(
                f"{name}: duplicate part names {_listing(list(dup))}; every column needs its "
                "own name"
            )
        bad = [c for c in X.columns if not _numeric_dtype(X[c].dtype)]
        if bad:
            col = bad[0]
            sample = _first_non_numeric(X[col])
            raise CompositionError(
                f"{name}: column {col!r} is not numeric (e.g. value {sample!r}); "
                "parse the table with compwidgets.read_composition or select the part columns"
            )
        index, columns = X.index, X.columns
        values = X.to_numpy(dtype=float, copy=copy)
    elif isinstance(X, pd.Series):
        if not _numeric_dtype(X.dtype):
            raise CompositionError(
                f"{name}: the Series is not numeric (e.g. value {_first_non_numeric(X)!r})"
            )
        if X.index.duplicated().any():
            raise CompositionError(
                f"{name}: duplicate part names {_listing(list(X.index[X.index.duplicated()]))}"
            )
        columns = X.index
        values = X.to_numpy(dtype=float, copy=True)[None, :]
        single = True
    else:
        if isinstance(X, (str, bytes, dict, set)) or X is None:
            raise TypeError(f"{name}: expected an array-like of numbers, got {type(X).__name__}")
        try:
            values = np.array(X, dtype=float, copy=True if copy else None)
        except (TypeError, ValueError) as err:
            raise CompositionError(f"{name}: cannot read as numbers ({err})") from None
        if values.ndim == 1:
            values = values[None, :]
            single = True
        elif values.ndim != 2:
            raise CompositionError(
                f"{name}: expected shape (D,) or (n, D), got an array of shape {values.shape}"
            )
    if values.size == 0:
        raise CompositionError(f"{name}: empty input (shape {values.shape}); nothing to compute")
    if values.shape[1] < min_parts:
        raise CompositionError(
            f"{name}: {values.shape[1]} part(s) given; at least {min_parts} are needed"
        )
    return Table(values, index, columns, single, name)


def _numeric_dtype(dtype) -> bool:
    return pd.api.types.is_numeric_dtype(dtype) and not pd.api.types.is_bool_dtype(dtype)


def _first_non_numeric(series: pd.Series):
    converted = pd.to_numeric(series, errors="coerce")
    bad = series[converted.isna() & series.notna()]
    value = bad.iloc[0] if len(bad) else series.iloc[0] if len(series) else None
    return value.item() if isinstance(value, np.generic) else value


def require_finite(t: Table) -> None:
    """Raise naming the first rows/columns holding NaN or infinity."""
    bad = ~np.isfinite(t.values)
    if bad.any():
        _raise_cells(t, bad, "missing or non-finite values (NaN or inf)")


def require_positive(t: Table) -> None:
    """Raise unless every value is finite and strictly positive (for logarithms)."""
    require_finite(t)
    bad = t.values <= 0
    if bad.any():
        _raise_cells(
            t,
            bad,
            "zero or negative values; log-ratios need strictly positive parts "
            "(replace values below detection first, e.g. multiplicative_replacement)",
        )


def require_non_negative(t: Table) -> None:
    """Raise unless every value is finite and >= 0, and each row has a positive sum."""
    require_finite(t)
    bad = t.values < 0
    if bad.any():
        _raise_cells(t, bad, "negative values")
    empty = ~(t.values > 0).any(axis=1)  # (a sum could overflow near the float maximum)
    if empty.any():
        rows = np.flatnonzero(empty)
        raise CompositionError(
            f"{t.name}: rows {_listing(t.row_labels(rows), len(rows))} sum to zero; "
            "they hold no composition"
        )


def close_rows(v: np.ndarray, total: float = 1.0) -> np.ndarray:
    """Rows of a checked non-negative matrix rescaled to sum to ``total``, without overflow.

    A row whose plain sum overflows (parts near the float maximum) is first divided
    by its largest value, so it still closes correctly; other rows are divided by
    their sum as they are. Rows must hold a positive value.
    """
    v = np.asarray(v, dtype=float)
    with np.errstate(over="ignore"):
        sums = v.sum(axis=-1, keepdims=True)
    over = ~np.isfinite(sums)
    if over.any():
        scaled = v / v.max(axis=-1, keepdims=True)
        v = np.where(over, scaled, v)
        sums = np.where(over, scaled.sum(axis=-1, keepdims=True), sums)
    return total * (v / sums)


def _raise_cells(t: Table, bad: np.ndarray, what: str) -> None:
    rows, cols = np.nonzero(bad)
    row_labels = t.row_labels(np.unique(rows))
    col_labels = t.column_labels(np.unique(cols))
    first = (t.row_labels(rows[:1])[0], t.column_labels(cols[:1])[0], t.values[rows[0], cols[0]])
    raise CompositionError(
        f"{t.name}: {what} in {len(rows)} cell(s); rows {_listing(row_labels)}, "
        f"columns {_listing(col_labels)} (first: row {first[0]!r}, column {first[1]!r}, "
        f"value {float(first[2])!r})"
    )


def resolve_parts(t: Table, parts: Sequence, what: str = "part") -> np.ndarray:
    """Positions of ``parts`` (names or integer positions) in ``t``'s columns."""
    names = t.part_names() if t.columns is None else list(t.columns)
    positions = []
    for p in parts:
        if isinstance(p, (int, np.integer)) and not (t.columns is not None and p in names):
            if not -len(names) <= p < len(names):
                raise CompositionError(
                    f"{t.name}: {what} position {p} is out of range for {len(names)} parts"
                )
            positions.append(int(p) % len(names))
        elif p in names:
            positions.append(names.index(p))
        else:
            raise CompositionError(
                f"{t.name}: unknown {what} {p!r}; known parts are {_listing(names)}"
            )
    if len(set(positions)) != len(positions):
        raise CompositionError(f"{t.name}: a {what} is named twice in {list(parts)!r}")
    return np.asarray(positions, dtype=int)


def is_unlabelled(columns: pd.Index) -> bool:
    """True for the default column labels 0..k-1 that pandas gives a frame built without names."""
    return isinstance(columns, pd.RangeIndex) and columns.start == 0 and columns.step == 1


def match_columns(
    frame: pd.DataFrame,
    labels: Sequence[str],
    what: str,
    error: type[CompositionError] = CompositionError,
    kind: str = "part",
) -> np.ndarray:
    """The cells of ``frame`` with its columns matched by label to ``labels``, in that order.

    Every frame-shaped input (an SBP, a contrast matrix, balances given back to a
    transformer) goes through here, so a table whose columns are in another order
    is reordered and never read by position. Labels are compared as text. A frame
    built without column names (columns ``0..k-1``) has no labels to match: its
    columns are taken in order and must be ``len(labels)``. ``kind`` names what the
    labels are in messages ("part", "balance").

    Raises
    ------
    CompositionError (or ``error``, a subclass)
        Repeated column labels, or labels that are not in ``labels`` / labels of
        ``labels`` that are not columns, each listed by name.
    """
    labels = [str(p) for p in labels]
    if is_unlabelled(frame.columns):
        if frame.shape[1] != len(labels):
            raise error(
                f"{what}: {frame.shape[1]} unnamed columns for {len(labels)} {kind}s "
                f"({_listing(labels)}); name the columns after the {kind}s"
            )
        return frame.to_numpy()
    columns = [str(c) for c in frame.columns]
    twice = sorted({c for c in columns if columns.count(c) > 1})
    if twice:
        raise error(f"{what}: column label(s) {_listing(twice)} appear twice")
    unknown = [c for c in columns if c not in set(labels)]
    missing = [p for p in labels if p not in set(columns)]
    if unknown or missing:
        problems = []
        if unknown:
            problems.append(f"column(s) {_listing(unknown)} are not among the {kind}s")
        if missing:
            problems.append(f"{kind}(s) {_listing(missing)} have no column")
        raise error(
            f"{what}: the columns do not match the {kind}s {_listing(labels, len(labels))}: "
            + "; ".join(problems)
        )
    order = [columns.index(p) for p in labels]
    return frame.to_numpy()[:, order]
