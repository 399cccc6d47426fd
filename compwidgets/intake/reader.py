"""The entry point: :func:`read_composition`, one step after another on one state object."""

from __future__ import annotations

from collections.abc import Hashable, Iterable, Mapping, Sequence

from ..composition import Composition
from ..core import DEFAULT_FRACTION, CompositionError
from . import codes
from .columns import choose_index, classify_columns
from .load import is_lazy_source, load
from .options import (
    DEFAULT_BELOW_TOKENS,
    DEFAULT_MISSING_TOKENS,
    DEFAULT_TOTAL_TOLERANCE,
    make_options,
)
from .parts import (
    apply_conversions,
    choose_common_unit,
    column_limits,
    make_parts,
    read_parts,
    resolve_conversions,
    settings_limits,
)
from .replace import replace_below
from .report import build
from .state import IntakeState
from .totals import analytical_total, compare_total_columns


def read_composition(
    source,
    *,
    parts: Sequence[Hashable] | None = None,
    units: Mapping[Hashable, str] | None = None,
    default_unit: str = "wt%",
    common_unit: str | None = None,
    convert: Mapping[Hashable, str] | None = None,
    detection_limits=None,
    replacement: str = "multiplicative",
    fraction: float = DEFAULT_FRACTION,
    negative_is_below_detection: bool = False,
    total_window: tuple[float, float] = (98.5, 101.5),
    check_total: bool = True,
    total_tolerance: float | None = DEFAULT_TOTAL_TOLERANCE,
    decimal: str = ".",
    thousands: str | None = None,
    sheet_name: int | str = 0,
    below_tokens: Iterable[str] = DEFAULT_BELOW_TOKENS,
    missing_tokens: Iterable[str] = DEFAULT_MISSING_TOKENS,
    index_col: Hashable | None = None,
    sep: str | None = None,
    spill=None,
) -> Composition:
    """Read a table of compositions into a :class:`~compwidgets.composition.Composition`.

    Every input column ends as a part, as metadata or as the row labels, and
    :attr:`Composition.column_account` (and one ``"column"`` entry of the
    report per column) says which and why, with a reason code
    (:mod:`compwidgets.intake.codes`).

    Parameters
    ----------
    source : DataFrame or path
        A DataFrame (never modified) or a ``.csv``, ``.tsv``, ``.txt`` (read
        with ``pandas.read_csv``) or ``.xlsx``/``.xlsm`` (openpyxl) or ``.xls``
        (``pandas.read_excel``, needs the ``xlrd`` package) file. Files are
        read as text, so metadata from files stays text (sample ids such as
        ``"007"`` keep their zeros). A header that appears twice in a file is
        refused (naming it and both column positions); an Excel formula cell is
        read from its stored result (reported), one without a stored result is
        an error in a part column. Column names that are not text (numbers,
        tuples of a two-row header) are converted to text and reported.
    parts : list of column names, optional
        The part columns (names as in the table, or without their unit).
        Default: detected column by column (see
        :mod:`compwidgets.intake.columns`): a header naming a composition unit
        (``"SiO2 (wt%)"``), an element, an oxide or an analyte (``Zr``,
        ``Fe2O3T``, ``LOI``, ``Total S``) makes a part, and then every cell
        must be readable (else the error names the column and its first
        unreadable cells; an all-empty such column is refused too). Totals and
        sums (``Total``, ``Sum``, ``Total oxides``, ``Sum REE (ppm)``,
        ``ΣREE``), coordinates (x, y, easting, latitude, depth, ...), headers
        with a length/angle/temperature or other non-composition unit
        (``"Depth (m)"``, ``"Weight (g)"``) and sample properties (``pH``,
        ``Year``) are metadata. Any other column is a part when all its cells
        are readable with at least one number (point counts, ``"a"``), else
        metadata (reported, with the reason).
    units : dict column -> unit, optional
        Units of the parts. Otherwise read from the name (``"SiO2 (wt%)"``,
        ``"Zr [ppm]"``, ``"Ba_ppm"``; the part is then called ``SiO2``, ...),
        from the cells (``"150 ppm"``, ``"<5 ppm"``: the units in the cells
        must agree with the header and with each other) or ``default_unit``.
        Known: wt% (also "%"), ppm, ppb, mg/kg, g/t, ug/g (µg/g), mg/g, g/kg,
        and "count" for point counts.
    default_unit : str, default "wt%"
        Unit of parts whose unit is given nowhere else.
    common_unit : str, optional
        Unit of the result. Default: wt% when any part is in wt%, else ppm
        (counts stay counts; counts cannot be mixed with mass units).
        1 wt% = 10,000 ppm; mg/kg = g/t = ug/g = ppm.
    convert : dict part -> formula, optional
        Formula conversions, e.g. ``{"Fe2O3": "FeO", "SiO2": "Si", "Zr": "ZrO2"}``,
        with factors from :func:`compwidgets.units.conversion_factor`. Values and
        detection limits are multiplied and the part is renamed to the target.
    detection_limits : dict part -> limit, or a number, optional
        Limits in each part's original unit, for cells given as a token
        (``"bdl"``, ...) or as zero. A ``<0.05`` cell carries its own limit,
        which wins. A number applies to every part, in each part's own unit.
        When not given, a DataFrame's ``attrs["detection_limits"]`` (part ->
        limit, as the demo tables carry) is used for the parts it names
        (reported); an error for a token without a limit lists the limits
        the column's own ``<x`` entries give.
    replacement : {"multiplicative", "simple", "none"}, default "multiplicative"
        What values below detection become: multiplicative replacement
        (Martin-Fernandez et al. 2003; ``fraction * DL`` with the observed
        parts of the row rescaled so that the row keeps the total of its
        observed parts and all their ratios), ``"simple"`` (``fraction * DL``,
        nothing else changes) or ``"none"`` (left NaN). Rows where
        multiplicative replacement is impossible (no observed part, or the
        replacements would reach the observed total;
        :func:`compwidgets.core.replacement_factors`) are not replaced and
        are flagged. Missing cells are never filled.
    fraction : float, default 0.65
        Share of the detection limit used as the replacement, in (0, 1).
    negative_is_below_detection : bool, default False
        Read ``-0.05`` as "below a detection limit of 0.05" (a laboratory
        convention); otherwise a negative number is an error.
    total_window : (low, high), default (98.5, 101.5)
        Acceptable analytical total in wt% (a common acceptance window for
        major-element analyses, quoted from memory: common practice, not a
        standard; use your laboratory's). Checked only when every part is a
        mass unit and at least one is reported in percent (a table of traces
        in ppm alone is not a full analysis); the total is the sum of the
        observed values in wt% as reported (before formula conversion and
        replacement). Set ``check_total=False`` for other partial analyses.
    check_total : bool, default True
    total_tolerance : float or None, default 0.5
        A stated total column (``Total``, ``Total (wt%)``, ``Sum``) is compared
        per row with the sum of the observed parts in its unit (a total of the
        oxides or majors with the parts reported in percent); rows differing
        by more than this many wt% (absolute; counts for point counts) are
        flagged with both numbers. None: no comparison.
    decimal : {".", ","}, default "."
        Decimal mark of text cells (with "," a cell " 1,5 " reads as 1.5; a
        cell such as "1.234" is then refused as ambiguous unless ``thousands``
        says what the dot is).
    thousands : {",", ".", " ", "'", None}, default None
        Thousands separator of text cells ("1,234.5" with ``thousands=","``).
        It must part groups of three digits; otherwise the cell is refused.
    sheet_name : int or str, default 0
        Sheet of a spreadsheet.
    below_tokens : list of str
        Text meaning "below detection", compared stripped and
        case-insensitively. Default: ``bdl, b.d.l., <dl, <lod, nd, n.d.,
        not detected``; note that "n.d." and "nd" are read as "not detected"
        (remove them here and add them to ``missing_tokens`` if your table
        uses them for "no data"). A token that is a number (e.g. "-999")
        matches cells of that value.
    missing_tokens : list of str
        Text meaning "missing". Default: ``"", -, --, na, n.a., nan, null,
        none, not analysed``. NaN/None cells of a DataFrame are always missing.
    index_col : str, int or False, optional
        The column holding the row labels (a name, or a position counted from
        0), for files and DataFrames alike. Default None: a sample-id column
        is detected (a header such as ``Sample ID``, ``sample_id``, ``Lab No``
        or else the first column, holding a unique value in every row) when
        the table has no labels of its own (files; DataFrames with the
        default 0..n-1 index). False: no label column (files: rows numbered
        from 0; DataFrames keep their index).
    sep : str, optional
        Text files only: the delimiter; default tab for .tsv, else the most
        frequent of tab ; , | in the header line.
    spill : path, False or None
        Tables read partition by partition only (a dask DataFrame, Parquet,
        a glob of files): where the parsed partitions are kept once read, so
        that a second use does not parse again (:mod:`compwidgets.lazy.spill`).
        None (default): a temporary folder, removed with the composition;
        a path: that folder (kept); False: parse again at every use.

    Returns
    -------
    Composition
        See :class:`~compwidgets.composition.Composition`. The report holds
        one row per action, each with a reason ``code``: ``column`` (one per
        input column: part, metadata or index, and why), ``renamed``,
        ``setting``, ``parsed_text`` (a number read from text that needed
        more than trimming: decimal comma, minus sign, thousands separators,
        a unit in the cell, a formula's stored result), ``missing``,
        ``below_detection`` (``value`` = the limit in the common unit, NaN
        when unknown), ``negative_as_below_detection``, ``unit_converted``
        and ``formula_converted`` (one per column, ``value`` = factor),
        ``replaced`` (``value`` = the new value), ``scaled`` (one per row of
        a multiplicative replacement, ``value`` = the factor its observed
        parts were multiplied by), ``total_not_compared`` and ``flagged``
        (``value`` = the analytical total when checked; ``code`` = the codes
        of the row's reasons joined by ";"). Cells are named by their row
        label and their part name.

    Raises
    ------
    CompositionError
        For any cell or option that cannot be read, naming the row label, the
        column and the value.
    """
    options = make_options(
        parts=parts,
        units=units,
        default_unit=default_unit,
        common_unit=common_unit,
        convert=convert,
        detection_limits=detection_limits,
        replacement=replacement,
        fraction=fraction,
        negative_is_below_detection=negative_is_below_detection,
        total_window=total_window,
        check_total=check_total,
        total_tolerance=total_tolerance,
        decimal=decimal,
        thousands=thousands,
        sheet_name=sheet_name,
        below_tokens=below_tokens,
        missing_tokens=missing_tokens,
        index_col=index_col,
        sep=sep,
    )
    if is_lazy_source(source):  # dask: the same steps, partition by partition
        from ..lazy.intake import read_lazy

        return read_lazy(source, options, spill=spill)
    if spill is not None:
        raise CompositionError(
            "spill applies to tables read partition by partition (dask, Parquet, a glob of "
            "files); this table is read into memory whole"
        )
    st = IntakeState(options, load(source, options))
    choose_index(st)
    classify_columns(st)
    make_parts(st)
    choose_common_unit(st)
    column_limits(st)
    resolve_conversions(st)
    read_parts(st)
    analytical_total(st)
    compare_total_columns(st)
    apply_conversions(st)
    replace_below(st)
    return build(st, _settings(st))


