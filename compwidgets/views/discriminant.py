"""The discriminant view: how well the active parts tell the model's groups apart.

A linear (or quadratic) discriminant rule is fitted on the ilr coordinates of
the model's active parts, with its grouping column (or a group made from a
selection) as the groups (:class:`compwidgets.discriminant.GroupDiscriminant`).
The view draws

* the rows on the first two discriminant axes (canonical variates), in their
  group colours, with the scatter machinery of
  :class:`~compwidgets.views._scatter.ScatterView` (selection tools, density
  mode for large tables, hover with the posterior probabilities);
* the cross-validated confusion matrix (stratified k-fold) as a grid: a click
  on a cell selects its rows (true group i assigned to group j) in every view;
* the discriminant directions as clr loadings (a log-contrast each: they sum
  to 0), with the parts that load most named.

Every number comes from :mod:`compwidgets.core.discriminant`; this module
places marks and text. Large tables: the rule is fitted on a stratified random
sample of at most ``max_fit_rows`` rows and cross-validated on at most
``max_cv_rows`` (the notes say so); every row is drawn and assigned.

Assignments are exploratory (see :data:`compwidgets.discriminant.CAUTION`).

Example
-------
>>> import compwidgets as cw
>>> table = cw.demo.stream_sediments(n=400)  # invented survey, five catchments
>>> model = cw.CompositionModel(cw.read_composition(table), group_column="catchment")
>>> view = DiscriminantView(model, kind="quadratic")
>>> counts = view.rule.confusion_frame()  # the counts of the grid
>>> view.select_cell(0, 1)  # rows of the first group assigned to the second
>>> bool(len(model.selection) == counts.iat[0, 1])
True
"""

from __future__ import annotations

import html

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets as t

from ..core import CompositionError, geometry
from ..core import discriminant as core_discriminant
from ..discriminant import CAUTION, GroupDiscriminant
from ..model import CompositionModel
from . import _common as cm
from ._plot_layout import plane_limits
from ._scatter import ScatterView
from ._threads import one_blas_thread

__all__ = ["DiscriminantView"]

#: Colours of the confusion grid (0 rows -> most rows) and of the loadings of axes 1 and 2.
GRID_COLOURS = ("#f7f6f2", "#9fc0e6")
LOADING_COLOURS = (cm.PALETTE[0], "#9fc0e6")
#: Parts named per side of an axis.
_TOP_PARTS = 3
#: Pixels between the data and the legend on the right.
_LEGEND_GAP_PX = 12
#: Widest data area (before the legend), as a multiple of its height.
_MAX_ASPECT = 1.4
#: Row and column names of the empty grid shown before a fit (the grid needs 2 x 2).
_NO_GROUPS = ("", " ")
#: Pixels per part along the loadings chart, and per group along the confusion grid.
_LOADING_PX = 16
_CELL_PX = 48


class ConfusionGrid(bq.GridHeatMap):
    """bqplot's GridHeatMap with its selected cells as plain ``[row, column]`` pairs.

    The browser sends the cells a click selects as a JSON list; bqplot's array
    trait reads it as an object array that it cannot send back, so the change
    never reached an observer (seen in Chromium with bqplot 0.13). A list trait
    keeps the pairs as they come, both ways.
    """

    selected = t.List(allow_none=True, default_value=None).tag(sync=True)


def axis_label(axis: int, share: float | None, single: bool = False) -> str:
    """Axis text: discriminant axis ``axis`` (0-based) and its share of the separation."""
    if single and axis == 1:
        return "spread across axis 1 (no 2nd axis with 2 groups)"
    text = "n/a" if share is None or not np.isfinite(share) else f"{100 * share:.1f} %"
    return f"discriminant axis {axis + 1} \u00b7 {text}"


