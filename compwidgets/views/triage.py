"""The triage panel: the intake report turned into rows to look at.

:class:`TriagePanel` lists, as buttons with a row count, the rows flagged at
intake (and why), analytical totals outside the window, missing and
below-detection values per part, the values replaced (the detection limit and
the value put in its place), and the outlier candidates by robust Mahalanobis
distance of the ilr coordinates of the active parts
(:func:`compwidgets.core.outliers.robust_distances`). Clicking an item selects
its rows in every view.

The outlier screening is the one costly item, so it runs only when needed:
when the panel is first shown (the workbench tells it when its tab opens; a
panel displayed on its own starts once the kernel is idle), when its results
are asked for in code (``fits``, ``outliers``, ``items``, ...), or, once shown,
after the active parts change. A progress bar shows its stages. Its cost is
bounded: the MCD is fitted on at most ``max_fit_rows`` rows and on at most
``max_coordinates`` coordinates (see :mod:`compwidgets.core.outliers`), and the
panel says when either limit applied.

A caution is shown above the panel: these are exploratory screening results;
they do not replace accredited laboratory QA/QC or local regulations.
Everything from the table reaches the browser as text (``Label`` values,
``Button`` descriptions, ``Select`` options).
"""

from __future__ import annotations

from collections.abc import Callable

import ipywidgets as w
import numpy as np
import pandas as pd

from ..core import CompositionError
from ..core.outliers import (
    DEFAULT_MAX_COORDINATES,
    DEFAULT_MAX_FIT_ROWS,
    DEFAULT_QUANTILE,
    RobustDistances,
    robust_distances,
    robust_distances_by_group,
)
from ..intake import codes
from ._errors import shows_errors
from ._later import run_when_idle
from ._progress import ProgressLine
from ._threads import one_blas_thread
from ._words import counted

__all__ = ["CAUTION", "TriageItem", "TriagePanel", "intake_items"]

#: Shown above the panel.
CAUTION = (
    "Caution: exploratory results do not replace accredited laboratory QA/QC or local regulations."
)

#: Flagged rows listed one by one (the buttons cover all of them).
MAX_LISTED_ROWS = 500

#: Below this many fitted rows per ilr coordinate the panel warns of the MCD's
#: small-sample bias (more ordinary rows beyond the cut-off than nominal).
SMALL_FIT_ROWS_PER_COORDINATE = 20

#: Model traits the outlier screening follows.
_FOLLOWED = ["active_parts", "amalgamations", "group_column", "metadata_version"]

SECTIONS = (
    "Flagged rows",
    "Analytical totals",
    "Missing values",
    "Below detection",
    "Replaced values",
    "Outliers",
)


class TriageItem:
    """One thing to look at: a section, a text label and the row positions.

    Parameters
    ----------
    section, label : str
    positions : array-like of int, optional
        Row positions (sorted, unique), or None when ``find`` gives them.
    count : int, optional
        How many rows (with ``find``: known without finding them).
    find : callable, optional
        Returns the row positions when first asked for (the panel shows counts
        only until an item is used), then kept.
    """

    __slots__ = ("section", "label", "_positions", "_count", "_find")

    def __init__(
        self,
        section: str,
        label: str,
        positions=None,
        *,
        count: int | None = None,
        find: Callable[[], np.ndarray] | None = None,
    ):
        if (positions is None) == (find is None):
            raise ValueError("TriageItem: give either positions or find")
        if find is not None and count is None:
            raise ValueError("TriageItem: find needs the count")
        self.section, self.label = section, label
        self._positions = None if positions is None else np.asarray(positions, dtype=np.uint32)
        self._count = int(self._positions.size) if count is None else int(count)
        self._find = find

    @property
    def positions(self) -> np.ndarray:
        """Row positions (found on first use)."""
        if self._positions is None:
            found = np.asarray(self._find(), dtype=np.uint32)
            if found.size != self._count:
                raise CompositionError(
                    f"triage: item {self.label!r} found {found.size} rows, counted {self._count}"
                )
            self._positions, self._find = found, None
        return self._positions

    @property
    def count(self) -> int:
        return self._count

    def __repr__(self) -> str:
        return f"TriageItem({self.section!r}, {self.label!r}, count={self._count})"


