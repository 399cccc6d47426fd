"""A scikit-learn transformer from compositions to balances (ilr coordinates of an SBP).

Example (an invented table of two groups that differ in ln(CaO / MgO)):

>>> import numpy as np, pandas as pd
>>> from sklearn.pipeline import make_pipeline
>>> from sklearn.discriminant_analysis import LinearDiscriminantAnalysis
>>> rng = np.random.default_rng(0)
>>> parts = ["SiO2", "MgO", "CaO"]
>>> logs = rng.normal(0, 0.1, size=(40, 3)) + np.r_[[[2, 0, 0]] * 20, [[2, 0, 1]] * 20]
>>> table = pd.DataFrame(np.exp(logs), columns=parts).assign(group=["a"] * 20 + ["b"] * 20)
>>> sbp = [[1, -1, -1], [0, 1, -1]]  # SiO2 against MgO, CaO; then MgO against CaO
>>> pipe = make_pipeline(BalanceTransformer(sbp, parts), LinearDiscriminantAnalysis())
>>> pipe.fit(table[parts], table["group"]).score(table[parts], table["group"])
1.0
"""

from __future__ import annotations

import inspect
from collections.abc import Sequence

import numpy as np
import pandas as pd
from sklearn.base import BaseEstimator, TransformerMixin
from sklearn.utils.validation import check_array, check_is_fitted

from . import core
from .core._arrays import is_unlabelled as _unlabelled
from .core._arrays import match_columns
from .core.sbp import pivot_sbp

__all__ = ["BalanceTransformer", "TransformerInputError", "pivot_sbp"]


class TransformerInputError(core.CompositionError):
    """Input that scikit-learn's own checks refuse (shape, feature names, non-numbers).

    The same message as scikit-learn's ``ValueError``, raised as a
    :class:`compwidgets.core.CompositionError` (itself a ``ValueError``).
    """


def _sklearn_checked(check, *args, **kwargs):
    try:
        return check(*args, **kwargs)
    except core.CompositionError:
        raise
    except ValueError as err:
        raise TransformerInputError(str(err)) from err


try:  # scikit-learn >= 1.6
    from sklearn.utils.validation import validate_data as _validate_data
except ImportError:  # pragma: no cover - older scikit-learn

    def _validate_data(estimator, X, reset=True, **kw):
        if "ensure_all_finite" in kw:
            kw["force_all_finite"] = kw.pop("ensure_all_finite")
        return estimator._validate_data(X, reset=reset, **kw)


#: Name of check_array's "reject NaN/inf" option (renamed in scikit-learn 1.6).
_FINITE = (
    "ensure_all_finite"
    if "ensure_all_finite" in inspect.signature(check_array).parameters
    else "force_all_finite"
)


