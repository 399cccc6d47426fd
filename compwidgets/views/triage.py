"""The triage panel: the intake report turned into rows to look at.

:class:`TriagePanel` lists, as buttons with a row count, the rows flagged at
intake (and why), analytical totals outside the window, missing and
below-detection values per part, the values replaced (the detection limit and
the value put in its place), and the outlier candidates by robust Mahalanobis
distance of the ilr coordinates of the active parts
(:func:`compwidgets.core.outliers.robust_distances`, recomputed when the active
parts change). Clicking an item selects its rows in every view.

A caution is shown above the panel: these are exploratory screening results;
they do not replace accredited laboratory QA/QC or local regulations.
Everything from the table reaches the browser as text (``Label`` values,
``Button`` descriptions, ``Select`` options).
"""

from __future__ import annotations

from dataclasses import dataclass

import ipywidgets as w
import numpy as np
import pandas as pd

from ..composition import BELOW_DL, MISSING
from ..core import CompositionError
from ..core.outliers import (
    DEFAULT_QUANTILE,
    RobustDistances,
    chi2_cutoff,
    robust_distances,
    robust_distances_by_group,
)
from ..intake import codes

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


@dataclass(frozen=True, eq=False)
class TriageItem:
    """One thing to look at: a section, a text label and the row positions."""

    section: str
    label: str
    positions: np.ndarray

    @property
    def count(self) -> int:
        return int(self.positions.size)


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


