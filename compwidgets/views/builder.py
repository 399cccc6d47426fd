"""The balance builder: design a sequential binary partition (SBP) by hand.

:class:`BalanceBuilder` shows the partition as a balance dendrogram (bar
length = variance of each balance, with the distribution of each balance on
its axis; Egozcue & Pawlowsky-Glahn 2005, and Pawlowsky-Glahn & Egozcue 2011,
Exploring compositional data with the CoDa-dendrogram, Austrian Journal of
Statistics 40, from memory) and a table of the balances. The user splits groups of parts, undoes
splits, merges leaves back, renames balances, starts from an automatic partition
(principal balances, Ward clustering of parts) and saves the dendrogram as a figure
(PNG or SVG, see :mod:`compwidgets.views._figure_save`). The front end (``js/``) draws and edits;
every proposed tree is validated here with :mod:`compwidgets.core.tree`, every
number comes from :mod:`compwidgets.core`, and each valid tree becomes the
model's SBP, so the other views follow.
"""

from __future__ import annotations

import copy
import time
import uuid
from collections.abc import Callable
from pathlib import Path
from typing import NamedTuple

import anywidget
import ipywidgets as widgets
import numpy as np
import traitlets as t

from .. import core
from ..core import principal as _principal
from ..core.separation import STATISTIC_KEYS, balance_separation
from ..core.summary import quartile_summary, summarize_balances
from ..core.tree import sbp_to_tree, split_nodes, tree_to_sbp
from ..model import CompositionModel, ModelError
from ._common import group_colours
from ._esm import bundle, read_asset
from ._figure_save import FigureSaveControl
from ._first import observe_first

__all__ = ["BalanceBuilder"]

#: Errors of a proposed tree that become a message in ``messages`` (core.SBPError is a
#: ValueError; malformed JSON from the front end may raise the others).
_REFUSED = (ValueError, TypeError, KeyError, t.TraitError)

#: Keys of a per-balance summary sent in ``stats`` (from core.summary).
_STAT_KEYS = (
    "index",
    "n",
    "n_missing",
    "variance",
    "share",
    "mean",
    "q5",
    "q25",
    "q50",
    "q75",
    "q95",
    "groups",
    "separation",
)


def _leaf(parts: list[str]) -> dict:
    return {"id": "n0", "parts": list(parts), "name": "", "children": []}


class _Partition(NamedTuple):
    """A checked tree: its SBP and, per split node (pre-order), id, names and sides."""

    sbp: np.ndarray  # int8 (k, D)
    ids: list[str]
    display: list[str]  # the names shown and given to the model
    defaults: list[str]  # "num1,num2 | den1,den2"
    custom: list[str]  # the user's names ("" = default)
    sides: list[tuple[list[str], list[str]]]  # (numerator parts, denominator parts)


def _short(x: float | None) -> float | None:
    """A number with 6 significant digits (what the front end can show), for the wire."""
    return None if x is None else float(f"{x:.6g}")


def _columns(selection: list[dict]) -> dict:
    """The selection's statistics per balance as columns: ids, n, mean, q25, q75."""
    if not selection:
        return {}
    return {
        "ids": [s["id"] for s in selection],
        "n": int(selection[0]["n"]),  # complete rows: the same for every balance
        **{key: [_short(s[key]) for s in selection] for key in ("mean", "q25", "q75")},
    }


def _row_map(sbp: np.ndarray | None, names) -> dict[bytes, str]:
    """SBP row (as bytes) -> balance name: the partition regardless of row order."""
    if sbp is None or sbp.shape[0] == 0:
        return {}
    rows = np.asarray(sbp, dtype=np.int8)
    return {row.tobytes(): str(name) for row, name in zip(rows, names, strict=False)}


