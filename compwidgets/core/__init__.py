"""The compositional maths of compwidgets: pure numpy / scipy / pandas.

Every function takes one composition of shape (D,) or a matrix (n, D) as an
array-like; given a DataFrame it returns a DataFrame with the same index.
Every variance uses ddof = 1 (:data:`DDOF`). Log-ratio functions raise
:class:`CompositionError` (a ``ValueError``) naming the offending rows and
columns for zero, negative or non-finite input, never returning NaN.
"""

from . import (
    discriminant,
    geometry,
    outliers,
    principal,
    regions,
    rules,
    separation,
    summary,
    ternary,
    tree,
)
from ._arrays import CompositionError
from .biplot import (
    Biplot,
    clr_biplot,
    composition_biplot,
    link_length,
    logratio_sd,
    ray_associations,
)
from .operations import (
    aitchison_distance,
    aitchison_inner,
    aitchison_norm,
    closure,
    perturb,
    power,
)
from .principal import principal_balances, ward_sbp
from .rules import check_balance_names, check_parts, check_sbp, require_sbp
from .sbp import SBPError, balance_names, balances, pivot_sbp, sbp_basis, validate_sbp
from .stats import DDOF, center, clr_covariance, total_variance, variation_matrix
from .subcomp import amalgamate, subcomposition
from .transforms import alr, alr_inv, clr, clr_inv, default_basis, ilr, ilr_inv
from .zeros import (
    DEFAULT_FRACTION,
    multiplicative_replacement,
    multiplicative_replacement_rows,
)

__all__ = [
    "Biplot",
    "DDOF",
    "DEFAULT_FRACTION",
    "CompositionError",
    "SBPError",
    "aitchison_distance",
    "aitchison_inner",
    "aitchison_norm",
    "alr",
    "alr_inv",
    "amalgamate",
    "balance_names",
    "balances",
    "center",
    "check_balance_names",
    "check_parts",
    "check_sbp",
    "closure",
    "clr",
    "clr_biplot",
    "composition_biplot",
    "clr_covariance",
    "clr_inv",
    "default_basis",
    "ilr",
    "ilr_inv",
    "link_length",
    "logratio_sd",
    "multiplicative_replacement",
    "multiplicative_replacement_rows",
    "perturb",
    "pivot_sbp",
    "power",
    "principal_balances",
    "ray_associations",
    "require_sbp",
    "sbp_basis",
    "subcomposition",
    "total_variance",
    "validate_sbp",
    "variation_matrix",
    "ward_sbp",
    # submodules
    "discriminant",
    "geometry",
    "outliers",
    "principal",
    "regions",
    "rules",
    "separation",
    "summary",
    "ternary",
    "tree",
]
