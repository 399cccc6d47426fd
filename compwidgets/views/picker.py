"""The subcomposition picker: active parts, amalgamations and ternary parts.

:class:`SubcompositionPicker` writes the model's ``active_parts`` and
``amalgamations`` (every view follows through the model) and the ``parts`` of
the ternary views it is given. The parts list has a filter box (by name or
unit) and bulk choices (every part, all majors, all traces, all parts of one
unit). For the active parts it shows the variation matrix
``T_ij = var ln(x_i / x_j)`` as one heat-map picture
(:class:`~compwidgets.views.heatmap.VariationHeatmap`: hover a cell for its
value, click it to use the pair in a ternary) and the total variance, so the
user sees which log-ratios carry the variability. Every number comes from
:mod:`compwidgets.core` (through the model's cache).

Everything from the table (part names, values) reaches the browser as text
only: ``Label`` values, ``Dropdown`` / ``SelectMultiple`` options, and the heat
map's names (``textContent``).
"""

from __future__ import annotations

from collections.abc import Sequence

import ipywidgets as w
import numpy as np
import pandas as pd
import traitlets as t

from .. import core
from ..units import normalize_unit
from ._errors import shows_errors
from ._words import counted
from .heatmap import VariationHeatmap

__all__ = ["SubcompositionPicker", "part_groups"]

#: How many of the largest log-ratio variances are named under the heat map.
N_LARGEST = 3

#: Units of parts counted as traces (ppm and finer mass fractions).
TRACE_UNITS = frozenset({"ppm", "ppb", "mg/kg", "g/t", "ug/g"})

#: How the bulk buttons combine a group of parts with the active parts.
BULK_ACTIONS = ("replace", "add", "remove")


def part_groups(composition) -> dict[str, list[str]]:
    """Groups of parts offered for bulk choice: every part, majors, traces, and by unit.

    Keys: ``"all"``; ``"majors"`` (reported in wt%) and ``"traces"`` (reported in
    ppm, ppb, mg/kg, g/t or ug/g) when the table has them; ``"unit:<unit>"`` for
    each unit as reported, when there is more than one. Parts keep the table's order.
    """
    parts = list(composition.parts)
    units = {p: str(composition.units.get(p, composition.unit)) for p in parts}
    canonical = {p: normalize_unit(u) for p, u in units.items()}
    groups: dict[str, list[str]] = {"all": parts}
    majors = [p for p in parts if canonical[p] == "wt%"]
    traces = [p for p in parts if canonical[p] in TRACE_UNITS]
    if majors:
        groups["majors"] = majors
    if traces:
        groups["traces"] = traces
    by_unit: dict[str, list[str]] = {}
    for p in parts:
        by_unit.setdefault(units[p], []).append(p)
    if len(by_unit) > 1:
        for unit, members in by_unit.items():
            groups[f"unit:{unit}"] = members
    return groups


def _group_label(key: str, members: list[str]) -> str:
    n = counted(len(members), "part")
    if key == "all":
        return f"every part ({n})"
    if key == "majors":
        return f"all majors, wt% ({n})"
    if key == "traces":
        return f"all traces, ppm and finer ({n})"
    return f"all parts in {key.removeprefix('unit:')} ({n})"


