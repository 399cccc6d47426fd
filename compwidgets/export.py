"""Exports of a model's balances and SBP: DataFrames, CSV files and a JSON document.

- :func:`ilr_frame` — balances (ilr coordinates) per row, named as the model's balances;
- :func:`sbp_frame` / :func:`contrast_frame` — the signed SBP and its orthonormal contrasts;
- :func:`sbp_document` / :func:`save_sbp` / :func:`load_sbp` — the partition as a JSON
  document that rebuilds the same SBP on the same or another table;
- :func:`save_ilr_csv` / :func:`save_selected_csv` — CSV files.

The JSON document (format ``"compwidgets-sbp"``, version 1)::

    {
      "format": "compwidgets-sbp",
      "version": 1,
      "parts": ["SiO2", "Al2O3", ...],          # the active parts, in order
      "tree": {...},                             # see compwidgets.core.tree
      "balances": [                              # one per SBP row, in row order
        {"name": "...", "numerator": [...], "denominator": [...]}, ...
      ],
      "unit": "wt%",                             # unit of the table it was made on
      "replacement": {"strategy": ..., ...},     # how values below detection were replaced
      "amalgamations": {"FeOt": ["FeO", "Fe2O3"]}  # the amalgamated parts among "parts"
    }

Reading it uses :mod:`json` only (no pickle, no eval) and checks every key at every
level (the top, each balance, each tree node, the replacement block, the
amalgamations): a key it does not know, a key given twice, a value of the wrong
type, a document larger than :data:`MAX_DOCUMENT_BYTES` or nested deeper than
:data:`MAX_DEPTH` is refused with a :class:`DocumentError` naming it.

This module reads the model through its public API and changes it only with
:meth:`CompositionModel.set_partition`; the model never imports this module. All
numbers come from :mod:`compwidgets.core`; this module only arranges them. Every
refusal is an :class:`ExportError`, a :class:`compwidgets.core.CompositionError`.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from . import core
from .core.tree import sbp_to_tree, tree_to_sbp, validate_tree

FORMAT = "compwidgets-sbp"
VERSION = 1
_REQUIRED = ("format", "version", "parts", "tree", "balances")
_OPTIONAL = ("unit", "replacement", "amalgamations")
_BALANCE_KEYS = ("name", "numerator", "denominator")
#: Intake settings copied into the document's "replacement" entry (when present).
_REPLACEMENT_KEYS = ("replacement", "fraction", "detection_limits", "negative_is_below_detection")
#: The keys of the "replacement" entry (intake's "replacement" is written as "strategy").
_REPLACEMENT_ENTRY = ("strategy", "fraction", "detection_limits", "negative_is_below_detection")
#: Largest document read (bytes of a file; a chain of splits over 200 parts, written with
#: indentation, takes about 7.5 MB).
MAX_DOCUMENT_BYTES = 16_000_000
#: Deepest nesting of JSON objects and lists read (a chain of splits over D parts nests
#: about 2 D deep, so this allows partitions of 200 parts in any shape).
MAX_DEPTH = 400
#: Most JSON values (objects, lists, strings, numbers) a document given as a dict may hold.
MAX_VALUES = 500_000


class ExportError(core.CompositionError):
    """An export that cannot be made as asked (e.g. no SBP, or a partial one)."""


class DocumentError(ExportError):
    """A JSON SBP document that cannot be read or does not fit the table."""


# ------------------------------------------------------------------ frames
def _require_sbp(model, complete: bool = False, hint: str = "") -> np.ndarray:
    """The model's SBP (``core.require_sbp``); its refusal becomes an :class:`ExportError`."""
    try:
        return core.require_sbp(model.sbp, model.active_parts, complete=complete)
    except core.SBPError as err:
        raise ExportError(f"{err}{hint}") from None


def _as_export_error(method, *args, **kwargs):
    """Call a table method of the model; its refusal becomes an :class:`ExportError`."""
    try:
        return method(*args, **kwargs)
    except core.CompositionError as err:
        raise ExportError(str(err)) from None


