"""Simultaneous comparisons of estimates: the pairwise table and the Tukey-Kramer core.

:func:`simultaneous_pairs` takes any k estimates and the standard errors of their
differences (level means, or least-squares means with their covariance), so the
factorial engine's marginal means and the one-way comparisons of
:mod:`explorer.inference.comparisons` share one computation and one result type.

References
----------
Tukey, J. W. (1953). The problem of multiple comparisons. Unpublished manuscript.
Kramer, C. Y. (1956). Extension of multiple range tests to group means with unequal
numbers of replications. Biometrics 12, 307-310.
Holm, S. (1979). A simple sequentially rejective multiple test procedure. Scand. J.
Stat. 6, 65-70.
Hayter, A. J. (1984). A proof of the conjecture that the Tukey-Kramer multiple
comparisons procedure is conservative. Annals of Statistics 12, 61-75.
Hochberg, Y. and Tamhane, A. C. (1987). Multiple Comparison Procedures. Wiley.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Literal

import numpy as np
import pandas as pd

from ..formatting import result_frame
from ..rendering import html_repr
from .distributions import t_ppf, t_two_sided_p
from .errors import DesignError, ExplorerError, preview
from .numerics import read_only_copy
from .studentized_range import srange_ppf, srange_sf
from .tables import html_table

__all__ = ["PairwiseTable", "adjust_pvalues", "simultaneous_pairs", "check_confidence", "pair_indices", "labels_at"]


@dataclass(frozen=True, kw_only=True, eq=False)
class PairwiseTable:
    """A family of comparisons between level means.

    Each row compares ``first - second``. ``statistic`` is the difference over its
    standard error (a t ratio; methods based on the studentized range also show
    ``q = sqrt(2) |t|`` in :meth:`to_frame`). ``pvalue`` is adjusted for the family by
    ``adjustment``; ``ci_low``/``ci_high`` are simultaneous intervals for the family
    (``None`` when the method has none, see ``notes``). Undefined entries are NaN and
    named in ``notes``.
    """

    method: str
    adjustment: str
    family_size: int
    labels: tuple[str, ...]
    estimates: np.ndarray
    first: tuple[str, ...]
    second: tuple[str, ...]
    difference: np.ndarray
    se: np.ndarray
    df: np.ndarray
    statistic: np.ndarray
    pvalue: np.ndarray
    ci_low: np.ndarray | None
    ci_high: np.ndarray | None
    confidence: float = 0.95
    alternative: str = "two-sided"
    range_based: bool = False
    notes: tuple[str, ...] = field(default=())

    def significant(self, alpha: float = 0.05) -> np.ndarray:
        """Which comparisons are declared different at family-wise level ``alpha``."""
        with np.errstate(invalid="ignore"):
            out: np.ndarray = np.asarray(self.pvalue < alpha) & np.isfinite(self.pvalue)
        return out

    def pair(self, a: str, b: str) -> dict[str, float | str | None]:
        """The row comparing levels ``a`` and ``b`` (in either order; the sign follows the table)."""
        for i, (f, s) in enumerate(zip(self.first, self.second)):
            if {f, s} == {a, b}:
                row = self.to_frame().iloc[i]
                return {str(c): (None if pd.isna(v) else v) for c, v in row.items()}
        raise ExplorerError(f"no comparison of {a!r} with {b!r} in this table; levels are {preview(self.labels)}")

    def to_frame(self) -> pd.DataFrame:
        pct = f"{self.confidence:.0%}"
        data: dict[str, object] = {
            "first": list(self.first),
            "second": list(self.second),
            "difference": self.difference,
            "standard error": self.se,
            "df": self.df,
            "t": self.statistic,
        }
        if self.range_based:
            data["q"] = np.sqrt(2.0) * np.abs(self.statistic)
        data[f"p-value ({self.adjustment})"] = self.pvalue
        if self.ci_low is not None and self.ci_high is not None:
            data[f"{pct} simultaneous low"] = self.ci_low
            data[f"{pct} simultaneous high"] = self.ci_high
        frame = pd.DataFrame(data)
        for c in frame.columns[2:]:
            frame[c] = pd.array(np.asarray(frame[c], dtype=float), dtype="Float64")
            frame[c] = frame[c].mask(frame[c].isna(), pd.NA)
        return result_frame(frame)

    @property
    def title(self) -> str:
        side = "" if self.alternative == "two-sided" else f", one-sided ({self.alternative})"
        return f"{self.method} comparisons{side}: {self.adjustment}, family of {self.family_size}"

    @html_repr
    def _repr_html_(self) -> str:
        return html_table(self.to_frame(), self.title, self.notes)


# ---------------------------------------------------------------------- helpers
def adjust_pvalues(p: np.ndarray, method: str) -> np.ndarray:
    """Family-wise adjusted p-values: Holm's step-down, Bonferroni, or none.

    Parameters
    ----------
    p : numpy.ndarray
        Unadjusted p-values; NaN entries stay NaN and do not count towards the family.
    method : {'holm', 'bonferroni', 'none'}
        The adjustment.

    Returns
    -------
    numpy.ndarray
        Adjusted p-values, capped at 1, in the input order.

    References
    ----------
    Holm, S. (1979). A simple sequentially rejective multiple test procedure. Scand. J.
    Stat. 6, 65-70.

    Examples
    --------
    >>> import numpy as np
    >>> import explorer as ex
    >>> ex.stats.adjust_pvalues(np.array([0.01, 0.04, 0.03]), "holm").round(3).tolist()
    [0.03, 0.06, 0.06]
    """
    p = np.asarray(p, dtype=float)
    method = method.lower()
    ok = np.isfinite(p)
    m = int(ok.sum())
    out = np.full_like(p, np.nan)
    if method == "none":
        out[ok] = p[ok]
    elif method == "bonferroni":
        out[ok] = np.minimum(p[ok] * m, 1.0)
    elif method == "holm":
        pv = p[ok]
        order = np.argsort(pv, kind="mergesort")
        stepped = np.maximum.accumulate(pv[order] * (m - np.arange(m)))
        adj = np.empty(m)
        adj[order] = np.minimum(stepped, 1.0)
        out[ok] = adj
    else:
        raise ExplorerError(f"adjustment must be 'holm', 'bonferroni' or 'none', not {method!r}")
    return out


def labels_at(labels: Sequence[str], idx: np.ndarray) -> tuple[str, ...]:
    """``labels`` at positions ``idx`` as a tuple (one numpy gather: millions of pairs in a fraction of a second)."""
    return tuple(np.asarray(labels, dtype=object)[np.asarray(idx, dtype=np.int64)].tolist())


def pair_indices(k: int) -> tuple[np.ndarray, np.ndarray]:
    i, j = np.triu_indices(k, 1)
    return i, j


def check_confidence(confidence: float) -> float:
    if not 0 < float(confidence) < 1:
        raise ExplorerError(f"confidence must be between 0 and 1 (e.g. 0.95), not {confidence!r}")
    return float(confidence)


def simultaneous_pairs(
    labels: Sequence[str],
    estimates: np.ndarray,
    se_diff: np.ndarray,
    df: float,
    *,
    confidence: float = 0.95,
    method: Literal["tukey", "bonferroni", "none"] = "tukey",
    offset: float = 0.0,
) -> PairwiseTable:
    """All pairwise differences of ``estimates`` with simultaneous intervals.

    Parameters
    ----------
    labels : sequence of str
        Names of the k estimates (level means or least-squares means).
    estimates : numpy.ndarray
        The k estimates, on a scale shifted by ``offset``.
    se_diff : numpy.ndarray
        k x k matrix; ``se_diff[i, j]`` is the standard error of
        ``estimates[i] - estimates[j]`` (only the upper triangle is read).
    df : float
        Degrees of freedom of the error variance behind the standard errors.
    confidence : float, default 0.95
        Family-wise coverage of the intervals.
    method : {'tukey', 'bonferroni', 'none'}, default 'tukey'
        'tukey': studentized range with k means (Tukey when all standard errors of
        differences are equal, Tukey-Kramer otherwise); 'bonferroni': t with
        ``alpha / m``; 'none': per-comparison t.
    offset : float, default 0.0
        Added back to the estimates the table shows; the differences are taken before,
        so a large offset costs no digits.

    Returns
    -------
    PairwiseTable
        Every pair ``i < j`` with difference, standard error, statistic, adjusted
        p-value and interval.

    Notes
    -----
    Tukey-Kramer: ``q = |d| / (se / sqrt(2))`` referred to the studentized range with
    k means and ``df`` df; interval ``d +- q_(1-alpha)(k, df) se / sqrt(2)``. For
    least-squares means with correlated estimates the intervals are conservative.

    References
    ----------
    Kramer, C. Y. (1956). Extension of multiple range tests to group means with unequal
    numbers of replications. Biometrics 12, 307-310.
    Hayter, A. J. (1984). A proof of the conjecture that the Tukey-Kramer multiple
    comparisons procedure is conservative. Annals of Statistics 12, 61-75.
    Hochberg, Y. and Tamhane, A. C. (1987). Multiple Comparison Procedures, ch. 3.

    Examples
    --------
    Three invented means with a common standard error of difference 0.5 on 12 df:

    >>> import numpy as np
    >>> import explorer as ex
    >>> pairs = ex.stats.simultaneous_pairs(["a", "b", "c"], np.array([10.0, 11.2, 10.1]),
    ...                                     np.full((3, 3), 0.5), 12.0)
    >>> pairs.method, pairs.pvalue.round(3).tolist()
    ('Tukey', [0.08, 0.978, 0.112])
    """
    confidence = check_confidence(confidence)
    labels = tuple(str(x) for x in labels)
    est = np.asarray(estimates, dtype=float)
    k = len(labels)
    se_m = np.asarray(se_diff, dtype=float)
    if est.shape != (k,) or se_m.shape != (k, k):
        raise ExplorerError(
            f"simultaneous_pairs needs {k} estimates and a {k}x{k} matrix of standard errors of differences; "
            f"got shapes {est.shape} and {se_m.shape}"
        )
    if k < 2:
        raise DesignError("pairwise comparisons need at least two levels")
    if not df > 0:
        raise DesignError(f"pairwise comparisons need positive error df, not {df!r}")
    i, j = pair_indices(k)
    d = est[i] - est[j]
    se = se_m[i, j]
    notes: list[str] = []
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(se > 0, d / se, np.nan)
    bad = ~(se > 0)
    if bad.any():
        notes.append(
            f"{int(bad.sum())} comparison(s) have a zero or undefined standard error; their test and interval "
            "are undefined."
        )
    m = len(d)
    dfs = np.full(m, float(df))
    alpha = 1 - confidence
    method_l = method.lower()
    if method_l == "tukey":
        finite_se = se[np.isfinite(se)]
        equal = finite_se.size > 0 and np.ptp(finite_se) <= 1e-12 * np.max(np.abs(finite_se))
        name = "Tukey" if equal else "Tukey-Kramer"
        adjustment = f"studentized range, {k} means"
        p = np.where(bad, np.nan, srange_sf(np.sqrt(2.0) * np.abs(np.nan_to_num(t)), k, df))
        crit = float(srange_ppf(confidence, k, df)[0]) / np.sqrt(2.0)
        range_based = True
    elif method_l in ("bonferroni", "none"):
        name = "pairwise t"
        adjustment = "Bonferroni" if method_l == "bonferroni" else "none (per comparison)"
        p_raw = np.where(bad, np.nan, t_two_sided_p(np.nan_to_num(t), df))
        p = adjust_pvalues(p_raw, method_l)
        crit = -float(t_ppf(alpha / 2 / (m if method_l == "bonferroni" else 1), df))
        range_based = False
    else:
        raise ExplorerError(f"method must be 'tukey', 'bonferroni' or 'none', not {method!r}")
    half = crit * se
    return PairwiseTable(
        method=name, adjustment=adjustment, family_size=m, labels=labels, estimates=read_only_copy(est + offset),
        first=labels_at(labels, i), second=labels_at(labels, j),
        difference=read_only_copy(d), se=read_only_copy(se), df=read_only_copy(dfs), statistic=read_only_copy(t),
        pvalue=read_only_copy(p),
        ci_low=read_only_copy(np.where(bad, np.nan, d - half)), ci_high=read_only_copy(np.where(bad, np.nan, d + half)),
        confidence=confidence, range_based=range_based, notes=tuple(notes),
    )


# The names these had before they were shared between modules; kept for code written against them, removed in the
# next release.
_pairs = pair_indices
_check_confidence = check_confidence
