"""The selection bar: how many rows are selected, what to do with them, exports.

:class:`SelectionBar` shows the size of the model's selection, clears or
inverts it, turns it into a group column (a new colour in every view) and
writes exports to files the user names: the ilr coordinates (CSV), the SBP
(JSON) and the selected rows (CSV). Each export reports what it wrote (path,
rows, balances) or why it did not. Figures are saved by each view's own "Save
figure" control, not here.

File contents come from :mod:`compwidgets.export`; this module only resolves
the file name.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import ipywidgets as w
import traitlets as t

from ._errors import shows_errors
from ._first import observe_first
from ._words import counted

__all__ = ["SelectionBar"]


def _fit() -> w.Layout:
    """A button as wide as its label (the default width cuts long labels)."""
    return w.Layout(width="auto")


class ExportRefused(ValueError):
    """An export that was not attempted (no file name, file exists, nothing to write)."""


class SelectionBar(w.VBox):
    """Selection count, clear / invert, group from the selection, and exports.

    The controls stand in one line that wraps on a narrow screen; under it the
    ``status`` line and the ``messages`` area.

    Parameters
    ----------
    model : CompositionModel

    Attributes
    ----------
    count_label : ipywidgets.Label
        E.g. "123 of 2,000 rows selected".
    count_value : ipywidgets.Label
        Just the count, plain digits ("123").
    file_name : ipywidgets.Text
        File name for the exports (the suffix is added when missing).
    overwrite : ipywidgets.Checkbox
        Allow replacing an existing file.
    status : ipywidgets.Label
        What the last action did (path and rows), or why it did not.
    messages : ipywidgets.Output
        Shows errors raised in callbacks (the same name in every view).
    """

    def __init__(self, model, **kwargs):
        self.model = model
        self.messages = w.Output()
        capture = shows_errors(self.messages)

        self.count_label = w.Label(value="")
        self.count_value = w.Label(value="", layout=w.Layout(display="none"))
        self.clear_button = w.Button(description="Clear selection", layout=_fit())
        self.invert_button = w.Button(description="Invert selection", layout=_fit())
        self.clear_button.on_click(capture(lambda _b: self.model.clear_selection()))
        self.invert_button.on_click(capture(lambda _b: self.model.invert_selection()))

        self.group_name = w.Text(
            placeholder="new column name",
            description="Group",
            style={"description_width": "initial"},
            layout=w.Layout(width="17em"),
        )
        self.group_button = w.Button(description="Make a group from the selection", layout=_fit())
        self.group_button.on_click(capture(lambda _b: self.make_group(self.group_name.value)))

        self.file_name = w.Text(
            placeholder="e.g. survey_ilr.csv",
            description="Export to file",
            style={"description_width": "initial"},
            layout=w.Layout(width="19em"),
        )
        self.overwrite = w.Checkbox(
            value=False,
            description="overwrite an existing file",
            indent=False,
            layout=w.Layout(width="auto"),
        )
        self.ilr_button = w.Button(description="ilr coordinates (CSV)", layout=_fit())
        self.sbp_button = w.Button(description="SBP (JSON)", layout=_fit())
        self.selected_button = w.Button(description="Selected rows (CSV)", layout=_fit())
        self.ilr_button.on_click(capture(lambda _b: self.export_ilr()))
        self.sbp_button.on_click(capture(lambda _b: self.export_sbp()))
        self.selected_button.on_click(capture(lambda _b: self.export_selected()))

        self.status = w.Label(value="")
        line = w.HBox(
            [
                w.HBox(
                    [self.count_label, self.count_value, self.clear_button, self.invert_button]
                ),
                w.HBox([self.group_name, self.group_button]),
                w.HBox(
                    [
                        self.file_name,
                        self.ilr_button,
                        self.sbp_button,
                        self.selected_button,
                        self.overwrite,
                    ]
                ),
            ]
        )
        line.add_class("cw-bar")
        super().__init__(children=[line, self.status, self.messages], **kwargs)

        self._on_selection = capture(self._selection_changed)
        # the count is sent before the views restyle their points (see _first)
        observe_first(model, self._on_selection, "selection")
        self._show_count()

    # ------------------------------------------------------------ public
    @property
    def count(self) -> int:
        """Number of selected rows."""
        return int(self.model.selection.size)

    def make_group(self, name: str) -> bool:
        """Turn the selection into the group column ``name`` (used for colours)."""
        name = (name or "").strip()
        if self.count == 0:
            self._say("No group made: nothing is selected; select rows first.")
            return False
        try:
            column = self.model.selection_to_group(name)
        except (t.TraitError, ValueError) as err:
            self._say(f"No group made: {err}.")
            return False
        counts = column.value_counts()
        parts = ", ".join(f"{counted(counts[c], 'row')} {c}" for c in column.cat.categories)
        self._say(f"Made the group column {name!r} ({parts}); the views now colour by it.")
        self.group_name.value = ""
        return True

    def export_ilr(self) -> Path | None:
        """Write the balances (ilr coordinates of the SBP) of every row (CSV) to the named file."""

        def write(path: Path) -> str:
            self._require_sbp()
            from ..export import save_ilr_csv

            save_ilr_csv(self.model, path)
            n, ok = self.model.n_rows, int(self.model.complete_rows().sum())
            gaps = (
                f"; {counted(n - ok, 'row')} of them incomplete (their balances are empty)"
                if ok < n
                else ""
            )
            return (
                f"{counted(n, 'row')} x {counted(len(self.model.balance_names), 'balance')}{gaps}"
            )

        return self._export("ilr coordinates", ".csv", write)

    def export_sbp(self) -> Path | None:
        """Write the SBP (JSON) to the named file."""

        def write(path: Path) -> str:
            self._require_sbp()
            from ..export import save_sbp

            save_sbp(self.model, path)
            k, D = self.model.sbp.shape
            return f"{counted(k, 'balance')} over {counted(D, 'part')}"

        return self._export("SBP", ".json", write)

    def export_selected(self) -> Path | None:
        """Write the selected rows (CSV) to the named file."""

        def write(path: Path) -> str:
            if self.count == 0:
                raise ExportRefused("nothing is selected; select rows first")
            from ..export import save_selected_csv

            n = save_selected_csv(self.model, path)
            return counted(int(n), "row")

        return self._export("selected rows", ".csv", write)

    def close(self) -> None:
        """Stop following the model, then close the widgets."""
        try:
            self.model.unobserve(self._on_selection, names=["selection"])
        except ValueError:
            pass
        super().close()

    # ---------------------------------------------------------- internals
    def _selection_changed(self, change) -> None:
        self._show_count()

    def _show_count(self) -> None:
        n, total = self.count, self.model.n_rows
        self.count_label.value = f"{n:,} of {counted(total, 'row')} selected"  # the one on screen
        self.count_value.value = str(n)

    def _typed_name(self, suffix: str) -> Path:
        name = (self.file_name.value or "").strip()
        if not name:
            raise ExportRefused("type a file name first")
        path = Path(name).expanduser()
        if not path.suffix:
            path = path.with_suffix(suffix)
        elif path.suffix.lower() != suffix:
            raise ExportRefused(f"{path.name!r} does not end in {suffix}; use a {suffix} name")
        return path

    def _target(self, suffix: str) -> Path:
        path = self._typed_name(suffix).resolve()
        if not path.parent.is_dir():
            raise ExportRefused(f"the folder {str(path.parent)!r} does not exist")
        if path.exists() and not self.overwrite.value:
            raise ExportRefused(
                f"{str(path)!r} exists already; tick 'overwrite an existing file' or choose "
                "another name"
            )
        return path

    def _require_sbp(self) -> None:
        if self.model.sbp is None:
            raise ExportRefused("no SBP yet: build one in the balance builder")

    def _export(self, what: str, suffix: str, write: Callable[[Path], str]) -> Path | None:
        try:
            path = self._target(suffix)
            detail = write(path)
        except ImportError as err:
            self._say(f"{what.capitalize()} not written: exports are not available ({err}).")
            return None
        except (ExportRefused, t.TraitError, ValueError, OSError) as err:
            self._say(f"{what.capitalize()} not written: {err}.")
            return None
        if not path.exists():
            self._say(f"{what.capitalize()}: no file was written at {str(path)!r}.")
            return path
        self._say(f"Wrote {what} to {str(path)!r} ({detail}).")
        return path

    def _say(self, text: str) -> None:
        self.status.value = text
