"""The base of scatter-like views (ternary diagram, biplot, discriminant plane).

A :class:`ScatterView` is an ``ipywidgets.VBox`` holding a toolbar (selection
tools, how a selection combines, clear, close polygon, balance colours, group
symbols, "Save figure"), one ``bqplot.Figure`` and its text lines (``status``,
``notes``) and ``messages`` (the ``Output`` where callback errors go). It is
bound to one :class:`~compwidgets.model.CompositionModel`: it reads the rows it
shows from the model and writes the selection back through ``model.select``.
Subclasses supply the 2-D coordinates of the rows they can show and their own
marks (the subclass API is listed in the class docstring).

The view is made of parts, each a module with one job, whose methods run on the
view:

* :mod:`._drawing`: the selection tools (rectangle, lasso), kernel-side hit
  tests, the outline of the last shape and ``selection_shape``;
* :mod:`._polygon`: polygon vertices clicked one by one;
* :mod:`._legend`: point colours, group symbols and the legend;
* :mod:`._density_layer`: the density picture of density mode;
* :mod:`._hover`: the hover tooltip;
* :mod:`._figure_speedups` (one per model, shared by its views): in the page, the
  selection of every view's marks painted in one go, the brush sent at release;
* this module: building, coordinates and redrawing, points / density modes,
  the selection highlight, view ranges and closing.

Two modes, chosen by the number of rows shown (``mode="auto"``; threshold
5,000 rows by default, see DESIGN.md, Scale):

* points: one SVG ``Scatter`` of every row, coloured by group (or by a
  balance when ``model.colour_by`` is set); the selection is the mark's
  ``selected`` index array.
* density: one ``Image`` mark with the density of all rows (muted) and of
  the selection (near-black), plus a seeded random subsample of points on
  top for hover; the notes say how many rows the density holds and how
  many are drawn as points.

A change of the model's selection only sends ``selected`` index arrays (the
points, the replaced-value markers, the symbol marks in use; ahead of them, the
same arrays of all the model's views in one message of :mod:`._figure_speedups`)
or a new picture
(density; in one of two picture widgets made with the view, its selection
layer counted from the bins of the selected rows); point coordinates are sent
only when they change. Errors in widget callbacks are shown in the view's
``messages`` output (:mod:`._errors`: without entering the output on every
call, which cost a stream flush per callback).

Rows that the view cannot show (incomplete in its parts) are left out of this
view only; a text line says how many.
"""

from __future__ import annotations

import re

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets as t

from ..model import CompositionModel
from . import _common as cm
from ._density_layer import DensityLayer
from ._drawing import MODE_LABELS, DrawingTools
from ._errors import shows_errors
from ._figure_save import BqplotFigureSource, FigureSaveControl
from ._figure_speedups import figure_speedups
from ._hover import HoverTips
from ._legend import ColourKey
from ._mark_selection import show_selection
from ._polygon import PolygonEditing

__all__ = ["ScatterView"]

_EMPTY_ROWS = np.zeros(0, dtype=np.uint32)


