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


def _nbytes(value, depth: int = 0) -> int:
    """Approximate bytes held by a cached value (arrays, frames, tuples, plain objects).

    Objects are looked into two levels deep; the model, widgets and the
    composition they may refer to are shared, not held, and count nothing.
    """
    if isinstance(value, np.ndarray):
        return int(value.nbytes)
    if isinstance(value, (pd.DataFrame, pd.Series)):
        return int(np.sum(value.memory_usage(index=False)))
    if isinstance(value, pd.Index):
        return int(value.nbytes)
    if isinstance(value, (t.HasTraits, Composition)) or depth > 2:
        return 0
    if isinstance(value, (tuple, list)):
        return sum(_nbytes(v, depth + 1) for v in value)
    if isinstance(value, dict):
        return sum(_nbytes(v, depth + 1) for v in value.values())
    if hasattr(value, "__dict__"):
        return sum(_nbytes(v, depth + 1) for v in vars(value).values())
    return 64


def _freeze(value) -> None:
    """Make the arrays of a cached value read-only (a tuple's, a list's, its own)."""
    if isinstance(value, np.ndarray):
        value.flags.writeable = False
    elif isinstance(value, (tuple, list)):
        for v in value:
            _freeze(v)


class ModelError(core.CompositionError, t.TraitError):
    """An invalid change to the model (the model is left unchanged).

    A :class:`compwidgets.core.CompositionError` (so a ``ValueError``): one
    ``except CompositionError`` catches every refusal, wherever it enters. It is
    also a ``traitlets.TraitError``, which traitlets needs to undo a batch of
    changes made under ``hold_trait_notifications``.
    """


class _NotAComposition(core.CompositionError, TypeError):
    """The model was given something other than a Composition."""


def _checked(rule, *args, **kwargs):
    """Call one of the :mod:`compwidgets.core` rules; its refusal becomes a :class:`ModelError`."""
    try:
        return rule(*args, **kwargs)
    except ModelError:
        raise
    except core.CompositionError as err:
        raise ModelError(str(err)) from None


class _Refusing:
    """Mixin for the model's traits: a value of the wrong type raises :class:`ModelError`."""

    def error(self, obj, value, error=None, info=None):
        try:
            super().error(obj, value, error, info)
        except ModelError:
            raise
        except t.TraitError as err:
            raise ModelError(*err.args) from None


class _List(_Refusing, t.List):
    pass


class _Dict(_Refusing, t.Dict):
    pass


class _Text(_Refusing, t.Unicode):
    pass


class _Count(_Refusing, t.Int):
    pass


class _RowPositions(_Refusing, t.TraitType):
    """Row positions: any 1-D integer array-like or boolean mask, stored as sorted unique uint32.

    Assigning an equal set of rows does not notify (traitlets compares old and new
    values with ``==``, which for arrays is element-wise and so always a change).
    """

    info_text = "row positions (1-D integers in 0..n-1) or a boolean mask of n values"

    def validate(self, obj, value):
        return obj._as_positions(value)

    def set(self, obj, value):
        new = self._validate(obj, value)
        old = obj._trait_values.get(self.name, self.default_value)
        if isinstance(old, np.ndarray) and np.array_equal(old, new):
            return
        obj._trait_values[self.name] = new
        obj._notify_trait(self.name, old, new)


class _Partition(_Refusing, t.TraitType):
    """The SBP: None, or a read-only int8 matrix (balances x active parts).

    Any array-like or DataFrame may be assigned; the model's validator checks it
    against the active parts (a DataFrame by its column labels). Assigning an
    equal matrix does not notify.
    """

    default_value = None
    allow_none = True
    info_text = "an SBP matrix (balances x active parts) or None"

    def set(self, obj, value):
        new = self._validate(obj, value)
        old = obj._trait_values.get(self.name, self.default_value)
        same = (
            isinstance(old, np.ndarray)
            and isinstance(new, np.ndarray)
            and old.shape == new.shape
            and np.array_equal(old, new)
        )
        if same:  # nothing to announce; it now stands over the current parts
            obj._sbp_for = _sbp_key(old, obj.active_parts)
            return
        if old is None and new is None:
            return
        obj._trait_values[self.name] = new
        obj._notify_trait(self.name, old, new)


