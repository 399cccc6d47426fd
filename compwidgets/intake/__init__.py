"""Intake: a messy table (DataFrame, CSV/TSV/TXT, Excel) -> :class:`Composition`.

Every input column ends as a part, as metadata or as the row labels, and the
column account says which and why. Every cell of every part column ends up
with a status ("observed", "below_dl", "missing"), a number in the common unit
(or NaN) and, when known, a detection limit; everything that was not a plain
number is written to the report under the row's label, with a reason code
(:mod:`compwidgets.intake.codes`). Rows are never dropped: rows that look
wrong are flagged and kept.

The steps, one module each, fill one state object (:mod:`.state`) in turn:
:mod:`.load` (files, headers), :mod:`.columns` (row labels, the role of each
column, with :mod:`.names` for what a header says), :mod:`.cells` (reading the
cells), :mod:`.parts` (units, limits, conversions), :mod:`.totals`,
:mod:`.replace` (with :mod:`compwidgets.core.zeros`) and :mod:`.report`.

The analytical total window, the comparison with a stated total and the
below-detection replacement change or judge numbers that may feed a decision
(an ore-grade or a contamination call). They are screening aids: such
decisions follow accredited laboratory practice and the laboratory's own
quality control, not this package.
"""

from __future__ import annotations

from . import codes
from .load import EXCEL_EXTENSIONS, TEXT_EXTENSIONS
from .names import COORDINATE_NAMES, TOTAL_NAMES
from .options import (
    DEFAULT_BELOW_TOKENS,
    DEFAULT_MISSING_TOKENS,
    DEFAULT_TOTAL_TOLERANCE,
    REPLACEMENTS,
    THOUSANDS_SEPARATORS,
)
from .reader import read_composition

__all__ = [
    "COORDINATE_NAMES",
    "DEFAULT_BELOW_TOKENS",
    "DEFAULT_MISSING_TOKENS",
    "DEFAULT_TOTAL_TOLERANCE",
    "EXCEL_EXTENSIONS",
    "REPLACEMENTS",
    "TEXT_EXTENSIONS",
    "THOUSANDS_SEPARATORS",
    "TOTAL_NAMES",
    "codes",
    "read_composition",
]