class SubcompositionPicker(w.VBox):
    """Choose the active parts, define amalgamations and pick ternary parts.

    Parameters
    ----------
    model : CompositionModel
        The shared model; the picker writes ``active_parts`` and ``amalgamations``.
    ternaries : sequence of views
        Views with a ``parts`` trait of three part names (e.g. ``TernaryView``);
        the picker shows three drop-downs per view.

    Attributes
    ----------
    parts_select : ipywidgets.SelectMultiple
        The active parts (options: ``model.available_parts`` matching the filter).
    part_filter : ipywidgets.Text
        Shows only the parts whose name or unit contains this text (any case).
    bulk_group : ipywidgets.Dropdown
        A group of parts (every part, majors, traces, a unit, those matching
        the filter) for the buttons ``bulk_buttons`` (use only, add, remove).
    status : ipywidgets.Label
        What the last action did, or why it was refused.
    variation : pandas.DataFrame or None
        The variation matrix shown (complete rows of the active parts).
    total_variance : float or None
        The total variance shown.
    heatmap : VariationHeatmap
        The variation matrix as one picture (hover a cell, click to use the pair).
    picked_pair : tuple of str or None
        The pair of parts of the last heat-map cell clicked.
    pair_buttons : list of ipywidgets.Button
        "Show in ternary k": the picked pair and the part that adds most
        log-ratio variance to both.
    ternary_dropdowns : list of tuple of three ipywidgets.Dropdown
    messages : ipywidgets.Output
        Shows errors raised in callbacks (the same name in every view).
    """

    def __init__(self, model, ternaries: Sequence = (), **kwargs):
        self.model = model
        self.ternaries = list(ternaries)
        self._syncing = 0
        self._heat_key: tuple | None = None
        self.variation: pd.DataFrame | None = None
        self.total_variance: float | None = None
        self.picked_pair: tuple[str, str] | None = None
        self.messages = w.Output()
        capture = shows_errors(self.messages)
        self._groups = part_groups(model.composition)

        self.status = w.Label(value="")
        self.parts_select = w.SelectMultiple(
            options=list(model.available_parts),
            value=tuple(model.active_parts),
            rows=min(10, max(4, len(model.available_parts))),
            description="Active parts",
            style={"description_width": "initial"},
        )
        self.all_button = w.Button(description="All parts", tooltip="Make every part active")
        self._on_parts_widget = capture(self._parts_widget_changed)
        self.parts_select.observe(self._on_parts_widget, names=["value"])
        self.all_button.on_click(capture(lambda _b: self.set_active_parts(self.model.parts)))
        self.part_filter = w.Text(
            placeholder="name or unit, e.g. Zr or ppm",
            description="Filter",
            continuous_update=True,
        )
        self.part_filter.observe(capture(lambda _c: self._apply_filter()), names=["value"])
        self.bulk_group = w.Dropdown(
            options=self._bulk_options(), description="Group", layout=w.Layout(width="auto")
        )
        self.bulk_buttons = [
            w.Button(description=text, tooltip=tip, layout=w.Layout(width="auto"))
            for text, tip in (
                ("Use only these", "Make exactly the parts of the group active"),
                ("Add", "Add the parts of the group to the active parts"),
                ("Remove", "Remove the parts of the group from the active parts"),
            )
        ]
        for button, how in zip(self.bulk_buttons, BULK_ACTIONS, strict=True):
            button.on_click(capture(lambda _b, how=how: self.choose(self.bulk_group.value, how)))

        # amalgamations
        self.amalgamation_name = w.Text(placeholder="name of the new part", description="Name")
        self.amalgamation_members = w.SelectMultiple(
            options=list(model.parts),
            rows=min(8, max(3, len(model.parts))),
            description="Sum of",
        )
        self.use_amalgamation = w.Checkbox(value=True, description="use it in the active parts")
        self.add_button = w.Button(description="Add amalgamation")
        self.remove_select = w.Dropdown(options=list(model.amalgamations), description="Defined")
        self.remove_button = w.Button(description="Remove amalgamation")
        self.add_button.on_click(capture(self._add_clicked))
        self.remove_button.on_click(capture(self._remove_clicked))

        # ternaries
        self.ternary_dropdowns: list[tuple[w.Dropdown, w.Dropdown, w.Dropdown]] = []
        self._view_handlers = []
        rows = []
        for i, view in enumerate(self.ternaries):
            current = [str(p) for p in view.parts]
            options = self._ternary_options(current)
            # named by the corner each part takes (the order of core.ternary.VERTICES)
            dds = tuple(
                w.Dropdown(
                    options=options,
                    value=p,
                    description=corner,
                    style={"description_width": "initial"},
                    layout=w.Layout(width="auto", max_width="14em"),
                )
                for p, corner in zip(current, ("top", "left", "right"), strict=False)
            )
            if len(dds) != 3:
                raise ValueError(
                    f"ternary view {i + 1} has {len(dds)} parts {current}; a ternary shows 3"
                )
            handler = capture(lambda change, i=i: self._ternary_widget_changed(i))
            for dd in dds:
                dd.observe(handler, names=["value"])
            self.ternary_dropdowns.append(dds)
            view_handler = capture(lambda change, i=i: self._sync_ternary(i))
            view.observe(view_handler, names=["parts"])
            self._view_handlers.append(view_handler)
            label = w.Label(value=f"Ternary {i + 1}", layout=w.Layout(min_width="5.5em"))
            rows.append(w.HBox([label, *dds]))

        # variation heat map: one picture, whatever the number of parts
        self.heatmap = VariationHeatmap()
        self.heatmap.observe(capture(self._cell_picked), names=["picked"])
        self.pair_label = w.Label(value="")
        self.pair_buttons = [
            w.Button(
                description=f"Show in ternary {i + 1}",
                disabled=True,
                layout=w.Layout(width="auto"),
                tooltip="the picked pair and the part adding most log-ratio variance to both",
            )
            for i in range(len(self.ternaries))
        ]
        for i, button in enumerate(self.pair_buttons):
            button.on_click(capture(lambda _b, i=i: self.use_pair(i)))
        self.total_label = w.Label(value="")
        self.largest_label = w.Label(value="")
        self.rows_label = w.Label(value="")

        self._on_model_parts = capture(self._model_parts_changed)
        self._on_model_amalgamations = capture(self._model_amalgamations_changed)
        model.observe(self._on_model_parts, names=["active_parts"])
        model.observe(self._on_model_amalgamations, names=["amalgamations"])

        sections = [
            w.Label(value="Subcomposition"),
            self.part_filter,
            w.HBox([self.parts_select, self.all_button]),
            w.HBox([self.bulk_group]),
            w.HBox(self.bulk_buttons),
            w.Label(value="Amalgamations (new parts as sums of parts)"),
            w.HBox(
                [
                    w.VBox([self.amalgamation_name, self.use_amalgamation, self.add_button]),
                    self.amalgamation_members,
                ]
            ),
            w.HBox([self.remove_select, self.remove_button]),
        ]
        if rows:
            sections += [w.Label(value="Ternary parts"), *rows]
        sections += [
            w.Label(value="Variation matrix var(ln(row part / column part)) of the active parts"),
            self.heatmap,
            self.pair_label,
            w.HBox(self.pair_buttons),
            self.total_label,
            self.largest_label,
            self.rows_label,
            self.status,
            self.messages,
        ]
        super().__init__(children=sections, **kwargs)
        self._refresh_heat()

    # ------------------------------------------------------------ actions
    def set_active_parts(self, parts: Sequence[str]) -> bool:
        """Make ``parts`` the active parts; on an invalid choice show why and change nothing."""
        parts = [str(p) for p in parts]
        if parts == list(self.model.active_parts):
            self._sync_parts_select()  # drop a pending invalid choice shown in the widget
            return True
        try:
            self.model.active_parts = parts
        except (t.TraitError, ValueError) as err:
            self._say(
                f"Active parts not changed: {err}. The views keep "
                f"{', '.join(self.model.active_parts)}."
            )
            return False
        self._say(f"Active parts: {', '.join(self.model.active_parts)}.")
        return True

    def add_amalgamation(self, name: str, members: Sequence[str], use: bool = True) -> bool:
        """Define the part ``name`` as the sum of ``members``.

        With ``use=True`` the new part replaces its members among the active
        parts (or joins them when none is active). Invalid definitions show a
        message and leave the model unchanged.
        """
        model = self.model
        name = str(name).strip() if name is not None else ""
        members = [str(m) for m in members]
        problem = None
        if not name:
            problem = "an amalgamation needs a name"
        elif name in model.amalgamations:
            problem = f"an amalgamation named {name!r} exists already; choose another name"
        elif name in model.parts:
            problem = f"{name!r} already names a part; choose another name"
        elif len(members) < 2:
            problem = f"an amalgamation sums at least 2 parts; {name!r} has {len(members)}"
        else:
            unknown = [m for m in members if m not in model.parts]
            if unknown:
                problem = (
                    f"unknown member part(s) {unknown} of {name!r}; members are parts of the "
                    "composition"
                )
        if problem is None:
            groups = dict(model.amalgamations)
            groups[name] = members
            try:
                model.amalgamations = groups
            except (t.TraitError, ValueError) as err:
                problem = str(err)
        if problem is not None:
            self._say(f"Amalgamation not added: {problem}.")
            return False
        text = f"Added {name} = {' + '.join(members)}."
        if use:
            active = list(model.active_parts)
            first = [i for i, p in enumerate(active) if p in members]
            rest = [p for p in active if p not in members]
            new = rest[: first[0]] + [name] + rest[first[0] :] if first else rest + [name]
            if len(new) < 2:
                text += " Not made active: at least 2 active parts are needed."
            else:
                try:
                    model.active_parts = new
                except (t.TraitError, ValueError) as err:
                    text += f" Not made active: {err}."
        self._say(text)
        return True

    def remove_amalgamation(self, name: str) -> bool:
        """Remove the amalgamation ``name``; if it is active its members take its place."""
        model = self.model
        if name not in model.amalgamations:
            known = ", ".join(model.amalgamations) or "none"
            self._say(f"Amalgamation not removed: {name!r} is not defined (defined: {known}).")
            return False
        members = list(model.amalgamations[name])
        active = list(model.active_parts)
        try:
            if name in active:
                k = active.index(name)
                model.active_parts = active[:k] + members + active[k + 1 :]
            groups = {g: m for g, m in model.amalgamations.items() if g != name}
            model.amalgamations = groups
        except (t.TraitError, ValueError) as err:
            self._say(f"Amalgamation not removed: {err}.")
            return False
        self._say(f"Removed {name}.")
        return True

    def set_ternary_parts(self, i: int, parts: Sequence[str]) -> bool:
        """Show ``parts`` (three names) in ternary view ``i``; refuse invalid choices."""
        view = self.ternaries[i]
        parts = [str(p) for p in parts]
        problem = None
        if len(parts) != 3:
            problem = f"a ternary shows 3 parts, got {len(parts)}"
        elif len(set(parts)) != 3:
            twice = sorted({p for p in parts if parts.count(p) > 1})
            problem = f"{', '.join(twice)} is chosen twice; choose 3 different parts"
        else:
            unknown = [p for p in parts if p not in self.model.available_parts]
            members = [m for p in parts for m in self._members(p)]
            shared = sorted({m for m in members if members.count(m) > 1})
            if unknown:
                problem = f"unknown part(s) {unknown}"
            elif shared:
                problem = (
                    f"{', '.join(shared)} would be counted twice (an amalgamation and its member)"
                )
        if problem is None:
            if parts == [str(p) for p in view.parts]:
                return True
            try:
                view.parts = parts
            except (t.TraitError, ValueError) as err:
                problem = str(err)
        if problem is not None:
            self._say(f"Ternary {i + 1} not changed: {problem}.")
            return False
        self._say(f"Ternary {i + 1}: {', '.join(parts)}.")
        return True

    def close(self) -> None:
        """Stop following the model and the views, then close the widgets."""
        try:
            self.model.unobserve(self._on_model_parts, names=["active_parts"])
            self.model.unobserve(self._on_model_amalgamations, names=["amalgamations"])
        except ValueError:
            pass
        for view, handler in zip(self.ternaries, self._view_handlers, strict=True):
            try:
                view.unobserve(handler, names=["parts"])
            except ValueError:
                pass
        self.heatmap.close()
        super().close()

    # ------------------------------------------------------- widget events
    def _parts_widget_changed(self, change) -> None:
        if self._syncing:
            return
        chosen = [str(p) for p in change["new"]]
        active = list(self.model.active_parts)
        shown = list(self.parts_select.options)
        if len(shown) < len(self.model.available_parts):
            # a filter hides parts: the choice is about the parts shown; the others keep
            # their state (and the active parts keep their order)
            hidden = set(self.model.available_parts) - set(shown)
            picked = set(chosen)
            kept = [p for p in active if p in hidden or p in picked]
            chosen = kept + [p for p in shown if p in picked and p not in kept]
        if set(chosen) == set(active):
            return
        self.set_active_parts(chosen)

    # ------------------------------------------------------------ filter, bulk
    def matching_parts(self, text: str | None = None) -> list[str]:
        """Available parts whose name or reported unit contains ``text`` (any case)."""
        text = (self.part_filter.value if text is None else text).strip().lower()
        available = list(self.model.available_parts)
        if not text:
            return available
        units = self.model.composition.units
        return [
            p
            for p in available
            if text in str(p).lower() or text in str(units.get(p, "sum of parts")).lower()
        ]

    def parts_in(self, group: str) -> list[str]:
        """The parts of a bulk group: a key of :func:`part_groups`, or ``"filter"``."""
        if group == "filter":
            return self.matching_parts()
        if group not in self._groups:
            raise ValueError(
                f"unknown group of parts {group!r}; groups: {', '.join(self._groups)}, filter"
            )
        return list(self._groups[group])

    def choose(self, group: str, how: str = "replace") -> bool:
        """Make a group of parts active, add it to the active parts, or remove it.

        Parameters
        ----------
        group : str
            ``"all"``, ``"majors"``, ``"traces"``, ``"unit:<unit>"`` (see
            :func:`part_groups`) or ``"filter"`` (the parts matching the filter box).
        how : {"replace", "add", "remove"}

        Returns
        -------
        bool
            False (with a message, nothing changed) for an invalid result, e.g.
            fewer than 2 parts left.
        """
        if how not in BULK_ACTIONS:
            raise ValueError(f"how must be one of {', '.join(BULK_ACTIONS)}, got {how!r}")
        members = self.parts_in(group)
        if not members:
            self._say(f"Active parts not changed: no part in the group {group!r}.")
            return False
        active = list(self.model.active_parts)
        if how == "replace":
            new = members
        elif how == "add":
            taken = {m for p in active for m in self.model.members(p)}
            new = active + [p for p in members if p not in active and p not in taken]
        else:
            gone = set(members)
            new = [p for p in active if p not in gone]
        return self.set_active_parts(new)

    def _bulk_options(self) -> list[tuple[str, str]]:
        options = [(_group_label(k, v), k) for k, v in self._groups.items()]
        return options + [("the parts matching the filter", "filter")]

    def _apply_filter(self) -> None:
        shown = self.matching_parts()
        self._syncing += 1
        try:
            with self.parts_select.hold_sync():
                if list(self.parts_select.options) != shown:
                    self.parts_select.options = shown
                active = set(self.model.active_parts)
                self.parts_select.value = tuple(p for p in shown if p in active)
        finally:
            self._syncing -= 1
        n = len(self.model.available_parts)
        if len(shown) < n:
            self._say(f"Filter: {len(shown)} of {n} parts shown.")

    def _add_clicked(self, _button) -> None:
        if self.add_amalgamation(
            self.amalgamation_name.value,
            list(self.amalgamation_members.value),
            use=self.use_amalgamation.value,
        ):
            self.amalgamation_name.value = ""
            self.amalgamation_members.value = ()

    def _remove_clicked(self, _button) -> None:
        if self.remove_select.value is None:
            self._say("Amalgamation not removed: none is defined.")
            return
        self.remove_amalgamation(self.remove_select.value)

    def _ternary_widget_changed(self, i: int) -> None:
        if self._syncing:
            return
        self.set_ternary_parts(i, [dd.value for dd in self.ternary_dropdowns[i]])

    # -------------------------------------------------------- model events
    def _model_parts_changed(self, change) -> None:
        self._sync_parts_select()
        self._refresh_heat()

    def _model_amalgamations_changed(self, change) -> None:
        self._syncing += 1
        try:
            names = list(self.model.amalgamations)
            if list(self.remove_select.options) != names:
                self.remove_select.options = names
        finally:
            self._syncing -= 1
        self._apply_filter()
        for i in range(len(self.ternaries)):
            self._sync_ternary(i)
        self._refresh_heat()

    def _sync_parts_select(self) -> None:
        shown = set(self.parts_select.options)
        active = tuple(p for p in self.model.active_parts if p in shown)
        if set(self.parts_select.value) == set(active):
            return
        self._syncing += 1
        try:
            self.parts_select.value = active
        finally:
            self._syncing -= 1

    def _ternary_options(self, current: Sequence[str]) -> list[str]:
        available = list(self.model.available_parts)
        return available + [p for p in current if p not in available]

    def _sync_ternary(self, i: int) -> None:
        current = [str(p) for p in self.ternaries[i].parts]
        if len(current) != 3:
            self._say(f"Ternary {i + 1} shows {len(current)} parts {current}; expected 3.")
            return
        options = self._ternary_options(current)
        self._syncing += 1
        try:
            for dd, p in zip(self.ternary_dropdowns[i], current, strict=True):
                if list(dd.options) != options:
                    dd.options = options
                if dd.value != p:
                    dd.value = p
        finally:
            self._syncing -= 1

    # ------------------------------------------------------------- heat map
    def _members(self, part: str) -> list[str]:
        if part in self.model.parts:
            return [part]
        return list(self.model.amalgamations.get(part, [part]))

    def _refresh_heat(self) -> None:
        parts = list(self.model.active_parts)
        key = tuple((p, tuple(self._members(p))) for p in parts)
        if key == self._heat_key:
            return
        self._heat_key = key
        ok = self.model.complete_rows(parts)
        n_ok, n = int(ok.sum()), self.model.n_rows
        left_out = (
            f"; {counted(n - n_ok, 'row')} with a missing or zero value in these parts left out"
            if n_ok < n
            else ""
        )
        self.rows_label.value = f"Computed on {n_ok:,} of {n:,} rows{left_out}."
        self._set_pair(None)
        try:
            T = self.model.variation_matrix(parts)
            total = self.model.total_variance(parts)
        except (core.CompositionError, ValueError) as err:
            self.variation, self.total_variance = None, None
            self.heatmap.clear()
            self.total_label.value = f"No variation matrix: {err}"
            self.largest_label.value = ""
            return
        self.variation, self.total_variance = T, total
        values = T.to_numpy(dtype=float)
        self.heatmap.set_matrix(parts, values)
        self.total_label.value = f"Total variance: {total:.3f}"
        D = len(parts)
        iu = np.triu_indices(D, 1)
        order = np.argsort(-values[iu], kind="stable")[:N_LARGEST]
        largest = [f"ln({parts[iu[0][k]]}/{parts[iu[1][k]]}) {values[iu][k]:.2f}" for k in order]
        self.largest_label.value = "Largest log-ratio variances: " + ", ".join(largest)

    def _cell_picked(self, change) -> None:
        picked = list(change["new"])
        if len(picked) != 2 or self.variation is None:
            return
        names = list(self.variation.columns)
        i, j = picked
        if i == j:
            return
        self._set_pair((names[i], names[j]))

    def _set_pair(self, pair: tuple[str, str] | None) -> None:
        self.picked_pair = pair
        for button in self.pair_buttons:
            button.disabled = pair is None
        if pair is None:
            text = "Click a cell of the variation matrix to use its pair of parts."
        else:
            a, b = pair
            value = float(self.variation.loc[a, b])
            text = f"Picked ln({a}/{b}): variance {value:.3f}."
        if self.pair_label.value != text:
            self.pair_label.value = text

    def pick_pair(self, a: str, b: str) -> None:
        """Pick the pair (a, b) as a click on its heat-map cell does."""
        names = list(self.variation.columns) if self.variation is not None else []
        missing = [p for p in (a, b) if p not in names]
        if missing or a == b:
            raise ValueError(
                f"pick_pair needs two different active parts of the heat map ({names}), "
                f"got {a!r} and {b!r}"
            )
        self.heatmap.picked = [names.index(a), names.index(b)]

    def use_pair(self, i: int) -> bool:
        """Show the picked pair in ternary ``i``, with the part adding most variance to both."""
        if self.picked_pair is None or self.variation is None:
            self._say("No pair picked: click a cell of the variation matrix first.")
            return False
        a, b = self.picked_pair
        T = self.variation
        used = set(self._members(a)) | set(self._members(b))
        candidates = [p for p in T.columns if p not in (a, b) and not used & set(self._members(p))]
        if not candidates:
            self._say(f"Ternary {i + 1} not changed: no third part to show with {a} and {b}.")
            return False
        score = T.loc[a, candidates].to_numpy() + T.loc[b, candidates].to_numpy()
        third = candidates[int(np.argmax(score))]
        return self.set_ternary_parts(i, [a, b, third])

    def _say(self, text: str) -> None:
        self.status.value = text
