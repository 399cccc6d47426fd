"""Screen layout of the workbench: a wrapping grid of titled cells and the text rules.

The workbench is a column: the selection bar (one wrapping line of controls),
the progress line, then a grid of cells that wraps with the width of the
notebook. Each cell is a view under its human name (:func:`titled`). The
style sheet (:func:`stylesheet`) lets text wrap instead of being cut: ipywidgets
draws labels and buttons on one line with an ellipsis, which hides the end of
long part names, counts and cautions in a narrow column.

The style sheet is static text (no table data in it); everything from the
table stays in ``Label`` values and ``Button`` descriptions.
"""

from __future__ import annotations

import ipywidgets as w

__all__ = ["CSS", "grid", "stylesheet", "titled"]

#: Class of the workbench's root; every rule below applies inside it only.
ROOT = "cw-workbench"

#: The layout rules (plain CSS, scoped to the workbench).
CSS = f"""
.{ROOT} {{ width: 100%; box-sizing: border-box; }}
.{ROOT} .cw-grid {{
  display: flex; flex-flow: row wrap; gap: 10px 12px; align-items: flex-start;
}}
.{ROOT} .cw-cell {{ flex: 0 1 auto; min-width: 0; max-width: 100%; box-sizing: border-box; }}
.{ROOT} .cw-cell-builder {{ flex: 1 1 560px; }}
.{ROOT} .cw-cell-panels {{ flex: 1 1 440px; max-width: 820px; }}
.{ROOT} .cw-cell-title {{ font-weight: 600; }}
/* each plot is a layer of its own: a change in one (a brush moving, a restyle) is not
   repainted and re-layered with the thousands of points of the others */
.{ROOT} .cw-plot svg.svg-figure {{ will-change: transform; }}
.{ROOT} .cw-bar {{ flex-flow: row wrap; align-items: center; gap: 4px 16px; }}
.{ROOT} .cw-bar > .jupyter-widget-hbox {{ flex-flow: row wrap; align-items: center; }}
/* text wraps at the width it has instead of ending in an ellipsis */
.{ROOT} .widget-label, .{ROOT} .jupyter-widget-label {{
  white-space: normal; overflow-wrap: anywhere; text-overflow: clip;
  height: auto; min-height: var(--jp-widgets-inline-height); line-height: 1.45;
  padding-top: 4px; box-sizing: border-box;
}}
.{ROOT} .widget-label:empty, .{ROOT} .jupyter-widget-label:empty {{
  min-height: 0; padding: 0;
}}
.{ROOT} .widget-inline-hbox > .widget-label,
.{ROOT} .jupyter-widget-inline-hbox > .jupyter-widget-label {{
  width: auto; min-width: 3em; max-width: 45%; flex-shrink: 0; padding-top: 0;
  line-height: var(--jp-widgets-inline-height);
}}
.{ROOT} .widget-button, .{ROOT} .jupyter-button {{
  width: auto; max-width: 100%; white-space: normal; overflow-wrap: anywhere;
  height: auto; min-height: var(--jp-widgets-inline-height); line-height: 1.35;
  padding-top: 4px; padding-bottom: 4px;
}}
.{ROOT} .jupyter-widget-hbox, .{ROOT} .jupyter-widget-vbox {{ max-width: 100%; }}
.{ROOT} .jupyter-widget-hbox {{ flex-wrap: wrap; }}
.{ROOT} .jupyter-widget-tab {{ max-width: 100%; }}
/* the builder's table of balances under its dendrogram, at the builder's full width */
.{ROOT} .cw-builder .cw-panel {{ flex: 1 1 100%; min-width: 0; overflow-x: auto; }}
.{ROOT} .cw-cell-panels .widget-tab-contents,
.{ROOT} .cw-cell-panels .jupyter-widget-tab-contents {{
  max-height: 78vh; overflow-y: auto;
}}
"""


def stylesheet() -> w.HTML:
    """The layout rules as a ``<style>`` element (static text, nothing from the table)."""
    return w.HTML(value=f"<style>{CSS}</style>", layout=w.Layout(display="none"))


def titled(title: w.Label, view: w.Widget, kind: str) -> w.VBox:
    """A grid cell: ``title`` (a Label naming the view) above ``view``."""
    title.add_class("cw-cell-title")
    cell = w.VBox([title, view])
    cell.add_class("cw-cell")
    cell.add_class(f"cw-cell-{kind}")
    return cell


def grid(cells) -> w.Box:
    """The cells in rows that wrap with the available width."""
    box = w.Box(children=list(cells))
    box.add_class("cw-grid")
    return box
