"""The ternary diagram of three parts (or amalgamations), linked to the shared model.

Layout (from :mod:`compwidgets.core.ternary`): the first part at the top
vertex, the second bottom left, the third bottom right; side 1, equal aspect.
Every number drawn (projection, grid, ticks, centring, regions, lines) comes
from :mod:`compwidgets.core`; this module only places marks and text.

Example
-------
>>> import compwidgets as cw
>>> table = cw.demo.stream_sediments(n=300)  # invented survey
>>> model = cw.CompositionModel(
...     cw.read_composition(table, detection_limits=cw.demo.DETECTION_LIMITS)
... )
>>> model.amalgamations = {"mafic": ["Fe2O3", "MgO"]}
>>> view = TernaryView(model, ["SiO2", "Al2O3", "mafic"], probability_levels=[0.9, 0.99])
>>> view.centred = True          # perturb data and grid by the inverse data centre
>>> view.parts = ["Na2O", "K2O", "CaO"]
>>> view.boundaries = True       # decision boundaries of a discriminant on these 3 parts
"""

from __future__ import annotations

from collections.abc import Sequence

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import pandas as pd
import traitlets as t

from ..core import CompositionError, center, closure
from ..core import discriminant as core_discriminant
from ..core import regions as core_regions
from ..core import ternary as core_ternary
from ..model import CompositionModel, ModelError
from . import _common as cm
from ._scatter import ScatterView

__all__ = ["TernaryView"]

H = core_ternary.HEIGHT

#: Offset of tick labels from the frame, and of vertex labels from the vertices (data units).
_TICK_OFFSET = 0.035
#: Scale ranges: the triangle with room for labels, plus a legend strip on the right.
_X_RANGE = (-0.13, 1.55)
_Y_RANGE = (-0.15, H + 0.09)


def _format_level(level: float) -> str:
    pct = 100.0 * level
    return f"{pct:.0f}" if abs(pct - round(pct)) < 1e-9 else f"{pct:.3g}"


