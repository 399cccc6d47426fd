"""The shared composition model that every view follows.

One :class:`CompositionModel` holds the composition from intake and the state
that the views share: the active parts (with user-defined amalgamations), the
selection, the grouping column used for colours, and the SBP. Views keep a
reference to the model, never to each other; they read derived data from the
model (computed once by :mod:`compwidgets.core` and cached) and write back only
through its traits and methods.

The selection is a sorted ``numpy.uint32`` array of row *positions* (0 .. n-1
in the order of ``composition.values``); ``model.index[selection]`` gives the
original index labels.
"""

from __future__ import annotations

from collections import OrderedDict
from collections.abc import Sequence

import numpy as np
import pandas as pd
import traitlets as t

from . import core
from .composition import Composition

_EMPTY = np.zeros(0, dtype=np.uint32)
_MISSING = object()
#: Rows per block when a row-wise derived matrix (closed, clr, ilr, balances) is computed.
_BLOCK_ROWS = 65536


def _nbytes(value) -> int:
    """Approximate bytes held by a cached value (arrays, frames, tuples, dataclasses)."""
    if isinstance(value, np.ndarray):
        return int(value.nbytes)
    if isinstance(value, (pd.DataFrame, pd.Series)):
        return int(np.sum(value.memory_usage(index=False)))
    if isinstance(value, (tuple, list)):
        return sum(_nbytes(v) for v in value)
    if isinstance(value, dict):
        return sum(_nbytes(v) for v in value.values())
    if hasattr(value, "__dict__"):
        return sum(_nbytes(v) for v in vars(value).values())
    return 64


def _freeze(value) -> None:
    """Make the arrays of a cached value read-only (a tuple's, a list's, its own)."""
    if isinstance(value, np.ndarray):
        value.flags.writeable = False
    elif isinstance(value, (tuple, list)):
        for v in value:
            _freeze(v)


class ModelError(ValueError):
    """An invalid change to the model (the model is left unchanged)."""


class _RowPositions(t.Instance):
    """An ndarray trait that does not notify when an equal array is assigned.

    traitlets compares old and new values with ``==``, which for arrays is
    element-wise and so always counts as a change.
    """

    def __init__(self, **kwargs):
        super().__init__(np.ndarray, **kwargs)

    def set(self, obj, value):
        new = self._validate(obj, value)
        old = obj._trait_values.get(self.name, self.default_value)
        if isinstance(old, np.ndarray) and np.array_equal(old, new):
            return
        obj._trait_values[self.name] = new
        obj._notify_trait(self.name, old, new)