class DiscriminantView(ScatterView):
    """Discriminant analysis of the model's groups on its active parts.

    Parameters
    ----------
    model : CompositionModel
    kind : {"linear", "quadratic"}, default "linear"
        The rule that assigns rows (and is cross-validated); the plane is the
        linear discriminant's either way.
    priors : {"proportional", "equal"}, default "proportional"
    n_splits : int, default 5
        Folds of the stratified cross-validation.
    max_fit_rows, max_cv_rows : int or None, default 20,000 and 10,000
        Rows the rule is fitted on and cross-validated on (stratified random
        samples beyond; seeded with ``seed``).
    id_column : str, default ""
        Metadata column shown as the sample id on hover ("" = the row label).
    **kwargs
        Passed to :class:`~compwidgets.views._scatter.ScatterView` (mode,
        threshold, subsample_size, seed, height).

    Attributes
    ----------
    rule : GroupDiscriminant or None
        The fitted rule (None when it cannot be fitted; ``notes`` says why).
    confusion : ConfusionGrid
        The cross-validated counts (row = true group, column = assigned); its
        ``selected`` cells (``[[row, column], ...]``) select their rows.
    confusion_figure, loadings_figure : bqplot.Figure
    loadings : bqplot.Bars
        clr loadings of axes 1 and 2 (grouped bars).
    axis_text : ipywidgets.Label
        The parts that load most on each axis.
    caution : ipywidgets.HTML
    """

    #: Room for the axes around the plot area (pixels).
    figure_margin = {"top": 10, "bottom": 45, "left": 58, "right": 10}
    tooltip_max_lines = 7

    kind = t.Enum(core_discriminant.KINDS, default_value="linear")
    priors = t.Enum(core_discriminant.PRIORS, default_value="proportional")
    n_splits = t.Int(5)

    def __init__(
        self,
        model: CompositionModel,
        kind: str = "linear",
        priors: str = "proportional",
        *,
        n_splits: int = 5,
        max_fit_rows: int | None = 20_000,
        max_cv_rows: int | None = 10_000,
        id_column: str = "",
        **kwargs,
    ):
        self.rule: GroupDiscriminant | None = None
        self._plane_xy: np.ndarray | None = None
        self._fit_key = None
        self._fit_error = ""
        self._internal = True
        self._cell_rows = np.zeros(0, dtype=np.uint32)
        self._selecting_cells = False
        self.max_fit_rows, self.max_cv_rows = max_fit_rows, max_cv_rows
        super().__init__(model, **kwargs)
        self._build_side()
        try:
            self.kind, self.priors, self.n_splits = kind, priors, n_splits
            self.id_column = id_column
        finally:
            self._internal = False
        handler = self._guard(self._on_selection_elsewhere)
        model.observe(handler, names=["selection"])
        self._selection_handler = handler
        self._start()

    # ---------------------------------------------------------------- fitting
    @t.validate("n_splits")
    def _check_splits(self, proposal):
        if int(proposal["value"]) < 2:
            raise t.TraitError(f"n_splits must be at least 2, got {proposal['value']}")
        return int(proposal["value"])

    @t.observe("kind", "priors", "n_splits")
    def _on_rule_traits(self, change):
        if change["name"] == "kind" and hasattr(self, "_kind_buttons"):
            self._kind_buttons.value = change["new"]
        if change["name"] == "priors" and hasattr(self, "_priors_menu"):
            self._priors_menu.value = change["new"]
        if self._ready and not self._internal:
            self.refresh()

    def _key(self) -> tuple:
        """What the rule depends on (a new metadata column leaves the others unchanged)."""
        m = self.model
        parts = tuple((p, tuple(m.members(p))) for p in m.active_parts)
        return (parts, m.group_column, self.kind, self.priors, self.n_splits)

    def _refit(self) -> None:
        """Fit the rule on the model's current parts and groups (or say why not)."""
        self._fit_key = self._key()
        m = self.model

        def fit():
            try:
                with one_blas_thread():  # fits on a bounded sample: one thread is steady
                    return fit_on_one_thread()
            except CompositionError as err:
                return f"no discriminant: {err}"

        def fit_on_one_thread():
            rule = GroupDiscriminant(
                m,
                self.kind,
                self.priors,
                n_splits=self.n_splits,
                max_fit_rows=self.max_fit_rows,
                max_cv_rows=self.max_cv_rows,
                seed=self.seed,
            )
            rule.cross_validation  # noqa: B018 - fitted now, so a failure shows now
            return rule, rule.fit.plane_coordinates(rule.coordinates)

        # kept in the model's cache: parts (or options) shown before are a lookup
        sbp = None if m.sbp is None else (m.sbp.shape, m.sbp.tobytes(), tuple(m.balance_names))
        key = (
            "discriminant-rule", m.group_column, m.metadata_version, self.kind, self.priors,
            self.n_splits, self.max_fit_rows, self.max_cv_rows, self.seed, sbp,
        )  # fmt: skip
        self._rule_key = key
        fitted = m.derived(key, None, fit)
        if isinstance(fitted, str):
            self.rule, self._plane_xy, self._fit_error = None, None, fitted
        else:
            (self.rule, self._plane_xy), self._fit_error = fitted, ""

    # ----------------------------------------------------------- ScatterView
    def shown_parts(self) -> list[str]:
        return list(self.model.active_parts)

    def _view_ranges(self):
        return (-1.0, 1.0), (-1.0, 1.0)  # until the first fit: see _coordinates

    def _legend_anchor(self):
        return cm.right_legend_anchor(self)

    def _coordinates_key(self):
        return getattr(self, "_rule_key", None)  # the plane is the rule's

    def _coordinates(self):
        if self._fit_key != self._key():
            self._refit()
        rule = self.rule
        if rule is None:
            return np.zeros(0, np.uint32), np.zeros(0), np.zeros(0)
        xy = self._plane_xy
        self.set_view_ranges(*self._plane_ranges(xy))
        return rule.rows, xy[:, 0], xy[:, 1]

    def _plane_ranges(self, xy: np.ndarray):
        corners = geometry.bounding_corners(xy[:, 0], xy[:, 1])  # the same limits, 4 numbers
        (x0, x1), (y0, y1) = plane_limits(
            corners, np.zeros((0, 2)), aspect_range=(0.75, _MAX_ASPECT)
        )
        legend = (self.legend_width_px + _LEGEND_GAP_PX) / self._plot_height_px()
        return (x0, x1 + legend * (y1 - y0)), (y0, y1)

    def _refresh_extra(self) -> None:
        if self._fit_key != self._key():  # new groups (the base redraws only colours then)
            self.refresh()
            return
        self._draw_axes_labels()
        self._draw_confusion()
        self._draw_loadings()
        self._set_note("fit", self._fit_note())

    # ------------------------------------------------------------------ build
    def _build_side(self) -> None:
        self.axis_x = bq.Axis(scale=self.scale_x, label=axis_label(0, None), grid_lines="none")
        self.axis_y = bq.Axis(
            scale=self.scale_y, label=axis_label(1, None),
            side="left", grid_lines="none", label_offset="40px",
        )  # fmt: skip
        self.figure.axes = [self.axis_x, self.axis_y]

        rows_scale, cols_scale = bq.OrdinalScale(reverse=True), bq.OrdinalScale()
        self._grid_scales = (rows_scale, cols_scale)
        self._grid_colour = bq.ColorScale(colors=list(GRID_COLOURS), min=0, max=1)
        self.confusion = ConfusionGrid(
            color=np.zeros((2, 2)), row=np.array(_NO_GROUPS), column=np.array(_NO_GROUPS),
            scales={"row": rows_scale, "column": cols_scale, "color": self._grid_colour},
            display_format=".0f", font_style={"font-size": "12px"}, stroke="#ffffff",
            interactions={"click": "select"},
            selected_style={"stroke": cm.DENSITY_SELECTION_COLOUR, "stroke-width": "3"},
        )  # fmt: skip
        self.confusion.observe(self._guard(self._on_cell), names=["selected"])
        self._grid_axes = [
            bq.Axis(scale=rows_scale, side="left"),
            bq.Axis(scale=cols_scale, side="bottom", label="assigned (cross-validated)"),
        ]  # fmt: skip
        self.confusion_figure = bq.Figure(
            marks=[self.confusion], axes=self._grid_axes, animation_duration=0,
            fig_margin={"top": 10, "bottom": 60, "left": 130, "right": 60},
            layout=widgets.Layout(width="430px", height="300px"), padding_x=0, padding_y=0,
        )  # fmt: skip
        self.confusion_note = widgets.Label()

        self._load_x = bq.OrdinalScale()
        self._load_y = bq.LinearScale(min=-1.0, max=1.0)
        self.loadings = bq.Bars(
            x=np.array(["-"]), y=np.zeros((2, 1)), scales={"x": self._load_x, "y": self._load_y},
            type="grouped", colors=list(LOADING_COLOURS), padding=0.15, interactions={},
            enable_hover=False, labels=["axis 1", "axis 2"], display_legend=False,
        )  # fmt: skip
        self._load_axes = [
            bq.Axis(scale=self._load_x, side="bottom", tick_rotate=-90,
                    tick_style={"font-size": "11px"}),
            bq.Axis(scale=self._load_y, side="left", label="clr loading",
                    tick_format=".1f", label_offset="32px"),
        ]  # fmt: skip
        self.loadings_figure = bq.Figure(
            marks=[self.loadings], axes=self._load_axes, animation_duration=0,
            fig_margin={"top": 10, "bottom": 70, "left": 48, "right": 8},
            layout=widgets.Layout(width="420px", height="220px"),
        )  # fmt: skip
        self.axis_text = widgets.Label()
        self.axis_text_2 = widgets.Label()
        self.caution = widgets.HTML(
            f'<div style="white-space: normal; max-width: 760px">{html.escape(CAUTION)}</div>'
        )

        self._kind_buttons = widgets.ToggleButtons(
            options=[("linear", "linear"), ("quadratic", "quadratic")],
            value=self.kind, description="rule", style={"button_width": "90px"},
            layout=widgets.Layout(display="flex", align_items="center"),
        )  # fmt: skip
        self._kind_buttons.observe(self._guard(self._on_kind_button), names=["value"])
        self._priors_menu = widgets.Dropdown(
            options=[("group shares", "proportional"), ("equal", "equal")],
            value=self.priors, description="priors", style={"description_width": "initial"},
            layout=widgets.Layout(width="auto"),
        )  # fmt: skip
        self._priors_menu.observe(self._guard(self._on_priors_menu), names=["value"])
        self.controls = widgets.HBox([self._kind_buttons, self._priors_menu])
        side = widgets.VBox([self.confusion_figure, self.confusion_note])
        self.body = widgets.HBox([self.figure, side], layout=widgets.Layout(flex_flow="row wrap"))
        self.children = [
            self.toolbar,
            self.controls,
            self.body,
            self.loadings_figure,
            self.axis_text,
            self.axis_text_2,
            self.caution,
            self.status,
            self.notes,
            self.messages,
        ]

    def _on_kind_button(self, change):
        if change["new"] != self.kind:
            self.kind = change["new"]

    def _on_priors_menu(self, change):
        if change["new"] != self.priors:
            self.priors = change["new"]

    # ---------------------------------------------------------------- drawing
    def _fit_note(self) -> str:
        rule = self.rule
        if rule is None:
            return self._fit_error
        fit, cv = rule.fit, rule.cross_validation
        n_fit, n_all = int(fit.n_train.sum()), int(fit.n_available.sum())
        rule_name = "linear" if fit.kind == "linear" else "quadratic (plane of the linear)"
        parts = [f"{rule_name} discriminant of {len(fit.classes)} groups of {rule.group_column!r}"]
        if n_fit < n_all:
            parts.append(f"fitted on a stratified random {n_fit:,} of {n_all:,} rows")
        cv_text = f"{cv.n_splits}-fold cross-validation"
        if cv.rows.size < n_all:
            cv_text += f" of a stratified random {cv.rows.size:,} rows"
        parts.append(f"{cv_text}: {100 * cv.accuracy:.1f} % assigned to their own group")
        if fit.left_out:
            small = ", ".join(f"{name!r} ({n})" for name, n in fit.left_out.items())
            parts.append(f"left out of the fit (fewer than {fit.min_group_rows} rows): {small}")
        return "; ".join(parts)

    def _draw_axes_labels(self) -> None:
        fit = self.rule.fit if self.rule is not None else None
        single = fit is not None and fit.second_direction is not None
        ratio = fit.explained_ratio if fit is not None else np.zeros(0)
        labels = [
            axis_label(a, float(ratio[a]) if a < ratio.size else None, single) for a in (0, 1)
        ]
        for axis, label in zip((self.axis_x, self.axis_y), labels, strict=True):
            if axis.label != label:
                axis.label = label

    def _draw_confusion(self) -> None:
        rule = self.rule
        if rule is None:
            names, counts = list(_NO_GROUPS), np.zeros((2, 2))
            note = ""
        else:
            names = list(rule.classes)
            counts = rule.cross_validation.confusion.astype(float)
            note = "rows: true group; columns: assigned; click a cell to select its rows"
        K = len(names)
        with self.confusion.hold_sync():
            self.confusion.selected = None
            self.confusion.row = self.confusion.column = None  # sizes checked against color
            self.confusion.color = counts
            self.confusion.row = np.array(names, dtype=str)
            self.confusion.column = np.array(names, dtype=str)
        top = float(counts.max()) if counts.size else 1.0
        if self._grid_colour.max != max(top, 1.0):
            self._grid_colour.max = max(top, 1.0)
        side = max(4, K) * _CELL_PX
        width, height = f"{side + 140}px", f"{side + 70}px"
        if self.confusion_figure.layout.width != width:
            self.confusion_figure.layout.width = width
            self.confusion_figure.layout.height = height
        self._cell_rows = np.zeros(0, dtype=np.uint32)
        if self.confusion_note.value != note:
            self.confusion_note.value = note

    def _draw_loadings(self) -> None:
        rule = self.rule
        if rule is None:
            cm.assign_arrays(self.loadings, x=np.array(["-"]), y=np.zeros((2, 1)))
            self.axis_text.value = self.axis_text_2.value = ""
            return
        fit = rule.fit
        L = fit.clr_loadings
        second = L[:, 1] if L.shape[1] > 1 else np.zeros(L.shape[0])
        with self.loadings.hold_sync():
            self.loadings.x = np.array(rule.parts, dtype=str)
            self.loadings.y = np.vstack([L[:, 0], second])
        top = float(np.abs(L[:, :2]).max()) * 1.1 if L.size else 1.0
        with self._load_y.hold_sync():
            self._load_y.min, self._load_y.max = -top, top
        width = f"{max(420, 60 + _LOADING_PX * len(rule.parts))}px"
        if self.loadings_figure.layout.width != width:
            self.loadings_figure.layout.width = width
        texts = []
        for a in range(min(2, fit.n_axes)):
            plus, minus = fit.top_parts(a, _TOP_PARTS)
            share = 100 * float(fit.explained_ratio[a])
            texts.append(
                f"axis {a + 1} ({share:.0f} % of the separation, clr loadings summing to 0): "
                f"high {', '.join(plus) or '-'} against {', '.join(minus) or '-'}"
            )
        texts += [""] * (2 - len(texts))
        self.axis_text.value, self.axis_text_2.value = texts

    # -------------------------------------------------------------- selection
    def select_cell(self, true: int, assigned: int, mode: str | None = None) -> None:
        """Select the rows of group ``true`` assigned to group ``assigned`` (cross-validated)."""
        self._select_cells([(true, assigned)], mode)

    def _select_cells(self, cells, mode: str | None = None) -> None:
        if self.rule is None:
            return
        cv = self.rule.cross_validation
        K = len(self.rule.classes)
        rows = []
        for i, j in cells:
            if not (0 <= int(i) < K and 0 <= int(j) < K):
                raise ValueError(f"cell ({i}, {j}) is outside the {K} x {K} confusion matrix")
            rows.append(cv.cell_rows(int(i), int(j)))
        chosen = np.unique(np.concatenate(rows)).astype(np.uint32) if rows else self._cell_rows
        self._selecting_cells = True
        try:
            self.model.select(chosen, mode or self.select_mode)
        finally:
            self._selecting_cells = False
        self._cell_rows = np.asarray(self.model.selection)

    def _on_cell(self, change) -> None:
        cells = change["new"]
        if cells is None or len(cells) == 0:
            return
        self._select_cells([(int(c[0]), int(c[1])) for c in cells])

    def _on_selection_elsewhere(self, change) -> None:
        """The selection no longer holds the clicked cells' rows: un-highlight them."""
        if self._selecting_cells:
            return
        if self.confusion.selected is not None and not np.array_equal(
            self.model.selection, self._cell_rows
        ):
            self.confusion.selected = None

    # ------------------------------------------------------------------ hover
    def _hover_lines(self, row: int) -> list[str]:
        lines = self._hover_heading(row)
        rule = self.rule
        if rule is None:
            return lines
        pos = int(np.searchsorted(rule.rows, row))
        if pos >= rule.rows.size or rule.rows[pos] != row:
            return lines
        post = rule.posteriors[pos]
        order = np.argsort(post)[::-1]
        best = order[0]
        lines.append(f"assigned: {rule.classes[best]} (posterior {post[best]:.3f})")
        listed = [f"{rule.classes[k]} {post[k]:.3f}" for k in order[:3] if post[k] >= 0.0005]
        lines.append("posteriors: " + ", ".join(listed))
        cv = rule.cross_validation
        at = int(np.searchsorted(cv.rows, row))
        if at < cv.rows.size and cv.rows[at] == row:
            lines.append(f"cross-validated: {rule.classes[cv.predicted[at]]}")
        return lines

    # ------------------------------------------------------------------ export
    def pipeline(self):
        """The fitted rule as a scikit-learn Pipeline (see :meth:`GroupDiscriminant.pipeline`).

        Its balances are those of the model's current SBP when it is complete
        over the rule's parts (else the pivot SBP).
        """
        if self.rule is None:
            raise CompositionError(self._fit_error or "no discriminant is fitted")
        m = self.model
        D = len(self.rule.parts)
        if m.sbp is not None and m.sbp.shape == (D - 1, D) and self.rule.parts == m.active_parts:
            return self.rule.pipeline(np.array(m.sbp), list(m.balance_names))
        return self.rule.pipeline()

    def close(self) -> None:
        """Stop following the model and close every widget of the view."""
        if getattr(self, "_closed", True):
            return
        handler = getattr(self, "_selection_handler", None)
        if handler is not None:
            self.model.unobserve(handler, names=["selection"])
            self._selection_handler = None
        for w in (
            "confusion", "confusion_figure", "confusion_note", "loadings", "loadings_figure",
            "axis_text", "axis_text_2", "caution", "controls", "body", "_kind_buttons",
            "_priors_menu", "axis_x", "axis_y", "_grid_colour", "_load_x", "_load_y",
        ):  # fmt: skip
            widget = getattr(self, w, None)
            if widget is not None:
                widget.close()
        for w in [*getattr(self, "_grid_axes", []), *getattr(self, "_load_axes", []),
                  *getattr(self, "_grid_scales", ())]:  # fmt: skip
            w.close()
        super().close()