class BalanceBuilder(anywidget.AnyWidget):
    """Build a sequential binary partition by hand; it becomes the model's SBP.

    Parameters
    ----------
    model : CompositionModel
        The shared model. The builder writes ``model.sbp`` / ``balance_names``
        (through :meth:`CompositionModel.set_sbp`) and ``model.colour_by``; it
        follows ``active_parts``, ``sbp``, ``balance_names``, ``selection``,
        ``group_column`` and ``colour_by``.

    Traits (synced with the front end)
    ----------------------------------
    parts : list of str
        The model's active parts (the root's parts). Kernel -> front end.
    tree : dict
        The partition as a tree: node = ``{"id", "parts", "name", "children"}``,
        ``children`` = ``[]`` (leaf) or ``[numerator, denominator]``; SBP rows are
        the split nodes in pre-order (:mod:`compwidgets.core.tree`). The front
        end proposes an edit by setting it; an invalid tree is refused: the
        trait goes back to the last valid tree, ``messages`` says why and the
        model is unchanged.
    stats : list of dict
        One entry per split node, pre-order: ``id``, ``name`` (as shown and
        as in ``model.balance_names``), ``default_name``, ``custom_name``,
        ``numerator``, ``denominator`` (parts) and the summary of the balance
        over the rows complete in the active parts: ``n``, ``variance``
        (ddof = 1), ``share`` of the total variance, ``mean``, ``q5`` ..
        ``q95``, ``groups`` (``[{"code", "n", "mean"}]``, codes index
        ``groups``) and ``separation`` of the groups along the balance (None
        without a grouping column): ``anova_f``, ``anova_p``, ``kruskal_h``,
        ``kruskal_p``, ``kruskal_n`` (rows ranked: at most
        :attr:`max_rank_rows`), ``between_share``, ``n``, ``n_groups``
        (:func:`compwidgets.core.separation.balance_separation`). Values that
        cannot be computed are None.
    selection_summary : dict
        The statistics of the selected complete rows, in columns (the smallest
        message a selection change sends): ``ids`` (split nodes, pre-order),
        ``n`` (selected complete rows) and lists ``mean``, ``q25``, ``q75`` (6
        significant digits; None without rows). A selection change updates only
        this and ``n_selected``; the front end then redraws only the selection's
        marks and cells.
    total_variance : float or None
        Total variance of the active parts (complete rows, ddof = 1).
    n_samples : int
        Rows complete in the active parts (the rows of every statistic).
    n_rows : int
        Rows of the table; the widget says how many the statistics leave out.
    n_selected : int
        Selected rows (``model.selection.size``).
    groups : list of dict
        ``{"code", "name", "colour"}`` per category of ``model.group_column``.
    messages : str
        The builder's message area: why the last change was refused or a
        suggestion failed ("" = fine).
    busy : bool
        True while a suggestion that took more than :attr:`progress_delay` s runs.
    progress : str
        What the running suggestion has done so far.
    colour_balance : str
        Id of the split node whose balance colours the other views ("" = none);
        mirrored to ``model.colour_by`` as that balance's name.
    figure_control : FigureSaveControl
        The "Save figure" control (format, scale, file name) the front end shows
        under the dendrogram; see :meth:`save_figure`.

    Kernel-side traits (not synced)
    -------------------------------
    selection_stats : list of dict
        One entry per split node: ``id``, ``n``, ``mean``, ``q25``, ``q75`` of
        the selected complete rows, at full precision.

    Custom messages
    ---------------
    From the front end: ``{"type": "suggest", "method": "principal" | "ward"}`` (see
    :meth:`suggest`) and ``{"type": "figure", "id", ...}`` with the figure's bytes as
    the one buffer (or an ``error``), the answer to the kernel's
    ``{"type": "figure-request", "id", "format", "scale"}`` (see :meth:`request_figure`).
    """

    _esm = bundle()
    _css = read_asset("builder.css")

    parts = t.List(t.Unicode()).tag(sync=True)
    tree = t.Dict().tag(sync=True)
    stats = t.List(t.Dict()).tag(sync=True)
    selection_summary = t.Dict().tag(sync=True)
    selection_stats = t.List(t.Dict())
    total_variance = t.Float(None, allow_none=True).tag(sync=True)
    n_samples = t.Int(0).tag(sync=True)
    n_rows = t.Int(0).tag(sync=True)
    n_selected = t.Int(0).tag(sync=True)
    groups = t.List(t.Dict()).tag(sync=True)
    messages = t.Unicode("").tag(sync=True)
    busy = t.Bool(False).tag(sync=True)
    progress = t.Unicode("").tag(sync=True)
    colour_balance = t.Unicode("").tag(sync=True)
    figure_control = t.Instance(FigureSaveControl, allow_none=True).tag(
        sync=True, **widgets.widget_serialization
    )

    #: A suggestion running longer than this (seconds) shows ``busy`` and ``progress``.
    progress_delay: float = 1.0
    #: Largest group searched exhaustively for principal balances (see core.principal).
    max_exhaustive: int = 16
    #: Rows ranked for the Kruskal-Wallis test of a balance (a seeded random subset above).
    max_rank_rows: int = 100_000
    #: Optional ``source(sbp, names) -> (entries, total, n_used, n_rows)`` whose entries'
    #: keys replace the model's statistics in ``stats`` (set by :meth:`set_statistics_source`).
    statistics_source: Callable | None = None

    def __init__(self, model: CompositionModel, **kwargs):
        if not isinstance(model, CompositionModel):
            raise TypeError(f"BalanceBuilder needs a CompositionModel, got {type(model).__name__}")
        self.model = model
        self._syncing = False  # the kernel itself is assigning tree / parts / colour_balance
        self._pushing = False  # the builder is writing to the model
        self._last_tree: dict = {}
        self._part = _Partition(
            np.zeros((0, len(model.active_parts)), np.int8), [], [], [], [], []
        )
        self._rows = np.zeros(model.n_rows, dtype=bool)
        self._B: np.ndarray | None = None
        self._summary: list[dict] = []
        self._total: float | None = None
        self._n_ok = 0
        self._separation: dict[bytes, dict] = {}  # SBP row -> separation, same rows and groups
        self._separation_parts: list = []  # the active parts (and members) it was found for
        self._figure_replies: dict[str, Callable[[bytes | None, str], None]] = {}
        super().__init__(n_rows=model.n_rows, **kwargs)
        self.figure_control = FigureSaveControl(self, default_name="balance-dendrogram")
        self.observe(self._on_tree, names=["tree"])
        self.observe(self._on_parts, names=["parts"])
        self.observe(self._on_colour_balance, names=["colour_balance"])
        self.on_msg(self._on_msg)
        self._model_handlers: list[tuple[Callable, list[str]]] = [
            (self._on_model_partition, ["active_parts", "sbp", "balance_names"]),
            (self._on_model_data, ["amalgamations"]),
            (self._on_model_selection, ["selection"]),
            (self._on_model_groups, ["group_column", "metadata_version"]),
            (self._on_model_colour, ["colour_by"]),
        ]
        for handler, names in self._model_handlers:
            if names == ["selection"]:  # a few numbers: sent before the views restyle points
                observe_first(model, handler, "selection")
            else:
                model.observe(handler, names=names)
        self._refresh_groups()
        self._sync_from_model(force=True)

    # ------------------------------------------------------------- public API
    def suggest(self, method: str) -> bool:
        """Replace the tree by a suggested partition of the active parts.

        Parameters
        ----------
        method : {"principal", "ward"}
            ``"principal"``: principal balances
            (:func:`compwidgets.core.principal.principal_balances`);
            ``"ward"``: Ward clustering of the clr columns
            (:func:`compwidgets.core.principal.ward_sbp`). Both use the clr
            coordinates (``model.clr()``) of the rows complete in the active parts.

        Returns
        -------
        bool
            True when the suggestion became the tree (and the model's SBP);
            otherwise ``messages`` says why.
        """
        parts = list(self.parts)
        ok = self.model.complete_rows()
        Z = np.asarray(self.model.clr())[ok]
        start = time.monotonic()
        last = [0.0]

        def report(done: float, total: int) -> None:
            now = time.monotonic()
            if now - start < self.progress_delay:
                return
            if not self.busy:
                self.busy = True
            if now - last[0] >= 0.1 or not self.progress:
                last[0] = now
                self.progress = (
                    f"principal balances: {float(done):.1f} of {total} balances found "
                    f"({100 * float(done) / max(total, 1):.0f} %)"
                )

        try:
            if method == "principal":
                sbp = _principal.principal_balances(
                    Z, max_exhaustive=self.max_exhaustive, progress=report, kind="clr"
                )
            elif method == "ward":
                sbp = _principal.ward_sbp(Z, parts)
            else:
                self.messages = f"unknown suggestion {method!r}; use 'principal' or 'ward'"
                return False
            tree = sbp_to_tree(sbp, parts)
        except _REFUSED as err:
            self.messages = f"no suggestion: {err}"
            return False
        finally:
            if self.busy:
                self.busy = False
            if self.progress:
                self.progress = ""
        return self._propose(tree)

    def reset(self) -> None:
        """Back to one group holding every active part (the model's SBP is cleared)."""
        self._propose(_leaf(list(self.parts)))

    def set_statistics_source(self, source: Callable | None) -> None:
        """Take the balances' statistics from ``source`` (e.g. all rows of a larger table)."""
        self.statistics_source = source
        with self.hold_sync():
            self._publish_stats()

    def request_figure(
        self, fmt: str, scale: int, reply: Callable[[bytes | None, str], None]
    ) -> None:
        """Ask the front end for the dendrogram as a figure file (a figure source).

        Parameters
        ----------
        fmt : {"png", "svg"}
            An SVG document (table text only as text nodes) or its PNG.
        scale : int
            PNG size = the dendrogram's size on screen x ``scale``.
        reply : callable
            Called as ``reply(data, "")`` with the file's bytes, or ``reply(None, why)``,
            when the page answers. Only a builder shown in the page answers; the first
            answer counts when it is shown more than once.
        """
        request_id = uuid.uuid4().hex
        self._figure_replies[request_id] = reply
        self.send({"type": "figure-request", "id": request_id, "format": fmt, "scale": scale})

    def save_figure(self, path: str | Path, scale: int = 2) -> Path | None:
        """Save the dendrogram: what the "Save figure" control does, from code.

        Parameters
        ----------
        path : str or Path
            File name ending in ``.png`` or ``.svg`` (relative to the working folder).
        scale : {1, 2, 4}, default 2
            PNG size factor (ignored for SVG).

        Returns
        -------
        Path or None
            The file the figure goes to; it is written when the page answers (the
            builder must be shown in the page). None when the name is refused;
            ``figure_control.message`` says why.
        """
        control = self.figure_control
        control.file_name.value = str(path)
        if int(scale) not in [value for _, value in control.scale.options]:
            control.message.value = f"No figure saved: scale {scale} is not one of 1, 2, 4."
            return None
        control.scale.value = int(scale)
        return control.save()

    def close(self) -> None:
        """Stop following the model, then close the widget and its figure control."""
        for handler, names in getattr(self, "_model_handlers", []):
            try:
                self.model.unobserve(handler, names=names)
            except ValueError:
                pass
        self._model_handlers = []
        control = getattr(self, "figure_control", None)
        if control is not None:
            control.close()
        super().close()

    # ------------------------------------------------------- tree validation
    def _check(self, tree, parts: list[str]) -> _Partition:
        """The partition of a proposed tree over ``parts``.

        Raises
        ------
        core.SBPError
            For an invalid tree, or two balances with the same name.
        """
        sbp, names, ids = tree_to_sbp(tree, parts)
        if sbp.shape[0] == 0:
            return _Partition(sbp, [], [], [], [], [])
        defaults = core.balance_names(sbp, parts, complete=False)
        custom = [str(n).strip() for n in names]
        display = core.check_balance_names(custom, sbp, parts)  # "" = default; distinct
        sides = [
            (list(n["children"][0]["parts"]), list(n["children"][1]["parts"]))
            for n in split_nodes(tree)
        ]
        return _Partition(sbp, list(ids), display, defaults, custom, sides)

    def _on_tree(self, change) -> None:
        if not self._syncing:
            self._propose(change["new"])

    def _propose(self, tree) -> bool:
        """Validate a tree; push it to the model and install it, or refuse it."""
        parts = list(self.parts)
        try:
            part = self._check(tree, parts)
        except _REFUSED as err:
            self._refuse(str(err))
            return False
        colour_id = self._carried_colour(part)
        colour_name = part.display[part.ids.index(colour_id)] if colour_id else ""
        try:
            self._push_to_model(part, colour_name)
        except ModelError as err:
            self._refuse(str(err))
            return False
        self._install(copy.deepcopy(tree), parts, part, colour_id)
        return True

    def _refuse(self, message: str) -> None:
        """Send the last valid tree back, with the reason."""
        with self.hold_sync():
            self._set_quietly("tree", copy.deepcopy(self._last_tree))
            self.messages = f"change refused: {message}. The balances are unchanged."

    def _set_quietly(self, name: str, value) -> None:
        """Assign one of this widget's traits without running the front-end handlers."""
        self._syncing = True
        try:
            if getattr(self, name) != value:
                setattr(self, name, value)
        finally:
            self._syncing = False

    def _carried_colour(self, part: _Partition) -> str:
        """Id, in a new partition, of the balance colouring the views (same SBP row) or ""."""
        if not self.colour_balance or self.colour_balance not in self._part.ids:
            return ""
        row = self._part.sbp[self._part.ids.index(self.colour_balance)]
        for k, new_row in enumerate(part.sbp):
            if np.array_equal(row, new_row):
                return part.ids[k]
        return ""

    # --------------------------------------------------------- kernel -> model
    def _push_to_model(self, part: _Partition, colour_name: str) -> None:
        """Write the SBP, its names and the colour balance to the model."""
        m = self.model
        self._pushing = True
        try:
            with m.hold_trait_notifications():
                if part.sbp.shape[0] == 0:
                    m.clear_sbp()  # names and colour_by follow
                    return
                if _row_map(m.sbp, m.balance_names) != _row_map(part.sbp, part.display):
                    m.set_sbp(part.sbp, part.display)
                if m.colour_by != colour_name:
                    m.colour_by = colour_name
        finally:
            self._pushing = False

    def _install(self, tree: dict, parts: list[str], part: _Partition, colour_id: str) -> None:
        """Make ``tree`` the builder's state and send it with fresh statistics."""
        self._last_tree = copy.deepcopy(tree)
        self._part = part
        warning = self._compute()
        with self.hold_sync():
            self._set_quietly("parts", parts)
            self._set_quietly("tree", tree)
            self._set_quietly("colour_balance", colour_id)
            self._publish_stats()
            self._publish_selection()
            self.messages = warning

    # --------------------------------------------------------- model -> kernel
    def _tree_for_model(self, parts: list[str]) -> dict:
        """Tree of the model's SBP (one leaf when it has none or it does not fit)."""
        m = self.model
        sbp = m.sbp
        if sbp is None or sbp.shape[0] == 0 or sbp.shape[1] != len(parts):
            return _leaf(parts)
        defaults = core.balance_names(sbp, parts, complete=False)
        names = list(m.balance_names)
        if len(names) != len(defaults):
            names = defaults
        return sbp_to_tree(
            sbp, parts, ["" if n == d else n for n, d in zip(names, defaults, strict=True)]
        )

    def _renamed(self, tree: dict, names: dict[bytes, str]) -> dict:
        """Copy of ``tree`` with the balance names of ``names`` (row bytes -> name)."""
        out = copy.deepcopy(tree)
        for node, row, default in zip(
            split_nodes(out), self._part.sbp, self._part.defaults, strict=True
        ):
            name = names.get(row.tobytes(), default)
            node["name"] = "" if name == default else name
        return out

    def _sync_from_model(self, force: bool = False) -> None:
        """Follow the model's active parts and SBP (an edit made elsewhere, e.g. a load)."""
        if self._pushing:
            return
        m = self.model
        parts = list(m.active_parts)
        tree = None
        if not force and parts == list(self.parts) and self._last_tree:
            wanted = _row_map(m.sbp, m.balance_names)
            shown = _row_map(self._part.sbp, self._part.display)
            if wanted == shown:
                return
            if wanted.keys() == shown.keys():  # same partition, other names: keep the ids
                tree = self._renamed(self._last_tree, wanted)
        if tree is None:
            tree = self._tree_for_model(parts)
        try:
            part = self._check(tree, parts)
        except _REFUSED:
            tree = _leaf(parts)
            part = self._check(tree, parts)
        colour_id = (
            part.ids[part.display.index(m.colour_by)] if m.colour_by in part.display else ""
        )
        self._install(tree, parts, part, colour_id)

    def _on_model_partition(self, change) -> None:
        self._sync_from_model()

    def _on_model_data(self, change) -> None:
        if self._pushing:
            return
        self._separation = {}  # an amalgamation changed: same rows, other values
        warning = self._compute()
        with self.hold_sync():
            self._publish_stats()
            self._publish_selection()
            self.messages = warning

    def _on_model_selection(self, change) -> None:
        self._publish_selection()

    def _on_model_groups(self, change) -> None:
        self._separation = {}
        with self.hold_sync():
            self._refresh_groups()
            self._summarise()
            self._publish_stats()

    def _on_model_colour(self, change) -> None:
        if self._pushing:
            return
        name = change["new"]
        part = self._part
        colour_id = part.ids[part.display.index(name)] if name in part.display else ""
        self._set_quietly("colour_balance", colour_id)

    # ------------------------------------------------------ front end -> kernel
    def _on_parts(self, change) -> None:
        if not self._syncing:
            self._set_quietly("parts", list(self.model.active_parts))

    def _on_colour_balance(self, change) -> None:
        if self._syncing:
            return
        new, old = change["new"], change["old"]
        part = self._part
        if new and new not in part.ids:
            with self.hold_sync():
                self._set_quietly("colour_balance", old if old in part.ids else "")
                self.messages = f"change refused: no balance has the id {new!r}."
            return
        name = part.display[part.ids.index(new)] if new else ""
        if self.model.colour_by == name:
            return
        self._pushing = True
        try:
            self.model.colour_by = name
        except t.TraitError as err:
            with self.hold_sync():
                self._set_quietly("colour_balance", old if old in part.ids else "")
                self.messages = f"change refused: {err}."
        finally:
            self._pushing = False

    def _on_msg(self, widget, content, buffers) -> None:
        if not isinstance(content, dict):
            return
        if content.get("type") == "suggest":
            self.suggest(str(content.get("method", "")))
        elif content.get("type") == "figure":
            reply = self._figure_replies.pop(str(content.get("id", "")), None)
            if reply is None:
                return  # a second view's answer, or one nobody waits for
            error = str(content.get("error") or "")
            data = bytes(buffers[0]) if buffers and not error else None
            reply(data, error)

    # ------------------------------------------------------------- statistics
    def _compute(self) -> str:
        """Balances of the complete rows and their summaries; returns a warning ("" = none)."""
        m = self.model
        part = self._part
        ok = np.asarray(m.complete_rows(), dtype=bool)
        n_ok = int(ok.sum())
        parts_key = [(p, m.members(p)) for p in m.active_parts]
        if parts_key != self._separation_parts or not np.array_equal(ok, self._rows):
            self._separation = {}  # other balance values: computed again when asked
            self._separation_parts = parts_key
        self._rows, self._n_ok = ok, n_ok
        self._B, self._total = None, None
        warning = ""
        if n_ok <= core.DDOF:
            warning = (
                f"only {n_ok} {'row has' if n_ok == 1 else 'rows have'} a positive value in "
                f"every active part; a variance needs at least {core.DDOF + 1} rows"
            )
        else:
            self._total = m.total_variance()
            if part.sbp.shape[0]:
                sbp = part.sbp
                # kept in the model's cache per partition (parts shown again are a lookup),
                # computed in blocks of rows
                B = m.rowwise(
                    ("builder-balances", sbp.shape, sbp.tobytes()),
                    None,
                    lambda v: core.balances(v, sbp, complete=False),
                    sbp.shape[0],
                )
                self._B = B if n_ok == m.n_rows else B[ok]
        self._summarise()
        return warning

    def _summarise(self) -> None:
        """Summaries of the balances (with the current groups) from the cached balances."""
        if self._B is None:
            self._summary = []
            return
        cats, codes = self.model.group_codes()
        codes = np.asarray(codes)[self._rows]
        self._summary = summarize_balances(
            self._B,
            codes=codes,
            n_groups=len(cats),
            total=self._total,
            names=self._part.display,
        )
        for entry, separation in zip(
            self._summary, self._separations(codes, len(cats)), strict=True
        ):
            entry["separation"] = separation

    def _separations(self, codes: np.ndarray, n_groups: int) -> list[dict | None]:
        """Group separation of each balance; kept per SBP row while rows and groups stay."""
        if not n_groups:
            return [None] * self._B.shape[1]
        keys = [row.tobytes() for row in self._part.sbp]
        new = [k for k, key in enumerate(keys) if key not in self._separation]
        if new:
            found = balance_separation(
                self._B if len(new) == len(keys) else self._B[:, new],  # no copy of all
                codes,
                n_groups,
                max_rank_rows=self.max_rank_rows,
            )
            for k, entry in zip(new, found, strict=True):
                self._separation[keys[k]] = {key: entry[key] for key in STATISTIC_KEYS}
        return [dict(self._separation[key]) for key in keys]

    def _publish_stats(self) -> None:
        part = self._part
        stats = []
        total, n_used, n_rows, over = self._total, self._n_ok, self.model.n_rows, None
        if self.statistics_source is not None:
            over, total, n_used, n_rows = self.statistics_source(part.sbp, part.display)
        for k in range(part.sbp.shape[0]):
            if k < len(self._summary):
                summary = {key: self._summary[k].get(key) for key in _STAT_KEYS}
            else:  # no statistics (too few rows): the structure only
                summary = {**dict.fromkeys(_STAT_KEYS), "index": k, "n": 0, "groups": []}
            if over is not None:
                own = summary.get("separation")
                summary.update({key: over[k][key] for key in _STAT_KEYS if key in over[k]})
                if over[k].get("separation") is not None:
                    # the source's F and between share over its rows; the rank test (a
                    # sample of rows in any case) stays the model's
                    summary["separation"] = {
                        **dict.fromkeys(STATISTIC_KEYS),
                        **(own or {}),
                        **over[k]["separation"],
                    }
            stats.append(
                {
                    "id": part.ids[k],
                    "name": part.display[k],
                    "default_name": part.defaults[k],
                    "custom_name": part.custom[k],
                    "numerator": part.sides[k][0],
                    "denominator": part.sides[k][1],
                    **summary,
                }
            )
        if self.stats != stats:
            self.stats = stats
        if self.total_variance != total:
            self.total_variance = total
        if self.n_samples != n_used:
            self.n_samples = n_used
        if self.n_rows != n_rows:
            self.n_rows = n_rows

    def _publish_selection(self) -> None:
        """Statistics of the selected complete rows (cheap: nothing else is resent)."""
        m = self.model
        selection = []
        if self._B is not None:
            if self._n_ok == m.n_rows:  # every row complete: the selected rows of B directly
                chosen = self._B[m.selection]
            else:
                chosen = self._B[m.selected_mask()[self._rows]]
            summary = quartile_summary(chosen)
            selection = [{"id": i, **s} for i, s in zip(self._part.ids, summary, strict=True)]
        compact = _columns(selection)
        with self.hold_sync():
            if self.selection_stats != selection:
                self.selection_stats = selection
            if self.selection_summary != compact:
                self.selection_summary = compact
            n = int(m.selection.size)
            if self.n_selected != n:
                self.n_selected = n

    def _refresh_groups(self) -> None:
        cats, _ = self.model.group_codes()
        colours = [str(c) for c in group_colours(list(cats))]  # shared palette
        groups = [{"code": i, "name": str(c), "colour": colours[i]} for i, c in enumerate(cats)]
        if self.groups != groups:
            self.groups = groups