class BalanceTransformer(TransformerMixin, BaseEstimator):
    """Balances of compositions for an SBP (Egozcue & Pawlowsky-Glahn 2005).

    Parameters
    ----------
    sbp : array-like or DataFrame of shape (D-1, D), optional
        A complete SBP (+1 numerator, -1 denominator, 0 outside). A DataFrame
        names its parts in its columns. Default: the pivot SBP (part 1 vs the
        rest, part 2 vs the parts after it, ...), whose basis is
        ``core.default_basis``.
    parts : sequence of str, optional
        The parts, in the SBP's column order. With a DataFrame ``X`` the
        columns are picked by these names (other columns are ignored);
        with an array ``X`` its D columns are these parts in this order.
        Default: the SBP DataFrame's columns, else all columns of ``X``.
    names : sequence of str, optional
        Output feature names; default ``core.balance_names``.

    Attributes
    ----------
    sbp_ : ndarray of int8, shape (D-1, D)
    basis_ : ndarray of shape (D-1, D)
        Orthonormal contrasts (``core.sbp_basis``).
    parts_ : list of str
    columns_ : ndarray of int
        Positions of ``parts_`` among the input columns.
    names_ : list of str
    n_features_in_ : int
    feature_names_in_ : ndarray of str
        Only when fitted on a DataFrame with string column names.

    Notes
    -----
    Every cell of the parts must be strictly positive (log-ratios); zeros
    must be replaced first (``core.multiplicative_replacement``). Rows are
    closed implicitly: balances do not depend on the scale of a row.
    ``inverse_transform`` gives closed compositions (rows summing to 1) of
    ``parts_`` only.
    """

    def __init__(self, sbp=None, parts: Sequence[str] | None = None, names=None):
        self.sbp = sbp
        self.parts = parts
        self.names = names

    def __sklearn_tags__(self):
        tags = super().__sklearn_tags__()
        tags.input_tags.positive_only = True
        return tags

    @classmethod
    def from_model(cls, model) -> BalanceTransformer:
        """A transformer with the model's (complete) SBP, active parts and balance names.

        ``X`` then needs columns named as ``model.active_parts`` (e.g.
        ``pd.DataFrame(model.closed(), columns=model.active_parts)``).
        """
        try:
            core.require_sbp(model.sbp, model.active_parts, complete=True)
        except core.SBPError as err:
            raise core.SBPError(f"the model's SBP cannot make a transformer: {err}") from None
        return cls(
            sbp=np.array(model.sbp, dtype=np.int8),
            parts=list(model.active_parts),
            names=list(model.balance_names),
        )

    # ------------------------------------------------------------------ fit
    def _resolve_parts(self, n_features: int) -> tuple[list[str], np.ndarray]:
        seen = getattr(self, "feature_names_in_", None)
        seen = None if seen is None else [str(c) for c in seen]
        if self.parts is not None:
            if isinstance(self.parts, str):
                raise core.SBPError("parts must be a list of part names, not one string")
            parts = [str(p) for p in self.parts]
        elif isinstance(self.sbp, pd.DataFrame) and not _unlabelled(self.sbp.columns):
            parts = [str(c) for c in self.sbp.columns]
        else:
            parts = seen if seen is not None else [f"x{j + 1}" for j in range(n_features)]
        if seen is not None:
            missing = [p for p in parts if p not in seen]
            if missing:
                raise core.SBPError(f"part(s) {missing} are not columns of X; columns: {seen}")
        elif len(parts) != n_features:
            raise core.SBPError(f"{len(parts)} parts named but X has {n_features} columns")
        parts = core.check_parts(parts, parts, what="BalanceTransformer parts")
        if seen is not None:
            return parts, np.array([seen.index(p) for p in parts], dtype=int)
        return parts, np.arange(n_features)

    def _resolve_sbp(self, parts: list[str]) -> np.ndarray:
        if self.sbp is None:
            return pivot_sbp(len(parts))
        # a DataFrame is matched to the parts by its column labels (core.check_sbp)
        return core.check_sbp(self.sbp, parts, complete=True)

    def _frame(self, X, values: np.ndarray) -> pd.DataFrame:
        """The parts of ``X`` as a DataFrame (so core errors name rows and parts).

        Negative cells raise first, in scikit-learn's wording for estimators
        that need non-negative data; ``core`` then rejects zeros and NaN.
        """
        index = X.index if isinstance(X, pd.DataFrame) else pd.RangeIndex(values.shape[0])
        frame = pd.DataFrame(values[:, self.columns_], index=index, columns=self.parts_)
        negative = frame.to_numpy() < 0
        if negative.any():
            r, c = np.argwhere(negative)[0]
            raise core.CompositionError(
                f"Negative values in data passed to {type(self).__name__}: "
                f"{int(negative.sum())} cell(s), first row {index[r]!r}, part "
                f"{self.parts_[c]!r} = {float(frame.iat[r, c])!r}; compositions must be "
                "strictly positive"
            )
        return frame

    def fit(self, X, y=None):
        """Check the SBP and the parts against ``X`` (strictly positive compositions)."""
        values = _sklearn_checked(
            _validate_data, self, X, reset=True, ensure_all_finite=False, ensure_min_features=2
        )
        self.parts_, self.columns_ = self._resolve_parts(values.shape[1])
        self.sbp_ = self._resolve_sbp(self.parts_)
        self.names_ = core.check_balance_names(self.names, self.sbp_, self.parts_)
        self.basis_ = core.sbp_basis(self.sbp_)
        core.balances(self._frame(X, values), self.sbp_)  # raises naming bad rows/parts
        return self

    # ------------------------------------------------------------ transform
    def transform(self, X) -> np.ndarray:
        """Balances (n, D-1) of ``X``: ``core.balances`` with ``sbp_``."""
        check_is_fitted(self, "sbp_")
        values = _sklearn_checked(_validate_data, self, X, reset=False, ensure_all_finite=False)
        B = core.balances(self._frame(X, values), self.sbp_, names=self.names_)
        return B.to_numpy(dtype=float)

    def inverse_transform(self, X):
        """Closed compositions of ``parts_`` from balances: ``core.ilr_inv`` with ``basis_``.

        A DataFrame input gives a DataFrame (same index, columns ``parts_``); its
        columns are matched by label to the balance names ``names_`` (reordered;
        unknown or missing names refused), unless they are unnamed (``0..k-1``).
        """
        check_is_fitted(self, "sbp_")
        index = X.index if isinstance(X, pd.DataFrame) else None
        if isinstance(X, pd.DataFrame) and not _unlabelled(X.columns):
            X = match_columns(X, self.names_, "inverse_transform", kind="balance")
        Y = _sklearn_checked(check_array, X, dtype=float, **{_FINITE: False})  # core names rows
        k = self.sbp_.shape[0]
        if Y.shape[1] != k:
            raise core.CompositionError(
                f"inverse_transform: {Y.shape[1]} columns given; this SBP has {k} balances"
            )
        out = core.ilr_inv(Y, self.basis_, parts=self.parts_)
        if index is not None:
            return pd.DataFrame(out, index=index, columns=self.parts_)
        return out

    def get_feature_names_out(self, input_features=None) -> np.ndarray:
        """The balance names ``names_`` (object array)."""
        check_is_fitted(self, "sbp_")
        if input_features is not None:
            given = [str(f) for f in input_features]
            seen = getattr(self, "feature_names_in_", None)
            expected = list(seen) if seen is not None else None
            if expected is not None and given != [str(c) for c in expected]:
                raise TransformerInputError("input_features is not equal to feature_names_in_")
            if expected is None and len(given) != self.n_features_in_:
                raise TransformerInputError(
                    f"input_features should have length equal to number of features "
                    f"({self.n_features_in_}), got {len(given)}"
                )
        return np.asarray(self.names_, dtype=object)