def ilr_frame(
    model,
    include_metadata: bool = False,
    include_selection: bool = False,
    require_complete: bool = True,
) -> pd.DataFrame:
    """Balances of the model's SBP as a DataFrame (:meth:`CompositionModel.ilr_frame`).

    Parameters
    ----------
    model : CompositionModel
    include_metadata, include_selection, require_complete : bool
        As for :meth:`CompositionModel.ilr_frame`.

    Raises
    ------
    ExportError
        No SBP; a partial SBP with ``require_complete``; a balance name that
        is also a metadata column (or ``"selected"``).
    """
    _require_sbp(model, require_complete, " (or pass require_complete=False)")
    return _as_export_error(model.ilr_frame, include_metadata, include_selection, require_complete)


def sbp_frame(model) -> pd.DataFrame:
    """The signed SBP, balances as rows (:meth:`CompositionModel.sbp_frame`)."""
    _require_sbp(model)
    return _as_export_error(model.sbp_frame)


def contrast_frame(model) -> pd.DataFrame:
    """Orthonormal contrasts of the SBP (:meth:`CompositionModel.contrast_frame`)."""
    _require_sbp(model)
    return _as_export_error(model.contrast_frame)


# -------------------------------------------------------------- CSV files
def save_ilr_csv(
    model,
    path,
    *,
    include_metadata: bool = False,
    include_selection: bool = False,
    require_complete: bool = True,
    **csv_options,
) -> Path:
    """Write :func:`ilr_frame` to a CSV file (``csv_options`` go to ``DataFrame.to_csv``)."""
    frame = ilr_frame(model, include_metadata, include_selection, require_complete)
    path = Path(path)
    frame.to_csv(path, **csv_options)
    return path


#: Column of the selected-rows CSV naming the parts whose value replaces one below detection.
REPLACED_COLUMN = "replaced below detection"


def save_selected_csv(model, path, include_balances: bool = True, **csv_options) -> int:
    """Write the selected rows (metadata, parts, and balances when an SBP is set) to CSV.

    A column :data:`REPLACED_COLUMN` lists, per row, the parts whose value is a
    replacement of a value below detection (empty when none), so imputed
    values are never taken for measured ones.

    Returns the number of rows written (0 writes the header only).
    """
    frame = model.selected_frame()
    if REPLACED_COLUMN in frame.columns:
        raise ExportError(f"the table has a column named {REPLACED_COLUMN!r} already")
    replaced = model.composition.replaced.iloc[model.selection]
    names = np.asarray(replaced.columns, dtype=object)
    frame[REPLACED_COLUMN] = [", ".join(names[row]) for row in replaced.to_numpy(dtype=bool)]
    if include_balances and model.sbp is not None:
        B = pd.DataFrame(
            np.array(model.balances())[model.selection],
            index=frame.index,
            columns=list(model.balance_names),
        )
        clash = [c for c in B.columns if c in set(frame.columns)]
        if clash:
            raise ExportError(f"balance name(s) {clash} are also column names of the table")
        frame = pd.concat([frame, B], axis=1)
    frame.to_csv(Path(path), **csv_options)
    return int(len(frame))


# ---------------------------------------------------------- JSON document
def _sides(row: np.ndarray, parts: list[str]) -> tuple[list[str], list[str]]:
    return (
        [parts[j] for j in np.flatnonzero(row > 0)],
        [parts[j] for j in np.flatnonzero(row < 0)],
    )


def _jsonable(value):
    """``value`` if it survives a JSON round trip as it is, else its ``str``."""
    try:
        return json.loads(json.dumps(value, allow_nan=False))
    except (TypeError, ValueError):
        return str(value)


