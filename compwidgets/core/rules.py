"""The input rules that every entry point asks, each written once.

- :func:`check_parts` — a valid set of parts to study (the model's active parts,
  the parts a view shows): known, distinct, enough of them, and no part of the
  table counted twice through amalgamations.
- :func:`check_sbp` — a valid SBP over these parts (a DataFrame is matched to the
  parts by its column labels).
- :func:`require_sbp` — an SBP is set (and, when asked, complete).
- :func:`check_balance_names` — one distinct name per balance (``""`` = the default).

The model, the views, the exports and the transformer call these functions and never
restate them. Every refusal is a :class:`CompositionError` (a ``ValueError``);
SBP refusals are its subclass :class:`~compwidgets.core.sbp.SBPError`.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from ._arrays import CompositionError
from .sbp import SBPError, balance_names, validate_sbp
from .tree import leaf_groups, sbp_to_tree

__all__ = [
    "check_balance_names",
    "check_parts",
    "check_sbp",
    "part_members",
    "require_sbp",
]

#: How a missing SBP is reported everywhere.
NO_SBP = "no SBP is set; build one in the balance builder or call set_sbp"


def part_members(part: str, known: Sequence[str], amalgamations: Mapping | None) -> list[str]:
    """Parts of the table that make up ``part``: itself, or the members of an amalgamation."""
    if part in known or not amalgamations or part not in amalgamations:
        return [part]
    return [str(m) for m in amalgamations[part]]


def check_parts(
    parts,
    known: Sequence[str],
    amalgamations: Mapping | None = None,
    *,
    count: int | None = None,
    what: str = "active parts",
) -> list[str]:
    """Check a set of parts to study and return it as a list of names.

    Parameters
    ----------
    parts : sequence of str
        The proposed parts (names of parts of the table or of amalgamations).
    known : sequence of str
        The parts of the table.
    amalgamations : mapping of name -> member parts, optional
        Amalgamations that may be used as parts.
    count : int, optional
        Exact number of parts needed (e.g. 3 for a ternary); default: at least 2.
    what : str
        How the message calls the parts.

    Raises
    ------
    CompositionError
        Not a list of names, too few (or not ``count``) parts, an unknown or
        repeated name, or two parts that share a member (a part of the table
        would be counted twice).
    """
    if isinstance(parts, (str, bytes)):
        raise CompositionError(f"{what}: give a list of part names, not the single {parts!r}")
    try:
        parts = list(parts)
    except TypeError:
        raise CompositionError(
            f"{what}: give a list of part names, got {type(parts).__name__}"
        ) from None
    odd = [p for p in parts if not isinstance(p, str)]
    if odd:
        raise CompositionError(
            f"{what}: part names are text; got {odd[0]!r} ({type(odd[0]).__name__})"
        )
    groups = dict(amalgamations or {})
    if count is not None and len(parts) != count:
        raise CompositionError(
            f"{what}: exactly {count} parts are needed, got {len(parts)}: {parts}"
        )
    if count is None and len(parts) < 2:
        raise CompositionError(f"at least 2 {what} are needed, got {parts}")
    available = list(known) + [g for g in groups if g not in set(known)]
    unknown = [p for p in parts if p not in set(available)]
    if unknown:
        raise CompositionError(
            f"{what}: unknown part(s) {unknown}; available: {', '.join(available)}"
        )
    twice = sorted({p for p in parts if parts.count(p) > 1})
    if twice:
        raise CompositionError(f"{what}: a part is listed twice in {parts} ({', '.join(twice)})")
    owners: dict[str, list[str]] = {}
    for p in parts:
        for m in part_members(p, known, groups):
            owners.setdefault(m, []).append(p)
    shared = {m: o for m, o in owners.items() if len(o) > 1}
    if shared:
        detail = "; ".join(f"{m} twice (in {', '.join(o)})" for m, o in shared.items())
        raise CompositionError(
            f"{what} {parts} share a member part and would count a part twice: {detail}"
        )
    return parts


def check_sbp(sbp, parts: Sequence[str], complete: bool = False) -> np.ndarray:
    """A valid SBP over ``parts``, as an int8 array with its columns in the order of ``parts``.

    A DataFrame is matched by its column labels (reordered to ``parts``; unknown
    or missing labels are refused by name); an array must have one column per part.
    With ``complete=False`` a partition still being built (its first rows) is accepted.

    Raises
    ------
    SBPError
    """
    if sbp is None:
        raise SBPError(NO_SBP)
    return validate_sbp(sbp, list(parts), complete=complete)


def require_sbp(sbp, parts: Sequence[str] | None = None, complete: bool = False) -> np.ndarray:
    """Return ``sbp``; refuse a missing one, and a partial one when ``complete``.

    Parameters
    ----------
    sbp : ndarray or None
        A checked SBP (e.g. ``model.sbp``).
    parts : sequence of str, optional
        Its parts; they name the groups still to split of a partial SBP.
    complete : bool, default False
        Require all D-1 balances.

    Raises
    ------
    SBPError
        ``"no SBP is set; ..."``, or ``"the SBP is partial: k of D-1 balances;
        groups still to split: {...}"``.
    """
    if sbp is None:
        raise SBPError(NO_SBP)
    S = np.asarray(sbp)
    D = S.shape[1]
    if complete and S.shape[0] != D - 1:
        names = [f"part {j + 1}" for j in range(D)] if parts is None else [str(p) for p in parts]
        groups = [g for g in leaf_groups(sbp_to_tree(S, names)) if len(g) > 1]
        listed = "; ".join("{" + ", ".join(g) + "}" for g in groups)
        raise SBPError(
            f"the SBP is partial: {S.shape[0]} of {D - 1} balances; groups still to split: "
            f"{listed}. Finish it first"
        )
    return sbp


def check_balance_names(names, sbp, parts: Sequence[str]) -> list[str]:
    """One distinct name per balance of ``sbp``; ``""`` or None keeps the default name.

    Names are stripped of surrounding spaces; the default of a balance is
    :func:`~compwidgets.core.sbp.balance_names` (``"num1,num2 | den1"``).

    Raises
    ------
    SBPError
        Wrong number of names, a name that is not text, or a name used twice.
    """
    S = np.asarray(sbp)
    defaults = balance_names(S, parts, complete=False)
    if names is None:
        return defaults
    if isinstance(names, (str, bytes)):
        raise SBPError(f"balance names: give one name per balance, not the single {names!r}")
    names = list(names)
    if len(names) != len(defaults):
        raise SBPError(f"{len(names)} names for {len(defaults)} balances")
    odd = [n for n in names if n is not None and not isinstance(n, str)]
    if odd:
        raise SBPError(f"balance names are text; got {odd[0]!r} ({type(odd[0]).__name__})")
    full = [(n or "").strip() or d for n, d in zip(names, defaults, strict=True)]
    first: dict[str, int] = {}
    for i, name in enumerate(full):
        if name in first:
            raise SBPError(
                f"the balance name {name!r} is used twice (balances {first[name] + 1} and "
                f"{i + 1}); each balance needs its own name"
            )
        first[name] = i
    return full