def _sbp_key(sbp: np.ndarray, parts) -> tuple:
    """What an SBP means: its matrix and the parts its columns are."""
    return (sbp.shape, sbp.tobytes(), tuple(parts))


def _frame_names(sbp) -> list[str] | None:
    """Balance names carried by the index of an SBP table (as :func:`export.sbp_frame` writes)."""
    if isinstance(sbp, pd.DataFrame) and not isinstance(sbp.index, pd.RangeIndex):
        if all(isinstance(n, str) for n in sbp.index):
            return list(sbp.index)
    return None


class CompositionModel(t.HasTraits):
    """Shared state of a compwidgets workbench.

    Every refused change raises :class:`ModelError`, a
    :class:`compwidgets.core.CompositionError`, and leaves the model unchanged.

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
        Parts (or amalgamation names) under study; at least 2, distinct, no part
        of the table counted twice (``core.check_parts``).
    amalgamations : dict of str -> list of str
        New parts defined as sums of parts of the composition.
    selection : ndarray of uint32
        Sorted unique row positions; row positions in any order (repeats count
        once) or a boolean mask may be assigned; an equal set of rows does not notify.
    group_column : str
        Metadata column for colours ("" = no grouping).
    sbp : ndarray of int8 or None
        Signed SBP matrix (k, D) over ``active_parts`` (read-only; ``core.check_sbp``).
        Prefer :meth:`set_sbp`; a matrix or SBP table assigned directly is checked
        the same way and gets the default balance names. A change of the active
        parts drops it.
    balance_names : list of str
        One distinct name per SBP row (``""`` assigned = the default name).
    colour_by : str
        "" to colour by ``group_column``; a balance name to colour by its value.
    metadata_version : int
        Incremented when a column is added to the metadata (e.g. a group made from a selection).
    """

    active_parts = _List(t.Unicode())
    amalgamations = _Dict()
    selection = _RowPositions()
    group_column = _Text("")
    sbp = _Partition()
    balance_names = _List(t.Unicode())
    colour_by = _Text("")
    metadata_version = _Count(0)

    #: Most entries the cache of derived data keeps (closed, clr, ilr, the views'
    #: projections and density bins, per set of parts); the least recently used go first.
    cache_size = 256
    #: Most bytes that cache keeps: enough for two sets of parts of a laboratory export
    #: (300,000 rows x 51 parts with every view), so that going back to the last set is a
    #: lookup; lower it where memory is short (the least recently used go first).
    cache_bytes = 2**30

    def __init__(
        self,
        composition: Composition,
        active_parts: Sequence[str] | None = None,
        group_column: str = "",
        **kwargs,
    ):
        if not isinstance(composition, Composition):
            raise _NotAComposition(
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
        self._sbp_for: tuple | None = None  # what the current SBP was checked against
        self._named: tuple | None = None  # (SBP key, names) last given for an SBP
        super().__init__(selection=_EMPTY.copy(), **kwargs)
        if active_parts is None:
            active_parts = composition.parts
        elif not isinstance(active_parts, str):
            active_parts = list(active_parts)
        self.active_parts = active_parts
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
    # Every rule is asked of compwidgets.core (core.rules); these validators only
    # turn its refusals into ModelError.
    def _valid_amalgamations(self, value, active: Sequence[str]) -> dict:
        """Checked amalgamations; with them, ``active`` must not count a part twice."""
        groups = dict(value)
        for name, members in groups.items():
            named = not isinstance(members, (str, bytes)) and isinstance(members, Sequence)
            if not named or not all(isinstance(m, str) for m in members):
                raise ModelError(
                    f"amalgamation {name!r}: give a list of part names, got {members!r}"
                )
        if groups:
            _checked(core.subcomp.check_amalgamations, groups, self.parts)
        groups = {k: [str(m) for m in v] for k, v in groups.items()}
        clash = [g for g in groups if g in self.parts]
        if clash:
            raise ModelError(f"amalgamation name(s) {clash} already name a part")
        # redefining an active amalgamation must not count a part twice
        active = [p for p in active if p in self.parts or p in groups]
        try:
            core.check_parts(active, self.parts, groups, count=len(active))
        except core.CompositionError as err:
            raise ModelError(
                f"with these amalgamations, {err}; change the active parts first"
            ) from None
        return groups

    @t.validate("active_parts")
    def _check_active(self, proposal):
        return _checked(core.check_parts, proposal["value"], self.parts, self.amalgamations)

    @t.validate("amalgamations")
    def _check_amalgamations(self, proposal):
        return self._valid_amalgamations(proposal["value"], self.active_parts)

    @t.validate("group_column")
    def _check_group(self, proposal):
        name = proposal["value"]
        if name and name not in self.metadata.columns:
            raise ModelError(
                f"unknown grouping column {name!r}; metadata columns: "
                f"{', '.join(map(str, self.metadata.columns))}"
            )
        return name

    @t.validate("sbp")
    def _check_sbp(self, proposal):
        value = proposal["value"]
        if value is None:
            return None
        S = _checked(core.check_sbp, value, self.active_parts, complete=False)
        S.flags.writeable = False
        self._sbp_for = _sbp_key(S, self.active_parts)
        return S

    @t.validate("balance_names")
    def _check_balance_names(self, proposal):
        names = list(proposal["value"])
        if self.sbp is None:
            if names:
                raise ModelError(f"balance names {names} need an SBP; {core.rules.NO_SBP}")
            return []
        return self._valid_names(names, self.sbp, self.active_parts)

    def _valid_names(self, names, sbp, parts) -> list[str]:
        """Checked balance names (``core.check_balance_names``), none a column of the table.

        A balance named like a part or a metadata column could not sit next to it in
        the exports (``export.ilr_frame(include_metadata=True)``, the selected-rows CSV).
        """
        names = _checked(core.check_balance_names, names, sbp, parts)
        taken = set(self.parts) | {str(c) for c in self.metadata.columns}
        clash = [n for n in names if n in taken]
        if clash:
            raise ModelError(
                f"balance name(s) {clash} are already column names of the table (parts or "
                "metadata); choose other names"
            )
        return names

    @t.validate("colour_by")
    def _check_colour_by(self, proposal):
        name = proposal["value"]
        if name and name not in self.balance_names:
            raise ModelError(f"unknown balance {name!r}; balances: {self.balance_names}")
        return name

    @t.observe("active_parts")
    def _on_active_parts(self, change):
        # An SBP is a partition of exactly the parts it was made over: other parts drop it.
        if self.sbp is None:
            return
        if self._sbp_for != _sbp_key(self.sbp, change["new"]):
            self.sbp = None
        else:  # kept: it was set over these very parts
            self._follow_names()

    @t.observe("sbp")
    def _on_sbp(self, change):
        if change["new"] is None:
            if self.balance_names:
                self.balance_names = []
        else:
            self._follow_names()

    def _follow_names(self) -> None:
        """Keep the names given for exactly this SBP over these parts; else the default names."""
        key = _sbp_key(self.sbp, self.active_parts)
        if self._named == (key, list(self.balance_names)):
            return
        names = core.balance_names(self.sbp, self.active_parts, complete=False)
        if list(self.balance_names) != names:
            self.balance_names = names

    @t.observe("balance_names")
    def _on_balance_names(self, change):
        if self.sbp is not None:
            self._named = (_sbp_key(self.sbp, self.active_parts), list(change["new"]))
        if self.colour_by and self.colour_by not in change["new"]:
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
        if isinstance(rows, (int, np.integer)) and not isinstance(rows, (bool, np.bool_)):
            rows = [rows]  # one row position
        try:
            arr = np.asarray(rows)
        except (TypeError, ValueError) as err:
            raise ModelError(f"a selection is row positions or a boolean mask ({err})") from None
        if arr.dtype == bool:
            if arr.shape != (self.n_rows,):
                raise ModelError(
                    f"a boolean selection mask needs {self.n_rows} values, got shape {arr.shape}"
                )
            return np.flatnonzero(arr).astype(np.uint32)
        if arr.size == 0:
            return _EMPTY.copy()
        if arr.ndim != 1 or not np.issubdtype(arr.dtype, np.integer):
            raise ModelError(
                "a selection is a 1-D array of integer row positions or a boolean mask; "
                f"got dtype {arr.dtype}, shape {arr.shape}"
            )
        lo, hi = int(arr.min()), int(arr.max())
        if lo < 0 or hi >= self.n_rows:
            bad = lo if lo < 0 else hi
            raise ModelError(f"row position {bad} is outside 0..{self.n_rows - 1}")
        out = arr.astype(np.uint32, copy=False)
        if np.any(out[1:] <= out[:-1]):  # unsorted or repeated: each row once, in order
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
        """Select rows by their original index labels.

        Parameters
        ----------
        labels : label or sequence of labels
            One label (a string, a number, or a tuple that is a label of the
            index) or several; repeats count once.
        mode : {"replace", "add", "remove", "intersect"}

        Raises
        ------
        ModelError
            Naming the labels that are not in the index.
        """
        single = isinstance(labels, (str, bytes)) or not pd.api.types.is_list_like(labels)
        if isinstance(labels, tuple):
            try:
                single = labels in self.index
            except (TypeError, ValueError):
                single = False
        try:
            wanted = pd.Index([labels] if single else list(labels), tupleize_cols=False)
            pos = self.index.get_indexer_for(wanted)
        except (TypeError, ValueError) as err:
            raise ModelError(f"select_labels: cannot look up {labels!r} ({err})") from None
        if (pos < 0).any():
            missing = list(dict.fromkeys(wanted[pos < 0]))
            shown = ", ".join(map(repr, missing[:5])) + (
                f" and {len(missing) - 5} more" if len(missing) > 5 else ""
            )
            raise ModelError(f"unknown row label(s) {shown}; the index has {self.n_rows} rows")
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
        if name in self.metadata.columns or name in self.parts or name in self.balance_names:
            raise ModelError(
                f"a column or balance named {name!r} exists already; choose another name"
            )
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
        sbp = _checked(core.require_sbp, self.sbp)
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
        """Set an SBP over the active parts and its balance names (all checked first).

        Parameters
        ----------
        sbp : array-like or DataFrame of shape (k, D)
            +1 numerator, -1 denominator, 0 outside; k = D - 1 for a complete
            partition, fewer rows for one still being built. A DataFrame (e.g.
            ``export.sbp_frame`` of another model) is matched to the active parts
            by its column labels and reordered to them; unknown or missing labels
            are refused by name. An array's columns are the active parts in order.
        names : sequence of str, optional
            One name per balance; ``""`` keeps the default name. Default: the
            index of an SBP table when it holds names, else the default names
            (``"num1,num2 | den1"``).

        Raises
        ------
        ModelError
            An invalid SBP or names; the model is left unchanged.
        """
        self.set_partition(sbp, self.active_parts, names)

    def set_partition(
        self,
        sbp,
        parts: Sequence[str] | None = None,
        names: Sequence[str] | None = None,
        amalgamations: dict | None = None,
    ) -> None:
        """Set the active parts, the amalgamations they need and an SBP over them at once.

        All or nothing: everything is checked before the model changes, and the
        views are notified once, of the whole change. This is how a saved
        partition (``export.load_sbp``) is applied to a model.

        Parameters
        ----------
        sbp : array-like or DataFrame of shape (k, len(parts))
            As for :meth:`set_sbp`, over ``parts`` instead of the active parts.
        parts : sequence of str, optional
            The new active parts. Default: the columns of an SBP table, else
            the current active parts.
        names : sequence of str, optional
            As for :meth:`set_sbp`.
        amalgamations : dict of str -> list of str, optional
            Amalgamations to add to the model's (e.g. those among ``parts``); one
            already defined with other members is refused.

        Raises
        ------
        ModelError
            Naming what does not fit; the model is left unchanged.
        """
        if parts is None:
            own = isinstance(sbp, pd.DataFrame) and not core._arrays.is_unlabelled(sbp.columns)
            parts = [str(c) for c in sbp.columns] if own else list(self.active_parts)
        groups = dict(self.amalgamations)
        extra = dict(amalgamations or {})
        clash = [g for g, m in extra.items() if g in groups and list(groups[g]) != list(m)]
        if clash:
            raise ModelError(
                f"amalgamation(s) {', '.join(map(str, clash))} are defined differently in this "
                "model; remove or rename them first"
            )
        groups.update(extra)
        groups = self._valid_amalgamations(groups, parts)
        parts = _checked(core.check_parts, parts, self.parts, groups)
        S = _checked(core.check_sbp, sbp, parts, complete=False)
        names = self._valid_names(_frame_names(sbp) if names is None else names, S, parts)
        S.flags.writeable = False
        with self.hold_trait_notifications():
            if groups != dict(self.amalgamations):
                self.amalgamations = groups
            if parts != list(self.active_parts):
                self.active_parts = parts
            self.sbp = S
            self._sbp_for = _sbp_key(S, parts)
            self._named = (self._sbp_for, names)
            if list(self.balance_names) != names:
                self.balance_names = names
            if self.colour_by and self.colour_by not in names:
                self.colour_by = ""

    def clear_sbp(self) -> None:
        """Remove the SBP (and its balance names)."""
        self.sbp = None

    # ------------------------------------------------------- tables of the SBP
    def sbp_frame(self) -> pd.DataFrame:
        """The signed SBP: balances as rows (index = names), active parts as columns, +1/-1/0.

        Applied to another model with :meth:`set_sbp`, it is matched by its column
        labels, so it keeps its meaning whatever the order of that model's parts.
        """
        sbp = _checked(core.require_sbp, self.sbp, self.active_parts)
        return pd.DataFrame(
            sbp.astype(int),
            index=pd.Index(list(self.balance_names), name="balance"),
            columns=pd.Index(list(self.active_parts), name="part"),
        )

    def contrast_frame(self) -> pd.DataFrame:
        """Orthonormal contrasts of the SBP (``core.sbp_basis``), shaped as :meth:`sbp_frame`.

        Each row sums to zero and has unit length; ``clr(x) @ row`` is the balance.
        """
        sbp = _checked(core.require_sbp, self.sbp, self.active_parts)
        return pd.DataFrame(
            core.sbp_basis(sbp, complete=False),
            index=pd.Index(list(self.balance_names), name="balance"),
            columns=pd.Index(list(self.active_parts), name="part"),
        )

    def ilr_frame(
        self,
        include_metadata: bool = False,
        include_selection: bool = False,
        require_complete: bool = True,
    ) -> pd.DataFrame:
        """Balances of the SBP as a DataFrame, one row per row of the table.

        Parameters
        ----------
        include_metadata : bool, default False
            Put the metadata columns (those made in this session included) first.
        include_selection : bool, default False
            Add a boolean ``"selected"`` column (after the metadata).
        require_complete : bool, default True
            Refuse a partial SBP (fewer than D-1 balances); with False a
            partial SBP gives its balances.

        Returns
        -------
        DataFrame
            Index = the table's original index; one column per balance, named as
            :attr:`balance_names`. Every row is there: rows with a missing or
            non-positive value in an active part have NaN balances.

        Raises
        ------
        ModelError
            No SBP; a partial SBP with ``require_complete``; a balance name that
            is also a metadata column (or ``"selected"``).
        """
        _checked(core.require_sbp, self.sbp, self.active_parts, complete=require_complete)
        names = list(self.balance_names)
        frame = pd.DataFrame(np.array(self.balances()), index=self.index.copy(), columns=names)
        pieces = []
        if include_metadata:
            pieces.append(self.metadata)
        if include_selection:
            pieces.append(
                pd.DataFrame({"selected": self.selected_mask().copy()}, index=frame.index)
            )
        if pieces:
            front = pd.concat(pieces, axis=1)
            clash = [c for c in front.columns if c in set(names)]
            if clash:
                raise ModelError(
                    f"balance name(s) {clash} are also metadata/selection column names; "
                    "rename the balances"
                )
            frame = pd.concat([front, frame], axis=1)
        return frame

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