def sbp_document(model) -> dict:
    """The model's SBP as a JSON-ready document (see the module docstring).

    Balance names equal to the default name are stored as ``""`` in the tree
    and in full in ``"balances"``.
    """
    sbp = _require_sbp(model)
    parts = list(model.active_parts)
    names = list(model.balance_names)
    defaults = core.balance_names(sbp, parts, complete=False)
    tree_names = ["" if n == d else n for n, d in zip(names, defaults, strict=True)]
    settings = getattr(model.composition, "settings", {}) or {}
    replacement = {
        ("strategy" if k == "replacement" else k): _jsonable(settings[k])
        for k in _REPLACEMENT_KEYS
        if k in settings
    }
    amalgamations = {p: list(model.amalgamations[p]) for p in parts if p in model.amalgamations}
    return {
        "format": FORMAT,
        "version": VERSION,
        "parts": parts,
        "tree": sbp_to_tree(sbp, parts, tree_names),
        "balances": [
            dict(zip(("name", "numerator", "denominator"), (n, *_sides(row, parts)), strict=True))
            for n, row in zip(names, sbp, strict=True)
        ],
        "unit": str(getattr(model.composition, "unit", "")),
        "replacement": replacement,
        "amalgamations": amalgamations,
    }


def save_sbp(model, path) -> Path:
    """Write :func:`sbp_document` as UTF-8 JSON to ``path``."""
    path = Path(path)
    text = json.dumps(sbp_document(model), indent=2, ensure_ascii=False, allow_nan=False)
    path.write_text(text + "\n", encoding="utf-8")
    return path


@dataclass
class LoadedSBP:
    """A checked SBP document.

    Attributes
    ----------
    parts : list of str
        Active parts (the SBP's columns, in order).
    sbp : ndarray of int8, shape (k, D)
        The signed matrix, rows in the document's order.
    names : list of str
        Balance names, one per row.
    tree : dict
    amalgamations : dict
    unit : str or None
    replacement : dict
    notes : list of str
        Differences from the target table that are not errors (e.g. unit).
    """

    parts: list[str]
    sbp: np.ndarray
    names: list[str]
    tree: dict
    amalgamations: dict = field(default_factory=dict)
    unit: str | None = None
    replacement: dict = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)


def _reject_constant(name: str):
    raise DocumentError(f"SBP document: {name} is not a number JSON allows")


def _unique_keys(pairs: list) -> dict:
    """``object_pairs_hook`` of the reader: a key given twice in one object is refused."""
    out: dict = {}
    for key, value in pairs:
        if key in out:
            raise DocumentError(f"SBP document: the key {key!r} is given twice in one object")
        out[key] = value
    return out


def _plain_copy(doc) -> dict:
    """A checked copy of a document given as a dict: JSON types only, bounded in size and depth.

    Walks without recursion, so no nesting (or a dict that contains itself) can
    exhaust the stack; the copy means the caller's dict is never kept or changed.
    """
    if not isinstance(doc, dict):
        raise DocumentError("SBP document: expected a JSON object at the top")
    root: dict = {}
    stack = [(doc, root, 1, "the document")]
    count = 0
    while stack:
        source, target, depth, where = stack.pop()
        if depth > MAX_DEPTH:
            raise DocumentError(
                f"SBP document: nested deeper than {MAX_DEPTH} levels (at {where}); "
                "not a partition this reader takes"
            )
        items = source.items() if isinstance(source, dict) else enumerate(source)
        for key, value in items:
            count += 1
            if count > MAX_VALUES:
                raise DocumentError(f"SBP document: more than {MAX_VALUES} values; too large")
            if isinstance(source, dict) and not isinstance(key, str):
                raise DocumentError(f"SBP document: key {key!r} in {where} is not a string")
            inner = f"{where} / {key!r}"
            if isinstance(value, (dict, list)):
                copy = {} if isinstance(value, dict) else [None] * len(value)
                stack.append((value, copy, depth + 1, inner))
            elif value is None or isinstance(value, (str, bool, int)):
                copy = value
            elif isinstance(value, float) and np.isfinite(value):
                copy = value
            else:
                raise DocumentError(
                    f"SBP document: {inner} holds {value!r} ({type(value).__name__}), which "
                    "is not a JSON value (text, finite number, true/false, null, list, object)"
                )
            target[key] = copy
    return root


