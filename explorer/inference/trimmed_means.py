"""Trimmed-means one-way analysis (Wilcox): a robust alternative to leaving points out.

For each level with n_j rows, g_j = floor(gamma n_j) rows are trimmed from each end
(gamma = 0.2 by default) and h_j = n_j - 2 g_j remain. With the trimmed mean ybar_tj and
the winsorized variance s_wj^2 (the g_j smallest values set to the next one up, the g_j
largest to the next one down, sample variance with n_j - 1), Wilcox's heteroscedastic
test of equal trimmed means is

    d_j = (n_j - 1) s_wj^2 / (h_j (h_j - 1)),  w_j = 1/d_j,  U = sum w_j,
    Xt = sum w_j ybar_tj / U,
    A = sum w_j (ybar_tj - Xt)^2 / (k - 1),
    B = 2 (k - 2)/(k^2 - 1) sum (1 - w_j/U)^2 / (h_j - 1),
    F = A / (1 + B) on k - 1 and 1 / (3/(k^2 - 1) sum (1 - w_j/U)^2/(h_j - 1)) df.

With two levels it is Yuen's (1974) trimmed t test (F = t^2, same df). Every row stays
in the data: extreme values lose their pull through the trimming, instead of being
left out by hand.

References
----------
Wilcox, R. R. (2017). Introduction to Robust Estimation and Hypothesis Testing, 4th ed.,
sec. 7.1 (the heteroscedastic one-way test for trimmed means, Wilcox 1995).
Yuen, K. K. (1974). The two-sample trimmed t for unequal population variances.
Biometrika 61, 165-170.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..engine.distributions import f_sf
from ..engine.errors import DesignError, ExplorerError
from ..engine.fitrows import every_kept_row
from ..engine.results import Results
from ..engine.tables import html_table
from ..formatting import p_equals, show_df, show_stat
from ..rendering import html_repr
from .oneway_inputs import require_oneway, row_sample_notes

__all__ = ["TrimmedMeansTest", "trimmed_means_test", "trimmed_stats"]


def trimmed_stats(x: np.ndarray, trim: float) -> tuple[float, float, int]:
    """Trimmed mean, winsorized variance and the count left after trimming (``h``)."""
    xs = np.sort(np.asarray(x, dtype=float))
    n = xs.size
    g = int(np.floor(trim * n))
    h = n - 2 * g
    tmean = float(np.mean(xs[g:n - g]))
    w = xs.copy()
    if g:
        w[:g] = xs[g]
        w[n - g:] = xs[n - g - 1]
    wvar = float(np.var(w, ddof=1)) if n > 1 else float("nan")
    return tmean, wvar, h


@dataclass(frozen=True, kw_only=True, eq=False)
class TrimmedMeansTest:
    """Wilcox's test of equal trimmed means, with the per-level trimmed means and their SEs."""

    factor: str
    trim: float
    labels: tuple[str, ...]
    n: np.ndarray
    kept_after_trim: np.ndarray
    trimmed_mean: np.ndarray
    winsorized_sd: np.ndarray
    se: np.ndarray
    statistic: float | None
    df_num: float
    df_den: float | None
    pvalue: float | None
    notes: tuple[str, ...] = field(default=())

    def to_frame(self) -> pd.DataFrame:
        return pd.DataFrame({"level": list(self.labels), "n": self.n, "left after trimming": self.kept_after_trim,
                             "trimmed mean": self.trimmed_mean, "winsorized SD": self.winsorized_sd,
                             "standard error": self.se})

    @property
    def title(self) -> str:
        return (f"Trimmed means ({self.trim:.0%} from each end) of {self.factor}: F = {show_stat(self.statistic)} on "
                f"({show_df(self.df_num)}, {show_df(self.df_den)}) df, {p_equals(self.pvalue)}")

    @html_repr
    def _repr_html_(self) -> str:
        return html_table(self.to_frame(), self.title, self.notes)

    def to_text(self) -> str:
        f = self.to_frame()
        return f"{self.title}\n{f.to_string(index=False)}"


def trimmed_means_test(results: Results, *, trim: float = 0.2) -> TrimmedMeansTest:
    """Wilcox's heteroscedastic one-way test of trimmed means on the kept rows.

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study (``study.results``).
    trim : float, default 0.2
        Share trimmed from each end of each level.

    Returns
    -------
    TrimmedMeansTest
        The trimmed means, winsorized SDs and standard errors of the levels, and the
        test's F with its (fractional) df and p-value.

    References
    ----------
    Wilcox, R. R. (2017). Introduction to Robust Estimation and Hypothesis Testing, 4th
    ed., sec. 7.1.
    Yuen, K. K. (1974). The two-sample trimmed t for unequal population variances.
    Biometrika 61, 165-170.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> test = ex.stats.trimmed_means_test(results)
    >>> test.trimmed_mean.round(3).tolist(), round(test.df_den, 2)
    ([50.075, 51.225, 49.85], 6.0)
    """
    require_oneway(results, "The trimmed-means test")
    if not 0 <= trim < 0.5:
        raise ExplorerError(f"trim is the share cut from each end, between 0 and 0.5, not {trim!r}")
    fit = every_kept_row(results.fit, results.n_used, "the trimmed-means test")
    g = np.asarray(fit.group)
    offset = float(results.groups.offset)
    y = np.asarray(fit.y, dtype=float) - offset
    k = results.groups.k
    labels = tuple(results.groups.labels)
    tm, wv, h, n = np.empty(k), np.empty(k), np.empty(k, dtype=np.int64), np.bincount(g, minlength=k)
    for j in range(k):
        tm[j], wv[j], h[j] = trimmed_stats(y[g == j], trim)
    if np.any(h < 2):
        bad = [lab for lab, hh in zip(labels, h) if hh < 2]
        raise DesignError(f"level(s) {bad} keep fewer than two rows after trimming {trim:.0%} from each end; "
                          "the test needs two or more")
    d = (n - 1) * wv / (h * (h - 1))
    notes = list(row_sample_notes(results))
    notes.append("Every row stays in: the trimming limits the pull of extreme values without leaving rows out.")
    se = np.sqrt(d)
    if not np.all(d > 0):
        return TrimmedMeansTest(factor=results.spec.factors[0], trim=trim, labels=labels, n=n, kept_after_trim=h,
                                trimmed_mean=tm + offset, winsorized_sd=np.sqrt(wv), se=se, statistic=None,
                                df_num=float(k - 1), df_den=None, pvalue=None,
                                notes=tuple(notes + ["A level has zero winsorized variance: the test is undefined."]))
    w = 1 / d
    u = w.sum()
    xt = float(np.sum(w * tm) / u)
    a = float(np.sum(w * (tm - xt) ** 2) / (k - 1))
    s = float(np.sum((1 - w / u) ** 2 / (h - 1)))
    b = 2 * (k - 2) / (k * k - 1) * s
    f = a / (1 + b)
    df2 = 1 / (3 / (k * k - 1) * s)
    return TrimmedMeansTest(factor=results.spec.factors[0], trim=trim, labels=labels, n=n, kept_after_trim=h,
                            trimmed_mean=tm + offset, winsorized_sd=np.sqrt(wv), se=se, statistic=f,
                            df_num=float(k - 1), df_den=df2, pvalue=float(f_sf(f, k - 1, df2)), notes=tuple(notes))
