"""Subcompositions and amalgamations."""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
import pandas as pd

from ._arrays import CompositionError, as_table, close_rows, require_non_negative, resolve_parts


def subcomposition(X, parts: Sequence):
    """The closed subcomposition of the chosen ``parts`` (names or positions)."""
    t = as_table(X)
    if len(parts) < 2:
        raise CompositionError(f"subcomposition: needs at least 2 parts, got {list(parts)!r}")
    cols = resolve_parts(t, parts)
    sub = t.values[:, cols]
    t_sub = type(t)(sub, t.index, None if t.columns is None else t.columns[cols], t.single, t.name)
    require_non_negative(t_sub)
    return t_sub.wrap(close_rows(sub))


def amalgamate(X, groups: Mapping[str, Sequence], keep_rest: bool = True):
    """Replace groups of parts by their sums (amalgamation).

    Parameters
    ----------
    X : array-like or DataFrame of shape (n, D)
    groups : mapping of new name -> member parts (names or positions)
    keep_rest : bool, default True
        Keep the parts that are in no group, after the amalgamated ones.

    Returns
    -------
    Same form as ``X``: the amalgamated columns first, in the order of ``groups``.
    The result is not re-closed: sums keep the unit of the input.
    """
    t = as_table(X)
    if not groups:
        raise CompositionError("amalgamate: no groups given")
    names = t.part_names()
    used: dict[int, str] = {}
    columns, out_names = [], []
    for new, members in groups.items():
        if not isinstance(new, str) or not new.strip():
            raise CompositionError(f"amalgamate: group name {new!r} must be a non-empty string")
        if isinstance(members, (str, bytes)) or len(members) == 0:
            raise CompositionError(f"amalgamate: group {new!r} needs a list of member parts")
        cols = resolve_parts(t, members, what=f"member of {new!r}")
        for c in cols:
            if c in used:
                raise CompositionError(
                    f"amalgamate: part {names[c]!r} is in both {used[c]!r} and {new!r}"
                )
            used[c] = new
        columns.append(t.values[:, cols].sum(axis=1))
        out_names.append(new)
    rest = [j for j in range(len(names)) if j not in used] if keep_rest else []
    clash = sorted(set(out_names) & {names[j] for j in rest})
    if clash:
        raise CompositionError(f"amalgamate: new name(s) {clash} already name a kept part")
    values = np.column_stack(columns + [t.values[:, j] for j in rest])
    return t.wrap(values, out_names + [names[j] for j in rest])


def check_amalgamations(groups: Mapping[str, Sequence], parts: Sequence[str]) -> None:
    """Raise :class:`CompositionError` unless ``groups`` is a valid amalgamation of ``parts``."""
    amalgamate(pd.DataFrame(np.ones((1, len(parts))), columns=list(parts)), groups)
