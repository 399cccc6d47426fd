"""Counts in words: every count on screen names its unit ("1 row", "2,000 rows").

>>> counted(1, "row")
'1 row'
>>> counted(2000, "row")
'2,000 rows'
>>> counted(3, "balance")
'3 balances'
>>> counted(2, "degree of freedom", "degrees of freedom")
'2 degrees of freedom'
"""

from __future__ import annotations

__all__ = ["counted"]


def counted(n: int, unit: str, plural: str | None = None) -> str:
    """``n`` with thousands separators and its unit, singular for exactly one."""
    n = int(n)
    word = unit if n == 1 else (plural or f"{unit}s")
    return f"{n:,} {word}"
