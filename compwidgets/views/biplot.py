"""The clr biplot of the model's active parts, linked to the shared model.

Samples are points (the scatter machinery of
:class:`~compwidgets.views._scatter.ScatterView`: group colours, selection
tools, density mode for large tables, replaced-value markers, hover); parts
are rays from the origin with their names at the tips. Every number drawn
comes from :mod:`compwidgets.core.biplot`; this module places marks and text.

Clicking a ray tip (easiest with the selection tool "Off") lists the parts
whose rays point the same way and the opposite way; clicking a second tip
draws the link of the two parts and gives the standard deviation of their
log-ratio. ``picked_parts`` holds the clicked parts and can be set directly.

Switching ``scaling`` or ``components`` moves the points and rays only: the
selection, the colours and the legend text are not sent again.

Rays are drawn at their true length in the covariance biplot. In the form
biplot (and in a covariance biplot whose rays would be invisibly short or
would crowd the points) they are drawn multiplied by one readable factor
(:func:`compwidgets.core.biplot.ray_display_factor`), said in ``ray_note``;
the numbers in the text (link lengths, log-ratio sds, cosines) always come from
the unscaled biplot. Part names sit beyond their tips, moved apart where they
would overlap (:func:`compwidgets.views._plot_layout.ray_label_positions`); a name
pushed beyond the plot (a few of 200 parts) is not drawn, rather than cut at the
edge, and ``ray_note`` counts those (a click on the ray tip still names the part).

Example
-------
>>> import compwidgets as cw
>>> table = cw.demo.stream_sediments(n=300)  # invented survey
>>> model = cw.CompositionModel(
...     cw.read_composition(table, detection_limits=cw.demo.DETECTION_LIMITS)
... )
>>> view = BiplotView(model, components=(0, 2), scaling="form")
>>> view.picked_parts = ["SiO2", "CaO"]   # show their link
"""

from __future__ import annotations

from collections.abc import Sequence

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets as t

from ..core import CompositionError, geometry
from ..core import biplot as core_biplot
from ..model import CompositionModel
from . import _common as cm
from . import _plot_layout as plot_layout
from ._scatter import ScatterView
from ._threads import one_blas_thread
from ._words import counted

__all__ = ["BiplotView"]

#: Colours of the rays, their tips when clicked, and the link between two tips.
RAY_COLOUR = "#4a4a4a"
PICKED_COLOUR = "#c0561e"
AXIS_CROSS_COLOUR = "#b4b4b4"

#: Pixels between the data (and ray labels) and the legend on the right.
_LEGEND_GAP_PX = 12
#: Widest plot area, as a multiple of its height (legend included).
_MAX_ASPECT = 1.6
#: Pixels between a ray tip's dot and the box of its part name, and half the height of a
#: part name's box (12 px text; its width: :func:`._plot_layout.text_width_px`).
_LABEL_GAP_PX = 2.0
_LABEL_HALF_HEIGHT_PX = 7.0
#: Radius (pixels) of the dot at a ray tip: a Scatter marker of ``default_size`` 40 px².
_TIP_SIZE_PX2 = 40
_TIP_RADIUS_PX = float(np.sqrt(_TIP_SIZE_PX2 / np.pi))
#: Extra pixels on each side of a part name's box, so that two placed names do not touch.
_LABEL_PAD_PX = 1.5
#: Most component numbers written under the variance bars (every k-th beyond).
_BAR_TICKS = 8
#: Components offered in the plane menu (pairs among the first few).
_MENU_COMPONENTS = 3
#: Parts listed on each side of a ray's associations.
_ASSOC_LISTED = 3
#: Metadata values longer than this are shortened in the tooltip.
_HOVER_MAX_CHARS = 60

_HINT = (
    "Click a ray tip (selection tool Off) to list the parts most and least associated "
    "with it; click a second tip to see their link."
)


def axis_label(component: int, ratio: float | None) -> str:
    """Axis text of a component (0-based) with its share of the total variance."""
    share = "n/a" if ratio is None or not np.isfinite(ratio) else f"{100 * ratio:.1f} %"
    return f"clr comp. {component + 1} \u00b7 {share}"


def _plane_label(pair: tuple[int, int]) -> str:
    return f"{pair[0] + 1} \u00d7 {pair[1] + 1}"