class TernaryView(ScatterView):
    """Ternary diagram of three parts of the model, with selection tools.

    Parameters
    ----------
    model : CompositionModel
    parts : sequence of 3 str, optional
        Parts or amalgamation names of ``model.available_parts``. Default: the
        first three active parts, following ``model.active_parts`` as it changes
        (until ``parts`` is set).
    grid_step : float, default 0.1
        Grid lines every 10 % of each part.
    centred : bool, default False
        Perturb data, grid and overlays by the inverse of the data centre
        (von Eynatten, Pawlowsky-Glahn & Egozcue 2002); ticks keep the original shares.
    probability_levels : sequence of float, default ()
        Probability regions (normal model in ilr) drawn per group, e.g. [0.9, 0.95, 0.99].
    probability_kind : {"prediction", "known_parameters"}, default "prediction"
        Prediction regions for a new sample (F quantile, parameters estimated from
        the group) or the known-parameter regions (chi-square), which hold fewer
        new samples than their level in small groups (the notes then say how many);
        see :mod:`compwidgets.core.regions`.
    confidence_level : float or None, default None
        Confidence region of each group's centre (Hotelling's T^2), e.g. 0.95.
    compositional_line : None, (row, row) or dict, default None
        A compositional line through the compositions of two rows (model row
        positions), or ``{"direction": clr vector of 3 values, "origin": row
        position or 3-part composition (default: the data centre)}``.
    boundaries : bool, default False
        Draw the decision boundaries of a discriminant rule fitted on the three
        parts shown, with the model's groups (toggled in the view): where two
        groups have equal discriminant scores and no third beats them, as
        compositional curves (straight lines in ilr for the linear rule);
        :func:`compwidgets.core.discriminant.decision_boundaries`.
    boundary_kind : {"linear", "quadratic"}, default "linear"
    boundary_priors : {"proportional", "equal"}, default "proportional"
        Prior probabilities of the groups in that rule: their shares of the
        rows, or equal. The workbench keeps it equal to the discriminant
        view's ``priors``, so both views assign with the same priors.
    id_column : str, default ""
        Metadata column shown as the sample id on hover ("" = the row label).
    **kwargs
        Passed to :class:`~compwidgets.views._scatter.ScatterView` (mode,
        threshold, subsample_size, seed, height).
    """

    parts = t.List(t.Unicode())
    grid_step = t.Float(0.1)
    centred = t.Bool(False)
    probability_levels = t.List(t.Float())
    probability_kind = t.Enum(core_regions.PROBABILITY_KINDS, default_value="prediction")
    confidence_level = t.Float(None, allow_none=True)
    compositional_line = t.Any(None, allow_none=True)
    boundaries = t.Bool(False)
    boundary_kind = t.Enum(core_discriminant.KINDS, default_value="linear")
    boundary_priors = t.Enum(core_discriminant.PRIORS, default_value="proportional")

    #: Rows a boundary rule is fitted on at most (a stratified random sample beyond).
    boundary_max_rows = 50_000

    def __init__(
        self,
        model: CompositionModel,
        parts: Sequence[str] | None = None,
        *,
        grid_step: float = 0.1,
        centred: bool = False,
        probability_levels: Sequence[float] = (),
        probability_kind: str = "prediction",
        confidence_level: float | None = None,
        compositional_line=None,
        boundaries: bool = False,
        boundary_kind: str = "linear",
        boundary_priors: str = "proportional",
        id_column: str = "",
        **kwargs,
    ):
        self._follow = parts is None
        self._internal = False
        self._notice = ""  # a lasting note about the parts shown (kept across redraws)
        self._active_before: set[str] = set()  # to tell which parts left the active set
        self._left_active: list[str] = []  # shown parts a change took out of the active ones
        self._centring: np.ndarray | None = None
        self._boundary_cache: tuple = ((), [], "")  # (key, curves, note)
        super().__init__(model, **kwargs)
        self._active_before = set(model.active_parts)
        self._build_boundary_controls()
        self._internal = True
        try:
            self.parts = self._followed_parts() if parts is None else list(parts)
        finally:
            self._internal = False
        self.grid_step = grid_step
        self.centred = centred
        self.probability_levels = list(probability_levels)
        self.probability_kind = probability_kind
        self.confidence_level = confidence_level
        self.id_column = id_column
        self.compositional_line = compositional_line
        self.boundary_kind = boundary_kind
        self.boundary_priors = boundary_priors
        self.boundaries = boundaries
        self._start()

    def _build_boundary_controls(self) -> None:
        """The view's own controls under the toolbar: centring, decision boundaries, rule."""
        self._centring_toggle = widgets.ToggleButton(
            description="centred", icon="crosshairs", value=False,
            tooltip="perturb the points and the grid by the inverse of the data centre "
            "(the centre moves to the middle; the grid keeps the original shares)",
            layout=widgets.Layout(width="auto"),
        )  # fmt: skip
        self._boundary_toggle = widgets.ToggleButton(
            description="decision boundaries", icon="random", value=False,
            tooltip="boundaries of a discriminant rule fitted on these 3 parts and the groups",
            layout=widgets.Layout(width="auto"),
        )  # fmt: skip
        self._boundary_menu = widgets.Dropdown(
            options=[("linear rule", "linear"), ("quadratic rule", "quadratic")],
            value="linear", description="rule", style={"description_width": "initial"},
            layout=widgets.Layout(width="auto"),
        )  # fmt: skip
        self._boundary_links = [
            widgets.link((self._centring_toggle, "value"), (self, "centred")),
            t.link((self._boundary_toggle, "value"), (self, "boundaries")),
            t.link((self._boundary_menu, "value"), (self, "boundary_kind")),
        ]
        self.boundary_controls = widgets.HBox(
            [self._centring_toggle, self._boundary_toggle, self._boundary_menu]
        )
        children = list(self.children)
        self.children = [*children[:1], self.boundary_controls, *children[1:]]

    def close(self) -> None:
        """Stop following the model and close every widget of the view (twice is fine)."""
        for link in getattr(self, "_boundary_links", []):
            link.unlink()
        self._boundary_links = []
        for name in (
            "boundary_controls", "_centring_toggle", "_boundary_toggle", "_boundary_menu"
        ):  # fmt: skip
            widget = getattr(self, name, None)
            if widget is not None:
                widget.close()
        super().close()

    # --------------------------------------------------------------- options
    def _followed_parts(self) -> list[str]:
        active = list(self.model.active_parts)
        if len(active) >= 3:
            return active[:3]
        chosen = list(active)
        used = {m for p in chosen for m in cm.part_members(self.model, p)}
        for p in self.model.available_parts:
            members = set(cm.part_members(self.model, p))
            if len(chosen) < 3 and p not in chosen and not members & used:
                chosen.append(p)
                used |= members
        return cm.check_view_parts(self.model, chosen, 3)

    @t.validate("parts")
    def _check_parts(self, proposal):
        try:
            return cm.check_view_parts(self.model, proposal["value"], 3)
        except CompositionError as err:
            raise ModelError(f"TernaryView.parts: {err}") from None

    @t.validate("grid_step")
    def _check_step(self, proposal):
        try:
            core_ternary.grid_levels(proposal["value"])
        except CompositionError as err:
            raise t.TraitError(f"TernaryView.grid_step: {err}") from None
        return proposal["value"]

    @t.validate("probability_levels")
    def _check_levels(self, proposal):
        levels = [float(v) for v in proposal["value"]]
        bad = [v for v in levels if not 0.0 < v < 1.0]
        if bad:
            raise t.TraitError(f"probability_levels must be in (0, 1), got {bad}")
        return sorted(set(levels))

    @t.validate("confidence_level")
    def _check_confidence(self, proposal):
        value = proposal["value"]
        if value is not None and not 0.0 < value < 1.0:
            raise t.TraitError(f"confidence_level must be None or in (0, 1), got {value!r}")
        return value

    @t.validate("compositional_line")
    def _check_line(self, proposal):
        value = proposal["value"]
        if value is None:
            return None
        if isinstance(value, dict):
            unknown = set(value) - {"direction", "origin"}
            if unknown or "direction" not in value:
                raise t.TraitError(
                    "compositional_line as a dict needs 'direction' (a clr vector of 3 values) "
                    f"and optionally 'origin'; got keys {sorted(value)}"
                )
            d = np.asarray(value["direction"], dtype=float)
            if d.shape != (3,):
                raise t.TraitError(f"compositional_line direction needs 3 values, got {d.shape}")
            origin = value.get("origin")
            if origin is not None and not isinstance(origin, (int, np.integer)):
                o = np.asarray(origin, dtype=float)
                if o.shape != (3,) or not np.all(o > 0):
                    raise t.TraitError(
                        "compositional_line origin must be a row position or 3 positive parts"
                    )
            return {"direction": d, "origin": origin}
        try:
            rows = [int(v) for v in value]
        except (TypeError, ValueError):
            raise t.TraitError(
                "compositional_line must be None, two row positions, or a dict with a "
                f"'direction'; got {value!r}"
            ) from None
        if len(rows) != 2 or rows[0] == rows[1]:
            raise t.TraitError(f"compositional_line needs two different row positions, got {rows}")
        for r in rows:
            if not 0 <= r < self.model.n_rows:
                raise t.TraitError(f"row position {r} is outside 0..{self.model.n_rows - 1}")
        return tuple(rows)

    @t.observe("parts")
    def _on_parts(self, change):
        if not self._internal:
            self._follow = False
            self._notice = ""
        self._left_active = []
        if self._ready:
            self._set_vertex_labels()
            self.refresh()

    @t.observe("centred", "grid_step")
    def _on_geometry(self, change):
        if self._ready:
            self.refresh()

    @t.observe(
        "probability_levels",
        "probability_kind",
        "confidence_level",
        "compositional_line",
        "boundaries",
        "boundary_kind",
        "boundary_priors",
    )
    def _on_overlay_options(self, change):
        if self._ready:
            self._draw_overlays()

    def follow_active_parts(self) -> None:
        """Show the model's first three active parts again, and follow them."""
        self._follow = True
        self._notice = ""
        self._left_active = []
        self._internal = True
        try:
            self.parts = self._followed_parts()
        finally:
            self._internal = False
        if self._ready:
            self._draw_overlays()  # the notes, also when the parts stayed the same

    def _on_parts_source_changed(self) -> None:
        active = list(self.model.active_parts)
        before, self._active_before = self._active_before, set(active)
        if self._follow:
            new = self._followed_parts()
            if new != list(self.parts):
                self._internal = True
                try:
                    self.parts = new  # redraws
                finally:
                    self._internal = False
                return
        gone = [p for p in self.parts if p not in self.model.available_parts]
        if gone:
            self.follow_active_parts()
            self._notice = f"parts {gone} no longer exist in the model; showing active parts"
            self._draw_overlays()
            return
        # parts chosen for this view that a change took out of the active parts: shown
        # still (the user chose them); a note says so until they are back or changed
        self._left_active = [
            p for p in self.parts
            if p not in active and (p in before or p in self._left_active)
        ]  # fmt: skip
        self.refresh()  # an amalgamation may have new members

    # ----------------------------------------------------------- ScatterView
    def shown_parts(self) -> list[str]:
        return list(self.parts)

    def _view_ranges(self):
        return _X_RANGE, _Y_RANGE

    def _density_extent(self):
        return 0.0, 1.0, 0.0, H

    def _legend_anchor(self):
        return 1.12, H + 0.02, 0.055

    def _coordinates_key(self):
        return ("ternary", bool(self.centred))

    def _coordinates(self):
        parts = list(self.parts)
        model = self.model
        centred = bool(self.centred)

        def project():
            rows = np.flatnonzero(model.complete_rows(parts)).astype(np.uint32)
            if rows.size == 0:
                return rows, np.zeros(0), np.zeros(0), None
            # closed here, not kept: the projection is what is kept (less memory per view)
            values = model.part_values(parts)
            closed = closure(values if rows.size == model.n_rows else values[rows])
            centring = None
            if centred:
                centring = core_ternary.centring_perturbation(data=closed)
                closed = core_ternary.perturb_closed(closed, centring)
            x, y = core_ternary.ternary_to_xy(closed)
            return rows, x, y, centring

        # kept in the model's cache: showing these parts again does not project again
        rows, x, y, self._centring = model.derived(("ternary-xy", centred), parts, project)
        return rows, x, y

    @property
    def _closed_shown(self) -> np.ndarray:
        """Closed compositions (3 parts) of the rows shown, in the order of ``rows``."""
        parts = list(self.parts)
        rows = self.rows
        values = self.model.part_values(parts)
        return self.model.derived(
            ("ternary-closed-shown", rows.size), parts, lambda: closure(values[rows])
        )

    def _build_marks(self):
        xy = {"x": self.scale_x, "y": self.scale_y}
        quiet = {"interactions": {}, "enable_hover": False}
        self.grid = bq.Lines(
            x=np.zeros((0, 2)), y=np.zeros((0, 2)), scales=xy, colors=[cm.GRID_COLOUR],
            stroke_width=0.7, **quiet,
        )  # fmt: skip
        self.frame = bq.Lines(
            x=core_ternary.VERTICES[[1, 2, 0, 1], 0],
            y=core_ternary.VERTICES[[1, 2, 0, 1], 1],
            scales=xy, colors=[cm.FRAME_COLOUR], stroke_width=1.4, **quiet,
        )  # fmt: skip
        label = {"scales": xy, "colors": [cm.TEXT_COLOUR], "font_unit": "px", **quiet}
        # one Label mark per frame edge (a Label mark has one alignment)
        self.tick_labels = [
            bq.Label(x=[], y=[], text=np.array([], dtype=str), align=a, default_size=10, **label)
            for a in ("end", "middle", "start")
        ]
        self.vertex_labels = bq.Label(
            x=[0.5, -0.02, 1.02], y=[H + 0.045, -0.105, -0.105], text=np.array(["", "", ""]),
            align="middle", default_size=14, font_weight="bold", **label,
        )  # fmt: skip
        self.regions = bq.Lines(
            x=np.zeros((0, 2)), y=np.zeros((0, 2)), scales=xy, stroke_width=1.6, **quiet
        )
        self.centre_regions = bq.Lines(
            x=np.zeros((0, 2)), y=np.zeros((0, 2)), scales=xy, stroke_width=1.6,
            line_style="dashed", **quiet,
        )  # fmt: skip
        self.line = bq.Lines(
            x=np.zeros(0), y=np.zeros(0), scales=xy, colors=[cm.FRAME_COLOUR],
            stroke_width=1.5, line_style="dash_dotted", **quiet,
        )  # fmt: skip
        self.boundary_lines = bq.Lines(
            x=np.zeros((0, 2)), y=np.zeros((0, 2)), scales=xy, colors=[cm.FRAME_COLOUR],
            stroke_width=1.8, **quiet,
        )  # fmt: skip
        below = [self.grid, self.frame]
        above = [
            self.regions, self.centre_regions, self.boundary_lines, self.line, *self.tick_labels,
        ]  # fmt: skip
        return below, [*above, self.vertex_labels]

    def _set_vertex_labels(self) -> None:
        text = np.array([str(p) for p in self.parts], dtype=str)
        if list(self.vertex_labels.text) != list(text):
            self.vertex_labels.text = text

    def _refresh_extra(self) -> None:
        self._set_vertex_labels()
        self._draw_grid()
        self._draw_overlays()

    def _draw_grid(self) -> None:
        g = core_ternary.grid_lines(self.grid_step, centre=self._centre())
        with self.grid.hold_sync():
            self.grid.x = g.x.astype(np.float32)
            self.grid.y = g.y.astype(np.float32)
        ticks = core_ternary.grid_ticks(self.grid_step, centre=self._centre())
        for p, mark in enumerate(self.tick_labels):  # part A: left edge, B: bottom, C: right
            sel = ticks.part == p
            with mark.hold_sync():
                mark.x = ticks.x[sel] + _TICK_OFFSET * ticks.dx[sel]
                mark.y = ticks.y[sel] + _TICK_OFFSET * ticks.dy[sel] - (0.012 if p == 1 else 0)
                mark.text = np.array([_format_level(v) for v in ticks.level[sel]], dtype=str)

    def _centre(self) -> np.ndarray | None:
        """The data centre when centred (the grid is perturbed by its inverse), else None."""
        if self._centring is None:
            return None
        return core_ternary.centre_of_centring(self._centring)

    def _to_view(self, closed: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        if self._centring is not None:
            closed = core_ternary.perturb_closed(closed, self._centring)
        return core_ternary.ternary_to_xy(closed)

    def _draw_overlays(self) -> None:
        notes: list[str] = []
        levels = list(self.probability_levels)
        groups = self._groups() if levels or self.confidence_level is not None else []
        curves, colours, opacities = [], [], []
        centre_curves, centre_colours = [], []
        kind = self.probability_kind
        short = []
        for name, colour, X in groups:
            if not levels and self.confidence_level is None:
                break
            try:
                if levels:
                    regions = core_regions.probability_regions(X, levels, kind=kind)
                    for k, curve in enumerate(regions):
                        curves.append(self._to_view(curve))
                        colours.append(colour)
                        opacities.append(1.0 - 0.45 * k / max(1, len(levels) - 1))
                    held = [
                        f"{_format_level(core_regions.expected_coverage(a, len(X), kind))} % "
                        f"at {_format_level(a)} %"
                        for a in levels
                        if core_regions.under_covers(a, len(X), kind)
                    ]
                    if held:
                        short.append(f"{name} ({len(X)} rows) about {', '.join(held)}")
                if self.confidence_level is not None:
                    curve = core_regions.centre_confidence_region(X, self.confidence_level)
                    centre_curves.append(self._to_view(curve))
                    centre_colours.append(colour)
            except CompositionError as err:
                notes.append(f"no region for {name}: {str(err).removeprefix('regions: ')}")
        self._set_lines(self.regions, curves, colours, opacities)
        self._set_lines(self.centre_regions, centre_curves, centre_colours, [1.0])
        boundaries = self._boundary_curves(notes)
        self._set_lines(
            self.boundary_lines, [self._to_view(c) for c in boundaries],
            [cm.FRAME_COLOUR] * len(boundaries), [1.0],
        )  # fmt: skip
        line = self._line_points(notes)
        with self.line.hold_sync():
            if line is None:
                self.line.x, self.line.y = np.zeros(0), np.zeros(0)
            else:
                self.line.x, self.line.y = line[0].astype(np.float32), line[1].astype(np.float32)
        if short:
            notes.insert(
                0,
                "with estimated parameters these regions hold fewer new samples than their "
                f"level: {', '.join(short)}; the prediction regions allow for it",
            )
        if self.confidence_level is not None:
            notes.insert(
                0, f"confidence region of the centre at {_format_level(self.confidence_level)} %"
            )
        if levels:
            label = (
                "prediction regions for a new sample (normal model on ilr) at "
                if kind == "prediction"
                else "known-parameter regions (chi-square, normal model on ilr) at "
            )
            notes.insert(0, label + ", ".join(_format_level(v) + " %" for v in levels))
        if self._left_active:
            left = self._left_active
            notes.insert(
                0,
                f"{', '.join(left)} {'is' if len(left) == 1 else 'are'} no longer among the "
                "active parts; shown here still (choose other parts, or follow_active_parts())",
            )
        if self._notice:
            notes.insert(0, self._notice)
        self._set_note("overlays", "; ".join(notes))

    @staticmethod
    def _set_lines(mark, curves, colours, opacities) -> None:
        with mark.hold_sync():
            if curves:
                mark.x = np.array([c[0] for c in curves], dtype=np.float32)
                mark.y = np.array([c[1] for c in curves], dtype=np.float32)
                mark.colors = list(colours)
                mark.opacities = list(opacities)
            else:
                mark.x = np.zeros((0, 2), dtype=np.float32)
                mark.y = np.zeros((0, 2), dtype=np.float32)

    def _boundary_curves(self, notes: list[str]) -> list[np.ndarray]:
        """Decision boundaries (closed compositions) of a rule on the parts shown, if on."""
        if not self.boundaries:
            return []
        m = self.model
        key = (
            tuple((p, tuple(m.members(p))) for p in self.parts),
            m.group_column, m.metadata_version, self.boundary_kind, self.boundary_priors,
            tuple(m.active_parts) if self.boundary_priors == "proportional" else (),
            self.rows.size,
        )  # fmt: skip
        if self._boundary_cache[0] != key:
            curves, note = [], ""
            try:
                if not m.group_column:
                    raise CompositionError("the model has no grouping column")
                categories, codes = m.group_codes()
                labels = pd.Categorical.from_codes(codes[self.rows], categories=categories)
                fit = core_discriminant.fit_discriminant(
                    self._closed_shown, labels, kind=self.boundary_kind,
                    priors=self._boundary_prior_weights(categories, codes), classes=categories,
                    max_rows=self.boundary_max_rows, seed=self.seed,
                )  # fmt: skip
                curves = [b.curve for b in core_discriminant.decision_boundaries(fit)]
                prior = (
                    "priors: group shares" if self.boundary_priors == "proportional"
                    else "priors: equal"
                )  # fmt: skip
                note = (
                    f"decision boundaries of a {self.boundary_kind} discriminant of "
                    f"{m.group_column!r} fitted on these 3 parts ({prior}; exploratory)"
                )
                if fit.left_out:
                    note += f", without {', '.join(map(repr, fit.left_out))} (too few rows)"
            except CompositionError as err:
                note = f"no decision boundaries: {err}"
            self._boundary_cache = (key, curves, note)
        _, curves, note = self._boundary_cache
        notes.append(note)
        return curves

    def _boundary_prior_weights(self, categories, codes):
        """The priors of the boundary rule: those the discriminant view's rule uses.

        That rule is fitted on the rows complete in the active parts: with
        "proportional" priors, the groups' shares of those rows (not of the rows
        shown here, which may be more); "equal" as it is.
        """
        if self.boundary_priors != "proportional":
            return self.boundary_priors
        rows = self.model.complete_rows(list(self.model.active_parts))
        groups = pd.Categorical.from_codes(codes[rows], categories=categories)
        return core_discriminant.group_shares(groups, classes=categories)

    @property
    def boundary_curves(self) -> list[np.ndarray]:
        """The decision boundaries drawn (closed compositions, float64), [] when off."""
        if not self.boundaries or not self._ready:
            return []
        return list(self._boundary_cache[1])

    def _groups(self) -> list[tuple[str, str, np.ndarray]]:
        """(name, colour, closed 3-part data) of each group among the rows shown."""
        m = self.model
        X = self._closed_shown
        if not m.group_column:
            return [("all rows", cm.SINGLE_COLOUR, X)] if X.shape[0] else []
        categories, codes = m.group_codes()
        shown = codes[self.rows]
        palette = cm.group_colours(categories)
        out = []
        for k, name in enumerate(categories):
            sel = shown == k
            if sel.any():
                out.append((f"group {name!r}", palette[k], X[sel]))
        return out

    def _line_points(self, notes: list[str]):
        spec = self.compositional_line
        if spec is None:
            return None
        parts = list(self.parts)
        complete = self.model.complete_rows(parts)
        values = self.model.part_values(parts)

        def row_composition(r: int) -> np.ndarray | None:
            if not complete[r]:
                notes.append(
                    f"no compositional line: row {self.model.index[r]!r} is missing or zero in "
                    + ", ".join(parts)
                )
                return None
            return np.asarray(closure(values[r]))

        try:
            if isinstance(spec, dict):
                origin = spec["origin"]
                if origin is None:
                    if self._closed_shown.shape[0] == 0:
                        return None
                    x0 = np.asarray(center(self._closed_shown))  # the data centre
                elif isinstance(origin, (int, np.integer)):
                    x0 = row_composition(int(origin))
                else:
                    x0 = np.asarray(origin, dtype=float)
                if x0 is None:
                    return None
                pts = core_ternary.line_along(x0, spec["direction"])
            else:
                a, b = (row_composition(r) for r in spec)
                if a is None or b is None:
                    return None
                pts = core_ternary.line_through(a, b)
        except CompositionError as err:
            notes.append(f"no compositional line: {err}")
            return None
        return self._to_view(pts)

    # ------------------------------------------------------------------ hover
    def _hover_lines(self, row: int) -> list[str]:
        m = self.model
        comp = m.composition
        lines = self._hover_heading(row)
        parts = list(self.parts)
        closed = closure(m.part_values(parts)[row])
        values = m.part_values(parts)[row]
        for j, part in enumerate(parts):
            members = cm.part_members(m, part)
            replaced = bool(comp.replaced[members].iloc[row].any())
            raw = comp.raw[members].iloc[row].to_numpy(dtype=float)
            if part in comp.units:  # a part of the table: in the unit it was reported in
                (value,), unit = comp.in_reported_unit(part, [values[j]])
                raw, _ = comp.in_reported_unit(part, raw)
            else:  # an amalgamation: members may differ in unit, show the common one
                value, unit = values[j], comp.unit
            text = (
                f"{part}: {100 * closed[j]:.2f} % of the 3 shown | "
                f"{cm.format_number(value)} {unit}"
            )
            if replaced:
                known = raw[np.isfinite(raw)]
                observed = (
                    f"{cm.format_number(known.sum())} {unit} observed, " if known.size else ""
                )
                text += f" (replaced; {observed}below detection)"
            elif np.all(np.isfinite(raw)) and not np.isclose(raw.sum(), value):
                text += f" (raw {cm.format_number(raw.sum())} {unit})"
            lines.append(text)
        return lines