def _positions(index: pd.Index, labels, unique: bool = True) -> np.ndarray:
    """Row positions of ``labels`` in ``index`` (intake guarantees unique labels)."""
    labels = pd.Index(labels)
    pos = index.get_indexer(labels)
    if (pos < 0).any():
        raise CompositionError(f"triage: unknown row label(s) {list(labels[pos < 0][:5])}")
    return (np.unique(pos) if unique else pos).astype(np.uint32)


def _number(x: float) -> str:
    return f"{x:.3g}"


def _span(values: np.ndarray) -> str:
    values = np.asarray(values, dtype=float)
    values = values[np.isfinite(values)]
    if values.size == 0:
        return "unknown"
    lo, hi = float(values.min()), float(values.max())
    if np.isclose(lo, hi, rtol=1e-9, atol=0.0):
        return _number(lo)
    return f"{_number(lo)} to {_number(hi)}"


def _flag_codes(flags: pd.DataFrame) -> list[str]:
    """The reason codes present in the flags, in the order of :data:`codes.FLAG_CODES`."""
    if "code" not in flags.columns:
        return []
    found = {
        code
        for joined in flags["code"].astype(str).unique()
        for code in joined.split(codes.CODE_SEPARATOR)
    }
    return [k for k in codes.FLAG_CODES if k in found] + sorted(
        found - set(codes.FLAG_CODES) - {""}
    )


#: Report codes of the cells behind the per-part sections (one entry per cell).
_CELL_CODES = {
    "Missing values": (codes.MISSING_BLANK, codes.MISSING_TOKEN),
    "Below detection": (
        codes.BELOW_TOKEN,
        codes.BELOW_LESS_THAN,
        codes.BELOW_ZERO,
        codes.BELOW_NEGATIVE,
    ),
    "Replaced values": (codes.REPLACED_MULTIPLICATIVE, codes.REPLACED_SIMPLE),
}
_CELL_TEXT = {"Missing values": "missing", "Below detection": "below detection"}


class _RowFinder:
    """Row positions of labels of one index, the label lookup done once and only if asked."""

    def __init__(self, index: pd.Index, labels):
        self.index, self.labels, self._pos = index, labels, None

    def all(self) -> np.ndarray:
        """Positions of every label (in the order of the labels)."""
        if self._pos is None:
            self._pos = _positions(self.index, self.labels, unique=False)
        return self._pos

    def where(self, mask: np.ndarray) -> Callable[[], np.ndarray]:
        """A function giving the sorted positions of the labels where ``mask`` holds."""
        return lambda: np.unique(self.all()[mask])


def _cell_entries(composition) -> dict[str, dict[str, np.ndarray]]:
    """Section -> part -> row labels of the report's cell entries of that section."""
    report = composition.report
    wanted = [code for group in _CELL_CODES.values() for code in group]
    cells = report.loc[report["code"].isin(wanted).to_numpy(dtype=bool), ["row", "column", "code"]]
    out: dict[str, dict[str, np.ndarray]] = {}
    for section, group in _CELL_CODES.items():
        sub = cells[cells["code"].isin(group).to_numpy(dtype=bool)]
        rows = sub["row"].to_numpy(dtype=object)
        out[section] = {
            str(part): rows[at] for part, at in sub.groupby("column", sort=False).indices.items()
        }
    return out