class BiplotView(ScatterView):
    """Compositional (clr) biplot of the model's active parts.

    Parameters
    ----------
    model : CompositionModel
    components : (int, int), default (0, 1)
        0-based components on the x and y axes.
    scaling : {"covariance", "form"}, default "covariance"
        Covariance biplot (rays: standard deviations; links: log-ratio
        standard deviations) or form biplot (points keep Aitchison distances).
    id_column : str, default ""
        Metadata column shown as the sample id on hover ("" = the row label).
    **kwargs
        Passed to :class:`~compwidgets.views._scatter.ScatterView` (mode,
        threshold, subsample_size, seed, height).

    Traits
    ------
    scaling, components, id_column
        As above.
    picked_parts : list of str
        Up to two clicked parts: one shows its associations, two their link.

    Attributes
    ----------
    biplot : compwidgets.core.biplot.Biplot or None
        The fitted biplot in the current scaling (None when it cannot be fitted).
    rays, ray_tips, ray_labels, link, link_label : bqplot marks
    variance_figure : bqplot.Figure
        Bar chart of the share of total variance per component.
    info : ipywidgets.Textarea
        Associations or link of the picked parts (text only).
    ray_note : ipywidgets.Label
        Says by what factor the rays are drawn, when it is not 1 ("" otherwise).
    ray_factor : float
        That factor (rays on the plot = ``ray_factor`` times the biplot's columns).
    """

    #: Room for the axes around the plot area (pixels).
    figure_margin = {"top": 10, "bottom": 45, "left": 58, "right": 10}

    scaling = t.Enum(core_biplot.SCALINGS, default_value="covariance")
    components = t.Tuple(t.Int(), t.Int(), default_value=(0, 1))
    picked_parts = t.List(t.Unicode())

    def __init__(
        self,
        model: CompositionModel,
        components: Sequence[int] = (0, 1),
        scaling: str = "covariance",
        *,
        id_column: str = "",
        **kwargs,
    ):
        self._internal = False
        self._menu_updating = False
        self._fits: dict[str, core_biplot.Biplot] = {}
        self._fit_error = ""
        self._fit_parts: list[str] = []
        self.ray_factor = 1.0
        super().__init__(model, **kwargs)
        self._build_side()
        self._internal = True
        try:
            self.scaling = scaling
            self._fit_model()
            self.components = tuple(components)
            self.id_column = id_column
        finally:
            self._internal = False
        self._start()

    # ---------------------------------------------------------------- fitting
    @property
    def biplot(self) -> core_biplot.Biplot | None:
        """The fitted biplot in the current scaling (None if it cannot be fitted)."""
        if not self._fits:
            return None
        if self.scaling not in self._fits:
            any_fit = next(iter(self._fits.values()))
            self._fits[self.scaling] = any_fit.with_scaling(self.scaling)
        return self._fits[self.scaling]

    def _rows_needed(self) -> int:
        """How many components of row coordinates to keep (the menu's, or the chosen ones)."""
        comps = self.components if hasattr(self, "components") else (0, 1)
        return max(_MENU_COMPONENTS, max(comps) + 1)

    def _fit_model(self) -> None:
        """Fit the biplot of the active parts from the model's cached clr."""
        parts = list(self.model.active_parts)
        self._fits = {}
        self._fit_error = ""
        self._fit_parts = parts
        n_ok = int(self.model.complete_rows(parts).sum())
        r = min(n_ok - 1, len(parts) - 1)
        n_components = max(1, min(self._rows_needed(), r)) if r >= 1 else None
        scaling = self.scaling

        def fit_now():
            values = self.model.part_values(parts)
            try:
                with one_blas_thread():  # blocks of rows: one thread is fastest (_threads)
                    # the clr of each block of rows in turn: no (n, D) clr matrix is kept
                    return core_biplot.composition_biplot(
                        values, scaling, parts=parts, n_components=n_components, missing="omit"
                    )
            except CompositionError as err:
                return f"no biplot: {err}"

        # kept in the model's cache: showing these parts again does not fit again
        fit = self.model.derived(("clr-biplot", scaling, n_components), parts, fit_now)
        if isinstance(fit, str):
            self._fit_error = fit
            return
        self._fits[self.scaling] = fit

    def _n_components(self) -> int:
        fit = self.biplot
        return 0 if fit is None else fit.n_components

    def _plane(self) -> tuple[int, int | None]:
        """(x component, y component or None when the fit has a single component)."""
        cx, cy = self.components
        return cx, (cy if cy < self._n_components() else None)

    def _plane_coords(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(rows, x, y, drawn tips (D, 2)) in the current plane; sets ``ray_factor``."""
        fit = self.biplot
        if fit is None:
            self.ray_factor = 1.0
            return np.zeros(0, np.uint32), np.zeros(0), np.zeros(0), np.zeros((0, 2))
        cx, cy = self._plane()
        if max(cx, cy or 0) >= fit.row_coords.shape[1]:
            self._fit_model()  # a component beyond the row coordinates kept: refit
            fit = self.biplot
        plane = self._plane_list()

        def points():
            rows = np.flatnonzero(fit.rows_used).astype(np.uint32)
            every = rows.size == fit.rows_used.size  # no selection of rows needed
            x = fit.row_column(cx) if every else fit.row_column(cx)[rows]
            y = np.zeros(rows.size) if cy is None else fit.row_column(cy)
            y = y if every or cy is None else y[rows]
            return rows, x, y, core_biplot.ray_display_factor(fit, plane)

        # kept in the model's cache per plane: a plane shown before is a lookup
        key = ("biplot-plane", fit.scaling, fit.n_components, cx, cy)
        rows, x, y, self.ray_factor = self.model.derived(key, self._fit_parts, points)
        tips = np.column_stack(
            [
                fit.column_coords[:, cx],
                fit.column_coords[:, cy] if cy is not None else np.zeros(len(fit.parts)),
            ]
        )
        return rows, x, y, tips * self.ray_factor

    # ------------------------------------------------------------- validation
    @t.validate("components")
    def _check_components(self, proposal):
        value = tuple(int(c) for c in proposal["value"])
        if value[0] == value[1] or min(value) < 0:
            raise t.TraitError(
                f"BiplotView.components: two different 0-based components are needed, got {value}"
            )
        r = self._n_components() if hasattr(self, "_fits") else 0
        if r >= 2 and max(value) >= r:
            raise t.TraitError(
                f"BiplotView.components: component {max(value)} does not exist; this biplot "
                f"has components 0..{r - 1} (0-based)"
            )
        if r == 1 and value != (0, 1):
            raise t.TraitError(
                "BiplotView.components: this biplot has a single component; "
                "only (0, 1) is possible"
            )
        return value

    @t.validate("picked_parts")
    def _check_picked(self, proposal):
        parts = [str(p) for p in proposal["value"]]
        if len(parts) > 2:
            raise t.TraitError(f"BiplotView.picked_parts: at most 2 parts, got {parts}")
        if len(set(parts)) != len(parts):
            raise t.TraitError(f"BiplotView.picked_parts: a part is listed twice in {parts}")
        shown = list(self._fit_parts) if hasattr(self, "_fit_parts") else []
        unknown = [p for p in parts if p not in shown]
        if unknown:
            raise t.TraitError(
                f"BiplotView.picked_parts: {unknown} not in the biplot's parts "
                f"({', '.join(shown)})"
            )
        return parts

    @t.observe("scaling", "components")
    def _on_plane_traits(self, change):
        if change["name"] == "scaling" and hasattr(self, "_scaling_buttons"):
            if self._scaling_buttons.value != change["new"]:
                self._scaling_buttons.value = change["new"]
        if change["name"] == "components":
            self._sync_plane_menu()
        if self._ready and not self._internal:
            self._move()

    @t.observe("picked_parts")
    def _on_picked(self, change):
        if self._ready:
            self._draw_picks()

    # ----------------------------------------------------------- ScatterView
    def shown_parts(self) -> list[str]:
        return list(self._fit_parts or self.model.active_parts)

    def _view_ranges(self):
        return (-1.0, 1.0), (-1.0, 1.0)  # until the first fit: see _coordinates

    def _coordinates_key(self):
        return ("clr-biplot", self.scaling, tuple(self.components), self._n_components())

    def _legend_anchor(self):
        return cm.right_legend_anchor(self)

    def _coordinates(self):
        if self._fit_parts != list(self.model.active_parts):
            self._fit_model()
        rows, x, y, tips = self._plane_coords()
        self.set_view_ranges(*self._plane_ranges(x, y, tips))
        note = self._fit_error
        if not note and self._n_components() == 1:
            note = (
                f"a single component ({len(self._fit_parts)} parts, {rows.size} rows): "
                "the points lie on the first axis"
            )
        self._set_note("fit", note)
        return rows, x, y

    def _on_parts_source_changed(self) -> None:
        """Active parts or amalgamations changed: refit, keep selection and components."""
        self._fit_model()
        r = self._n_components()
        self._internal = True
        try:
            if r >= 2 and max(self.components) >= r:
                self.components = (0, 1)
            elif r == 1 and self.components != (0, 1):
                self.components = (0, 1)
            kept = [p for p in self.picked_parts if p in self._fit_parts]
            if kept != list(self.picked_parts):
                self.picked_parts = kept
        finally:
            self._internal = False
        self.refresh()

    def _build_marks(self):
        xy = {"x": self.scale_x, "y": self.scale_y}
        quiet = {"interactions": {}, "enable_hover": False}
        self.axis_cross = bq.Lines(
            x=np.zeros((2, 2), np.float32), y=np.zeros((2, 2), np.float32), scales=xy,
            colors=[AXIS_CROSS_COLOUR], stroke_width=0.8, line_style="dashed", **quiet,
        )  # fmt: skip
        self.rays = bq.Lines(
            x=np.zeros((0, 2), np.float32), y=np.zeros((0, 2), np.float32), scales=xy,
            colors=[RAY_COLOUR], stroke_width=1.4, **quiet,
        )  # fmt: skip
        self.link = bq.Lines(
            x=np.zeros(0, np.float32), y=np.zeros(0, np.float32), scales=xy,
            colors=[PICKED_COLOUR], stroke_width=2.0, line_style="dashed", **quiet,
        )  # fmt: skip
        self.ray_tips = bq.Scatter(
            x=np.zeros(0, np.float32), y=np.zeros(0, np.float32), scales=xy, marker="circle",
            default_size=_TIP_SIZE_PX2, colors=[RAY_COLOUR], stroke=None, interactions={},
            enable_hover=False,
        )  # fmt: skip
        self.ray_tips.on_element_click(self._guard(self._on_tip_click))
        # a name's text is centred on its position both ways (seen in Chromium, y_offset 0),
        # as the layout of the names in _label_layout assumes
        self.ray_labels = bq.Label(
            x=np.zeros(0), y=np.zeros(0), text=np.array([], dtype=str), scales=xy,
            colors=[RAY_COLOUR], default_size=12, font_unit="px", align="middle",
            y_offset=0, interactions={}, enable_hover=False,
        )  # fmt: skip
        self.ray_labels.on_element_click(self._guard(self._on_tip_click))
        self.link_label = bq.Label(
            x=np.zeros(0), y=np.zeros(0), text=np.array([], dtype=str), scales=xy,
            colors=[PICKED_COLOUR], default_size=12, font_unit="px", align="start",
            x_offset=6, y_offset=-6, font_weight="bold", **quiet,
        )  # fmt: skip
        below = [self.axis_cross]
        above = [self.rays, self.link, self.ray_tips, self.ray_labels, self.link_label]
        return below, above

    def _build_side(self) -> None:
        """Axes, scaling and plane controls, the variance bar chart and the info text."""
        self.axis_x = bq.Axis(
            scale=self.scale_x, label=axis_label(0, None), side="bottom", grid_lines="none"
        )
        self.axis_y = bq.Axis(
            scale=self.scale_y, label=axis_label(1, None), side="left",
            grid_lines="none", label_offset="40px",
        )  # fmt: skip
        self.figure.axes = [self.axis_x, self.axis_y]

        # components 1..r at integer positions (a linear scale: its axis can skip numbers)
        self._bar_x = bq.LinearScale(min=0.5, max=1.5, allow_padding=False)
        self._bar_y = bq.LinearScale(min=0.0)
        self.variance_bars = bq.Bars(
            x=np.zeros(0), y=np.zeros(0), scales={"x": self._bar_x, "y": self._bar_y},
            colors=[cm.GRID_COLOUR], padding=0.2, interactions={}, enable_hover=False,
        )  # fmt: skip
        self._bar_axes = [
            bq.Axis(scale=self._bar_x, label="component", side="bottom", tick_format="d"),
            bq.Axis(
                scale=self._bar_y, side="left", label="% of total variance",
                tick_format=".0f", label_offset="32px",
            ),
        ]  # fmt: skip
        self.variance_figure = bq.Figure(
            marks=[self.variance_bars], axes=self._bar_axes, animation_duration=0,
            fig_margin={"top": 10, "bottom": 40, "left": 48, "right": 8},
            layout=widgets.Layout(width="260px", height="200px"),
        )  # fmt: skip
        self.variance_note = widgets.Label()
        self._scaling_buttons = widgets.ToggleButtons(
            options=[("covariance", "covariance"), ("form", "form")],
            value=self.scaling,
            description="scaling",
            style={"button_width": "104px"},
            # a flex box keeps the description on the buttons' line
            layout=widgets.Layout(display="flex", align_items="center"),
        )
        self._scaling_buttons.observe(self._guard(self._on_scaling_button), names=["value"])
        self._plane_menu = widgets.Dropdown(
            options=[(_plane_label((0, 1)), (0, 1))],
            value=(0, 1),
            description="plane",
            layout=widgets.Layout(width="160px"),
        )
        self._plane_menu.observe(self._guard(self._on_plane_menu), names=["value"])
        self.info = widgets.Textarea(
            value=_HINT,
            disabled=True,
            description="rays",
            style={"description_width": "initial"},
            layout=widgets.Layout(width="300px", height="170px"),
        )
        self.ray_note = widgets.Label(layout=widgets.Layout(margin="0 0 0 12px"))
        self.controls = widgets.HBox([self._scaling_buttons, self._plane_menu, self.ray_note])
        self.side = widgets.VBox([self.variance_figure, self.variance_note, self.info])
        self.body = widgets.HBox([self.figure, self.side])
        self.children = [
            self.toolbar,
            self.controls,
            self.body,
            self.status,
            self.notes,
            self.messages,
        ]

    # ---------------------------------------------------------------- drawing
    def _move(self) -> None:
        """Scaling or components changed: move points and rays; nothing else is resent."""
        if not self._ready or self._closed:
            return
        rows, x, y, tips = self._plane_coords()
        if rows.size != self.rows.size or not np.array_equal(rows, self.rows):
            self.refresh()  # other rows (a refit dropped or added rows): full redraw
            return
        x_range, y_range = self._plane_ranges(x, y, tips)
        self.move_points(x, y, x_range=x_range, y_range=y_range)
        self._draw_rays(tips)
        self._draw_axes_labels()
        self._draw_bars()
        self._draw_picks()

    def _plane_ranges(self, x: np.ndarray, y: np.ndarray, tips: np.ndarray):
        """View ranges of a plane: every point, tip and the origin, then the legend's room.

        The figure keeps an equal aspect at a fixed height, so a wide plane is given a
        taller y range rather than a figure wider than ``_MAX_ASPECT`` times its height.
        """
        points = geometry.bounding_corners(x, y)  # the points' bounding box: same limits
        ranges = self._fit_ranges(points, tips)
        if tips.shape[0]:
            # the part names, laid out at that scale, must fit too (their boxes grow the
            # ranges a little; the margin of plane_limits absorbs the change of scale)
            labels, half = self._label_layout(tips, ranges[1][1] - ranges[1][0])
            corners = np.concatenate([labels - half, labels + half])
            ranges = self._fit_ranges(np.concatenate([points, corners]), tips)
        return ranges

    def _fit_ranges(self, points: np.ndarray, tips: np.ndarray):
        (x0, x1), (y0, y1) = plot_layout.plane_limits(points, tips)
        legend = (self.legend_width_px + _LEGEND_GAP_PX) / self._plot_height_px()
        # width / height = (x span + legend * y span) / y span <= _MAX_ASPECT
        tall = (x1 - x0) / (_MAX_ASPECT - legend)
        if tall > y1 - y0:
            mid = (y0 + y1) / 2
            y0, y1 = mid - tall / 2, mid + tall / 2
        return (x0, x1 + legend * (y1 - y0)), (y0, y1)

    def _label_layout(self, tips: np.ndarray, y_span: float) -> tuple[np.ndarray, np.ndarray]:
        """(centres, half sizes) of the part names' boxes, in data units, for a y span."""
        fit = self.biplot
        names = [str(p) for p in fit.parts] if fit is not None else []
        names = (names + [""] * tips.shape[0])[: tips.shape[0]]
        per_px = y_span / self._plot_height_px()  # equal aspect: the same along x
        boxes = np.array(
            [
                [plot_layout.text_width_px(name) + 2 * _LABEL_PAD_PX, 2 * _LABEL_HALF_HEIGHT_PX]
                for name in names
            ],
            dtype=float,
        ).reshape(-1, 2)
        boxes *= per_px
        tips = np.ascontiguousarray(tips, dtype=float)

        def place() -> np.ndarray:
            return plot_layout.ray_label_positions(
                tips, _LABEL_GAP_PX * per_px, box_sizes=boxes, tip_radius=_TIP_RADIUS_PX * per_px
            )

        # kept in the model's cache: the layout of many names is the slow part of a redraw
        key = ("biplot-labels", tips.tobytes(), boxes.tobytes(), float(per_px))
        centres = self.model.derived(key, self._fit_parts or [], place)
        return centres, boxes / 2

    def _refresh_extra(self) -> None:
        _, _, _, tips = self._plane_coords()
        self._set_ray_names()
        self._draw_rays(tips)
        self._draw_axes_labels()
        self._draw_bars(new_fit=True)
        self._sync_plane_menu()
        self._draw_picks()

    def _set_ray_names(self) -> None:
        fit = self.biplot
        names = [str(p) for p in fit.parts] if fit is not None else []
        cm.assign_arrays(self.ray_labels, text=np.array(names, dtype=str))

    def _draw_rays(self, tips: np.ndarray) -> None:
        D = tips.shape[0]
        (x0, x1), (y0, y1) = self.view_ranges
        # each name's box (centred on its position) clears its tip along the ray, and
        # names that would overlap are moved apart (outward or sideways)
        labels, half = self._label_layout(tips, y1 - y0)
        # a name pushed beyond the plot (many parts) would be cut at its edge: not drawn
        inside = np.ones(D, dtype=bool)
        for corner in (labels - half, labels + half):
            inside &= geometry.points_in_rectangle(corner[:, 0], corner[:, 1], (x0, x1), (y0, y1))
        opacities = np.ones(1) if inside.all() else inside.astype(float)
        if not np.array_equal(np.asarray(self.ray_labels.opacities, float), opacities):
            self.ray_labels.opacities = opacities
        legend_x = self._legend_anchor()[0] - 0.02 * (x1 - x0)
        zeros = np.zeros(D)
        cm.assign_arrays(
            self.rays,
            x=np.column_stack([zeros, tips[:, 0]]).astype(np.float32),
            y=np.column_stack([zeros, tips[:, 1]]).astype(np.float32),
        )
        cm.assign_arrays(
            self.ray_tips, x=tips[:, 0].astype(np.float32), y=tips[:, 1].astype(np.float32)
        )
        cm.assign_arrays(self.ray_labels, x=labels[:, 0], y=labels[:, 1])
        cm.assign_arrays(
            self.axis_cross,
            x=np.array([[x0, legend_x], [0.0, 0.0]], dtype=np.float32),
            y=np.array([[0.0, 0.0], [y0, y1]], dtype=np.float32),
        )
        notes = []
        if self.ray_factor != 1.0 and D:
            notes.append(
                f"rays drawn \u00d7 {self.ray_factor:g} "
                "(lengths compare between rays, not with points)"
            )
        if not inside.all():
            notes.append(
                f"{counted(int((~inside).sum()), 'part name')} not drawn (no room); "
                "click a ray tip, tool Off, for its name"
            )
        note = "; ".join(notes)
        if self.ray_note.value != note:
            self.ray_note.value = note

    def _draw_axes_labels(self) -> None:
        fit = self.biplot
        cx, cy = self.components
        rx = fit.explained_ratio[cx] if fit is not None and cx < fit.n_components else None
        ry = fit.explained_ratio[cy] if fit is not None and cy < fit.n_components else None
        label_x, label_y = axis_label(cx, rx), axis_label(cy, ry)
        if self.axis_x.label != label_x:
            self.axis_x.label = label_x
        if self.axis_y.label != label_y:
            self.axis_y.label = label_y

    def _draw_bars(self, new_fit: bool = False) -> None:
        fit = self.biplot
        if fit is None:
            if new_fit:
                cm.assign_arrays(self.variance_bars, x=np.zeros(0), y=np.zeros(0))
                self.variance_note.value = ""
            return
        r = fit.n_components
        if new_fit:
            numbers = np.arange(1, r + 1, dtype=float)
            percent = 100.0 * np.asarray(fit.explained_ratio, dtype=float)
            step = -(-r // _BAR_TICKS)  # ceil: at most _BAR_TICKS numbers under the bars
            cm.assign_arrays(self._bar_axes[0], tick_values=numbers[::step])
            with self._bar_x.hold_sync():
                self._bar_x.min, self._bar_x.max = 0.5, r + 0.5
            cm.assign_arrays(self.variance_bars, x=numbers, y=percent)
            top = float(percent.max()) * 1.1 if percent.size else 100.0
            if self._bar_y.max != top:
                self._bar_y.max = top
            # at 200 parts no component holds 1 %: whole numbers would label every tick 0 or 1
            tick_format = f".{plot_layout.tick_decimals(top)}f"
            if self._bar_axes[1].tick_format != tick_format:
                self._bar_axes[1].tick_format = tick_format
            note = (
                f"total variance {cm.format_number(fit.total_variance)} "
                f"(clr, {fit.n_rows_used} rows)"
            )
            if self.variance_note.value != note:
                self.variance_note.value = note
        shown = set(self.components)
        colours = [cm.PALETTE[0] if c in shown else cm.GRID_COLOUR for c in range(r)]
        if list(self.variance_bars.colors) != colours:
            self.variance_bars.colors = colours

    def _sync_plane_menu(self) -> None:
        if not hasattr(self, "_plane_menu"):
            return
        r = self._n_components()
        k = min(max(r, 2), _MENU_COMPONENTS)
        pairs = [(a, b) for a in range(k) for b in range(a + 1, k)]
        if r < 2:
            pairs = [(0, 1)]
        current = tuple(self.components)
        if current not in pairs:
            pairs.append(current)
        options = [(_plane_label(p), p) for p in pairs]
        self._menu_updating = True  # options then value: the menu's own events are not choices
        try:
            if [tuple(o) for o in self._plane_menu.options] != options:
                self._plane_menu.options = options
            if self._plane_menu.value != current:
                self._plane_menu.value = current
        finally:
            self._menu_updating = False
        if self._plane_menu.disabled != (r < 2):
            self._plane_menu.disabled = r < 2

    # ------------------------------------------------------------------ picks
    def _on_tip_click(self, mark, content) -> None:
        point = content.get("point") or content.get("data") or {}
        index = point.get("index")
        fit = self.biplot
        if index is None or fit is None or not 0 <= int(index) < len(fit.parts):
            return
        self.pick(fit.parts[int(index)])

    def pick(self, part: str) -> None:
        """Click on the tip of ``part``: toggle it; a third part starts a new pick."""
        picked = list(self.picked_parts)
        if part in picked:
            picked.remove(part)
        elif len(picked) >= 2:
            picked = [part]
        else:
            picked.append(part)
        self.picked_parts = picked

    def _draw_picks(self) -> None:
        fit = self.biplot
        D = 0 if fit is None else len(fit.parts)
        picked = [p for p in self.picked_parts if fit is not None and p in fit.parts]
        colours = [RAY_COLOUR] * max(D, 1)
        for p in picked:
            colours[fit.parts.index(p)] = PICKED_COLOUR
        if list(self.ray_tips.colors) != colours:
            self.ray_tips.colors = colours
        lx, ly, tx, ty, text = [], [], [], [], []
        if fit is None:
            info = self._fit_error or _HINT
        elif len(picked) == 2:
            info, (lx, ly, tx, ty, text) = self._link_text(fit, *picked)
        elif len(picked) == 1:
            info = self._association_text(fit, picked[0])
        else:
            info = _HINT
        cm.assign_arrays(
            self.link, x=np.asarray(lx, dtype=np.float32), y=np.asarray(ly, dtype=np.float32)
        )
        cm.assign_arrays(
            self.link_label,
            x=np.asarray(tx, dtype=float),
            y=np.asarray(ty, dtype=float),
            text=np.asarray(text, dtype=str),
        )
        if self.info.value != info:
            self.info.value = info

    def _plane_list(self) -> list[int]:
        cx, cy = self._plane()
        return [cx] if cy is None else [cx, cy]

    def _link_text(self, fit, a: str, b: str):
        plane = self._plane_list()
        in_plane = core_biplot.link_length(fit, a, b, plane)
        sd = core_biplot.logratio_sd(fit, a, b)
        comps = " and ".join(str(c + 1) for c in plane)
        if fit.scaling == "covariance":
            approx = (
                f"link length in this plane (components {comps}): {cm.format_number(in_plane)}"
            )
        else:
            approx = (
                f"link length in this plane (components {comps}): {cm.format_number(in_plane)} "
                "(form scaling: not a standard deviation)"
            )
        lines = [
            f"link {a} \u2013 {b}",
            f"sd of ln({a}/{b}): {cm.format_number(sd)}",
            f"(all components, {fit.n_rows_used} rows, ddof 1)",
            approx,
        ]
        if self.ray_factor != 1.0:
            lines.append(f"(rays and link drawn \u00d7 {self.ray_factor:g})")
        # the drawn link joins the drawn tips
        cx, cy = self._plane()
        ia, ib = fit.parts.index(a), fit.parts.index(b)
        col = fit.column_coords * self.ray_factor
        xs = [col[ia, cx], col[ib, cx]]
        ys = [col[ia, cy], col[ib, cy]] if cy is not None else [0.0, 0.0]
        mark = (xs, ys, [sum(xs) / 2], [sum(ys) / 2], [f"sd {cm.format_number(sd)}"])
        return "\n".join(lines), mark

    def _association_text(self, fit, part: str) -> str:
        plane = self._plane_list()
        try:
            assoc = core_biplot.ray_associations(fit, part, plane)
        except CompositionError as err:
            return str(err)
        valid = assoc.dropna()
        k = min(_ASSOC_LISTED, (len(valid) + 1) // 2)
        most = valid.iloc[:k]
        least = valid.iloc[::-1].iloc[: min(_ASSOC_LISTED, len(valid) - k)]
        comps = " and ".join(str(c + 1) for c in plane)
        meaning = (
            "cosine of the rays ~ correlation of the clr coordinates, which depends on the "
            "parts included; the log-ratio sd of two tips (click a second one) does not"
            if fit.scaling == "covariance"
            else "cosine of the rays in this plane"
        )
        lines = [
            f"{part}: rays in components {comps}",
            f"({meaning})",
            "most associated (rays pointing the same way):",
        ]
        lines += [f"  {name}  {cos:+.2f}" for name, cos in most.items()]
        lines.append("least associated (rays pointing the opposite way):")
        lines += [f"  {name}  {cos:+.2f}" for name, cos in least.items()]
        undefined = [str(p) for p in assoc.index[assoc.isna()]]
        if undefined:
            lines.append("no direction in this plane: " + ", ".join(undefined))
        return "\n".join(lines)

    # ------------------------------------------------------------- callbacks
    def _on_scaling_button(self, change) -> None:
        if change["new"] is not None and change["new"] != self.scaling:
            self.scaling = change["new"]

    def _on_plane_menu(self, change) -> None:
        if self._menu_updating:
            return
        value = change["new"]
        if value is not None and tuple(value) != tuple(self.components):
            self.components = tuple(value)

    # ------------------------------------------------------------------ hover
    def _hover_lines(self, row: int) -> list[str]:
        m = self.model
        meta = m.metadata
        lines = self._hover_heading(row)
        replaced = [
            p
            for p in self.shown_parts()
            if bool(m.composition.replaced[cm.part_members(m, p)].iloc[row].any())
        ]
        if replaced:
            lines.append("replaced below detection: " + ", ".join(replaced))
        skip = {self.id_column, m.group_column}
        for column in meta.columns:
            if len(lines) >= self.tooltip_max_lines:
                break
            if column in skip:
                continue
            value = meta[column].iloc[row]
            text = (
                "n/a"
                if value is None or (isinstance(value, float) and np.isnan(value))
                else str(value)
            )
            if len(text) > _HOVER_MAX_CHARS:
                text = text[: _HOVER_MAX_CHARS - 1] + "\u2026"
            lines.append(f"{column}: {text}")
        return lines

    # ----------------------------------------------------------------- closing
    def close(self) -> None:
        """Stop following the model and close every widget of the view."""
        if getattr(self, "_closed", True):
            return  # closed already, or the constructor failed before the view existed
        names = (
            "axis_x", "axis_y", "variance_bars", "_bar_x", "_bar_y", "variance_figure",
            "variance_note", "_scaling_buttons", "_plane_menu", "ray_note", "info", "controls",
            "side", "body",
        )  # fmt: skip
        owned = [getattr(self, n) for n in names if hasattr(self, n)]
        owned += list(getattr(self, "_bar_axes", []))
        super().close()
        for w in owned:
            w.close()