def intake_items(composition) -> list[TriageItem]:
    """The intake part of the triage, without widgets.

    Parameters
    ----------
    composition : Composition

    Returns
    -------
    list of TriageItem
        Flagged rows (all, then by reason code, see
        :mod:`compwidgets.intake.codes`), analytical totals below and above the
        window and stated totals that differ from the sum of the parts (read
        from the codes, not the text), then per part: missing values, values below
        detection, replaced values (positions from ``status`` and
        ``composition.replaced``, i.e. the cells of the report's "replaced"
        entries). Items with no rows are left out.
    """
    c = composition
    index = c.values.index
    items: list[TriageItem] = []

    flags = c.flags
    if len(flags):
        items.append(
            TriageItem("Flagged rows", "all flagged rows", _positions(index, flags.index))
        )
        for code in _flag_codes(flags):
            labels = c.flagged_rows(code)
            text = codes.REASONS.get(code, code)
            items.append(TriageItem("Flagged rows", f"flagged: {text}", _positions(index, labels)))

    lo, hi = (float(x) for x in (c.settings or {}).get("total_window", (np.nan, np.nan)))
    outside = c.flagged_rows(codes.TOTAL_OUTSIDE_WINDOW)
    if len(outside):
        totals = pd.to_numeric(flags.loc[outside, "total"], errors="coerce").to_numpy(float)
        for text, mask in (
            (f"analytical total below {lo:g} wt%", totals < lo),
            (f"analytical total above {hi:g} wt%", totals > hi),
        ):
            if mask.any():
                items.append(
                    TriageItem("Analytical totals", text, _positions(index, outside[mask]))
                )
    mismatch = c.flagged_rows(codes.TOTAL_MISMATCH)
    if len(mismatch):
        tolerance = (c.settings or {}).get("total_tolerance")
        items.append(
            TriageItem(
                "Analytical totals",
                "stated total differs from the sum of the parts"
                + (f" by more than {tolerance:g} wt%" if tolerance is not None else ""),
                _positions(index, mismatch),
            )
        )

    status = c.status.to_numpy()
    for j, part in enumerate(c.parts):
        pos = np.flatnonzero(status[:, j] == MISSING).astype(np.uint32)
        if pos.size:
            items.append(TriageItem("Missing values", f"{part}: missing", pos))
    for j, part in enumerate(c.parts):
        pos = np.flatnonzero(status[:, j] == BELOW_DL).astype(np.uint32)
        if pos.size:
            items.append(TriageItem("Below detection", f"{part}: below detection", pos))

    replaced = c.replaced.to_numpy()
    values = c.values.to_numpy(dtype=float)
    limits = c.detection_limits.to_numpy(dtype=float)
    for j, part in enumerate(c.parts):
        pos = np.flatnonzero(replaced[:, j]).astype(np.uint32)
        if not pos.size:
            continue
        dl, new = limits[pos, j], values[pos, j]
        with np.errstate(divide="ignore", invalid="ignore"):
            share = new / dl
        dl, shown_unit = c.in_reported_unit(part, dl)  # traces read back in ppm
        new, _ = c.in_reported_unit(part, new)
        label = (
            f"{part}: replaced; detection limit {_span(dl)} {shown_unit}, "
            f"now {_span(new)} {shown_unit}"
            + (f" ({_span(share)} x limit)" if np.isfinite(share).any() else "")
        )
        items.append(TriageItem("Replaced values", label, pos))
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
        every complete row. None fits on all rows.
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
    message : ipywidgets.Label
    """

    def __init__(
        self,
        model,
        quantile: float = DEFAULT_QUANTILE,
        support_fraction: float | None = None,
        random_state: int | None = 0,
        max_fit_rows: int | None = 5000,
        by_group: bool | None = None,
        **kwargs,
    ):
        self.model = model
        self.support_fraction = support_fraction
        self.random_state = random_state
        self.max_fit_rows = max_fit_rows
        self.fits: dict = {}
        self.distances: np.ndarray | None = None
        self._outlier_key: tuple | None = None
        self._not_screened = ""
        self.output = w.Output()
        capture = self.output.capture()

        self.caution = w.Label(value=CAUTION, style={"font_weight": "bold"})
        self.message = w.Label(value="")
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
        self.by_group.observe(capture(lambda _c: self.refresh_outliers()), names=["value"])
        self.mixture_note = w.Label(
            value="Rows of a different population (e.g. another catchment or rock type) also "
            "lie far from a single centre: screen by group before reading a distant row as an "
            "error."
        )
        self.outlier_label = w.Label(value="")

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
                        + (f"; first {len(shown):,} of {len(flagged):,} listed" if more else "")
                    )
                )
                children.append(self.flag_list)
        children += [
            w.Label(
                value=SECTIONS[-1] + " (robust Mahalanobis distance, ilr of the active parts)",
                style={"font_weight": "bold"},
            ),
            self.quantile,
            self.by_group,
            self.mixture_note,
            self.outlier_label,
            self.outlier_box,
            self.message,
            self.output,
        ]
        super().__init__(children=children, **kwargs)
        self._on_model = capture(self._model_changed)
        model.observe(self._on_model, names=_FOLLOWED)
        self.refresh_outliers()

    # ------------------------------------------------------------ public
    @property
    def items(self) -> list[tuple[str, np.ndarray]]:
        """``(button text, row positions)`` of every item, in panel order."""
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
        return self._intake_buttons + self._outlier_buttons

    def select_item(self, k: int) -> None:
        """Select the rows of item ``k`` (as a click on its button does)."""
        items = self._intake_items + self._outlier_items
        self.model.select(items[k].positions, mode=self.mode.value)

    @property
    def outliers(self) -> RobustDistances | None:
        """The robust fit of all complete rows (None when screening by group or not possible)."""
        fit = self.fits.get(None)
        return fit[1] if fit is not None else None

    def refresh_outliers(self) -> None:
        """Recompute the robust distances for the current active parts (if anything changed)."""
        model = self.model
        parts = list(model.active_parts)
        by_group = bool(self.by_group.value and model.group_column)
        key = (
            tuple(
                (p, tuple(model.amalgamations.get(p, [p])) if p not in model.parts else (p,))
                for p in parts
            ),
            (model.group_column, model.metadata_version) if by_group else None,
        )
        if key == self._outlier_key:
            return
        self._outlier_key = key
        ok = model.complete_rows(parts)
        rows = np.flatnonzero(ok)
        self.fits, self.distances = {}, None
        options = dict(
            quantile=self.quantile.value,
            support_fraction=self.support_fraction,
            random_state=self.random_state,
            max_fit_rows=self.max_fit_rows,
        )
        notes = []
        if rows.size < model.n_rows:
            notes.append(
                f"{model.n_rows - rows.size:,} row(s) with a missing or zero value in the active "
                "parts not screened"
            )
        try:
            coords = np.asarray(model.ilr(parts))[ok]
            if by_group:
                categories, codes = model.group_codes()
                codes = codes[ok]
                labels = np.array([categories[c] if c >= 0 else None for c in codes], object)
                fits, skipped = robust_distances_by_group(coords, labels, **options)
                no_value = int((codes < 0).sum())
                if no_value:
                    notes.append(f"{no_value:,} row(s) without a {model.group_column} value")
                for label, reason in skipped.items():
                    notes.append(f"group {label} not screened: {reason}")
                if not fits:
                    raise CompositionError("no group has enough complete rows")
                self.fits = {label: (rows[pos], fit) for label, (pos, fit) in fits.items()}
            else:
                self.fits = {None: (rows, robust_distances(coords, **options))}
        except (CompositionError, ValueError) as err:
            self._not_screened = ""
            self._set_outlier_items([], "; ".join([f"No outlier screening: {err}", *notes]))
            return
        distances = np.full(model.n_rows, np.nan)
        for pos, fit in self.fits.values():
            distances[pos] = fit.distances
        self.distances = distances
        sampled = [
            f"{label if label is not None else 'all rows'}: MCD fitted on a random "
            f"{int(fit.fitted.sum()):,} of {fit.fitted.size:,} rows"
            for label, (_, fit) in self.fits.items()
            if not fit.fitted.all()
        ]
        p = int(next(iter(self.fits.values()))[1].location.size)
        small = [
            "all rows" if label is None else str(label)
            for label, (_, fit) in self.fits.items()
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
            description=f"{item.label} ({item.count:,})",
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
                self.message.value = (
                    f"{self.mode.value}: {item.count:,} row(s) of {item.label!s}; "
                    f"{self.model.selection.size:,} selected"
                )
                return

    def _row_chosen(self, change) -> None:
        if change["new"] is None:
            return
        self.model.select([int(change["new"])], mode=self.mode.value)

    def _quantile_changed(self, change) -> None:
        if self.fits:
            self._update_cutoff()

    def _model_changed(self, change) -> None:
        if change["name"] == "group_column":
            self.by_group.disabled = not self.model.group_column
        self.refresh_outliers()

    def _update_cutoff(self) -> None:
        q = float(self.quantile.value)
        p = int(next(iter(self.fits.values()))[1].location.size)
        cut = chi2_cutoff(p, q)
        found = {label: pos[fit.distances > cut] for label, (pos, fit) in self.fits.items()}
        positions = np.sort(np.concatenate(list(found.values()))).astype(np.uint32)
        n_screened = sum(pos.size for pos, _ in self.fits.values())
        text = (
            f"{positions.size:,} of {n_screened:,} complete rows beyond distance {cut:.2f} "
            f"(square root of the chi-square {q:g} quantile, {p} degrees of freedom"
            + (", each group on its own)" if None not in self.fits else ")")
        )
        if self._not_screened:
            text += "; " + self._not_screened
        items = []
        if positions.size:
            items.append(TriageItem("Outliers", f"outliers, distance > {cut:.2f}", positions))
        if None not in self.fits:
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