def _flag_items(composition, index: pd.Index) -> list[TriageItem]:
    """Flagged rows (all, then by reason code) and analytical totals, counted from the codes."""
    c = composition
    flags = c.flags
    if not len(flags):
        return []
    finder = _RowFinder(index, flags.index)
    n = len(flags)
    items = [
        TriageItem("Flagged rows", "all flagged rows", count=n, find=finder.where(slice(None)))
    ]
    if "code" in flags.columns:
        # the distinct code lists are few: split each once, then mark its rows
        joined, inverse = pd.factorize(flags["code"].astype(str), sort=False)[::-1]
        holds = [set(j.split(codes.CODE_SEPARATOR)) for j in joined]
    else:
        inverse, holds = np.zeros(n, dtype=np.intp), [set()]
    inverse = np.asarray(inverse)

    def rows_with(code: str) -> np.ndarray:
        return np.isin(inverse, [k for k, found in enumerate(holds) if code in found])

    for code in _flag_codes(flags):
        mask = rows_with(code)
        items.append(
            TriageItem(
                "Flagged rows",
                f"flagged: {codes.REASONS.get(code, code)}",
                count=int(mask.sum()),
                find=finder.where(mask),
            )
        )
    lo, hi = (float(x) for x in (c.settings or {}).get("total_window", (np.nan, np.nan)))
    outside = rows_with(codes.TOTAL_OUTSIDE_WINDOW)
    if outside.any():
        totals = pd.to_numeric(flags["total"], errors="coerce").to_numpy(dtype=float)
        for text, side in (
            (f"analytical total below {lo:g} wt%", totals < lo),
            (f"analytical total above {hi:g} wt%", totals > hi),
        ):
            mask = outside & side
            if mask.any():
                items.append(
                    TriageItem(
                        "Analytical totals", text, count=int(mask.sum()), find=finder.where(mask)
                    )
                )
    mismatch = rows_with(codes.TOTAL_MISMATCH)
    if mismatch.any():
        tolerance = (c.settings or {}).get("total_tolerance")
        items.append(
            TriageItem(
                "Analytical totals",
                "stated total differs from the sum of the parts"
                + (f" by more than {tolerance:g} wt%" if tolerance is not None else ""),
                count=int(mismatch.sum()),
                find=finder.where(mismatch),
            )
        )
    return items


def _replaced_label(composition, part: str, pos: np.ndarray) -> str:
    """'<part>: replaced; detection limit ..., now ...' in the unit the part was reported in."""
    c = composition
    dl = c.detection_limits[part].to_numpy(dtype=float)[pos]
    new = c.values[part].to_numpy(dtype=float)[pos]
    with np.errstate(divide="ignore", invalid="ignore"):
        share = new / dl
    dl, shown_unit = c.in_reported_unit(part, dl)  # traces read back in ppm
    new, _ = c.in_reported_unit(part, new)
    return (
        f"{part}: replaced; detection limit {_span(dl)} {shown_unit}, "
        f"now {_span(new)} {shown_unit}"
        + (f" ({_span(share)} x limit)" if np.isfinite(share).any() else "")
    )


def intake_items(composition) -> list[TriageItem]:
    """The intake part of the triage, without widgets.

    Built from the reason codes of the flags and of the report (one entry per
    cell that was missing, below detection or replaced), counted without
    looking the rows up: the row positions of an item are found when it is
    first used (:attr:`TriageItem.positions`), except for replaced values,
    whose label quotes the values.

    Parameters
    ----------
    composition : Composition

    Returns
    -------
    list of TriageItem
        Flagged rows (all, then by reason code, see
        :mod:`compwidgets.intake.codes`), analytical totals below and above the
        window and stated totals that differ from the sum of the parts, then per
        part (in part order): missing values, values below detection, replaced
        values (the cells of the report's "replaced" entries, with the detection
        limit and the value put in its place). Items with no rows are left out.
    """
    c = composition
    index = c.values.index
    items = _flag_items(c, index)
    cells = _cell_entries(c)
    for section in ("Missing values", "Below detection"):
        found = cells[section]
        for part in c.parts:
            labels = found.get(str(part))
            if labels is not None and labels.size:
                items.append(
                    TriageItem(
                        section,
                        f"{part}: {_CELL_TEXT[section]}",
                        count=labels.size,
                        find=_RowFinder(index, labels).where(slice(None)),
                    )
                )
    found = cells["Replaced values"]
    for part in c.parts:
        labels = found.get(str(part))
        if labels is not None and labels.size:
            pos = _positions(index, labels)
            items.append(TriageItem("Replaced values", _replaced_label(c, part, pos), pos))
    return items


