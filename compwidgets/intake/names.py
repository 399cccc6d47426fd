"""What a column header says: a part (unit, element, oxide), a total, an id, a coordinate.

Only the header is read here; :mod:`.columns` combines it with the cells.
The word lists follow what laboratory exports commonly carry (common
practice, from memory): ``SiO2 (wt%)``, ``Zr [ppm]``, ``Fe2O3T``, ``LOI``,
``Total``, ``Sum REE (ppm)``, ``Sample ID``, ``Easting``.
"""

from __future__ import annotations

import re
from collections.abc import Iterable

import molmass
import numpy as np

from ..units import NON_PART_UNITS, _unit_key, normalize_unit, split_unit

#: Element symbols (from molmass).
ELEMENT_SYMBOLS = frozenset(e.symbol for e in molmass.ELEMENTS)

#: Column names read as coordinates (metadata) when parts are chosen automatically.
COORDINATE_NAMES = frozenset(
    {
        "x",
        "y",
        "z",
        "east",
        "north",
        "easting",
        "northing",
        "lat",
        "latitude",
        "lon",
        "long",
        "longitude",
        "depth",
        "elevation",
        "altitude",
    }
)
#: Partners of a "Y" column that make it the y coordinate rather than yttrium.
_X_NAMES = frozenset({"x", "east", "easting", "lon", "long", "longitude"})

#: Words (lower case) of a header that names a total of the parts.
TOTAL_WORDS = frozenset({"total", "totals", "sum", "summe", "tot", "σ", "∑"})
#: Qualifiers that keep a total header a total: "Analytical total", "Grand total".
_TOTAL_QUALIFIERS = frozenset(
    {"analytical", "grand", "of", "all", "the", "calc", "calculated", "count", "counts", "points"}
)
#: A total of the majors (oxides), compared with the parts reported in percent.
_MAJOR_GROUP = frozenset({"oxide", "oxides", "major", "majors", "elements", "element"})
#: Groups summed by a sum column (kept out of the parts, not compared).
_SUM_GROUPS = frozenset(
    {
        "ree",
        "lree",
        "mree",
        "hree",
        "ree+y",
        "reey",
        "pge",
        "hfse",
        "lile",
        "trace",
        "traces",
        "alkali",
        "alkalis",
        "alkalies",
        "volatiles",
        "metals",
        "base",
        "heavy",
        "light",
    }
)
#: The plainest total headers (every other total header is recognised by :func:`total_kind`).
TOTAL_NAMES = frozenset({"total", "totals", "sum"})

#: Analytes that are no formula (lower case, spaces removed).
ANALYTE_WORDS = frozenset(
    {"loi", "toc", "tic", "tc", "ts", "tn", "corg", "c-org", "orgc", "h2o+", "h2o-", "h2o"}
)
_IRON_TOTAL_SUFFIX = re.compile(r"(?:\(t\)|\(tot\)|\(total\)|tot|total|t|\*)$", re.IGNORECASE)
_FORMULA = re.compile(r"^(?:([A-Z][a-z]?)(\d+(?:\.\d+)?)?)+$")
_SYMBOL = re.compile(r"([A-Z][a-z]?)(\d+(?:\.\d+)?)?")

#: Words of a sample-id header; at least one of ID_CORE_WORDS must be among them.
ID_CORE_WORDS = frozenset(
    {
        "id",
        "ids",
        "sample",
        "samples",
        "specimen",
        "sampleid",
        "labid",
        "sampleno",
        "samplename",
        "name",
        "code",
        "label",
        "no",
        "nr",
        "number",
        "#",
    }
)
_ID_FILLER = frozenset({"lab", "field", "client", "ref", "reference", "analysis", "unique"})

#: Headers (lower case) of numeric sample properties that are not parts.
METADATA_NAMES = frozenset(
    {
        "year",
        "month",
        "day",
        "date",
        "time",
        "batch",
        "run",
        "replicate",
        "rep",
        "sequence",
        "seq",
        "order",
        "line",
        "station",
        "pit",
        "hole",
        "layer",
        "ph",
        "eh",
        "ec",
        "temperature",
        "temp",
        "weight",
        "sample weight",
        "mass",
        "sample mass",
        "moisture",
        "water content",
    }
)

_WORD = re.compile(r"[^\W_]+|[#σ∑Σ+]", re.UNICODE)


