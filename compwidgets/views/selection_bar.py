"""The selection bar: how many rows are selected, what to do with them, exports.

:class:`SelectionBar` shows the size of the model's selection, clears or
inverts it, turns it into a group column (a new colour in every view) and
writes exports to files the user names: the ilr coordinates (CSV), the SBP
(JSON), the selected rows (CSV), and each view as PNG or SVG. Each export
reports what it wrote (path and rows) or why it did not.

File contents come from :mod:`compwidgets.export` and the views' own
``save_png`` / ``save_svg``; this module only resolves the file name.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path

import ipywidgets as w
import traitlets as t

from ._errors import shows_errors
from ._first import observe_first

__all__ = ["SelectionBar"]


def _fit() -> w.Layout:
    """A button as wide as its label (the default width cuts long labels)."""
    return w.Layout(width="auto")


def _view_name(i: int, view) -> str:
    title = getattr(view, "title", "") or ""
    kind = type(view).__name__
    return f"{i + 1}: {kind}" + (f" ({title})" if title and isinstance(title, str) else "")


class ExportRefused(ValueError):
    """An export that was not attempted (no file name, file exists, nothing to write)."""


class SelectionBar(w.VBox):
    """Selection count, clear / invert, group from the selection, and exports.

    Parameters
    ----------
    model : CompositionModel
    views : sequence of views
        Views offered for PNG / SVG export (anything with ``save_png(path)``
        and ``save_svg(path)``).

    Attributes
    ----------
    count_label : ipywidgets.Label
        E.g. "123 of 2,000 samples selected".
    count_value : ipywidgets.Label
        Just the count, plain digits ("123").
    file_name : ipywidgets.Text
        File name for the exports (the suffix is added when missing).
    overwrite : ipywidgets.Checkbox
        Allow replacing an existing file.
    message : ipywidgets.Label
        What the last action did (path and rows), or why it did not.
    """

    def __init__(self, model, views: Sequence = (), **kwargs):
        self.model = model
        self.views = list(views)
        self.output = w.Output()
        capture = shows_errors(self.output)

        self.count_label = w.Label(value="")
        self.count_value = w.Label(value="", layout=w.Layout(display="none"))
        self.clear_button = w.Button(description="Clear selection", layout=_fit())
        self.invert_button = w.Button(description="Invert selection", layout=_fit())
        self.clear_button.on_click(capture(lambda _b: self.model.clear_selection()))
        self.invert_button.on_click(capture(lambda _b: self.model.invert_selection()))

        self.group_name = w.Text(placeholder="name of the new group column", description="Group")
        self.group_button = w.Button(description="Make a group from the selection", layout=_fit())
        self.group_button.on_click(capture(lambda _b: self.make_group(self.group_name.value)))

        self.file_name = w.Text(placeholder="file name, e.g. survey_ilr.csv", description="File")
        self.overwrite = w.Checkbox(value=False, description="overwrite an existing file")
        self.ilr_button = w.Button(description="ilr coordinates (CSV)", layout=_fit())
        self.sbp_button = w.Button(description="SBP (JSON)", layout=_fit())
        self.selected_button = w.Button(description="Selected rows (CSV)", layout=_fit())
        self.ilr_button.on_click(capture(lambda _b: self.export_ilr()))
        self.sbp_button.on_click(capture(lambda _b: self.export_sbp()))
        self.selected_button.on_click(capture(lambda _b: self.export_selected()))

        self.view_select = w.Dropdown(
            options=[(_view_name(i, v), i) for i, v in enumerate(self.views)],
            description="View",
        )
        self.png_button = w.Button(description="View as PNG", layout=_fit())
        self.svg_button = w.Button(description="View as SVG", layout=_fit())
        self.png_button.on_click(
            capture(lambda _b: self.export_view(self.view_select.value, "png"))
        )
        self.svg_button.on_click(
            capture(lambda _b: self.export_view(self.view_select.value, "svg"))
        )

        self.message = w.Label(value="")
        rows = [
            w.HBox([self.count_label, self.count_value, self.clear_button, self.invert_button]),
            w.HBox([self.group_name, self.group_button]),
            w.HBox([self.file_name, self.overwrite]),
            w.HBox([self.ilr_button, self.sbp_button, self.selected_button]),
        ]
        if self.views:
            rows.append(w.HBox([self.view_select, self.png_button, self.svg_button]))
        rows += [self.message, self.output]
        super().__init__(children=rows, **kwargs)

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
        parts = ", ".join(f"{int(counts[c]):,} {c}" for c in column.cat.categories)
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
            verb = "is" if n - ok == 1 else "are"
            gaps = (
                f"; {n - ok:,} of the rows {verb} incomplete (their balances are empty)"
                if ok < n
                else ""
            )
            return f"{n:,} rows x {len(self.model.balance_names)} balances{gaps}"

        return self._export("ilr coordinates", ".csv", write)

    def export_sbp(self) -> Path | None:
        """Write the SBP (JSON) to the named file."""

        def write(path: Path) -> str:
            self._require_sbp()
            from ..export import save_sbp

            save_sbp(self.model, path)
            k, D = self.model.sbp.shape
            return f"{k} balances over {D} parts"

        return self._export("SBP", ".json", write)

    def export_selected(self) -> Path | None:
        """Write the selected rows (CSV) to the named file."""

        def write(path: Path) -> str:
            if self.count == 0:
                raise ExportRefused("nothing is selected; select rows first")
            from ..export import save_selected_csv

            n = save_selected_csv(self.model, path)
            return f"{int(n):,} rows"

        return self._export("selected rows", ".csv", write)

    def export_view(self, k: int | None, kind: str) -> Path | None:
        """Save view ``k`` as ``kind`` ("png" or "svg") to the named file."""
        if kind not in ("png", "svg"):
            raise ValueError(f"export_view: kind must be 'png' or 'svg', got {kind!r}")
        if k is None or not 0 <= int(k) < len(self.views):
            self._say(f"Not written: no view {k!r} to save (views: {len(self.views)}).")
            return None
        view = self.views[int(k)]
        name = _view_name(int(k), view)

        def write(path: Path) -> str:
            save = getattr(view, f"save_{kind}", None)
            if save is None:
                raise ExportRefused(f"view {name} has no save_{kind}")
            # the name as typed (suffix added): a browser download uses it as the file name
            save(str(self._typed_name(f".{kind}")))
            return kind.upper()

        return self._export(f"view {name}", f".{kind}", write, browser=True)

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
        self.count_label.value = f"{n:,} of {total:,} samples selected"  # the one on screen
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

    def _export(
        self, what: str, suffix: str, write: Callable[[Path], str], browser: bool = False
    ) -> Path | None:
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
            if browser:
                self._say(
                    f"Asked the browser to save {what} as a download named {path.name!r} "
                    "(the view must be on screen; the kernel writes no file)."
                )
            else:
                self._say(f"{what.capitalize()}: no file was written at {str(path)!r}.")
            return path
        self._say(f"Wrote {what} to {str(path)!r} ({detail}).")
        return path

    def _say(self, text: str) -> None:
        self.message.value = text