def _read(path_or_dict) -> dict:
    if isinstance(path_or_dict, dict):
        return _plain_copy(path_or_dict)
    if not isinstance(path_or_dict, (str, os.PathLike)):
        raise DocumentError(
            f"load_sbp: expected a path or a dict, got {type(path_or_dict).__name__}"
        )
    path = Path(path_or_dict)
    try:
        size = path.stat().st_size
        if size > MAX_DOCUMENT_BYTES:
            raise DocumentError(
                f"SBP document {path.name}: {size:,} bytes; documents of more than "
                f"{MAX_DOCUMENT_BYTES:,} bytes are not read"
            )
        text = path.read_bytes().decode("utf-8")
        doc = json.loads(text, parse_constant=_reject_constant, object_pairs_hook=_unique_keys)
    except FileNotFoundError:
        raise DocumentError(f"SBP document: no file {str(path)!r}") from None
    except IsADirectoryError:
        raise DocumentError(f"SBP document: {str(path)!r} is a folder, not a file") from None
    except UnicodeDecodeError as err:
        raise DocumentError(f"SBP document {path.name}: not UTF-8 text ({err})") from None
    except json.JSONDecodeError as err:
        raise DocumentError(
            f"SBP document {path.name}: not valid JSON (line {err.lineno}, column {err.colno}: "
            f"{err.msg})"
        ) from None
    except RecursionError:
        raise DocumentError(
            f"SBP document {path.name}: nested too deeply to be a partition"
        ) from None
    if not isinstance(doc, dict):
        raise DocumentError(f"SBP document {path.name}: expected a JSON object at the top")
    return _plain_copy(doc)  # the same bounds as for a dict


def _string_list(value, what: str) -> list[str]:
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise DocumentError(f"SBP document: {what} must be a list of strings")
    return list(value)


def _known_keys(entry: dict, allowed, what: str) -> None:
    unknown = [k for k in entry if k not in allowed]
    if unknown:
        raise DocumentError(
            f"SBP document: unknown key(s) {', '.join(map(repr, unknown))} in {what}; "
            f"known: {', '.join(allowed)}"
        )


def _is_number(value) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _read_replacement(block) -> dict:
    """The "replacement" entry: how values below detection were replaced (checked key by key)."""
    if not isinstance(block, dict):
        raise DocumentError("SBP document: 'replacement' must be an object")
    _known_keys(block, _REPLACEMENT_ENTRY, "'replacement'")
    if "strategy" in block and not isinstance(block["strategy"], str):
        raise DocumentError("SBP document: 'replacement' / 'strategy' must be a string")
    if "fraction" in block and block["fraction"] is not None:
        if not _is_number(block["fraction"]) or not 0 < block["fraction"] < 1:
            raise DocumentError(
                "SBP document: 'replacement' / 'fraction' must be a number between 0 and 1, "
                f"got {block['fraction']!r}"
            )
    limits = block.get("detection_limits")
    if limits is not None and not _is_number(limits):
        if not isinstance(limits, dict) or not all(_is_number(v) for v in limits.values()):
            raise DocumentError(
                "SBP document: 'replacement' / 'detection_limits' must be a number or an "
                "object of part -> number"
            )
    negative = block.get("negative_is_below_detection")
    if negative is not None and not isinstance(negative, bool):
        raise DocumentError(
            "SBP document: 'replacement' / 'negative_is_below_detection' must be true or false"
        )
    return block


