"""Hover tooltips of a scatter-like view: a few text lines about the point under the mouse.

:class:`HoverTips` is a part of :class:`~compwidgets.views._scatter.ScatterView`
(its methods run on the view). The tooltip is one box of ``tooltip_max_lines``
labels made with the view; hovering a point rewrites their text (text only: table
text never reaches the page as markup). A subclass says what the lines are in
``_hover_lines(row)``, starting from ``_hover_heading(row)`` (sample id, group).
"""

from __future__ import annotations

import ipywidgets as widgets

__all__ = ["HoverTips"]


class HoverTips:
    """Tooltip of a :class:`ScatterView` (methods of the view)."""

    def _build_hover(self) -> None:
        self._tooltip_lines = [
            widgets.Label(layout=widgets.Layout(height="20px", margin="0px"))
            for _ in range(int(self.tooltip_max_lines))
        ]
        self.hover_box = widgets.VBox(
            self._tooltip_lines, layout=widgets.Layout(padding="2px 6px")
        )

    def _hover_lines(self, row: int) -> list[str]:
        """Text lines of the tooltip of model row ``row`` (``tooltip_max_lines`` are shown)."""
        return self._hover_heading(row)

    def _hover_heading(self, row: int) -> list[str]:
        """The first tooltip lines of a row: its sample id, then its group (if any)."""
        m = self.model
        if self.id_column:
            lines = [str(m.metadata[self.id_column].iloc[row])]
        else:
            lines = [str(m.index[row])]
        if m.group_column:
            categories, codes = m.group_codes()
            code = int(codes[row])
            lines.append(f"{m.group_column}: {categories[code] if code >= 0 else '(no value)'}")
        return lines

    def _on_hover(self, mark, content) -> None:
        point = content.get("point") or content.get("data") or {}
        index = point.get("index")
        if index is None or not 0 <= int(index) < self._mark_rows.size:
            return
        lines = self._hover_lines(int(self._mark_rows[int(index)]))
        for label, text in zip(
            self._tooltip_lines, lines + [""] * len(self._tooltip_lines), strict=False
        ):
            if label.value != text:
                label.value = text
            label.layout.display = None if text else "none"