def _settings(st: IntakeState) -> dict:
    o = st.options
    tokens = o.tokens
    return {
        **st.loaded.note,
        "parts": list(st.names),
        "columns": {st.names[j]: str(p.column) for j, p in enumerate(st.parts)},
        "units_given": None if o.units is None else {str(k): str(v) for k, v in o.units.items()},
        "default_unit": o.default_canonical,
        "unit": st.unit,
        "conversions": {
            str(st.parts[j].name): {"to": str(t), "factor": float(f)}
            for j, (t, f) in st.conversions.items()
        },
        "detection_limits": settings_limits(st),
        "detection_limits_source": st.limits_source,
        "replacement": o.replacement,
        "fraction": o.fraction,
        "negative_is_below_detection": o.negative_is_below_detection,
        "check_total": o.check_total,
        "total_checked": st.total_checked,
        "total_window": list(o.total_window),
        "total_tolerance": o.total_tolerance,
        "total_columns": [
            c.name
            for c in st.columns.values()
            if c.code == codes.TOTAL_COLUMN and c.parsed is not None
        ],
        "decimal": o.decimal,
        "thousands": o.thousands,
        "below_tokens": list(tokens.below_given),
        "missing_tokens": list(tokens.missing_given),
        "index_col": st.index_column,
        "index_source": st.index_source,
        "metadata": st.metadata_columns(),
    }
