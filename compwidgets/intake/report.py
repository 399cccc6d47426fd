"""The report, the flags and the column account, each entry with its reason code."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..composition import BELOW_DL, MISSING, OBSERVED, REPORT_COLUMNS, Composition
from . import codes
from .cells import HOW_CODES, HOW_TEXT
from .state import IntakeState

_STATUS_NAMES = np.array([OBSERVED, BELOW_DL, MISSING], dtype=object)
ACCOUNT_COLUMNS = ("role", "code", "detail", "part", "unit")
_HOW_CODE = np.array([HOW_CODES.get(h, "") for h in range(6)], dtype=object)
_HOW_TEXT = np.array([HOW_TEXT.get(h, "") for h in range(6)], dtype=object)
FLAG_COLUMNS = ("reason", "code", "total", "stated_total")


def number_text(x) -> np.ndarray:
    """Numbers as short text with 6 significant digits ('5', '0.0003', '1.5e-07')."""
    values = np.asarray(x, dtype=float)
    out = np.empty(values.shape, dtype=object)
    # Python's own formatting is several times faster than numpy's char.mod here
    out.ravel()[:] = list(map("{:.6g}".format, values.ravel().tolist()))
    return out


def window_text(x: np.ndarray, lo: float, hi: float) -> np.ndarray:
    """Totals with 2 decimals, more where rounding would hide that they are outside."""
    x = np.asarray(x, dtype=float)
    short = np.round(x, 2)
    inside = (short >= lo) & (short <= hi)
    out = np.empty(x.shape, dtype=object)
    out[:] = list(map(repr, np.where(inside, np.round(x, 6), short).tolist()))
    return out


def _labels(index: pd.Index, pos: np.ndarray) -> np.ndarray:
    rows = np.empty(len(pos), dtype=object)
    rows[:] = (
        list(index.take(pos))
        if isinstance(index, pd.MultiIndex)
        else index.take(pos).to_numpy(dtype=object)
    )
    return rows


def chunk(index, pos, column, action, code, original, value, detail) -> pd.DataFrame:
    """Report rows for the cells (or rows) at positions ``pos``."""
    m = len(pos)

    def full(x):
        return np.full(m, x, dtype=object) if m else np.empty(0, dtype=object)

    return pd.DataFrame(
        {
            "row": _labels(index, np.asarray(pos, dtype=np.intp)),
            "column": full(column),
            "action": full(action),
            "code": np.asarray(code, dtype=object) if np.ndim(code) else full(code),
            "original": np.asarray(original, dtype=object) if m else np.empty(0, dtype=object),
            "value": np.broadcast_to(np.asarray(value, dtype=float), (m,)).copy(),
            "detail": np.asarray(detail, dtype=object) if m else np.empty(0, dtype=object),
        }
    )


def one(column, action, code, original, value, detail) -> pd.DataFrame:
    """One report row that names no row (a column, a setting)."""
    return pd.DataFrame(
        {
            "row": np.array([None], dtype=object),
            "column": np.array([column], dtype=object),
            "action": np.array([action], dtype=object),
            "code": np.array([code], dtype=object),
            "original": np.array([original], dtype=object),
            "value": np.array([value], dtype=float),
            "detail": np.array([detail], dtype=object),
        }
    )


def _append(joined: np.ndarray, mask: np.ndarray, text, separator: str) -> None:
    """Append ``text`` (one string, or one per row) to ``joined`` where ``mask``, in place.

    ``joined`` holds None where nothing was written yet.
    """
    at = np.flatnonzero(mask)
    if not at.size:
        return
    piece = np.asarray(text, dtype=object)
    piece = piece[at] if piece.ndim else piece
    current = joined[at]
    empty = np.equal(current, None)
    if not empty.all():
        full = ~empty
        piece = np.broadcast_to(piece, at.shape).astype(object)
        piece[full] = current[full] + separator + piece[full]
    joined[at] = piece


def flag_rows(st: IntakeState):
    """Flags (reason text and codes per row), the flagged mask, reasons and codes."""
    status, index, names = st.status, st.index, st.names
    lo, hi = st.options.total_window
    observed_any = (status == 0).any(axis=1)
    missing = status == 2
    missing_any = missing.any(axis=1)
    totals = st.totals
    out = np.zeros(len(index), dtype=bool)
    if st.total_checked:
        out = observed_any & ((totals < lo) | (totals > hi))
    mismatch = np.zeros(len(index), dtype=bool)
    for mask, _ in st.total_flags:
        mismatch |= mask
    nr = st.not_replaced
    flagged = ~observed_any | missing_any | out | mismatch | (nr > 0)
    pos = np.flatnonzero(flagged)
    reason = np.full(len(pos), None, dtype=object)
    code = np.full(len(pos), None, dtype=object)

    def add(mask, text, name):
        _append(reason, mask, text, "; ")
        _append(code, mask, name, codes.CODE_SEPARATOR)

    add(~observed_any[pos], codes.REASONS[codes.NO_PART_OBSERVED], codes.NO_PART_OBSERVED)
    if missing_any[pos].any():
        listed = np.full(len(pos), "", dtype=object)
        for j, name in enumerate(names):
            m = missing[pos, j]
            listed = np.where(
                m, np.where(listed == "", str(name), listed + ", " + str(name)), listed
            )
        add(missing_any[pos], "missing part(s): " + listed, codes.MISSING_PARTS)
    if st.total_checked and out[pos].any():
        text = (
            "analytical total " + window_text(totals[pos], lo, hi) + f" wt% outside {lo:g}-{hi:g}"
        )
        add(out[pos], text, codes.TOTAL_OUTSIDE_WINDOW)
    for mask, text in st.total_flags:
        add(mask[pos], text[pos], codes.TOTAL_MISMATCH)
    for value, name in ((1, codes.NOT_REPLACED_NO_OBSERVED), (2, codes.NOT_REPLACED_OVERLOAD)):
        add(nr[pos] == value, codes.REASONS[name], name)
    total_col = (
        np.where(observed_any[pos], totals[pos], np.nan)
        if st.total_checked
        else np.full(len(pos), np.nan)
    )
    flags = pd.DataFrame(
        {"reason": reason, "code": code, "total": total_col, "stated_total": st.stated_total[pos]},
        index=index[pos],
    )
    if len(pos) == 0:
        flags = flags.astype({"reason": object, "code": object, "total": float})
    return flags, pos, reason, code


def _column_entries(st: IntakeState) -> list[pd.DataFrame]:
    pieces = []
    for new, old in st.loaded.renamed:
        pieces.append(
            one(
                new,
                "renamed",
                codes.NAME_CONVERTED,
                repr(old),
                np.nan,
                f"column name {old!r} ({type(old).__name__}) read as the text {new!r}",
            )
        )
    for c in st.columns.values():
        what = c.role + (f" {c.part!r}" if c.part else "") + (f" in {c.unit}" if c.unit else "")
        pieces.append(one(c.name, "column", c.code, c.role, np.nan, f"{what}: {c.detail}"))
    if st.limits_source == "attrs":
        pieces.append(
            one(
                None,
                "setting",
                codes.LIMITS_FROM_ATTRS,
                None,
                np.nan,
                "detection limits from the table's attrs['detection_limits'] for "
                + (", ".join(st.limits_used) if st.limits_used else "no part"),
            )
        )
    return pieces


def _cell_entries(st: IntakeState) -> list[pd.DataFrame]:
    pieces = []
    index, raw, dl = st.index, st.raw, st.limits
    for j, (p, rec) in enumerate(zip(st.parts, st.records, strict=True)):
        name, u = st.names[j], p.unit_given
        orig = p.parsed.originals
        pos = rec.text_read
        if len(pos):
            how = p.parsed.how[pos]
            pieces.append(
                chunk(
                    index,
                    pos,
                    name,
                    "parsed_text",
                    _HOW_CODE[how],
                    orig(pos),
                    raw[pos, j],
                    "read as "
                    + number_text(p.parsed.number[pos])
                    + f" {u} ("
                    + _HOW_TEXT[how]
                    + ")",
                )
            )
        pos = rec.missing
        if len(pos):
            blank = p.parsed.blank[pos]
            pieces.append(
                chunk(
                    index,
                    pos,
                    name,
                    "missing",
                    np.where(blank, codes.MISSING_BLANK, codes.MISSING_TOKEN).astype(object),
                    orig(pos),
                    np.nan,
                    np.where(blank, "missing value (empty)", "missing value (token)").astype(
                        object
                    ),
                )
            )
        pos = rec.below
        if len(pos):
            known = np.isfinite(rec.limit_given)
            how_text = np.where(
                rec.below_code == codes.BELOW_LESS_THAN,
                "'<' entry",
                np.where(
                    rec.below_code == codes.BELOW_ZERO,
                    "zero, limit from detection_limits",
                    "token, limit from detection_limits",
                ),
            ).astype(object)
            detail = np.where(
                known,
                "limit " + number_text(rec.limit_given) + f" {u} (" + how_text + ")",
                "limit unknown (" + how_text + ")",
            )
            pieces.append(
                chunk(
                    index,
                    pos,
                    name,
                    "below_detection",
                    rec.below_code,
                    orig(pos),
                    dl[pos, j],
                    detail,
                )
            )
        pos = rec.negative
        if len(pos):
            pieces.append(
                chunk(
                    index,
                    pos,
                    name,
                    "negative_as_below_detection",
                    codes.BELOW_NEGATIVE,
                    orig(pos),
                    dl[pos, j],
                    "negative value read as below detection, limit "
                    + number_text(rec.limit_negative)
                    + f" {u}",
                )
            )
    return pieces


def _conversion_entries(st: IntakeState) -> list[pd.DataFrame]:
    pieces = []
    for j, p in enumerate(st.parts):
        if p.unit != st.unit:
            f = st.unit_factors[j]
            pieces.append(
                one(
                    st.names[j],
                    "unit_converted",
                    codes.UNIT_CONVERTED,
                    p.unit_given,
                    f,
                    f"{p.unit_given} -> {st.unit}, factor {f:g}",
                )
            )
    for j, (target, factor) in st.conversions.items():
        source = str(st.parts[j].name)
        pieces.append(
            one(
                target,
                "formula_converted",
                codes.FORMULA_CONVERTED,
                source,
                factor,
                f"{source} -> {target}, factor {factor:.4f}",
            )
        )
    return pieces


def _replacement_entries(st: IntakeState) -> list[pd.DataFrame]:
    options = st.options
    if options.replacement == "none":
        return []
    pieces = []
    replacement, fraction = options.replacement, options.fraction
    code = (
        codes.REPLACED_MULTIPLICATIVE if replacement == "multiplicative" else codes.REPLACED_SIMPLE
    )
    repl = (st.status == 1) & np.isfinite(st.values)
    for j, p in enumerate(st.parts):
        pos = np.flatnonzero(repl[:, j])
        if not len(pos):
            continue
        detail = (
            f"{replacement}: {fraction:g} x detection limit "
            + number_text(st.limits[pos, j])
            + f" {st.unit}"
        )
        if replacement == "multiplicative":
            detail = detail + "; observed parts of the row scaled by " + number_text(st.scale[pos])
        pieces.append(
            chunk(
                st.index,
                pos,
                st.names[j],
                "replaced",
                code,
                p.parsed.originals(pos),
                st.values[pos, j],
                detail,
            )
        )
    if replacement == "multiplicative":
        rows = np.flatnonzero(repl.any(axis=1))
        if rows.size:
            pieces.append(
                chunk(
                    st.index,
                    rows,
                    None,
                    "scaled",
                    codes.OBSERVED_SCALED,
                    np.full(rows.size, None, dtype=object),
                    st.scale[rows],
                    "observed parts multiplied by "
                    + number_text(st.scale[rows])
                    + " so that the row keeps its observed total (multiplicative replacement)",
                )
            )
    return pieces


def _account(st: IntakeState) -> pd.DataFrame:
    cols = list(st.columns.values())
    final = {p.column: st.names[j] for j, p in enumerate(st.parts)}
    return pd.DataFrame(
        {
            "role": [c.role for c in cols],
            "code": [c.code for c in cols],
            "detail": [c.detail for c in cols],
            "part": [final.get(c.name, "") for c in cols],
            "unit": [c.unit for c in cols],
        },
        index=pd.Index([c.name for c in cols], name="column", dtype=object),
    )


def _status_column(codes_: np.ndarray, index: pd.Index) -> pd.Series:
    """One column of status names from its codes, as pandas' string dtype ("str").

    With pyarrow behind that dtype the names are taken by code from a small
    dictionary (no Python string per cell: several times faster); the values
    and dtype are those of ``pd.Series(names, dtype="str")``.
    """
    if _ARROW_STR:
        import pyarrow as pa

        names = pa.DictionaryArray.from_arrays(
            pa.array(codes_, type=pa.int8()), _arrow_status_names()
        ).dictionary_decode()
        return pd.Series(names, index=index, dtype="str", copy=False)
    return pd.Series(_STATUS_NAMES[codes_], index=index, dtype="str", copy=False)


#: True when pandas' "str" dtype is stored by pyarrow (pandas >= 3 with pyarrow).
_ARROW_STR = getattr(pd.api.types.pandas_dtype("str"), "storage", "") == "pyarrow"


def _arrow_status_names():
    import pyarrow as pa

    return pa.array([str(s) for s in _STATUS_NAMES], type=pa.large_string())  # pandas' own


def _status_frame(codes_: np.ndarray, index: pd.Index, cols: pd.Index) -> pd.DataFrame:
    """Status names from codes, column by column (pandas' string dtype where available)."""
    frame = pd.DataFrame(
        {j: _status_column(codes_[:, j], index) for j in range(codes_.shape[1])},
        index=index,
    )
    frame.columns = cols
    return frame


def build(st: IntakeState, settings: dict) -> Composition:
    """The Composition: arrays as frames, the report, the flags and the column account."""
    flags, fpos, reason, code = flag_rows(st)
    pieces = _column_entries(st) + _cell_entries(st) + _conversion_entries(st)
    pieces += _replacement_entries(st) + st.total_notes
    if len(fpos):
        pieces.append(
            chunk(
                st.index,
                fpos,
                None,
                "flagged",
                code,
                np.full(len(fpos), None, dtype=object),
                st.totals[fpos],
                reason,
            )
        )
    report = pd.concat(pieces, ignore_index=True)[list(REPORT_COLUMNS)]
    index = st.index
    cols = pd.Index(st.names)

    def frame_of(a):
        return pd.DataFrame(a, index=index, columns=cols, copy=False)

    meta_cols = st.metadata_columns()
    metadata = st.frame[meta_cols].copy() if meta_cols else pd.DataFrame(index=index)
    return Composition(
        values=frame_of(st.values),
        raw=frame_of(st.raw),
        status=_status_frame(st.status, index, cols),
        detection_limits=frame_of(st.limits),
        metadata=metadata,
        units={st.names[j]: p.unit_given for j, p in enumerate(st.parts)},
        unit=st.unit,
        report=report,
        flags=flags,
        settings=settings,
        column_account=_account(st),
    )
