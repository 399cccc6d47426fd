"""The subcomposition picker: active parts, amalgamations and ternary parts.

:class:`SubcompositionPicker` writes the model's ``active_parts`` and
``amalgamations`` (every view follows through the model) and the ``parts`` of
the ternary views it is given. For the active parts it shows the variation
matrix ``T_ij = var ln(x_i / x_j)`` as a small heat table and the total
variance, so the user sees which log-ratios carry the variability. Every number
comes from :mod:`compwidgets.core` (through the model's cache).

Everything from the table (part names, values) reaches the browser as text
only: ``Label`` values, ``Dropdown`` / ``SelectMultiple`` options.
"""

from __future__ import annotations

from collections.abc import Sequence

import ipywidgets as w
import numpy as np
import pandas as pd
import traitlets as t

from .. import core

__all__ = ["SubcompositionPicker"]

#: Ends of the colour scale of the heat table (low -> high variation).
LOW_COLOUR = (250, 247, 240)
HIGH_COLOUR = (120, 52, 18)
#: How many of the largest log-ratio variances are named under the table.
N_LARGEST = 3


def _colour(share: float) -> tuple[str, str]:
    """Background and text colour for a value at ``share`` (0..1) of the scale."""
    share = float(np.clip(share, 0.0, 1.0)) if np.isfinite(share) else 0.0
    rgb = [round(lo + (hi - lo) * share) for lo, hi in zip(LOW_COLOUR, HIGH_COLOUR, strict=True)]
    return "#{:02x}{:02x}{:02x}".format(*rgb), ("white" if share > 0.55 else "black")


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
        The active parts (options: ``model.available_parts``).
    message : ipywidgets.Label
        What the last action did, or why it was refused.
    variation : pandas.DataFrame or None
        The variation matrix shown (complete rows of the active parts).
    total_variance : float or None
        The total variance shown.
    heat_labels : list of list of ipywidgets.Label
        The heat table, header row and column included.
    ternary_dropdowns : list of tuple of three ipywidgets.Dropdown
    output : ipywidgets.Output
        Shows errors raised in callbacks.
    """

    def __init__(self, model, ternaries: Sequence = (), **kwargs):
        self.model = model
        self.ternaries = list(ternaries)
        self._syncing = 0
        self._heat_key: tuple | None = None
        self.variation: pd.DataFrame | None = None
        self.total_variance: float | None = None
        self.heat_labels: list[list[w.Label]] = []
        self.output = w.Output()
        self._cell_layout = w.Layout(padding="1px 6px", margin="0", justify_content="flex-end")
        self._head_layout = w.Layout(padding="1px 6px", margin="0")
        capture = self.output.capture()

        self.message = w.Label(value="")
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
            dds = tuple(
                w.Dropdown(options=options, value=p, layout=w.Layout(width="10em"))
                for p in current
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

        # variation heat table
        self.heat_table = w.GridBox(layout=w.Layout(grid_gap="1px"))
        self.total_label = w.Label(value="")
        self.largest_label = w.Label(value="")
        self.rows_label = w.Label(value="")

        self._on_model_parts = capture(self._model_parts_changed)
        self._on_model_amalgamations = capture(self._model_amalgamations_changed)
        model.observe(self._on_model_parts, names=["active_parts"])
        model.observe(self._on_model_amalgamations, names=["amalgamations"])

        sections = [
            w.Label(value="Subcomposition"),
            w.HBox([self.parts_select, self.all_button]),
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
            self.heat_table,
            self.total_label,
            self.largest_label,
            self.rows_label,
            self.message,
            self.output,
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
        self._close_heat()
        super().close()

    # ------------------------------------------------------- widget events
    def _parts_widget_changed(self, change) -> None:
        if self._syncing:
            return
        chosen = [str(p) for p in change["new"]]
        if set(chosen) == set(self.model.active_parts):
            return
        self.set_active_parts(chosen)

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
            available = list(self.model.available_parts)
            if list(self.parts_select.options) != available:
                self.parts_select.options = available
            names = list(self.model.amalgamations)
            if list(self.remove_select.options) != names:
                self.remove_select.options = names
        finally:
            self._syncing -= 1
        self._sync_parts_select()
        for i in range(len(self.ternaries)):
            self._sync_ternary(i)
        self._refresh_heat()

    def _sync_parts_select(self) -> None:
        active = tuple(self.model.active_parts)
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

    # ----------------------------------------------------------- heat table
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
            f"; {n - n_ok:,} row(s) with a missing or zero value in these parts are left out"
            if n_ok < n
            else ""
        )
        self.rows_label.value = f"Computed on {n_ok:,} of {n:,} rows{left_out}."
        try:
            T = self.model.variation_matrix(parts)
            frame = pd.DataFrame(self.model.part_values(parts)[ok], columns=parts)
            total = core.total_variance(frame)
        except (core.CompositionError, ValueError) as err:
            self.variation, self.total_variance = None, None
            self._close_heat()
            self.heat_table.children = ()
            self.total_label.value = f"No variation matrix: {err}"
            self.largest_label.value = ""
            return
        self.variation, self.total_variance = T, total
        self._draw_heat(parts, T.to_numpy(dtype=float))
        self.total_label.value = f"Total variance: {total:.3f}"
        D = len(parts)
        iu = np.triu_indices(D, 1)
        order = np.argsort(-T.to_numpy()[iu], kind="stable")[:N_LARGEST]
        largest = [
            f"ln({parts[iu[0][k]]}/{parts[iu[1][k]]}) {T.to_numpy()[iu][k]:.2f}" for k in order
        ]
        self.largest_label.value = "Largest log-ratio variances: " + ", ".join(largest)

    def _close_heat(self) -> None:
        for row in self.heat_labels:
            for label in row:
                label.close()
        self.heat_labels = []

    def _draw_heat(self, parts: list[str], T: np.ndarray) -> None:
        D = len(parts)
        off = T[~np.eye(D, dtype=bool)]
        top = float(off.max()) if off.size else 0.0
        if len(self.heat_labels) != D + 1:
            self._close_heat()
            self.heat_labels = [
                [
                    w.Label(layout=self._head_layout if 0 in (r, c) else self._cell_layout)
                    for c in range(D + 1)
                ]
                for r in range(D + 1)
            ]
            self.heat_table.children = tuple(lab for row in self.heat_labels for lab in row)
            self.heat_table.layout.grid_template_columns = f"repeat({D + 1}, max-content)"
        self.heat_labels[0][0].value = ""
        for j, p in enumerate(parts):
            self.heat_labels[0][j + 1].value = p
            self.heat_labels[j + 1][0].value = p
        for i in range(D):
            for j in range(D):
                label = self.heat_labels[i + 1][j + 1]
                background, text = _colour(T[i, j] / top if top > 0 else 0.0)
                label.value = f"{T[i, j]:.2f}"
                label.style.background = background
                label.style.text_color = text

    def _say(self, text: str) -> None:
        self.message.value = text