def _read_balances(balances, parts: list[str]) -> tuple[list[np.ndarray], list[str]]:
    if not isinstance(balances, list) or not balances:
        raise DocumentError("SBP document: 'balances' must be a non-empty list")
    rows, names = [], []
    column = {p: j for j, p in enumerate(parts)}
    for k, entry in enumerate(balances, start=1):
        if not isinstance(entry, dict) or set(entry) != set(_BALANCE_KEYS):
            got = f" (keys {', '.join(map(repr, entry))})" if isinstance(entry, dict) else ""
            raise DocumentError(
                f"SBP document: balance {k} must be an object with keys name, numerator, "
                f"denominator{got}"
            )
        if not isinstance(entry["name"], str):
            raise DocumentError(f"SBP document: balance {k}: 'name' must be a string")
        num = _string_list(entry["numerator"], f"balance {k} ({entry['name']!r}) numerator")
        den = _string_list(entry["denominator"], f"balance {k} ({entry['name']!r}) denominator")
        strangers = [p for p in num + den if p not in column]
        if strangers:
            raise DocumentError(
                f"SBP document: balance {k} ({entry['name']!r}) uses part(s) "
                f"{', '.join(strangers)} that are not in 'parts'"
            )
        twice = sorted({p for p in num + den if (num + den).count(p) > 1})
        if twice:
            raise DocumentError(
                f"SBP document: balance {k} ({entry['name']!r}) lists part(s) "
                f"{', '.join(twice)} twice"
            )
        row = np.zeros(len(parts), dtype=np.int8)
        row[[column[p] for p in num]] = 1
        row[[column[p] for p in den]] = -1
        rows.append(row)
        names.append(entry["name"])
    return rows, names


def _read_amalgamations(block, parts: list[str]) -> dict:
    if not isinstance(block, dict):
        raise DocumentError("SBP document: 'amalgamations' must be an object")
    out = {}
    for name, members in block.items():
        if name not in parts:
            raise DocumentError(
                f"SBP document: amalgamation {name!r} is not one of 'parts' "
                "(only the amalgamations among the parts are written)"
            )
        members = _string_list(members, f"amalgamation {name!r}")
        if not members:
            raise DocumentError(f"SBP document: amalgamation {name!r} has no members")
        out[name] = members
    return out


def read_document(path_or_dict) -> LoadedSBP:
    """Read and check an SBP document (path or dict) without applying it.

    Raises
    ------
    DocumentError
        Wrong format or version; missing, unknown or repeated keys at any level;
        wrong types; a document too large or nested too deeply; a tree or
        balances inconsistent with the parts or with each other.
    """
    try:
        return _read_document(path_or_dict)
    except RecursionError:  # the bounds above should make this impossible; never leak it
        raise DocumentError("SBP document: nested too deeply to be a partition") from None


