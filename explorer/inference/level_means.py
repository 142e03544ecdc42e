"""The means a planned comparison reads: level means, least-squares means or adjusted means.

One factor alone: the level means, their covariance ``MS_E diag(1/n)`` on the residual
df. Several factors or blocks: the least-squares means of the factor with the covariance
the fit gives them (``MS_E L (X'X)^-1 L'``, full-model residual mean square). With
covariates: the adjusted means at the covariate means, same form. Means are kept on the
shifted scale of the fit (``shifted``) so that differences and contrasts lose no digits
to the response offset.

References
----------
Searle, S. R., Speed, F. M. and Milliken, G. A. (1980). Population marginal means in the
linear model. The American Statistician 34(4), 216-221.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..engine.errors import DesignError, ExplorerError, closest_names
from ..engine.results import Results

__all__ = ["LevelMeans", "level_means", "check_factor"]


@dataclass(frozen=True, kw_only=True, eq=False)
class LevelMeans:
    """Means of one factor's levels with their covariance and error df.

    ``kind`` says which means these are ('level means', 'least-squares means',
    'adjusted means'). ``estimate = shifted + offset``.
    """

    factor: str
    labels: tuple[str, ...]
    shifted: np.ndarray
    offset: float
    covariance: np.ndarray
    df: float
    n: np.ndarray
    kind: str

    @property
    def estimate(self) -> np.ndarray:
        return self.shifted + self.offset

    def index(self, level: str, what: str = "level") -> int:
        """Position of ``level``; a clear error naming the levels when it is not one of them."""
        if level in self.labels:
            return self.labels.index(level)
        key = str(level)
        if key in self.labels:
            return self.labels.index(key)
        near = closest_names(key, self.labels)
        hint = f" Did you mean {near[0]!r}?" if near else ""
        raise ExplorerError(f"{what} {level!r} is not a level of {self.factor!r} with kept rows "
                            f"(levels: {list(self.labels)}).{hint}")


def check_factor(results: Results, factor: str | None) -> str:
    """The factor to compare (the first treatment factor by default); refuse names outside the model."""
    spec = results.spec
    f = spec.factors[0] if factor is None else factor
    if f not in spec.factors:
        near = closest_names(str(f), spec.factors)
        hint = f" Did you mean {near[0]!r}?" if near else ""
        raise ExplorerError(f"{f!r} is not a treatment factor of this study (factors: {list(spec.factors)}).{hint}")
    return f


def level_means(results: Results, factor: str | None = None) -> LevelMeans:
    """Means of ``factor``'s levels for planned comparisons (see module docstring)."""
    f = check_factor(results, factor)
    spec = results.spec
    if spec.is_oneway:
        gs = results.groups
        ms = float(results.ms_resid or 0.0)
        n = np.asarray(gs.n, dtype=float)
        return LevelMeans(factor=f, labels=tuple(gs.labels), shifted=np.asarray(gs.mean, dtype=float),
                          offset=float(gs.offset), covariance=np.diag(ms / n), df=float(results.df_resid),
                          n=np.asarray(gs.n), kind="level means")
    mm = results.marginal_means.get(f)
    if mm is None:
        raise DesignError(f"{f!r} has no least-squares means in this model (random or nested factors have none); "
                          "planned comparisons read fixed factors only")
    shifted = mm.shifted_estimate if mm.shifted_estimate is not None else mm.estimate - mm.offset
    kind = "adjusted means" if getattr(spec, "covariates", ()) else "least-squares means"
    return LevelMeans(factor=f, labels=tuple(mm.labels), shifted=np.asarray(shifted, dtype=float),
                      offset=float(mm.offset), covariance=np.asarray(mm.covariance, dtype=float),
                      df=float(mm.df), n=np.asarray(mm.n), kind=kind)