class TriagePanel(w.VBox):
    """Buttons that select the rows worth a look, with a caution above them.

    Parameters
    ----------
    model : CompositionModel
    quantile : float, default 0.975
        Chi-square quantile of the outlier cut-off (settable in the panel).
    support_fraction : float, optional
        MCD support fraction (default of :class:`sklearn.covariance.MinCovDet`).
    random_state : int, default 0
        Seed of the MCD, so that the outliers repeat.
    max_fit_rows : int or None, default 5000
        Fit the MCD on a seeded random sample of at most this many complete
        rows (the fit time grows with the rows); distances are computed for
        every complete row. When screening by group, the groups share this
        many rows (none is sampled below 500 rows). None fits on all rows.
    max_coordinates : int or None, default 20
        With more ilr coordinates than this (more than 21 active parts), fit
        the MCD on this many leading spherical principal components and flag
        rows far from them too (the orthogonal distance). None never reduces.
    by_group : bool, optional
        Screen each group of the grouping column on its own. Default: True
        when the model has a grouping column (rows of another population
        also lie far from a single centre), else False.

    Attributes
    ----------
    items : list of (str, ndarray)
        ``(button text, row positions)`` for every button, in panel order.
    buttons : list of ipywidgets.Button
        One per item, same order.
    fits : dict of group -> (row positions, RobustDistances)
        The robust fits of the last screening: one entry (key None) for all
        complete rows, or one per group of the grouping column when
        ``by_group`` is ticked.
    outliers : RobustDistances or None
        The fit of all complete rows (None when screening by group).
    distances : ndarray or None
        Robust distance per row (NaN for rows not screened).
    status : ipywidgets.Label
        What the last click selected.
    messages : ipywidgets.Output
        Shows errors raised in callbacks (the same name in every view).
    progress : ProgressLine
        Stage and progress bar of a running screening (hidden when none runs).
    limits_label : ipywidgets.Label
        The method and its limits.

    Methods
    -------
    ensure_screened()
        Screen now if the results are not those of the current parts.
    show()
        The panel is on screen: screen now, and again after each change.
    """

    def __init__(
        self,
        model,
        quantile: float = DEFAULT_QUANTILE,
        support_fraction: float | None = None,
        random_state: int | None = 0,
        max_fit_rows: int | None = DEFAULT_MAX_FIT_ROWS,
        by_group: bool | None = None,
        max_coordinates: int | None = DEFAULT_MAX_COORDINATES,
        **kwargs,
    ):
        self.model = model
        self.support_fraction = support_fraction
        self.random_state = random_state
        self.max_fit_rows = max_fit_rows
        self.max_coordinates = max_coordinates
        self._fits: dict = {}
        self._distances: np.ndarray | None = None
        self._outlier_key: tuple | None = None
        self._not_screened = ""
        self._shown = False  # on screen once: screen after each change
        self._pending = False  # a screening is scheduled for when the kernel is idle
        self._screening = False
        self.messages = w.Output()
        capture = shows_errors(self.messages)

        self.caution = w.Label(value=CAUTION, style={"font_weight": "bold"})
        self.status = w.Label(value="")
        self.mode = w.Dropdown(
            options=[
                ("replace the selection", "replace"),
                ("add to the selection", "add"),
                ("remove from the selection", "remove"),
                ("intersect with the selection", "intersect"),
            ],
            value="replace",
            description="A click will",
            style={"description_width": "initial"},
        )
        self.quantile = w.BoundedFloatText(
            value=float(quantile),
            min=0.5,
            max=0.9999,
            step=0.005,
            description="Cut-off quantile (chi-square)",
            style={"description_width": "initial"},
            layout=w.Layout(width="20em"),
        )
        self.quantile.observe(capture(self._quantile_changed), names=["value"])
        self.by_group = w.Checkbox(
            # a table of several populations (catchments, rock types) is screened group by
            # group by default: one robust centre would flag whole minority groups
            value=bool(model.group_column) if by_group is None else bool(by_group),
            description="screen each group of the grouping column on its own",
            disabled=not model.group_column,
            style={"description_width": "initial"},
            layout=w.Layout(width="auto"),
        )
        self.by_group.observe(capture(lambda _c: self.show()), names=["value"])
        self.mixture_note = w.Label(
            value="Rows of a different population (e.g. another catchment or rock type) also "
            "lie far from a single centre: screen by group before reading a distant row as an "
            "error."
        )
        self.outlier_label = w.Label(value="")
        self.limits_label = w.Label(value=self._limits_text())
        self.progress = ProgressLine()

        self._click = capture(self._clicked)
        self._intake_items = intake_items(model.composition)
        self._intake_buttons = [self._button(item) for item in self._intake_items]
        self._outlier_items: list[TriageItem] = []
        self._outlier_buttons: list[w.Button] = []
        self.outlier_box = w.VBox()

        flagged = model.composition.flags
        shown = flagged.iloc[:MAX_LISTED_ROWS]
        pos = _positions(model.index, shown.index, unique=False)
        options = [
            (f"{label}: {reason}", int(p))
            for label, reason, p in zip(shown.index, shown["reason"].astype(str), pos, strict=True)
        ]
        self.flag_list = w.Select(
            options=options,
            value=None,
            rows=min(6, max(2, len(options))),
            layout=w.Layout(width="95%"),
        )
        self.flag_list.observe(capture(self._row_chosen), names=["value"])

        children: list[w.Widget] = [self.caution, self.mode]
        for section in SECTIONS[:-1]:
            buttons = [
                b
                for item, b in zip(self._intake_items, self._intake_buttons, strict=True)
                if item.section == section
            ]
            children.append(w.Label(value=section, style={"font_weight": "bold"}))
            children.append(w.VBox(buttons) if buttons else w.Label(value="none"))
            if section == "Flagged rows" and options:
                more = len(flagged) - len(shown)
                children.append(
                    w.Label(
                        value="Flagged rows and why (click one to select it)"
                        + (
                            f"; first {len(shown):,} of {counted(len(flagged), 'row')} listed"
                            if more
                            else ""
                        )
                    )
                )
                children.append(self.flag_list)
        children += [
            w.Label(
                value=SECTIONS[-1] + " (robust Mahalanobis distance, ilr of the active parts)",
                style={"font_weight": "bold"},
            ),
            self.limits_label,
            self.quantile,
            self.by_group,
            self.mixture_note,
            self.progress,
            self.outlier_label,
            self.outlier_box,
            self.status,
            self.messages,
        ]
        super().__init__(children=children, **kwargs)
        self._on_model = capture(self._model_changed)
        self._capture = capture
        model.observe(self._on_model, names=_FOLLOWED)
        self._say_not_screened()

    # ------------------------------------------------------------ public
    @property
    def items(self) -> list[tuple[str, np.ndarray]]:
        """``(button text, row positions)`` of every item, in panel order."""
        self.ensure_screened()
        return [
            (b.description, item.positions)
            for item, b in zip(
                self._intake_items + self._outlier_items,
                self._intake_buttons + self._outlier_buttons,
                strict=True,
            )
        ]

    @property
    def buttons(self) -> list[w.Button]:
        self.ensure_screened()
        return self._intake_buttons + self._outlier_buttons

    def select_item(self, k: int) -> None:
        """Select the rows of item ``k`` (as a click on its button does)."""
        items = self._intake_items + self._outlier_items
        self.model.select(items[k].positions, mode=self.mode.value)

    @property
    def fits(self) -> dict:
        """The robust fits of the current screening (screens first when needed)."""
        self.ensure_screened()
        return self._fits

    @property
    def distances(self) -> np.ndarray | None:
        """Robust distance per row of the current screening (screens first when needed)."""
        self.ensure_screened()
        return self._distances

    @property
    def outliers(self) -> RobustDistances | None:
        """The robust fit of all complete rows (None when screening by group or not possible)."""
        fit = self.fits.get(None)
        return fit[1] if fit is not None else None

    @property
    def screened(self) -> bool:
        """True when the results shown are those of the current parts and options."""
        return self._outlier_key == self._screening_key()

    def show(self) -> None:
        """The panel is on screen: screen now if needed, and again after each change."""
        self._shown = True
        self.ensure_screened()

    def _repr_mimebundle_(self, **kwargs):
        # displayed on its own: screen once the kernel is idle (the panel shows its progress)
        if not self._shown:
            self._shown = True
            if not self.screened and not self._pending:
                self._pending = run_when_idle(self._capture(self._run_pending))
        return super()._repr_mimebundle_(**kwargs)

    def ensure_screened(self) -> None:
        """Screen for outliers now, unless the results are those of the current parts."""
        if not self._screening:
            self.refresh_outliers()

    def _screening_key(self) -> tuple:
        model = self.model
        by_group = bool(self.by_group.value and model.group_column)
        return (
            tuple((p, tuple(model.members(p))) for p in model.active_parts),
            (model.group_column, model.metadata_version) if by_group else None,
        )

    def _limits_text(self) -> str:
        rows = (
            "all complete rows"
            if self.max_fit_rows is None
            else f"at most {self.max_fit_rows:,} rows (a seeded random sample beyond)"
        )
        coords = (
            ""
            if self.max_coordinates is None
            else f"; beyond {self.max_coordinates} ilr coordinates, on the "
            f"{self.max_coordinates} leading spherical principal components, with rows far "
            "from them flagged too"
        )
        return f"Method: MCD of the ilr coordinates, fitted on {rows}{coords}."

    def _say_not_screened(self) -> None:
        text = "Not screened yet for these parts: the screening runs when this panel is shown."
        if self.outlier_label.value != text:
            self.outlier_label.value = text
        if self._outlier_buttons:
            self._set_outlier_items([], text)

    def refresh_outliers(self) -> None:
        """Recompute the robust distances for the current active parts (if anything changed)."""
        if self._outlier_key == self._screening_key():
            return
        self._screening = True
        try:
            self._screen()
        finally:
            self._screening = False
            self.progress.hide()

    def _screen(self) -> None:
        # many small fits (at most max_fit_rows x max_coordinates): one thread is steady
        with one_blas_thread():
            self._screen_now()

    def _screen_now(self) -> None:
        model = self.model
        parts = list(model.active_parts)
        by_group = bool(self.by_group.value and model.group_column)
        self._outlier_key = self._screening_key()
        ok = model.complete_rows(parts)
        rows = np.flatnonzero(ok)
        self._fits, self._distances = {}, None
        options = dict(
            quantile=self.quantile.value,
            support_fraction=self.support_fraction,
            random_state=self.random_state,
            max_fit_rows=self.max_fit_rows,
            max_coordinates=self.max_coordinates,
        )
        notes = []
        if rows.size < model.n_rows:
            notes.append(
                f"{counted(model.n_rows - rows.size, 'row')} with a missing or zero value in the "
                "active parts not screened"
            )
        try:
            self.progress.show(0, 2, f"ilr coordinates of {rows.size:,} complete rows")
            coords = np.asarray(model.ilr(parts))
            coords = coords if rows.size == ok.size else coords[ok]  # no copy of every row
            if by_group:
                categories, codes = model.group_codes()
                codes = codes[ok]
                labels = np.array(categories + [None], dtype=object)[codes]

                def step(done: int, total: int, label) -> None:
                    self.progress.show(
                        1 + done, total + 1, f"robust fit of group {label} ({done + 1} of {total})"
                    )

                fits, skipped = robust_distances_by_group(
                    coords, labels, shared_fit_rows=True, progress=step, **options
                )
                no_value = int((codes < 0).sum())
                if no_value:
                    notes.append(
                        f"{counted(no_value, 'row')} without a {model.group_column} value"
                    )
                for label, reason in skipped.items():
                    notes.append(f"group {label} not screened: {reason}")
                if not fits:
                    raise CompositionError("no group has enough complete rows")
                self._fits = {label: (rows[pos], fit) for label, (pos, fit) in fits.items()}
            else:
                n_fit = min(rows.size, self.max_fit_rows or rows.size)
                self.progress.show(1, 2, f"robust fit (MCD) on {n_fit:,} rows")
                self._fits = {None: (rows, robust_distances(coords, **options))}
        except (CompositionError, ValueError) as err:
            self._not_screened = ""
            self._set_outlier_items([], "; ".join([f"No outlier screening: {err}", *notes]))
            return
        distances = np.full(model.n_rows, np.nan)
        for pos, fit in self._fits.values():
            distances[pos] = fit.distances
        self._distances = distances
        sampled = [
            f"{label if label is not None else 'all rows'}: MCD fitted on a random "
            f"{int(fit.fitted.sum()):,} of {fit.fitted.size:,} rows"
            for label, (_, fit) in self._fits.items()
            if not fit.fitted.all()
        ]
        first = next(iter(self._fits.values()))[1]
        p = int(first.location.size)
        if first.reduced:
            shares = [fit.explained for _, fit in self._fits.values()]
            share = (
                f"{100 * shares[0]:.0f} %"
                if len(shares) == 1
                else f"{100 * min(shares):.0f}-{100 * max(shares):.0f} %"
            )
            sampled.insert(
                0,
                f"{first.n_input_coordinates} ilr coordinates reduced to their {p} leading "
                f"spherical principal components ({share} of the robust spread); rows far "
                "from those components are flagged by their orthogonal distance",
            )
        small = [
            "all rows" if label is None else str(label)
            for label, (_, fit) in self._fits.items()
            if fit.fitted.sum() < SMALL_FIT_ROWS_PER_COORDINATE * p
        ]
        if small:
            # Small-sample bias of the MCD (Pison, Van Aelst & Willems 2002, from memory):
            # with few rows per coordinate more ordinary rows pass the chi-square cut-off.
            sampled.append(
                f"few rows for {p} coordinates ({', '.join(small)}): expect more ordinary rows "
                "beyond the cut-off than the quantile suggests"
            )
        self._not_screened = "; ".join(notes + sampled)
        self._update_cutoff()

    def close(self) -> None:
        """Stop following the model, then close the widgets."""
        try:
            self.model.unobserve(self._on_model, names=_FOLLOWED)
        except ValueError:
            pass
        super().close()

    # ---------------------------------------------------------- internals
    def _button(self, item: TriageItem) -> w.Button:
        button = w.Button(
            description=f"{item.label} ({counted(item.count, 'row')})",
            tooltip="select these rows in every view",
            layout=w.Layout(width="auto", max_width="100%"),
        )
        button.on_click(self._click)
        return button

    def _clicked(self, button: w.Button) -> None:
        buttons = self.buttons
        for k, b in enumerate(buttons):
            if b is button:
                self.select_item(k)
                item = (self._intake_items + self._outlier_items)[k]
                self.status.value = (
                    f"{self.mode.value}: {counted(item.count, 'row')} of {item.label!s}; "
                    f"{counted(self.model.selection.size, 'row')} selected"
                )
                return

    def _row_chosen(self, change) -> None:
        if change["new"] is None:
            return
        self.model.select([int(change["new"])], mode=self.mode.value)

    def _quantile_changed(self, change) -> None:
        if self.screened and self._fits:
            self._update_cutoff()

    def _model_changed(self, change) -> None:
        if change["name"] == "group_column":
            self.by_group.disabled = not self.model.group_column
        if self.screened:
            return
        self._say_not_screened()
        if self._shown and not self._pending:
            # after the change has reached every view: screen once the kernel is idle
            self._pending = run_when_idle(self._capture(self._run_pending))

    def _run_pending(self) -> None:
        self._pending = False
        self.ensure_screened()

    def _update_cutoff(self) -> None:
        q = float(self.quantile.value)
        fits = self._fits
        first = next(iter(fits.values()))[1]
        p = int(first.location.size)
        cut, _ = first.cutoffs(q)
        found = {label: pos[fit.outliers_at(q)] for label, (pos, fit) in fits.items()}
        positions = np.sort(np.concatenate(list(found.values()))).astype(np.uint32)
        n_screened = sum(pos.size for pos, _ in fits.values())
        orthogonal = ""
        if first.reduced:
            if len(fits) == 1:
                orthogonal = f" or orthogonal distance {first.cutoffs(q)[1]:.2f}"
            else:
                orthogonal = " or their group's orthogonal-distance cut-off"
        text = (
            f"{positions.size:,} of {n_screened:,} complete rows beyond distance {cut:.2f}"
            f"{orthogonal} (square root of the chi-square {q:g} quantile, {p} degrees of "
            "freedom" + (", each group on its own)" if None not in fits else ")")
        )
        if self._not_screened:
            text += "; " + self._not_screened
        items = []
        if positions.size:
            items.append(
                TriageItem("Outliers", f"outliers, distance > {cut:.2f}{orthogonal}", positions)
            )
        if None not in fits:
            items += [
                TriageItem("Outliers", f"outliers in {label}", pos.astype(np.uint32))
                for label, pos in found.items()
                if pos.size
            ]
        self._set_outlier_items(items, text)

    def _set_outlier_items(self, items: list[TriageItem], text: str) -> None:
        for b in self._outlier_buttons:
            b.close()
        self._outlier_items = list(items)
        self._outlier_buttons = [self._button(item) for item in items]
        self.outlier_box.children = tuple(self._outlier_buttons)
        self.outlier_label.value = text