def _read_document(path_or_dict) -> LoadedSBP:
    doc = _read(path_or_dict)
    if doc.get("format") != FORMAT:
        raise DocumentError(
            f"SBP document: 'format' is {doc.get('format')!r}; expected {FORMAT!r}"
        )
    version = doc.get("version")
    if isinstance(version, bool) or version != VERSION:
        raise DocumentError(
            f"SBP document: version {version!r} is not supported; this compwidgets reads "
            f"version {VERSION}"
        )
    missing = [k for k in _REQUIRED if k not in doc]
    if missing:
        raise DocumentError(f"SBP document: missing key(s) {', '.join(missing)}")
    unknown = [k for k in doc if k not in _REQUIRED + _OPTIONAL]
    if unknown:
        raise DocumentError(f"SBP document: unknown key(s) {', '.join(map(str, unknown))}")
    parts = _string_list(doc["parts"], "'parts'")
    if len(parts) < 2 or len(set(parts)) != len(parts):
        raise DocumentError(f"SBP document: 'parts' needs 2 or more distinct names, got {parts}")
    try:
        validate_tree(doc["tree"], parts)
        tree_rows, tree_names, _ = tree_to_sbp(doc["tree"], parts)
    except core.SBPError as err:
        raise DocumentError(f"SBP document: 'tree' does not fit 'parts': {err}") from None
    rows, names = _read_balances(doc["balances"], parts)
    try:
        sbp = core.validate_sbp(np.array(rows), parts, complete=False)
    except core.SBPError as err:
        raise DocumentError(f"SBP document: 'balances' are not a valid partition: {err}") from None
    by_split = {r.tobytes(): n for r, n in zip(tree_rows, tree_names, strict=True)}
    if len(by_split) != len(rows) or set(by_split) != {r.tobytes() for r in sbp}:
        raise DocumentError("SBP document: 'tree' and 'balances' describe different partitions")
    for k, (row, name) in enumerate(zip(sbp, names, strict=True), start=1):
        if by_split[row.tobytes()] not in ("", name):
            raise DocumentError(
                f"SBP document: balance {k} is named {name!r} but its tree node "
                f"{by_split[row.tobytes()]!r}"
            )
    amalgamations = _read_amalgamations(doc.get("amalgamations", {}), parts)
    unit = doc.get("unit")
    if unit is not None and not isinstance(unit, str):
        raise DocumentError("SBP document: 'unit' must be a string")
    replacement = _read_replacement(doc.get("replacement", {}))
    return LoadedSBP(parts, sbp, names, doc["tree"], amalgamations, unit, replacement)


def load_sbp(model_or_parts, path_or_dict) -> LoadedSBP:
    """Read an SBP document and check it against a table; apply it to a model.

    Parameters
    ----------
    model_or_parts : CompositionModel or sequence of str
        A model: its active parts (and needed amalgamations) become the
        document's and its SBP and names are rebuilt, in one change
        (:meth:`CompositionModel.set_partition`). A list of part names: only
        checked against, nothing applied.
    path_or_dict : path or dict
        The document (read with :mod:`json`; no pickle, no eval).

    Returns
    -------
    LoadedSBP
        The checked content; ``notes`` lists differences that are not errors
        (unit or replacement strategy of the target table).

    Raises
    ------
    DocumentError
        An invalid document, or parts the target table does not have
        (``"parts not in this table: Cr2O3, V"``). The model is left unchanged.
    """
    loaded = read_document(path_or_dict)
    is_model = hasattr(model_or_parts, "set_partition")
    if is_model:
        table_parts = list(model_or_parts.parts)
        known = set(model_or_parts.available_parts)  # parts and the model's own amalgamations
    else:
        if isinstance(model_or_parts, str):
            raise DocumentError("load_sbp: give a model or a list of part names, not a string")
        table_parts = [str(p) for p in model_or_parts]
        known = set(table_parts)
    needed = {p: loaded.amalgamations[p] for p in loaded.parts if p in loaded.amalgamations}
    members = [m for group in needed.values() for m in group]
    absent = [m for m in dict.fromkeys(members) if m not in table_parts]
    absent += [p for p in loaded.parts if p not in needed and p not in known and p not in absent]
    if absent:
        raise DocumentError(f"parts not in this table: {', '.join(absent)}")
    if is_model:
        loaded.notes = _notes(loaded, model_or_parts)
        try:
            model_or_parts.set_partition(loaded.sbp, loaded.parts, loaded.names, needed)
        except core.CompositionError as err:
            raise DocumentError(
                f"the SBP document could not be applied to this model: {err}"
            ) from None
    return loaded


def _notes(loaded: LoadedSBP, model) -> list[str]:
    notes = []
    unit = str(getattr(model.composition, "unit", ""))
    if loaded.unit and unit and loaded.unit != unit:
        notes.append(f"the document was made on a table in {loaded.unit}; this one is in {unit}")
    settings = getattr(model.composition, "settings", {}) or {}
    made = loaded.replacement.get("strategy")
    here = settings.get("replacement")
    if made is not None and here is not None and made != here:
        notes.append(f"values below detection were replaced with {made!r} there and {here!r} here")
    return notes