class ScatterView(DrawingTools, PolygonEditing, ColourKey, DensityLayer, HoverTips, widgets.VBox):
    """Base of every scatter-like view bound to a :class:`CompositionModel`.

    Parameters
    ----------
    model : CompositionModel
    mode : {"auto", "points", "density"}, default "auto"
        "auto" draws points up to ``threshold`` rows shown, density above.
    threshold : int, default 5000
    subsample_size : int, default 500
        Points drawn on top of the density image (for hover), chosen at random
        with ``seed``. Each is an SVG element restyled on every selection change:
        1,500 of them took about three times as long in the browser as 500.
    seed : int, default 0
    height : int, default 460
        Figure height in pixels.

    Traits
    ------
    mode, threshold, subsample_size, seed
        As above; changing them redraws.
    tool : {"brush", "lasso", "polygon", "none"}
        Active selection tool ("lasso" only in points mode; the notes say why).
    select_mode : {"replace", "add", "remove", "intersect"}
        How a new selection combines with the model's selection.
    balance_scale : {"auto", "diverging", "sequential"}
        Colours of a balance (``model.colour_by``): "auto" is diverging around 0
        when the values shown span 0, else sequential over their range.
    group_symbols : bool
        Draw groups with distinct symbols as well as colours.
    selection_shape : dict or None
        The last shape this view selected with: ``{"kind": "rectangle",
        "vertices": [[x0, y0], [x1, y1]]}`` or ``{"kind": "polygon", "vertices":
        [[x, y], ...]}`` in the view's coordinates; None after a lasso (its
        outline stays in the browser), a cleared selection or a selection made
        elsewhere. Its outline is drawn (``selection_outline``).

    Attributes
    ----------
    model : CompositionModel
    figure : bqplot.Figure
    scale_x, scale_y : bqplot.LinearScale
        The positional scales (equal aspect; see :meth:`set_view_ranges`).
    colour_scale : bqplot.ColorScale
        The points' colour scale (groups or a balance).
    scatter : bqplot.Scatter
        The points (all rows in points mode, the subsample in density mode).
    density : bqplot.Image
        The density image (visible in density mode). bqplot redraws the mark
        when its ``image`` widget is replaced, not when that widget's value
        changes: the view keeps two ``ipywidgets.Image`` widgets, made with the
        view, writes a new picture into the one not shown and then shows it
        (no widget is made per selection change).
    brush : bqplot.interacts.BrushSelector
        Emptied once the view has taken its rectangle (each press starts anew).
    lasso : bqplot.interacts.LassoSelector
        The lasso in use (one of two; they take turns, see :mod:`._drawing`).
    polygon_marker : bqplot.Scatter
        Vertices of the polygon being drawn (click on the figure to add one).
    selection_outline : bqplot.Lines
        Outline of ``selection_shape``.
    replaced_marker : bqplot.Scatter
        Hollow diamonds on the rows with a replaced value in the shown parts;
        unselected, they fade like the points.
    figure_save : FigureSaveControl
        "Save figure" (PNG / SVG, scale, its own file name) in the toolbar.
    toolbar, status, notes : ipywidgets
        The controls above the figure; the left-out line and the notes below it.
    messages : ipywidgets.Output
        Where errors of the view's callbacks are shown.
    rows : ndarray of uint32
        Model row positions shown by the view, in the order of its coordinates.
    active_mode : {"points", "density"}
    n_left_out : int
        Rows of the model this view does not show.

    Methods
    -------
    refresh()
        Recompute the coordinates from the model and redraw everything.
    set_view_ranges(x_range, y_range)
        New limits of the figure's scales (density image, figure size and
        legend follow).
    move_points(x, y, *, x_range=None, y_range=None)
        New coordinates for the same rows, sending only positions.

    Subclass API
    ------------
    A subclass implements

    * ``_coordinates()``: (rows, x, y) of the rows it shows;
    * ``shown_parts()``: the parts those coordinates depend on;
    * ``_view_ranges()``: the scale limits at construction (later changes go
      through :meth:`set_view_ranges`);

    may override ``_coordinates_key`` (what the coordinates depend on besides
    ``shown_parts()``, hashable: the density bins are then kept in the
    model's cache per set of parts), ``_density_extent``, ``_build_marks``,
    ``_refresh_extra``,
    ``_hover_lines`` (starting from ``_hover_heading(row)``: sample id and
    group), ``_legend_anchor`` and ``_on_parts_source_changed``;
    may set the class attributes ``figure_margin`` (pixels around the plot
    area, e.g. room for axes), ``density_pixels``, ``legend_max``,
    ``legend_width_px`` and ``tooltip_max_lines``; and may use these
    protected members:

    * ``_start()``: connect to the model and draw; called once at the end of
      the subclass's ``__init__``;
    * ``_guard(func)``: wrap a widget callback so its errors reach the view's
      ``messages`` output and it does nothing once the view is closed;
    * ``_set_note(key, text)``: one of the notes joined in the ``notes`` line;
    * ``_plot_height_px()``: height of the plot area in pixels (to turn pixel
      sizes, e.g. of text, into data units: the aspect is equal);
    * ``_watch(obj, func, names)``: observe another object's traits through
      ``_guard``, unobserved when the view closes;
    * ``_density_image`` (:class:`~._density.DensityImage`) and
      ``_render_density()``: the density grid and a redraw of its picture
      (e.g. with the counts of rows held elsewhere);
    * ``_mark_rows``: model row of each drawn point, in the mark's order;
    * ``_ready`` (True once ``_start`` ran) and ``_closed`` (True once closed,
      or before the base was constructed): read only.

    A subclass that lays out the view's children itself keeps ``toolbar``,
    ``figure`` (or a box holding it), ``status``, ``notes`` and ``messages``.

    Everything else whose name starts with an underscore belongs to this class.
    """

    mode = t.Enum(("auto", "points", "density"), default_value="auto")
    threshold = t.Int(5000)
    subsample_size = t.Int(500)
    seed = t.Int(0)
    tool = t.Enum(("brush", "lasso", "polygon", "none"), default_value="brush")
    select_mode = t.Enum(("replace", "add", "remove", "intersect"), default_value="replace")
    #: Metadata column naming the samples in tooltips ("" = the index label).
    id_column = t.Unicode("")
    balance_scale = t.Enum(cm.BALANCE_SCALES, default_value="auto")
    group_symbols = t.Bool(False)
    selection_shape = t.Dict(default_value=None, allow_none=True)

    #: Pixels of the density image along x (y follows the aspect of the extent).
    density_pixels = 240
    #: Legend entries drawn before "... and N more".
    legend_max = 12
    #: Text lines of the hover tooltip.
    tooltip_max_lines = 6
    #: Pixels of legend text a subclass reserves on the right of its data (longer text
    #: is shortened with an ellipsis to the room the legend really has).
    legend_width_px = 160
    #: Pixels between the figure's edges and its plot area (room for axes, if any).
    figure_margin: dict = {"top": 10, "bottom": 10, "left": 10, "right": 10}

    # Lifecycle flags, also right before __init__ ran (close() must work then).
    _ready = False
    _closed = True

    def __init__(
        self,
        model: CompositionModel,
        *,
        mode: str = "auto",
        threshold: int = 5000,
        subsample_size: int = 500,
        seed: int = 0,
        height: int = 460,
        **kwargs,
    ):
        if not isinstance(model, CompositionModel):
            raise TypeError(
                f"a view needs a CompositionModel, got {type(model).__name__}; "
                "build one with compwidgets.model.CompositionModel(read_composition(...))"
            )
        super().__init__(**kwargs)
        self._closed = False  # from here on close() has widgets to close
        self._refreshing = False  # True while refresh() runs (it redraws density and legend)
        self._updating = False  # True while the view itself writes mark/selector traits
        self._selecting = False  # True while the view itself calls model.select
        self._last_brush = None
        self._handlers: list[tuple] = []
        self._notes: dict[str, str] = {}
        self.model = model
        self.mode, self.threshold = mode, threshold
        self.subsample_size, self.seed = subsample_size, seed
        self.height_px = int(height)
        self.rows = _EMPTY_ROWS
        self.active_mode = "points"
        self.n_left_out = 0
        self._x = np.zeros(0)
        self._y = np.zeros(0)
        self._mark_rows = _EMPTY_ROWS
        self._mark_pos = np.zeros(0, dtype=np.intp)
        self._legend_entries: list[tuple[str | None, str]] = []
        self._replaced_pos = np.zeros(0, dtype=np.intp)
        self._links: list = []
        self._build()

    # ------------------------------------------------------------ subclass API
    def _coordinates(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(rows uint32 sorted, x float64, y float64) of the rows the view shows."""
        raise NotImplementedError

    def shown_parts(self) -> list[str]:
        """The parts the coordinates depend on (for the left-out line and markers)."""
        raise NotImplementedError

    def _view_ranges(self) -> tuple[tuple[float, float], tuple[float, float]]:
        """((x0, x1), (y0, y1)) of the figure's scales."""
        raise NotImplementedError

    def _coordinates_key(self):
        """What ``_coordinates()`` depends on besides ``shown_parts()`` (hashable), or None.

        When a subclass names it, results derived from the coordinates (the
        density bins) are kept in the model's cache per set of parts.
        """
        return None

    def _density_extent(self) -> tuple[float, float, float, float]:
        """Data rectangle covered by the density image (default: the current view ranges)."""
        (x0, x1), (y0, y1) = self.view_ranges
        return x0, x1, y0, y1

    def _build_marks(self) -> tuple[list, list]:
        """Extra marks of the subclass: (drawn below the points, drawn above them)."""
        return [], []

    def _refresh_extra(self) -> None:
        """Update the subclass's marks after new coordinates or groups."""

    @t.validate("id_column")
    def _check_id_column(self, proposal):
        name = proposal["value"]
        if name and name not in self.model.metadata.columns:
            raise t.TraitError(
                f"unknown id column {name!r}; metadata columns: "
                f"{', '.join(map(str, self.model.metadata.columns))}"
            )
        return name

    def _legend_anchor(self) -> tuple[float, float, float]:
        """(x, y of the first entry, step down) of the legend, in data coordinates."""
        (x0, x1), (y0, y1) = self.view_ranges
        return x1 - 0.25 * (x1 - x0), y1 - 0.05 * (y1 - y0), 0.05 * (y1 - y0)

    def _on_parts_source_changed(self) -> None:
        """The model's active parts or amalgamations changed (default: redraw)."""
        self.refresh()

    # ------------------------------------------------------------------ build
    def _build(self) -> None:
        self._ranges = _checked_ranges(*self._view_ranges())
        (x0, x1), (y0, y1) = self._ranges
        self.scale_x = bq.LinearScale(min=x0, max=x1, allow_padding=False)
        self.scale_y = bq.LinearScale(min=y0, max=y1, allow_padding=False)
        self.colour_scale = bq.ColorScale(
            colors=[cm.SINGLE_COLOUR, cm.SINGLE_COLOUR], min=0, max=1
        )
        xy = {"x": self.scale_x, "y": self.scale_y}

        self._build_density_layer(xy)
        self._build_hover()
        self.scatter = cm.point_mark(xy, self.colour_scale, tooltip=self.hover_box)
        self.scatter.on_hover(self._guard(self._on_hover))
        # points cover the background: a click on one adds a polygon vertex at the point
        self.scatter.on_element_click(self._guard(self._on_point_click))
        self.replaced_marker = bq.Scatter(
            x=np.zeros(0, np.float32),
            y=np.zeros(0, np.float32),
            scales=xy,
            interactions={},
            enable_hover=False,
            **cm.REPLACED_MARKER,
        )
        self.replaced_marker.on_element_click(self._guard(self._on_point_click))
        self._build_colour_key(xy)
        self._build_polygon_marks(xy)
        self._build_outline(xy)

        below, above = self._build_marks()
        self._extra_marks = [*below, *above]
        marks = [
            self.density,
            *below,
            *self._symbol_marks,
            self.scatter,
            self.replaced_marker,
            *above,
            self._legend_swatches,
            self._legend_text,
            self.selection_outline,
            self._polygon_line,
            self.polygon_marker,
        ]
        self._build_selectors()
        # in the page: the marks restyle a selection the fast way, all views of the model
        # in one go, and the brush is sent when the drag ends (see the module)
        self._figure_speedups = figure_speedups(self.model)
        self._figure_speedups.add_view(self)

        self.figure = bq.Figure(
            marks=marks, axes=[], scale_x=self.scale_x, scale_y=self.scale_y,
            fig_margin=dict(self.figure_margin), padding_x=0.0, padding_y=0.0,
            animation_duration=0, display_toolbar=False,
        )  # fmt: skip
        self.figure.add_class("cw-plot")
        self._size_figure()
        self._build_toolbar()
        self.status = widgets.Label()
        self.notes = widgets.Label()
        self.messages = widgets.Output()
        self.children = [self.toolbar, self.figure, self.status, self.notes, self.messages]

    def _build_toolbar(self) -> None:
        """Tools, combination, clear, close polygon, balance colours, symbols, save figure."""
        self._tool_buttons = widgets.ToggleButtons(
            options=self._tool_options("points"),
            tooltips=self._tool_tips("points"),
            value="brush",
            style={"button_width": "92px"},
        )
        self._tool_buttons.observe(self._guard(self._on_tool_button), names=["value"])
        self._mode_dropdown = widgets.Dropdown(
            options=[(label, key) for key, label in MODE_LABELS.items()],
            value="replace",
            description="selection",
            layout=widgets.Layout(width="190px"),
        )
        self._clear_button = widgets.Button(description="Clear selection", icon="times")
        self._clear_button.on_click(self._guard(lambda _: self.clear_selection()))
        self._close_button = widgets.Button(
            description="Close polygon", layout=widgets.Layout(visibility="hidden")
        )
        self._close_button.on_click(self._guard(lambda _: self.close_polygon()))
        self._balance_scale_menu = widgets.Dropdown(
            options=[("auto", "auto"), ("diverging (0 centre)", "diverging"),
                     ("sequential (range)", "sequential")],
            value=self.balance_scale, description="balance colours",
            style={"description_width": "initial"}, layout=widgets.Layout(width="auto"),
        )  # fmt: skip
        self._balance_scale_box = widgets.HBox(
            [self._balance_scale_menu], layout=widgets.Layout(display="none")
        )
        self._symbols_box = widgets.Checkbox(
            value=self.group_symbols, description="symbols", indent=False,
            tooltip="draw groups with distinct symbols as well as colours",
            layout=widgets.Layout(width="auto"),
        )  # fmt: skip
        # plain mirrors of a control and a trait: the toolkit's own links
        self._links = [
            t.link((self._mode_dropdown, "value"), (self, "select_mode")),
            t.link((self._balance_scale_menu, "value"), (self, "balance_scale")),
            t.link((self._symbols_box, "value"), (self, "group_symbols")),
        ]
        self.figure_save = FigureSaveControl(
            BqplotFigureSource(self.figure), default_name=self._figure_name()
        )
        self.toolbar = widgets.HBox(
            [self._tool_buttons, self._mode_dropdown, self._clear_button, self._close_button,
             self._balance_scale_box, self._symbols_box, self.figure_save],
            layout=widgets.Layout(
                # wraps within the figure's first width: never wider than the view
                flex_flow="row wrap", align_items="center", max_width=self.figure.layout.width
            ),
        )  # fmt: skip

    def _figure_name(self) -> str:
        """Default file name of the saved figure: the kind of view (e.g. "ternary")."""
        name = type(self).__name__
        return (name[: -len("View")] if name.endswith("View") else name).lower() or "figure"

    def _size_figure(self) -> None:
        """Fix the figure's size so one data unit is as long in x as in y (equal aspect)."""
        (x0, x1), (y0, y1) = self._ranges
        m = self.figure.fig_margin
        plot_h = self._plot_height_px()
        plot_w = plot_h * (x1 - x0) / (y1 - y0)
        width = int(round(plot_w + m["left"] + m["right"]))
        ratio = width / self.height_px
        layout = self.figure.layout
        if (
            layout.width == f"{width}px"
            and layout.height == f"{self.height_px}px"
            and self.figure.min_aspect_ratio == ratio == self.figure.max_aspect_ratio
        ):
            return
        with self.figure.hold_sync():
            self.figure.layout = widgets.Layout(
                width=f"{width}px", height=f"{self.height_px}px", min_width=f"{width}px"
            )
            # keep min <= max at every step (the Figure validates each assignment)
            if ratio >= self.figure.max_aspect_ratio:
                self.figure.max_aspect_ratio = ratio
                self.figure.min_aspect_ratio = ratio
            else:
                self.figure.min_aspect_ratio = ratio
                self.figure.max_aspect_ratio = ratio

    def _start(self) -> None:
        """Connect to the model and draw (called once by the subclass at the end of __init__)."""
        m = self.model
        self._watch(m, self._on_model_selection, ["selection"])
        self._watch(m, self._on_model_groups, ["group_column", "metadata_version"])
        self._watch(m, self._on_model_colour, ["colour_by", "sbp", "balance_names"])
        self._watch(m, self._on_model_parts, ["active_parts", "amalgamations"])
        self._ready = True
        name = self._figure_name()
        parts = [re.sub(r"[^A-Za-z0-9_.]+", "", str(p)) for p in self.shown_parts()]
        if 0 < len(parts) <= 3 and all(parts):
            name = "-".join([name, *parts])  # two views of a kind get two file names
        self.figure_save.file_name.value = f"{name}.png"
        self.figure_save.file_name.placeholder = f"{name}.png"
        self.refresh()

    def _guard(self, func):
        """Wrap a callback: errors go to the view's Output (in a kernel), never half-silently."""
        captured = None

        def run(*args, **kwargs):
            nonlocal captured
            if self._closed:
                return None
            if captured is None:
                captured = shows_errors(self.messages)(func) if hasattr(self, "messages") else func
            return captured(*args, **kwargs)

        return run

    def _watch(self, obj, func, names: list[str]) -> None:
        handler = self._guard(func)
        obj.observe(handler, names=names)
        self._handlers.append((obj, handler, names))

    # ------------------------------------------------------------------ traits
    @t.validate("threshold")
    def _check_threshold(self, proposal):
        if proposal["value"] < 1:
            raise t.TraitError(f"threshold must be at least 1 row, got {proposal['value']}")
        return proposal["value"]

    @t.validate("subsample_size")
    def _check_subsample(self, proposal):
        if proposal["value"] < 0:
            raise t.TraitError(f"subsample_size must be >= 0, got {proposal['value']}")
        return proposal["value"]

    @t.validate("tool")
    def _check_tool(self, proposal):
        value = proposal["value"]
        if value == "lasso" and getattr(self, "active_mode", "points") == "density":
            return "polygon"  # the lasso outline never reaches the kernel: polygon instead
        return value

    @t.observe("mode", "threshold", "subsample_size", "seed")
    def _on_mode_traits(self, change):
        if self._ready:
            self.refresh()

    @t.observe("tool")
    def _on_tool(self, change):
        if hasattr(self, "_tool_buttons"):
            self._apply_tool()

    @t.observe("balance_scale", "group_symbols")
    def _on_colour_traits(self, change):
        if self._ready and not self._closed:
            self._apply_colours()

    # ------------------------------------------------------------ public hooks
    @property
    def view_ranges(self) -> tuple[tuple[float, float], tuple[float, float]]:
        """((x0, x1), (y0, y1)): the current limits of the figure's scales."""
        return self._ranges

    def set_view_ranges(self, x_range, y_range) -> None:
        """Show another rectangle of data coordinates.

        Updates the x and y scales, rebuilds the density grid and moves the
        density image when its extent follows the ranges, resizes the figure
        (equal aspect) and moves the legend (positions only: its text and
        colours are not sent again). Nothing is sent when the ranges are
        those shown already.

        Parameters
        ----------
        x_range, y_range : (float, float)
            Lower and upper limits, finite, lower < upper.

        Raises
        ------
        ValueError
            If a range is not two finite increasing numbers.
        """
        self._apply_ranges(_checked_ranges(x_range, y_range), redraw_density=True)

    def move_points(self, x, y, *, x_range=None, y_range=None) -> None:
        """New coordinates for the rows shown (same rows, same order as ``rows``).

        Sends only what moves: the points' x and y (one message), the
        replaced-value markers and, in density mode, a new density image.
        The selection, the colours and the legend text are not sent again.
        The brush rectangle and an unfinished polygon are cleared (they were
        drawn on the old positions). Marks of a subclass are its own to move.

        Parameters
        ----------
        x, y : array-like of float, shape (len(rows),)
            New coordinates, in the order of ``rows``.
        x_range, y_range : (float, float), optional
            New view ranges applied in the same step (see
            :meth:`set_view_ranges`); give both or neither.

        Raises
        ------
        ValueError
            If ``x`` or ``y`` does not have one value per row shown, or only
            one of ``x_range``, ``y_range`` is given.
        """
        x = np.asarray(x, dtype=float).reshape(-1)
        y = np.asarray(y, dtype=float).reshape(-1)
        n = self.rows.size
        if x.size != n or y.size != n:
            raise ValueError(
                f"move_points needs one x and one y per row shown ({n}, in the order of "
                f"view.rows), got {x.size} x and {y.size} y values; for other rows use refresh()"
            )
        if (x_range is None) != (y_range is None):
            raise ValueError("move_points: give both x_range and y_range, or neither")
        if x_range is not None:
            self._apply_ranges(_checked_ranges(x_range, y_range), redraw_density=False)
        self._x, self._y = x, y
        pick = self._mark_pos
        self._updating = True
        try:
            with self.scatter.hold_sync():
                self.scatter.x = self._x[pick].astype(np.float32)
                self.scatter.y = self._y[pick].astype(np.float32)
            self._draw_replaced()
            self._clear_brush()
            self._clear_vertices()
            self._set_shape(None)  # drawn on the old positions
        finally:
            self._updating = False
        self._apply_symbols()
        if self.active_mode == "density":
            self._set_density_points()
            self._render_density()

    def _apply_ranges(self, ranges, redraw_density: bool) -> None:
        if ranges == self._ranges:
            return
        self._ranges = ranges
        for scale, (lo, hi) in zip((self.scale_x, self.scale_y), ranges, strict=True):
            if scale.min != lo or scale.max != hi:
                with scale.hold_sync():
                    scale.min, scale.max = lo, hi
        extent = tuple(float(v) for v in self._density_extent())
        if extent != self._density_image.extent:
            self._density_image = self._new_density_image()
            with self.density.hold_sync():
                self.density.x = [extent[0], extent[1]]
                self.density.y = [extent[2], extent[3]]
            if redraw_density and not self._refreshing and self.active_mode == "density":
                self._set_density_points()
                self._render_density()
        self._size_figure()
        if not self._refreshing:  # refresh() draws the whole legend afterwards
            self._place_legend()

    # ---------------------------------------------------------------- drawing
    def refresh(self) -> None:
        """Recompute the coordinates from the model and redraw everything."""
        if not self._ready or self._closed:
            return
        self._refreshing = True
        try:
            self._redraw()
        finally:
            self._refreshing = False
        self.status.value = cm.left_out_message(self.n_left_out, self.shown_parts())
        self._refresh_extra()

    def _redraw(self) -> None:
        rows, x, y = self._coordinates()
        rows = np.asarray(rows, dtype=np.uint32)
        self.rows = rows
        self._x = np.asarray(x, dtype=float)
        self._y = np.asarray(y, dtype=float)
        self.n_left_out = self.model.n_rows - rows.size
        n = rows.size
        if self.mode == "auto":
            self.active_mode = "density" if n > self.threshold else "points"
        else:
            self.active_mode = self.mode
        if self.active_mode == "density":
            k = min(self.subsample_size, n)
            rng = np.random.default_rng(self.seed)
            pick = np.sort(rng.choice(n, size=k, replace=False)) if k < n else np.arange(n)
            self._set_density_points(cached=True)
        else:
            pick = np.arange(n)
        self._mark_pos = pick
        self._mark_rows = rows[pick]
        self._last_brush = None
        selected = np.flatnonzero(self.model.selected_mask()[self._mark_rows]).astype(np.uint32)
        self._updating = True
        try:
            show_selection(
                self.scatter, selected if selected.size else None,
                x=self._x[pick].astype(np.float32), y=self._y[pick].astype(np.float32),
            )  # fmt: skip
            self._draw_replaced()
            self._clear_brush()
            self._clear_vertices()
            self._set_shape(None)  # the coordinates may mean something else now
            self.density.visible = self.active_mode == "density"
        finally:
            self._updating = False
        if self.tool == "lasso" and self.active_mode == "density":
            self.tool = "polygon"
        self._apply_tool()
        self._apply_colours()
        self._apply_selection()

    def _draw_replaced(self) -> None:
        """Hollow diamonds on the drawn points with a replaced value in the shown parts."""
        mask = cm.replaced_rows(self.model, self.shown_parts())[self._mark_rows]
        self._replaced_pos = np.flatnonzero(mask)
        pos = self._mark_pos[mask]
        show_selection(
            self.replaced_marker, self._replaced_selected(),
            x=self._x[pos].astype(np.float32), y=self._y[pos].astype(np.float32),
        )  # fmt: skip

    def _replaced_selected(self, selected_points: np.ndarray | None = None):
        """``selected`` of the replaced-value markers: those of selected points (None if none)."""
        if selected_points is None:
            selected_points = self.model.selected_mask()[self._mark_rows]
        if not selected_points.any() or not self._replaced_pos.size:
            return None  # like the points: no selection draws every marker plainly
        return np.flatnonzero(selected_points[self._replaced_pos]).astype(np.uint32)

    def _plot_height_px(self) -> float:
        """Height of the plot area in pixels (the figure's height less its margins)."""
        fig = getattr(self, "figure", None)
        m = fig.fig_margin if fig is not None else self.figure_margin
        return float(self.height_px - m["top"] - m["bottom"])

    # -------------------------------------------------------------- selection
    def _fading_marks(self) -> list:
        """The marks that show the model's selection (unselected elements fade)."""
        return [self.scatter, self.replaced_marker, *self._symbol_marks]

    def _mark_selections(self) -> list:
        """[(mark, its ``selected``)] of each of :meth:`_fading_marks`, in that order."""
        drawn = self.model.selected_mask()[self._mark_rows]
        pos = np.flatnonzero(drawn).astype(np.uint32)
        return [
            (self.scatter, pos if pos.size else None),
            (self.replaced_marker, self._replaced_selected(drawn)),
            *self._symbol_selections(drawn),
        ]

    def _apply_selection(self) -> None:
        """Show the model's selection: mark ``selected`` (indices only) and the density image."""
        for mark, selected in self._mark_selections():
            if mark is self.scatter:
                self._set_mark_selected(selected)
            else:
                show_selection(mark, selected)
        if self.active_mode == "density":
            self._render_density()

    def _set_mark_selected(self, pos) -> None:
        self._updating = True
        try:
            show_selection(self.scatter, pos)
        finally:
            self._updating = False

    def _set_note(self, key: str, text: str) -> None:
        """Set one of the notes shown under the figure (each source of notes has a key)."""
        self._notes[key] = text
        value = "; ".join(v for v in self._notes.values() if v)
        if self.notes.value != value:
            self.notes.value = value

    # --------------------------------------------------------- event handlers
    def _on_model_selection(self, change) -> None:
        if not self._selecting:  # the shape drawn here no longer describes the selection
            self._clear_brush()
            self._set_shape(None)
            self._set_note("selection", "")
        self._apply_selection()

    def _on_model_groups(self, change) -> None:
        self._apply_colours()
        self._refresh_extra()

    def _on_model_colour(self, change) -> None:
        self._apply_colours()

    def _on_model_parts(self, change) -> None:
        self._on_parts_source_changed()

    # ------------------------------------------------------------------ export
    def save_png(self, path: str = "view.png", scale: float | None = None) -> None:
        """Ask the browser to save the figure as a PNG (bqplot ``Figure.save_png``).

        Front-end dependent: the figure must be displayed in a live front end,
        which renders it and offers it as a download named ``path``; nothing
        is written by the kernel.
        """
        self.figure.save_png(path, scale)

    def save_svg(self, path: str = "view.svg") -> None:
        """Ask the browser to save the figure as an SVG (bqplot ``Figure.save_svg``).

        Front-end dependent, like :meth:`save_png`.
        """
        self.figure.save_svg(path)

    # ----------------------------------------------------------------- closing
    def close(self) -> None:
        """Stop following the model and close every widget of the view.

        Safe to call twice, and on a view whose constructor failed (whatever
        was built is closed; nothing at all before the base was constructed),
        so ``__del__`` never raises.
        """
        if getattr(self, "_closed", True):
            return  # closed already, or the constructor failed before the view existed
        self._closed = True
        for obj, handler, names in getattr(self, "_handlers", []):
            obj.unobserve(handler, names=names)
        self._handlers = []
        speedups = getattr(self, "_figure_speedups", None)
        if speedups is not None:
            speedups.remove_view(self)  # shared by the model's views: not closed here
        names = (
            "toolbar", "_tool_buttons", "_mode_dropdown", "_clear_button", "_close_button",
            "_balance_scale_menu", "_balance_scale_box", "_symbols_box", "figure_save",
            "status", "notes", "messages", "hover_box", "brush", "figure", "scatter",
            "replaced_marker", "density", "_legend_swatches", "_legend_text",
            "selection_outline", "polygon_marker", "_polygon_line", "colour_scale",
            "scale_x", "scale_y",
        )  # fmt: skip
        owned = [getattr(self, n, None) for n in names]
        for link in getattr(self, "_links", []):
            link.unlink()
        self._links = []
        owned += list(getattr(self, "_tooltip_lines", []))
        owned += list(getattr(self, "_lassos", []))
        owned += list(getattr(self, "_symbol_marks", []))
        control = getattr(self, "figure_save", None)
        if control is not None:
            owned += [control.format, control.scale, control.file_name, control.button,
                      control.message, *control.children]  # fmt: skip
        owned += list(getattr(self, "_pictures", []))
        owned += list(getattr(self, "_extra_marks", []))
        for w in owned:
            if w is not None:
                w.close()
        super().close()


def _checked_ranges(x_range, y_range) -> tuple[tuple[float, float], tuple[float, float]]:
    """((x0, x1), (y0, y1)) as floats, or ValueError naming the bad range."""
    out = []
    for name, r in (("x_range", x_range), ("y_range", y_range)):
        try:
            lo, hi = (float(v) for v in r)
        except (TypeError, ValueError):
            raise ValueError(f"{name} must be two numbers (lower, upper), got {r!r}") from None
        if not (np.isfinite(lo) and np.isfinite(hi) and lo < hi):
            raise ValueError(f"{name} must be finite with lower < upper, got ({lo}, {hi})")
        out.append((lo, hi))
    return out[0], out[1]
