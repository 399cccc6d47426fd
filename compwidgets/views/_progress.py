"""A progress line: the stage of a long step and its progress, with ipywidgets' own bar.

Steps that can take more than about a second on a large table (building the
workbench, a change of the active parts, the outlier screening) show their
stage here. Widget updates made while the kernel computes reach the page at
once, so the line moves while the step runs.
"""

from __future__ import annotations

import ipywidgets as w

__all__ = ["ProgressLine"]


class ProgressLine(w.HBox):
    """An ``IntProgress`` bar and a stage text, hidden while nothing runs.

    Attributes
    ----------
    bar : ipywidgets.IntProgress
    stage : ipywidgets.Label
    """

    def __init__(self, **kwargs):
        self.bar = w.IntProgress(value=0, min=0, max=1, bar_style="info")
        self.stage = w.Label(value="")
        super().__init__(children=[self.bar, self.stage], **kwargs)
        self.layout.display = "none"
        self.add_class("cw-progress")

    @property
    def active(self) -> bool:
        """True while the line is shown."""
        return self.layout.display != "none"

    def show(self, done: int, total: int, text: str) -> None:
        """Show stage ``text``: ``done`` of ``total`` steps are over."""
        total = max(1, int(total))
        done = min(max(int(done), 0), total)
        with self.bar.hold_sync():  # the bar clamps its value to [min, max] at each step
            if total >= self.bar.max:
                self.bar.max = total
                self.bar.value = done
            else:
                self.bar.value = done
                self.bar.max = total
        if self.stage.value != text:
            self.stage.value = text
        if self.layout.display is not None:
            self.layout.display = None

    def hide(self) -> None:
        """Nothing runs any more."""
        if self.layout.display != "none":
            self.layout.display = "none"

    def close(self) -> None:
        self.bar.close()
        self.stage.close()
        super().close()