def name_text(name) -> str:
    """A column name as text: tuples (two-row headers) joined by spaces, numbers as written."""
    if isinstance(name, str):
        return name
    if isinstance(name, tuple):
        return " ".join(name_text(x) for x in name if not _unnamed_level(x)).strip()
    if isinstance(name, np.generic):
        name = name.item()
    if isinstance(name, float) and name.is_integer():
        return str(int(name))
    return str(name)


def _unnamed_level(x) -> bool:
    return x is None or (isinstance(x, str) and (not x.strip() or x.startswith("Unnamed: ")))


def words(text: str) -> list[str]:
    """Lower-case words of a header (letters and digits; '#', 'Σ' and '+' kept as words)."""
    return [w.lower().replace("Σ", "σ").replace("∑", "σ") for w in _WORD.findall(text)]


def header_unit(column: str) -> tuple[str, str | None, str | None]:
    """``(name without unit, unit text or None, canonical composition unit or None)``."""
    name, unit_text, _ = split_unit(column)
    return str(name), unit_text, normalize_unit(unit_text) if unit_text is not None else None


def is_formula(name: str) -> bool:
    """True for an element or formula (``Zr``, ``SiO2``, ``Fe2O3T``, ``FeO*``), case as written."""
    text = name.strip().replace(" ", "")
    base = _IRON_TOTAL_SUFFIX.sub("", text) if len(text) > 1 else text
    for candidate in {text, base}:
        if candidate and _FORMULA.match(candidate):
            symbols = [m.group(1) for m in _SYMBOL.finditer(candidate)]
            if symbols and all(s in ELEMENT_SYMBOLS for s in symbols):
                return True
    return False


def is_analyte(name: str) -> bool:
    """True when the header (unit removed) names an element, oxide or analyte such as LOI."""
    key = name.strip().lower().replace(" ", "")
    if key in ANALYTE_WORDS:
        return True
    if is_formula(name):
        return True
    parts = name.split()
    # "Total S", "Fe2O3 total", "S tot": one formula beside total words is an analyte
    rest = [p for p in parts if p.lower() not in TOTAL_WORDS]
    return len(parts) > 1 and len(rest) == 1 and is_formula(rest[0])


def total_kind(name: str) -> str | None:
    """``"total"`` (all parts), ``"majors"``, ``"sum"`` (of a group), ``"other"`` or None.

    ``Total``, ``Sum``, ``Analytical total``, ``Total (wt%)`` are totals of all
    parts; ``Total oxides``, ``Major total`` of the majors; ``Sum REE``,
    ``ΣREE``, ``Total traces`` of a group; any other header with a total word
    (``Total weight``) is ``"other"``. ``Total S``, ``Fe2O3 total`` and ``TOC``
    name analytes: None (they are parts).
    """
    ws = words(name)
    if not ws:
        return None
    # "ΣREE" is one word; split a leading sigma off
    if ws[0].startswith("σ") and len(ws[0]) > 1:
        ws = ["σ", ws[0][1:], *ws[1:]]
    if not any(w in TOTAL_WORDS for w in ws) or is_analyte(name):
        return None
    rest = [w for w in ws if w not in TOTAL_WORDS and w not in _TOTAL_QUALIFIERS]
    if not rest:
        return "total"
    if all(w in _MAJOR_GROUP for w in rest):
        return "majors"
    if all(w in _SUM_GROUPS or w in _MAJOR_GROUP for w in rest):
        return "sum"
    return "other"


def is_id_header(name: str) -> bool:
    """True for ``Sample``, ``Sample ID``, ``sample_id``, ``Lab No``, ``Name``, ``#``, ..."""
    ws = words(name)
    if not ws:
        return False
    return all(w in ID_CORE_WORDS or w in _ID_FILLER for w in ws) and any(
        w in ID_CORE_WORDS for w in ws
    )


def is_coordinate(name: str, others: Iterable[str]) -> bool:
    """A coordinate name; ``Y`` is yttrium unless an x-like column is there too."""
    key = name.strip().lower()
    if key not in COORDINATE_NAMES:
        return False
    if name.strip() == "Y":
        return any(str(o).strip().lower() in _X_NAMES for o in others)
    return True


def is_non_part_unit(unit_text: str | None) -> bool:
    """True for a length, angle or temperature unit (``m``, ``deg``, ``°C``)."""
    return unit_text is not None and _unit_key(unit_text) in NON_PART_UNITS


def is_metadata_name(name: str) -> bool:
    return name.strip().lower() in METADATA_NAMES
