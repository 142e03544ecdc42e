"""Least-squares (marginal) means of a factor and Tukey-Kramer comparisons of them.

The least-squares mean of level i of factor A is the model's fitted cell mean
averaged with equal weight over the levels of every other factor and block (Searle,
Speed and Milliken 1980). Under sum-to-zero coding on a complete grid of levels every
other term averages to zero, so it is ``b_0 + c_A(i)' b_A`` (``c_A(i)`` the level's
row of the contrast matrix) and its covariance is ``L V L'`` with ``V`` the
coefficient covariance. With balanced data it equals the raw level mean; with
unbalanced data it removes the imbalance of the other factors.

Pairs are compared with the Tukey-Kramer procedure on the model's residual df:
``q = |d| sqrt(2) / se(d)`` referred to the studentized range with k means
(Tukey 1953; Kramer 1956; Hayter 1984 for its conservativeness).

References
----------
Searle, S. R., Speed, F. M. and Milliken, G. A. (1980). Population marginal means in
the linear model: an alternative to least squares means. The American Statistician
34(4), 216-221.
Kramer, C. Y. (1956). Extension of multiple range tests to group means with unequal
numbers of replications. Biometrics 12, 307-310.
Hayter, A. J. (1984). A proof of the conjecture that the Tukey-Kramer multiple
comparisons procedure is conservative. Annals of Statistics 12, 61-75.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..formatting import result_frame
from ..rendering import html_repr
from .cellfit import CellFit
from .distributions import t_ppf
from .pairwise import PairwiseTable, simultaneous_pairs
from .tables import html_table

__all__ = ["MarginalMeans", "marginal_means"]


@dataclass(frozen=True, kw_only=True, eq=False)
class MarginalMeans:
    """Least-squares means of one factor's levels (original scale) with pooled-SD intervals.

    ``covariance`` is the estimates' covariance matrix (residual mean square included);
    ``raw_mean`` and ``n`` are the plain level means and counts, for comparison.
    ``offset`` is the response offset taken out before the fit: ``estimate - offset``
    computed on the shifted scale is kept in ``shifted_estimate``, and differences are
    taken from it so that a large offset costs no digits.
    """

    factor: str
    labels: tuple[str, ...]
    estimate: np.ndarray
    se: np.ndarray
    ci_low: np.ndarray
    ci_high: np.ndarray
    covariance: np.ndarray
    raw_mean: np.ndarray
    n: np.ndarray
    df: float
    confidence: float = 0.95
    notes: tuple[str, ...] = ()
    offset: float = 0.0
    shifted_estimate: np.ndarray | None = None

    def compare(self, confidence: float | None = None) -> PairwiseTable:
        """Tukey-Kramer simultaneous comparisons of every pair of these means.

        The standard error of each difference comes from the means' covariance, so the
        comparisons respect the imbalance of the other factors.
        """
        var = np.diag(self.covariance)
        se_diff = np.sqrt(np.maximum(var[:, None] + var[None, :] - 2 * self.covariance, 0.0))
        conf = self.confidence if confidence is None else confidence
        if self.shifted_estimate is None:
            est, offset = self.estimate, 0.0
        else:
            est, offset = self.shifted_estimate, self.offset
        return simultaneous_pairs(self.labels, est, se_diff, self.df, confidence=conf, method="tukey", offset=offset)

    def to_frame(self) -> pd.DataFrame:
        pct = f"{self.confidence:.0%}"
        return result_frame(
            {
                "level": list(self.labels), "n": self.n, "raw mean": self.raw_mean,
                "marginal mean": self.estimate, "standard error": self.se,
                f"{pct} CI low": self.ci_low, f"{pct} CI high": self.ci_high,
            }
        )

    @html_repr
    def _repr_html_(self) -> str:
        return html_table(self.to_frame(), f"Marginal (least-squares) means of {self.factor}", self.notes)


def marginal_means(
    fit: CellFit,
    factor: str,
    labels: tuple[str, ...],
    raw_mean: np.ndarray,
    n: np.ndarray,
    ms_resid: float,
    confidence: float = 0.95,
    df: float | None = None,
) -> MarginalMeans:
    """Least-squares means of ``factor`` from a sum-to-zero coded cell fit (see module docstring).

    ``ms_resid`` and ``df`` are the error mean square and its df (the residual by default;
    in models with random terms, the factor's own error term).
    """
    design = fit.design
    contrast = design.contrasts[factor]
    L = np.zeros((len(labels), design.n_params))
    L[:, 0] = 1.0
    L[:, design.slices[(factor,)]] = contrast
    shifted = L @ fit.coef
    est = shifted + fit.stats.offset
    cov = ms_resid * (L @ fit.cov_unscaled @ L.T)
    se = np.sqrt(np.maximum(np.diag(cov), 0.0))
    dfe = fit.df_resid if df is None else df
    half = t_ppf(0.5 + confidence / 2, dfe) * se
    return MarginalMeans(
        factor=factor, labels=labels, estimate=est, se=se, ci_low=est - half, ci_high=est + half,
        covariance=cov, raw_mean=raw_mean, n=n, df=dfe, confidence=confidence,
        offset=float(fit.stats.offset), shifted_estimate=shifted,
    )