class CompositionModel(t.HasTraits):
    """Shared state of a compwidgets workbench.

    Parameters
    ----------
    composition : Composition
        The output of :func:`compwidgets.read_composition`.
    active_parts : sequence of str, optional
        The subcomposition under study (default: every part).
    group_column : str, optional
        A metadata column used for colours and legends ("" for none).

    Traits (observe them with ``model.observe(handler, names=[...])``)
    ------
    active_parts : list of str
        Parts (or amalgamation names) under study; at least 2.
    amalgamations : dict of str -> list of str
        New parts defined as sums of parts of the composition.
    selection : ndarray of uint32
        Sorted unique row positions; assigning an equal array does not notify.
    group_column : str
        Metadata column for colours ("" = no grouping).
    sbp : ndarray of int8 or None
        Signed SBP matrix (D-1, D) over ``active_parts``.
    balance_names : list of str
        One name per SBP row.
    colour_by : str
        "" to colour by ``group_column``; a balance name to colour by its value.
    metadata_version : int
        Incremented when a column is added to the metadata (e.g. a group made from a selection).
    """

    active_parts = t.List(t.Unicode())
    amalgamations = t.Dict()
    selection = _RowPositions()
    group_column = t.Unicode("")
    sbp = t.Instance(np.ndarray, allow_none=True, default_value=None)
    balance_names = t.List(t.Unicode())
    colour_by = t.Unicode("")
    metadata_version = t.Int(0)

    #: Most entries the cache of derived data keeps (closed, clr, ilr, the views'
    #: projections and density bins, per set of parts); the least recently used go first.
    cache_size = 256
    #: Most bytes that cache keeps (the arrays of a million rows are large).
    cache_bytes = 512 * 2**20

    def __init__(
        self,
        composition: Composition,
        active_parts: Sequence[str] | None = None,
        group_column: str = "",
        **kwargs,
    ):
        if not isinstance(composition, Composition):
            raise TypeError(
                "CompositionModel needs a Composition; build one with "
                f"compwidgets.read_composition (got {type(composition).__name__})"
            )
        self.composition = composition
        self._parts = tuple(composition.parts)  # the composition never changes
        self._part_set = frozenset(self._parts)
        self._extra_metadata = pd.DataFrame(index=composition.values.index)
        self._cache: OrderedDict = OrderedDict()
        self._cache_sizes: dict = {}
        self._cache_used = 0
        self._selected_mask: np.ndarray | None = None
        super().__init__(selection=_EMPTY.copy(), **kwargs)
        self.active_parts = list(active_parts) if active_parts is not None else composition.parts
        if group_column:
            self.group_column = group_column

    # ----------------------------------------------------------------- basics
    @property
    def n_rows(self) -> int:
        return int(self.composition.values.shape[0])

    @property
    def index(self) -> pd.Index:
        """Original index labels, by row position."""
        return self.composition.values.index

    @property
    def parts(self) -> list[str]:
        """Every part of the composition (before amalgamation)."""
        return list(self._parts)

    @property
    def available_parts(self) -> list[str]:
        """Parts and amalgamation names that can be made active or shown."""
        return self.parts + [a for a in self.amalgamations if a not in self._part_set]

    @property
    def metadata(self) -> pd.DataFrame:
        """Metadata columns of the composition plus the columns made in this session."""
        if self._extra_metadata.shape[1] == 0:
            return self.composition.metadata
        key = ("metadata", self.metadata_version)
        if key not in self._cache:
            self._store(key, pd.concat([self.composition.metadata, self._extra_metadata], axis=1))
        return self._cache[key]

    # ------------------------------------------------------------ validation
    @t.validate("active_parts")
    def _check_active(self, proposal):
        parts = list(proposal["value"])
        known = set(self.available_parts)
        unknown = [p for p in parts if p not in known]
        if unknown:
            raise t.TraitError(
                f"unknown part(s) {unknown}; available: {', '.join(self.available_parts)}"
            )
        if len(parts) < 2:
            raise t.TraitError(f"at least 2 active parts are needed, got {parts}")
        if len(set(parts)) != len(parts):
            raise t.TraitError(f"a part is listed twice in {parts}")
        members = [m for p in parts for m in self.members(p)]
        if len(set(members)) != len(members):
            raise t.TraitError(
                "an amalgamation shares parts with another active part; "
                f"active parts {parts} would count a part twice"
            )
        return parts

    @t.validate("amalgamations")
    def _check_amalgamations(self, proposal):
        groups = {str(k): [str(m) for m in v] for k, v in dict(proposal["value"]).items()}
        if groups:
            try:
                core.subcomp.check_amalgamations(groups, self.parts)
            except core.CompositionError as err:
                raise t.TraitError(str(err)) from None
        clash = [g for g in groups if g in self.parts]
        if clash:
            raise t.TraitError(f"amalgamation name(s) {clash} already name a part")
        # redefining an active amalgamation must not count a part twice
        active = [p for p in self.active_parts if p in self.parts or p in groups]
        members = [m for p in active for m in (groups[p] if p in groups else [p])]
        twice = sorted({m for m in members if members.count(m) > 1})
        if twice:
            raise t.TraitError(
                f"with these amalgamations the active parts {active} would count "
                f"{', '.join(twice)} twice; change the active parts first"
            )
        return groups

    @t.validate("selection")
    def _check_selection(self, proposal):
        return self._as_positions(proposal["value"])

    @t.validate("group_column")
    def _check_group(self, proposal):
        name = proposal["value"]
        if name and name not in self.metadata.columns:
            raise t.TraitError(
                f"unknown grouping column {name!r}; metadata columns: "
                f"{', '.join(map(str, self.metadata.columns))}"
            )
        return name

    @t.validate("sbp")
    def _check_sbp(self, proposal):
        value = proposal["value"]
        if value is None:
            return None
        try:
            return core.validate_sbp(value, self.active_parts, complete=False)
        except core.CompositionError as err:
            raise t.TraitError(str(err)) from None

    @t.observe("active_parts")
    def _on_active_parts(self, change):
        # An SBP is a partition of exactly the active parts: a new set of parts drops it.
        if self.sbp is not None and list(change["old"] or []) != list(change["new"]):
            with self.hold_trait_notifications():
                self.sbp = None
                self.balance_names = []
                self.colour_by = ""

    @t.observe("amalgamations")
    def _on_amalgamations(self, change):
        # A redefined active amalgamation keeps its place and the SBP over it (the
        # derived data are cached by members, so they follow); one that is gone drops out.
        gone = [p for p in self.active_parts if p not in self.available_parts]
        if gone:
            kept = [p for p in self.active_parts if p in self.available_parts]
            self.active_parts = kept if len(kept) >= 2 else self.parts

    def _as_positions(self, rows) -> np.ndarray:
        arr = np.asarray(rows)
        if arr.dtype == bool:
            if arr.shape != (self.n_rows,):
                raise t.TraitError(
                    f"a boolean selection mask needs {self.n_rows} values, got shape {arr.shape}"
                )
            return np.flatnonzero(arr).astype(np.uint32)
        if arr.size == 0:
            return _EMPTY.copy()
        if arr.ndim != 1 or not np.issubdtype(arr.dtype, np.integer):
            raise t.TraitError(
                "a selection is a 1-D array of integer row positions or a boolean mask; "
                f"got dtype {arr.dtype}, shape {arr.shape}"
            )
        lo, hi = int(arr.min()), int(arr.max())
        if lo < 0 or hi >= self.n_rows:
            bad = lo if lo < 0 else hi
            raise t.TraitError(f"row position {bad} is outside 0..{self.n_rows - 1}")
        out = arr.astype(np.uint32, copy=False)
        if np.any(out[1:] <= out[:-1]):
            out = np.unique(out)
        return out.copy() if out is arr else out

    # -------------------------------------------------------------- selection
    def select(self, rows, mode: str = "replace") -> None:
        """Change the selection; notifies once, and only if it really changes.

        Parameters
        ----------
        rows : array of row positions or boolean mask of length ``n_rows``
        mode : {"replace", "add", "remove", "intersect"}
        """
        new = self._as_positions(rows)
        if mode == "add":
            new = np.union1d(self.selection, new).astype(np.uint32)
        elif mode == "remove":
            new = np.setdiff1d(self.selection, new, assume_unique=True).astype(np.uint32)
        elif mode == "intersect":
            new = np.intersect1d(self.selection, new, assume_unique=True).astype(np.uint32)
        elif mode != "replace":
            raise ModelError(
                f"unknown selection mode {mode!r}; use replace, add, remove or intersect"
            )
        self.selection = new  # the trait itself ignores an equal array

    def select_labels(self, labels, mode: str = "replace") -> None:
        """Select rows by their original index labels (unknown labels raise)."""
        pos = self.index.get_indexer(pd.Index(labels))
        if (pos < 0).any():
            missing = list(pd.Index(labels)[pos < 0][:5])
            raise ModelError(f"unknown row label(s) {missing}")
        self.select(pos, mode)

    def clear_selection(self) -> None:
        """Select nothing."""
        self.select(_EMPTY)

    def invert_selection(self) -> None:
        """Select every row that is not selected, and only those."""
        self.select(~self.selected_mask())

    def selected_mask(self) -> np.ndarray:
        """Boolean mask of the selection, by row position (cached per selection)."""
        if self._selected_mask is None:
            mask = np.zeros(self.n_rows, dtype=bool)
            mask[self.selection] = True
            mask.flags.writeable = False
            self._selected_mask = mask
        return self._selected_mask

    @t.observe("selection")
    def _on_selection(self, change):
        self._selected_mask = None

    def selected_frame(self) -> pd.DataFrame:
        """Selected rows: metadata, then the parts (common unit), with their original index."""
        pos = self.selection
        values = self.composition.values.iloc[pos]
        return pd.concat([self.metadata.iloc[pos], values], axis=1)

    def selection_to_group(
        self,
        name: str,
        selected_label: str = "selected",
        other_label: str = "other",
        use: bool = True,
    ) -> pd.Series:
        """Turn the selection into a new categorical metadata column ``name``.

        With ``use=True`` the new column becomes the grouping column, so the
        group shows with its own colour in every view.
        """
        if not isinstance(name, str) or not name.strip():
            raise ModelError("a group column needs a non-empty name")
        if name in self.metadata.columns or name in self.parts:
            raise ModelError(f"a column named {name!r} exists already; choose another name")
        if selected_label == other_label:
            raise ModelError("the selected and other labels must differ")
        labels = np.where(self.selected_mask(), selected_label, other_label)
        column = pd.Series(
            pd.Categorical(labels, categories=[selected_label, other_label]),
            index=self.index,
            name=name,
        )
        self._extra_metadata[name] = column
        self.metadata_version += 1
        if use:
            self.group_column = name
        return column

    # ---------------------------------------------------------------- groups
    def group_codes(self) -> tuple[list[str], np.ndarray]:
        """Categories of the grouping column and an int32 code per row (-1 = no value)."""
        if not self.group_column:
            return [], np.full(self.n_rows, -1, dtype=np.int32)
        key = ("groups", self.group_column, self.metadata_version)
        if key not in self._cache:
            column = self.metadata[self.group_column]
            cat = pd.Categorical(column.astype("object").where(column.notna(), None))
            self._store(key, ([str(c) for c in cat.categories], cat.codes.astype(np.int32)))
        return self._cache[key]

    # ----------------------------------------------------------- derived data
    def members(self, part: str) -> list[str]:
        """Parts of the composition that make up ``part`` (itself, or its members)."""
        if part in self._part_set:
            return [part]
        return list(self.amalgamations.get(part, [part]))

    def _key(self, kind: str, parts: Sequence[str]) -> tuple:
        return (kind, tuple((p, tuple(self.members(p))) for p in parts))

    def _store(self, key, value, size: int | None = None):
        """Keep ``value`` under ``key``; drop the least recently used beyond the budget.

        ``size`` (bytes counted against :attr:`cache_bytes`) defaults to the value's own.
        """
        old = self._cache.pop(key, None)
        if old is not None:
            self._cache_used -= self._cache_sizes.pop(key, 0)
        size = _nbytes(value) if size is None else int(size)
        self._cache[key] = value
        self._cache_sizes[key] = size
        self._cache_used += size
        while len(self._cache) > 1 and (
            len(self._cache) > self.cache_size or self._cache_used > self.cache_bytes
        ):
            oldest = next(iter(self._cache))
            if oldest == key:
                break
            del self._cache[oldest]
            self._cache_used -= self._cache_sizes.pop(oldest, 0)
        return value

    def _cached(self, key):
        """The cached value of ``key`` (marked as just used), or :data:`_MISSING`."""
        value = self._cache.get(key, _MISSING)
        if value is not _MISSING:
            self._cache.move_to_end(key)
        return value

    @property
    def cache_used(self) -> int:
        """Bytes of derived data held in the cache now (see :attr:`cache_bytes`)."""
        return self._cache_used

    def derived(self, kind, parts: Sequence[str] | None, compute):
        """A value derived from ``parts``, computed once per set of parts and kept.

        The cache that holds the model's own derived arrays also keeps what a
        view derives from them (a projection, density bin numbers, a fitted
        biplot), so that switching back to a set of parts shown before is a
        lookup. Keys name the members of amalgamations, so a redefined
        amalgamation is a new key.

        Parameters
        ----------
        kind : hashable
            What is derived, with every option that changes it (e.g.
            ``("ternary-xy", centred)``).
        parts : sequence of str or None
            The parts it is derived from (None: the active parts).
        compute : callable
            Called without arguments when the value is not cached. Arrays in
            the result are made read-only.

        Returns
        -------
        The cached or newly computed value.
        """
        key = self._key(kind, self._resolve(parts))
        value = self._cached(key)
        if value is _MISSING:
            value = compute()
            _freeze(value)
            self._store(key, value)
        return value

    def _resolve(self, parts: Sequence[str] | None) -> list[str]:
        parts = list(self.active_parts if parts is None else parts)
        known = self._part_set.union(self.amalgamations)
        unknown = [p for p in parts if p not in known]
        if unknown:
            raise ModelError(f"unknown part(s) {unknown}; available: {self.available_parts}")
        return parts

    def part_values(self, parts: Sequence[str] | None = None) -> np.ndarray:
        """Values (common unit) of ``parts``, amalgamations summed; NaN where missing."""
        parts = self._resolve(parts)
        key = self._key("values", parts)
        values = self._cached(key)
        if values is not _MISSING:
            return values
        frame = self.composition.values
        if parts == list(self._parts) and not frame.empty:
            # every part in the table's order: the composition's own values (a read-only
            # view where pandas allows it, so no second copy of the largest matrix)
            values = frame.to_numpy(dtype=float, copy=False)
            if values.flags.writeable:
                values = values.view()
            values.flags.writeable = False
            shared = not values.flags.owndata  # a view costs no memory of its own
            return self._store(key, values, size=0 if shared else None)
        values = np.empty((self.n_rows, len(parts)))
        for j, p in enumerate(parts):
            members = self.members(p)
            if len(members) == 1:
                values[:, j] = frame[members[0]].to_numpy(dtype=float)
            else:
                values[:, j] = frame[members].to_numpy(dtype=float).sum(axis=1)
        values.flags.writeable = False
        return self._store(key, values)

    def complete_rows(self, parts: Sequence[str] | None = None) -> np.ndarray:
        """Boolean mask of rows with a finite positive value in every one of ``parts``."""
        parts = self._resolve(parts)
        key = self._key("complete", parts)
        complete = self._cached(key)
        if complete is _MISSING:
            v = self.part_values(parts)
            with np.errstate(invalid="ignore"):
                complete = np.all(v > 0, axis=1) & np.all(np.isfinite(v), axis=1)
            complete.flags.writeable = False
            self._store(key, complete)
        return complete

    def rowwise(self, kind, parts: Sequence[str] | None, func, width: int) -> np.ndarray:
        """A row-by-row transform of the values of ``parts``, cached per set of parts.

        ``func`` maps an (m, D) block of complete rows to (m, ``width``); it is
        called on blocks of rows, so that its temporaries stay small on long
        tables. Incomplete rows are NaN. ``kind`` names the transform with every
        option that changes it.
        """
        parts = self._resolve(parts)
        return self._derived(kind, parts, func, width - len(parts))

    def _derived(self, kind, parts: Sequence[str] | None, func, width_offset: int = 0):
        parts = self._resolve(parts)
        key = self._key(kind, parts)
        out = self._cached(key)
        if out is not _MISSING:
            return out
        ok = self.complete_rows(parts)
        values = self.part_values(parts)
        out = np.full((self.n_rows, len(parts) + width_offset), np.nan)
        # every derived matrix is row by row: computed in blocks of rows, so that the
        # temporaries of the core functions stay small on a million rows
        rows = np.flatnonzero(ok)
        whole = rows.size == self.n_rows
        for start in range(0, rows.size, _BLOCK_ROWS):
            if whole:
                block = slice(start, min(start + _BLOCK_ROWS, rows.size))
            else:
                block = rows[start : start + _BLOCK_ROWS]
            out[block] = np.asarray(func(values[block]), dtype=float)
        out.flags.writeable = False
        return self._store(key, out)

    def total_variance(self, parts: Sequence[str] | None = None) -> float:
        """Total variance of ``parts`` over their complete rows (ddof = 1), cached."""
        parts = self._resolve(parts)
        # from the (cached) variation matrix: no second pass over the rows
        return core.stats.total_variance_from_variation(self.variation_matrix(parts))

    def replaced(self) -> np.ndarray:
        """Boolean (n_rows, n_parts): the value was below detection and has been replaced."""
        key = ("replaced",)
        mask = self._cached(key)
        if mask is _MISSING:
            # Composition.replaced is (status below detection) & (value present); the raw
            # numbers are NaN exactly where a cell was below detection or missing, and a
            # missing cell is never filled, so the same mask is (raw NaN) & (value present)
            # (numbers only: 20 times faster than comparing the status text at 10**6 rows)
            c = self.composition
            raw = c.raw.to_numpy(dtype=float, copy=False)
            values = c.values.to_numpy(dtype=float, copy=False)
            mask = np.isnan(raw) & ~np.isnan(values)
            mask.flags.writeable = False
            self._store(key, mask)
        return mask

    def replaced_rows(self, parts: Sequence[str] | None = None) -> np.ndarray:
        """Boolean mask (n_rows,): a value of one of ``parts`` (or of a member) was replaced."""
        parts = self._resolve(parts)
        position = {name: j for j, name in enumerate(self._parts)}
        columns = [position[m] for p in parts for m in self.members(p)]
        return self.derived(
            "replaced-rows", parts, lambda: self.replaced()[:, columns].any(axis=1)
        )

    def closed(self, parts: Sequence[str] | None = None) -> np.ndarray:
        """Closed subcomposition of ``parts`` (default: active parts); NaN rows are incomplete."""
        return self._derived("closed", parts, core.closure)

    def clr(self, parts: Sequence[str] | None = None) -> np.ndarray:
        """clr coordinates of ``parts`` (default: active parts); NaN rows are incomplete."""
        return self._derived("clr", parts, core.clr)

    def ilr(self, parts: Sequence[str] | None = None) -> np.ndarray:
        """ilr coordinates (default pivot basis) of ``parts``; NaN rows are incomplete."""
        return self._derived("ilr", parts, core.ilr, -1)

    def balances(self) -> np.ndarray:
        """Balances of the current SBP over the active parts, (n, D-1); NaN rows incomplete."""
        if self.sbp is None:
            raise ModelError("no SBP is set; build one in the balance builder or call set_sbp")
        sbp = self.sbp
        return self._derived(
            "balances:" + sbp.tobytes().hex(),
            None,
            lambda v: core.balances(v, sbp, complete=False),
            sbp.shape[0] - sbp.shape[1],
        )

    def balance_values(self, name: str) -> np.ndarray:
        """Values of one balance of the current SBP, by its name."""
        if name not in self.balance_names:
            raise ModelError(f"unknown balance {name!r}; balances: {self.balance_names}")
        return self.balances()[:, self.balance_names.index(name)]

    def set_sbp(self, sbp, names: Sequence[str] | None = None) -> None:
        """Set the SBP over the active parts (validated) and its balance names."""
        try:
            S = core.validate_sbp(sbp, self.active_parts, complete=False)
        except core.CompositionError as err:
            raise ModelError(str(err)) from None
        if S.shape[1] != len(self.active_parts):
            raise ModelError(
                f"the SBP has {S.shape[1]} parts but {len(self.active_parts)} parts are active"
            )
        defaults = core.balance_names(S, self.active_parts, complete=False)
        if names is None:
            names = defaults
        elif len(names) != S.shape[0]:
            raise ModelError(f"{len(names)} balance names for {S.shape[0]} balances")
        else:  # "" (or None) keeps the default name of that balance
            names = [str(n) if n else d for n, d in zip(names, defaults, strict=True)]
        if len(set(names)) != len(names):
            raise ModelError(f"balance names must be unique, got {names}")
        with self.hold_trait_notifications():
            if self.sbp is None or not np.array_equal(self.sbp, S):
                self.sbp = S
            if list(self.balance_names) != list(names):
                self.balance_names = list(names)
            if self.colour_by and self.colour_by not in names:
                self.colour_by = ""

    @t.validate("colour_by")
    def _check_colour_by(self, proposal):
        name = proposal["value"]
        if name and name not in self.balance_names:
            raise t.TraitError(f"unknown balance {name!r}; balances: {self.balance_names}")
        return name

    def variation_matrix(self, parts: Sequence[str] | None = None) -> pd.DataFrame:
        """Variation matrix of ``parts`` over the complete rows (ddof = 1)."""
        parts = self._resolve(parts)
        key = self._key("variation", parts)
        T = self._cached(key)
        if T is _MISSING:
            ok = self.complete_rows(parts)
            values = self.part_values(parts)
            frame = pd.DataFrame(values if ok.all() else values[ok], columns=parts, copy=False)
            T = self._store(key, core.variation_matrix(frame))
        return T

    # ---------------------------------------------------------------- exports
    def ilr_frame(self, **options) -> pd.DataFrame:
        """Balances of the SBP as a DataFrame (see :func:`compwidgets.export.ilr_frame`)."""
        from .export import ilr_frame

        return ilr_frame(self, **options)

    def sbp_frame(self) -> pd.DataFrame:
        """The SBP as a signed matrix, balances as rows (:func:`compwidgets.export.sbp_frame`)."""
        from .export import sbp_frame

        return sbp_frame(self)

    def contrast_frame(self) -> pd.DataFrame:
        """Orthonormal contrast matrix of the SBP (:func:`compwidgets.export.contrast_frame`)."""
        from .export import contrast_frame

        return contrast_frame(self)

    def save_sbp(self, path):
        """Write the SBP as a JSON document (:func:`compwidgets.export.save_sbp`)."""
        from .export import save_sbp

        return save_sbp(self, path)

    def load_sbp(self, path_or_document):
        """Rebuild an SBP from a JSON document (:func:`compwidgets.export.load_sbp`)."""
        from .export import load_sbp

        return load_sbp(self, path_or_document)

    def save_ilr_csv(self, path, **options):
        """Write the balances to CSV (:func:`compwidgets.export.save_ilr_csv`)."""
        from .export import save_ilr_csv

        return save_ilr_csv(self, path, **options)

    def save_selected_csv(self, path, **options):
        """Write the selected rows to CSV (:func:`compwidgets.export.save_selected_csv`)."""
        from .export import save_selected_csv

        return save_selected_csv(self, path, **options)
