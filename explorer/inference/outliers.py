"""Outlier screens on the residuals of the fitted model. They flag rows; they never edit.

Each screen returns the flagged row ids, the rule's threshold and the per-row score,
so that the user can look at the rows and decide, with a reason, whether any should
be left out. A flag is not a reason.

* Studentized residuals with a Bonferroni outlier test: externally studentized
  residuals ``t_i = e_i / sqrt(MSE_(i) (1 - h_i))`` on ``N - p - 1`` df, two-sided
  p-values multiplied by ``N`` (Cook and Weisberg 1982, sec. 2.2; Weisberg 2005, 9.1).
* Grubbs' two-sided test for one outlier among the residuals (Grubbs 1969;
  NIST/SEMATECH e-Handbook 1.3.5.17.1): ``G = max |e_i - ebar| / s`` against
  ``((N-1)/sqrt(N)) sqrt(t^2 / (N - 2 + t^2))`` with ``t`` the upper ``alpha/(2N)``
  point of t on ``N - 2`` df. Not run for fewer than 7 residuals (the Handbook advises
  against six or fewer).
* Robust z rule: ``z_i = 0.6745 (e_i - median e) / MAD``, flagged when ``|z_i| > 3.5``
  (Iglewicz and Hoaglin 1993).

References
----------
Cook, R. D. and Weisberg, S. (1982). Residuals and Influence in Regression. Chapman & Hall.
Grubbs, F. E. (1969). Procedures for detecting outlying observations in samples.
Technometrics 11, 1-21.
Iglewicz, B. and Hoaglin, D. C. (1993). How to Detect and Handle Outliers. ASQC.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, ClassVar

import numpy as np
import pandas as pd

from ..engine.distributions import t_ppf, t_two_sided_p
from ..engine.errors import ExplorerError
from ..engine.numerics import read_only_copy
from ..engine.tables import html_table
from ..formatting import result_frame, show_stat
from ..rendering import html_repr
from .oneway_inputs import row_sample_notes
from .result_extras import WithExtras

if TYPE_CHECKING:
    from ..engine.results import Results

__all__ = [
    "GRUBBS_MIN_N",
    "OutlierScreen",
    "bonferroni_outlier_test",
    "grubbs_critical",
    "grubbs_test",
    "robust_z_screen",
]

#: Grubbs' test is not run on fewer residuals than this (NIST/SEMATECH e-Handbook 1.3.5.17.1).
GRUBBS_MIN_N = 7


@dataclass(frozen=True, kw_only=True, eq=False)
class OutlierScreen(WithExtras):
    """Rows a screen flags, the rule's threshold and the score of every kept row.

    ``scores`` align with ``row_ids`` (all kept rows); ``flagged`` lists the ids whose
    score passes the threshold. ``ran`` is False when the screen's guard stopped it
    (see ``notes``). Extras of each screen are typed fields (``None`` elsewhere): the
    Bonferroni test's ``df`` (of each external studentized residual), ``n_params``
    (fitted parameters) and ``smallest_pvalue`` (the smallest Bonferroni-adjusted p);
    Grubbs' ``statistic`` (G) and ``alpha``; the robust z screen's ``median`` and ``mad``
    of the residuals.
    """

    method: str
    rule: str
    threshold: float | None
    row_ids: np.ndarray
    scores: np.ndarray
    flagged: tuple[object, ...]
    ran: bool = True
    notes: tuple[str, ...] = field(default=())
    df: int | None = None
    n_params: int | None = None
    smallest_pvalue: float | None = None
    statistic: float | None = None
    alpha: float | None = None
    median: float | None = None
    mad: float | None = None

    EXTRAS: ClassVar[tuple[tuple[str, str], ...]] = (
        ("df", "df"), ("fitted means", "n_params"), ("smallest Bonferroni p", "smallest_pvalue"), ("G", "statistic"),
        ("alpha", "alpha"), ("median", "median"), ("MAD", "mad"))

    def to_frame(self) -> pd.DataFrame:
        """Flagged rows with their scores (empty when nothing is flagged)."""
        ids = list(self.flagged)
        pos = {r: i for i, r in enumerate(self.row_ids.tolist())}
        return result_frame({"row": ids, "score": [float(self.scores[pos[r]]) for r in ids]})

    @html_repr
    def _repr_html_(self) -> str:
        cap = f"{self.method}: {self.rule} (threshold {show_stat(self.threshold)}); {len(self.flagged)} row(s) flagged"
        return html_table(self.to_frame(), cap, self.notes)


def _flag(row_ids: np.ndarray, mask: np.ndarray, order_by: np.ndarray) -> tuple[object, ...]:
    idx = np.flatnonzero(mask)
    idx = idx[np.argsort(-np.abs(order_by[idx]), kind="stable")]
    return tuple(row_ids[idx].tolist())


def bonferroni_outlier_test(results: Results, *, alpha: float = 0.05) -> OutlierScreen:
    """Externally studentized residuals; flag rows whose Bonferroni p-value is below ``alpha``.

    Parameters
    ----------
    results : Results
        The analysis of any model the engines fit.
    alpha : float, default 0.05
        Family-wise level over the N rows.

    Returns
    -------
    OutlierScreen
        The score of every kept row, the threshold and the rows that pass it (flagged
        for a look, never left out). ``df``, ``n_params`` and ``smallest_pvalue`` are set.

    Notes
    -----
    The threshold is the ``|t|`` above which a row is flagged, ``t_(1 - alpha/(2N))``
    on ``N - p - 1`` df (p = number of fitted means). Rows with leverage 1 (a level with
    one observation) have no studentized residual (score NaN, never flagged).

    References
    ----------
    Cook, R. D. and Weisberg, S. (1982). Residuals and Influence in Regression. Chapman &
    Hall, sec. 2.2.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> screen = ex.stats.bonferroni_outlier_test(results)
    >>> screen.flagged, round(screen.smallest_pvalue, 3)
    ((), 1.0)
    """
    if not 0 < alpha < 1:
        raise ExplorerError(f"alpha must be between 0 and 1, not {alpha!r}")
    fit = results.fit
    e = np.asarray(fit.residuals, dtype=float)
    h = np.asarray(fit.leverage, dtype=float)
    n = len(e)
    p_fit = n - results.df_resid
    df = results.df_resid - 1
    notes: list[str] = []
    rule = f"|studentized residual| above the t quantile at alpha/(2N), N = {n}"
    if df < 1 or not (results.ms_resid or 0) > 0:
        return OutlierScreen(method="studentized residuals (Bonferroni)", rule=rule, threshold=None,
                             row_ids=fit.row_ids, scores=read_only_copy(np.full(n, np.nan)), flagged=(), ran=False,
                             notes=("Not run: too few residual df or a zero residual mean square.",))
    sse = float(results.ms_resid or 0.0) * results.df_resid
    with np.errstate(divide="ignore", invalid="ignore"):
        r2 = e * e / (1 - h)
        s2_i = (sse - r2) / df
        t = np.where(h < 1, e / np.sqrt(s2_i * (1 - h)), np.nan)
    if np.any(h >= 1):
        notes.append("Rows alone in their level have leverage 1 and no studentized residual.")
    crit = -float(t_ppf(alpha / (2 * n), df))
    t_max = float(np.max(np.abs(np.nan_to_num(t))))
    p_min = min(1.0, float(n * t_two_sided_p(t_max, df)))
    mask = np.isfinite(t) & (np.abs(np.nan_to_num(t)) > crit)
    return OutlierScreen(
        method="studentized residuals (Bonferroni)", rule=rule, threshold=crit, row_ids=fit.row_ids,
        scores=read_only_copy(t), flagged=_flag(fit.row_ids, mask, np.nan_to_num(t)),
        df=int(df), n_params=int(p_fit), smallest_pvalue=p_min,
        notes=tuple(notes) + row_sample_notes(results),
    )


def grubbs_critical(n: int, alpha: float = 0.05) -> float:
    """Two-sided Grubbs critical value for ``n`` observations.

    Parameters
    ----------
    n : int
        Number of observations (at least 3).
    alpha : float, default 0.05
        Level of the test.

    Returns
    -------
    float
        ``(n - 1) / sqrt(n) sqrt(t^2 / (n - 2 + t^2))`` with ``t`` the upper
        ``alpha / (2n)`` quantile of t on ``n - 2`` df.

    References
    ----------
    NIST/SEMATECH e-Handbook of Statistical Methods, sec. 1.3.5.17.1 (Grubbs' test).
    Grubbs, F. E. (1969). Technometrics 11, 1-21.

    Examples
    --------
    >>> import explorer as ex
    >>> round(ex.stats.grubbs_critical(20), 4)
    2.7082
    """
    if n < 3:
        raise ExplorerError(f"Grubbs' critical value needs at least 3 observations, not {n}")
    t = -t_ppf(alpha / (2 * n), n - 2)
    return float((n - 1) / np.sqrt(n) * np.sqrt(t * t / (n - 2 + t * t)))


def grubbs_test(results: Results, *, alpha: float = 0.05) -> OutlierScreen:
    """Grubbs' two-sided test for a single outlier among the residuals (one pass, not repeated).

    Parameters
    ----------
    results : Results
        The analysis (at least 7 residuals).
    alpha : float, default 0.05
        Level of the test.

    Returns
    -------
    OutlierScreen
        The score of every kept row, the threshold and the rows that pass it (flagged
        for a look, never left out). ``statistic`` (G) and ``alpha`` are set.

    Notes
    -----
    Scores are ``|e_i - ebar| / s`` (s with N - 1 df). Only the most extreme row can be
    flagged. The residuals of a k-level fit have N - k df, not N - 1; with few rows per
    level the test is approximate.

    References
    ----------
    Grubbs, F. E. (1969). Procedures for detecting outlying observations in samples.
    Technometrics 11, 1-21.
    NIST/SEMATECH e-Handbook of Statistical Methods, sec. 1.3.5.17.1.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> screen = ex.stats.grubbs_test(results)
    >>> round(screen.statistic, 3), round(screen.threshold, 3), screen.flagged
    (1.518, 2.412, ())
    """
    fit = results.fit
    e = np.asarray(fit.residuals, dtype=float)
    n = len(e)
    rule = "largest |residual - mean| / SD above the two-sided Grubbs critical value"
    if n < GRUBBS_MIN_N:
        return OutlierScreen(method="Grubbs (two-sided)", rule=rule, threshold=None, row_ids=fit.row_ids,
                             scores=read_only_copy(np.full(n, np.nan)), flagged=(), ran=False,
                             notes=(f"Not run: {n} residuals; Grubbs' test needs at least {GRUBBS_MIN_N}.",))
    sd = float(np.std(e, ddof=1))
    if not sd > 0:
        return OutlierScreen(method="Grubbs (two-sided)", rule=rule, threshold=None, row_ids=fit.row_ids,
                             scores=read_only_copy(np.full(n, np.nan)), flagged=(), ran=False,
                             notes=("Not run: every residual is zero.",))
    z = np.abs(e - e.mean()) / sd
    crit = grubbs_critical(n, alpha)
    top = int(np.argmax(z))
    mask = np.zeros(n, dtype=bool)
    mask[top] = z[top] > crit
    return OutlierScreen(method="Grubbs (two-sided)", rule=rule, threshold=crit, row_ids=fit.row_ids,
                         scores=read_only_copy(z), flagged=_flag(fit.row_ids, mask, z),
                         statistic=float(z[top]), alpha=alpha, notes=row_sample_notes(results))


def robust_z_screen(results: Results, *, cutoff: float = 3.5) -> OutlierScreen:
    """Modified z-scores of the residuals from the median and the MAD.

    Parameters
    ----------
    results : Results
        The analysis of any model the engines fit.
    cutoff : float, default 3.5
        Rows with ``|0.6745 (e - median) / MAD|`` above it are flagged.

    Returns
    -------
    OutlierScreen
        The score of every kept row, the threshold and the rows that pass it (flagged
        for a look, never left out). ``median`` and ``mad`` are set.

    References
    ----------
    Iglewicz, B. and Hoaglin, D. C. (1993). How to Detect and Handle Outliers. ASQC.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> screen = ex.stats.robust_z_screen(results)
    >>> screen.flagged, round(screen.mad, 3)
    ((), 0.2)
    """
    if not cutoff > 0:
        raise ExplorerError(f"cutoff must be positive, not {cutoff!r}")
    fit = results.fit
    e = np.asarray(fit.residuals, dtype=float)
    med = float(np.median(e))
    mad = float(np.median(np.abs(e - med)))
    rule = "|0.6745 (residual - median) / MAD| above the cutoff"
    if not mad > 0:
        return OutlierScreen(method="robust z (median/MAD)", rule=rule, threshold=cutoff, row_ids=fit.row_ids,
                             scores=read_only_copy(np.full(len(e), np.nan)), flagged=(), ran=False,
                             notes=("Not run: at least half the residuals are equal, so the MAD is zero.",))
    z = 0.6745 * (e - med) / mad
    return OutlierScreen(method="robust z (median/MAD)", rule=rule, threshold=cutoff, row_ids=fit.row_ids,
                         scores=read_only_copy(z), flagged=_flag(fit.row_ids, np.abs(z) > cutoff, z),
                         median=med, mad=mad, notes=row_sample_notes(results))
