"""Fast tail probabilities and quantiles of the F and t distributions.

Thin wrappers over ``scipy.special`` ufuncs (``fdtrc``, ``stdtr``, ``stdtrit``): the same
numbers as ``scipy.stats.f.sf`` / ``t.sf`` / ``t.ppf`` without the per-call overhead of
the distribution objects, which dominates a recompute after one edit. Upper tails come
from survival functions, never ``1 - cdf``.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy import special

ArrayOrFloat = Any  # a float or an array of floats (ufunc inputs broadcast)

__all__ = ["f_sf", "t_sf", "t_ppf", "t_two_sided_p"]


def f_sf(x: ArrayOrFloat, dfn: ArrayOrFloat, dfd: ArrayOrFloat) -> Any:
    """Upper-tail probability P(F > x) of the F(dfn, dfd) distribution."""
    if type(x) is float:  # one statistic: clip without an array (NaN stays NaN, as np.maximum keeps it)
        return special.fdtrc(dfn, dfd, 0.0 if x < 0.0 else x)
    return special.fdtrc(dfn, dfd, np.maximum(x, 0.0))


def t_sf(x: ArrayOrFloat, df: ArrayOrFloat) -> Any:
    """Upper-tail probability P(T > x) of Student's t with ``df`` degrees of freedom."""
    return special.stdtr(df, -np.asarray(x, dtype=float))


def t_two_sided_p(x: ArrayOrFloat, df: ArrayOrFloat) -> Any:
    """Two-sided p-value 2 P(T > |x|)."""
    return 2.0 * special.stdtr(df, -np.abs(np.asarray(x, dtype=float)))


def t_ppf(q: ArrayOrFloat, df: ArrayOrFloat) -> Any:
    """Quantile of Student's t (``q`` in (0, 1))."""
    return special.stdtrit(df, q)
