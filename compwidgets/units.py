"""Units of compositional parts and oxide/element conversion factors.

Mass units are mass fractions: each one is a fixed multiple of ppm
(1 wt% = 10,000 ppm; mg/kg, g/t and ug/g equal ppm). Point counts ("count")
are not mass fractions and never convert to one. Conversion factors between
formulas (oxide to element, one oxide to another) come from the atomic
weights of the ``molmass`` library; no atomic weight is typed here.
"""

from __future__ import annotations

import re

import molmass

from .core import CompositionError

#: Canonical unit -> how many ppm one unit is (None: not a mass fraction).
PPM_PER_UNIT: dict[str, float | None] = {
    "wt%": 1e4,
    "ppm": 1.0,
    "ppb": 1e-3,
    "mg/kg": 1.0,
    "g/t": 1.0,
    "ug/g": 1.0,
    "mg/g": 1e3,
    "g/kg": 1e3,
    "count": None,
}

#: Spellings accepted for each canonical unit (compared after :func:`_unit_key`).
_ALIASES: dict[str, tuple[str, ...]] = {
    "wt%": ("wt%", "%", "weight%", "mass%"),
    "ppm": ("ppm",),
    "ppb": ("ppb",),
    "mg/kg": ("mg/kg",),
    "g/t": ("g/t",),
    "ug/g": ("ug/g", "µg/g", "μg/g"),
    "mg/g": ("mg/g",),
    "g/kg": ("g/kg",),
    "count": ("count", "counts"),
}

#: Units that mark a column as a measurement that is not a part (coordinates,
#: depths, angles, temperatures): such columns are metadata when parts are
#: detected automatically.
NON_PART_UNITS = frozenset(
    {"m", "km", "cm", "mm", "ft", "deg", "degree", "degrees", "°", "°c", "degc", "masl"}
)


def _unit_key(text: str) -> str:
    """Lower-case, without spaces or dots, micro signs as 'u'."""
    key = re.sub(r"[\s.]", "", str(text)).lower()
    return key.replace("µ", "u").replace("μ", "u")


_LOOKUP = {_unit_key(alias): unit for unit, aliases in _ALIASES.items() for alias in aliases}

KNOWN_UNITS: tuple[str, ...] = tuple(PPM_PER_UNIT)


def normalize_unit(text) -> str | None:
    """The canonical name of a unit spelling (``"Wt.%"`` -> ``"wt%"``), or None."""
    if not isinstance(text, str):
        return None
    return _LOOKUP.get(_unit_key(text))


def canonical_unit(text, where: str = "", hint: str = "") -> str:
    """Like :func:`normalize_unit` but raise :class:`CompositionError` for unknown units.

    ``where`` names the place at the start of the message, ``hint`` ends it.
    """
    unit = normalize_unit(text)
    if unit is None:
        place = f"{where}: " if where else ""
        raise CompositionError(
            f"{place}unknown unit {text!r}; known units are {', '.join(KNOWN_UNITS)} "
            f"(also '%', 'µg/g', 'counts'){hint}"
        )
    return unit


def is_mass_unit(unit: str) -> bool:
    """True for a canonical mass-fraction unit (everything but 'count')."""
    return PPM_PER_UNIT[unit] is not None


def unit_factor(from_unit: str, to_unit: str) -> float:
    """Multiplier turning values in ``from_unit`` into ``to_unit`` (canonical names).

    >>> unit_factor("wt%", "ppm")
    10000.0
    """
    if from_unit == to_unit:
        return 1.0
    a, b = PPM_PER_UNIT[from_unit], PPM_PER_UNIT[to_unit]
    if a is None or b is None:
        raise CompositionError(
            f"cannot convert {from_unit!r} to {to_unit!r}: point counts are not mass fractions"
        )
    return a / b


_BRACKETED = re.compile(r"^(?P<name>.*?\S)\s*[(\[{]\s*(?P<unit>[^()\[\]{}]*?)\s*[)\]}]\s*$")
_SUFFIXED = re.compile(r"^(?P<name>.*?[^_\s])(?:_|\s+)(?P<unit>[^_\s]+)$")


def split_unit(name) -> tuple[object, str | None, bool]:
    """Split a unit off a column name.

    ``"SiO2 (wt%)"`` and ``"Zr [ppm]"`` give ``("SiO2", "wt%", True)`` and
    ``("Zr", "ppm", True)``: any text in trailing brackets is returned as the
    unit (known or not, the caller decides). ``"Ba_ppm"`` and ``"Ba ppm"`` give
    ``("Ba", "ppm", False)`` only when the suffix is a known unit. Otherwise
    ``(name, None, False)``.
    """
    if not isinstance(name, str):
        return name, None, False
    m = _BRACKETED.match(name)
    if m and m.group("unit"):
        return m.group("name"), m.group("unit"), True
    m = _SUFFIXED.match(name)
    if m and normalize_unit(m.group("unit")) is not None:
        return m.group("name"), m.group("unit"), False
    return name, None, False


def _parse_formula(text, role: str, pair: str) -> molmass.Formula:
    try:
        formula = molmass.Formula(str(text))
        mass = formula.mass
    except Exception as err:  # molmass raises FormulaError and others on bad input
        reason = str(err).splitlines()[0] if str(err) else type(err).__name__
        raise CompositionError(
            f"conversion {pair}: {role} {text!r} is not a chemical formula ({reason})"
        ) from None
    if not mass > 0:
        raise CompositionError(f"conversion {pair}: {role} {text!r} is not a chemical formula")
    return formula


def _element_counts(formula: molmass.Formula) -> dict[str, int]:
    """Atoms per element; electrons of a charged formula are ignored."""
    return {sym: int(item.count) for sym, item in formula.composition().items() if sym != "e-"}


def shared_cation(source_formula: str, target_formula: str) -> str:
    """The one element other than oxygen that both formulas contain."""
    pair = f"{source_formula!r} -> {target_formula!r}"
    src = _element_counts(_parse_formula(source_formula, "source", pair))
    tgt = _element_counts(_parse_formula(target_formula, "target", pair))
    shared = sorted((set(src) & set(tgt)) - {"O"})
    if len(shared) != 1:
        what = "no element other than oxygen" if not shared else f"several elements {shared}"
        raise CompositionError(
            f"conversion {pair}: the formulas share {what}; a conversion needs exactly one "
            "shared cation (e.g. 'Fe2O3' -> 'FeO', 'SiO2' -> 'Si')"
        )
    return shared[0]


def conversion_factor(source_formula: str, target_formula: str) -> float:
    """Factor turning a mass fraction of ``source_formula`` into one of ``target_formula``.

    Both formulas are counted on their one shared cation ``E``::

        factor = (M(target) / n_E(target)) * (n_E(source) / M(source))

    with molar masses ``M`` from ``molmass``. E.g. ``Fe2O3 -> FeO`` is
    ``71.844 / 1 * 2 / 159.688 = 0.8998``.

    Raises
    ------
    CompositionError
        A formula cannot be read, or the two share no cation or more than one.
    """
    pair = f"{source_formula!r} -> {target_formula!r}"
    src = _parse_formula(source_formula, "source", pair)
    tgt = _parse_formula(target_formula, "target", pair)
    cation = shared_cation(source_formula, target_formula)
    n_src = _element_counts(src)[cation]
    n_tgt = _element_counts(tgt)[cation]
    return (tgt.mass / n_tgt) * (n_src / src.mass)
