"""A factor with two levels: Welch's two-sample t with its interval, and the Mann-Whitney test.

Welch (1947): ``t = (m1 - m2) / sqrt(s1^2/n1 + s2^2/n2)`` on the Welch-Satterthwaite
df ``(v1 + v2)^2 / (v1^2/(n1 - 1) + v2^2/(n2 - 1))`` with ``v_i = s_i^2/n_i``; the
interval of the difference is ``1 - alpha`` of the analysis.

Mann and Whitney (1947): ``U1 = R1 - n1 (n1 + 1)/2`` from the mid-ranks of the pooled
rows. The p-value is exact (the distribution of U by its generating function, the
Gaussian binomial coefficient) when one sample has at most 8 rows and there are no
ties; otherwise the normal approximation with the tie-corrected variance
``n1 n2 / 12 ((N + 1) - sum(t^3 - t)/(N (N - 1)))`` and a continuity correction of 1/2.
``U1 / (n1 n2)`` estimates P(X1 > X2) + P(X1 = X2)/2.

References
----------
Welch, B. L. (1947). The generalization of Student's problem when several different
population variances are involved. Biometrika 34, 28-35.
Mann, H. B. and Whitney, D. R. (1947). On a test of whether one of two random variables
is stochastically larger than the other. Ann. Math. Stat. 18, 50-60.
Hollander, M., Wolfe, D. A. and Chicken, E. (2014). Nonparametric Statistical Methods,
3rd ed., sec. 4.1 (ties, the normal approximation).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import special

from ..engine.distributions import t_ppf, t_two_sided_p
from ..engine.errors import DesignError
from ..engine.fitrows import every_kept_row
from ..engine.results import Results
from ..engine.tables import esc
from ..formatting import p_equals, show_df, show_measure, show_share, show_stat
from ..rendering import html_repr, note
from .oneway_inputs import require_oneway, row_sample_notes

__all__ = ["WelchT", "MannWhitney", "welch_t", "mann_whitney", "mid_ranks"]


def mid_ranks(y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mid-ranks of ``y`` (1-based) and the sizes of its tie blocks."""
    order = np.argsort(y, kind="mergesort")
    ys = y[order]
    n = len(y)
    starts = np.flatnonzero(np.r_[True, ys[1:] != ys[:-1]])
    sizes = np.diff(np.r_[starts, n])
    ranks = np.empty(n)
    ranks[order] = np.repeat(starts + (sizes + 1) / 2.0, sizes)
    return ranks, sizes


def _two(results: Results, what: str) -> None:
    require_oneway(results, what)
    if results.groups.k != 2:
        raise DesignError(f"{what} compares two levels; {results.spec.factors[0]!r} has {results.groups.k} "
                          f"with kept rows ({list(results.groups.labels)})")


@dataclass(frozen=True, kw_only=True)
class WelchT:
    """Welch's t for ``first - second`` with its ``confidence`` interval."""

    first: str
    second: str
    difference: float
    se: float
    statistic: float | None
    df: float | None
    pvalue: float | None
    ci_low: float | None
    ci_high: float | None
    confidence: float
    notes: tuple[str, ...] = field(default=())

    @html_repr
    def _repr_html_(self) -> str:
        return (f"<div><b>Welch two-sample t</b>, {esc(self.first)} − {esc(self.second)}: "
                f"difference {show_measure(self.difference)}, t = {show_stat(self.statistic)} on {show_df(self.df)} df, "
                f"{p_equals(self.pvalue)}, {self.confidence:.0%} interval ({show_measure(self.ci_low)}, "
                f"{show_measure(self.ci_high)})"
                "</div>" + "".join(note(n) for n in self.notes))

    def to_text(self) -> str:
        return (f"Welch two-sample t, {self.first} - {self.second}: difference {show_measure(self.difference)}, "
                f"t = {show_stat(self.statistic)} on {show_df(self.df)} df, {p_equals(self.pvalue)}, "
                f"{self.confidence:.0%} interval ({show_measure(self.ci_low)}, {show_measure(self.ci_high)})")


def welch_t(results: Results, *, confidence: float | None = None) -> WelchT:
    """Welch's two-sample t test and interval of the two levels of a one-factor study.

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study with two levels.
    confidence : float, optional
        Coverage of the intervals; ``1 - alpha`` of the analysis when not given.

    Returns
    -------
    WelchT
        The difference (first level minus second), its standard error, t,
        Welch-Satterthwaite df, p-value and interval.

    References
    ----------
    Welch, B. L. (1947). The generalization of Student's problem when several different
    population variances are involved. Biometrika 34, 28-35.

    Examples
    --------
    >>> import explorer as ex
    >>> df = ex.example_data("coating")
    >>> results = ex.Study(df[df.nozzle != "C"], "thickness_um", "nozzle").results
    >>> t = ex.stats.welch_t(results)
    >>> (t.first, t.second), round(t.difference, 3), round(t.df, 2)
    (('A', 'B'), -1.15, 6.0)
    """
    _two(results, "Welch's two-sample t")
    conf = 1 - results.spec.alpha if confidence is None else float(confidence)
    gs = results.groups
    n = gs.n.astype(float)
    if np.any(n < 2):
        raise DesignError("Welch's t needs two or more rows in each level (each level's own variance)")
    var = gs.m2 / (n - 1)
    v = var / n
    d = float(gs.mean[0] - gs.mean[1])
    se = float(np.sqrt(v.sum()))
    if not se > 0:
        return WelchT(first=gs.labels[0], second=gs.labels[1], difference=d, se=se, statistic=None, df=None,
                      pvalue=None, ci_low=None, ci_high=None, confidence=conf,
                      notes=("Both levels have zero spread: t is undefined.",))
    df = float(v.sum() ** 2 / np.sum(v**2 / (n - 1)))
    t = d / se
    half = float(t_ppf(0.5 + conf / 2, df)) * se
    return WelchT(first=gs.labels[0], second=gs.labels[1], difference=d, se=se, statistic=t, df=df,
                  pvalue=float(t_two_sided_p(t, df)), ci_low=d - half, ci_high=d + half, confidence=conf)


@dataclass(frozen=True, kw_only=True)
class MannWhitney:
    """Mann-Whitney test of the two levels: ``u`` is U of the first level."""

    first: str
    second: str
    u: float
    pvalue: float
    method: str
    probability: float
    z: float | None = None
    notes: tuple[str, ...] = field(default=())

    @html_repr
    def _repr_html_(self) -> str:
        z = "" if self.z is None else f", z = {show_stat(self.z)}"
        return (f"<div><b>Mann-Whitney</b> ({esc(self.method)}), {esc(self.first)} vs "
                f"{esc(self.second)}: U = {show_stat(self.u)}{z}, {p_equals(self.pvalue)}; "
                f"P({esc(self.first)} above {esc(self.second)}) estimated {show_share(self.probability)}</div>"
                + "".join(note(n) for n in self.notes))

    def to_text(self) -> str:
        return (f"Mann-Whitney ({self.method}), {self.first} vs {self.second}: U = {show_stat(self.u)}, "
                f"{p_equals(self.pvalue)}, "
                f"P({self.first} above {self.second}) estimated {show_share(self.probability)}")


def _u_distribution(m: int, n: int) -> np.ndarray:
    """Counts of U = 0..m n for samples of m and n without ties (Gaussian binomial coefficient)."""
    m, n = min(m, n), max(m, n)
    poly = [1]
    for i in range(1, m + 1):
        # multiply by (1 - q^(n+i)), then divide by (1 - q^i): exact integer arithmetic
        a = poly + [0] * (n + i)
        for k in range(len(a) - 1, n + i - 1, -1):
            a[k] -= a[k - n - i]
        b = [0] * len(a)
        for k in range(len(a)):
            b[k] = a[k] + (b[k - i] if k >= i else 0)
        poly = b[: m * n + 1] if len(b) > m * n + 1 else b
    out = np.array(poly[: m * n + 1], dtype=object)
    return out


def mann_whitney(results: Results) -> MannWhitney:
    """Mann-Whitney test of the two levels of a one-factor study.

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study with two levels.

    Returns
    -------
    MannWhitney
        U of the first level, the two-sided p-value (exact without ties, the normal
        approximation with tie and continuity corrections otherwise; ``method`` says
        which) and the probability that a value of the first level exceeds one of the
        second.

    References
    ----------
    Mann, H. B. and Whitney, D. R. (1947). On a test of whether one of two random
    variables is stochastically larger than the other. Ann. Math. Stat. 18, 50-60.
    Hollander, M., Wolfe, D. A. and Chicken, E. (2014). Nonparametric Statistical
    Methods, 3rd ed., sec. 4.1.

    Examples
    --------
    >>> import explorer as ex
    >>> df = ex.example_data("coating")
    >>> results = ex.Study(df[df.nozzle != "C"], "thickness_um", "nozzle").results
    >>> test = ex.stats.mann_whitney(results)
    >>> test.u, round(test.pvalue, 4), test.method
    (0.0, 0.0286, 'exact')
    """
    _two(results, "The Mann-Whitney test")
    fit = every_kept_row(results.fit, results.n_used, "the Mann-Whitney test")
    g = np.asarray(fit.group)
    y = np.asarray(fit.y, dtype=float)
    ranks, ties = mid_ranks(y)
    n1, n2 = int(np.sum(g == 0)), int(np.sum(g == 1))
    big_n = n1 + n2
    r1 = float(ranks[g == 0].sum())
    u1 = r1 - n1 * (n1 + 1) / 2.0
    labels = results.groups.labels
    notes = row_sample_notes(results)
    has_ties = bool(np.any(ties > 1))
    if min(n1, n2) <= 8 and not has_ties:
        counts = _u_distribution(n1, n2)
        total = sum(counts)
        u_int = int(round(u1))
        upper = sum(counts[u_int:])
        lower = sum(counts[: u_int + 1])
        p = float(min(1.0, 2 * min(upper, lower) / total))
        return MannWhitney(first=labels[0], second=labels[1], u=u1, pvalue=p, method="exact",
                           probability=u1 / (n1 * n2), notes=notes)
    t = ties.astype(float)
    var = n1 * n2 / 12.0 * ((big_n + 1) - np.sum(t**3 - t) / (big_n * (big_n - 1)))
    if not var > 0:
        return MannWhitney(first=labels[0], second=labels[1], u=u1, pvalue=1.0, method="normal approximation",
                           probability=u1 / (n1 * n2), notes=notes + ("All observations are tied.",))
    mu = n1 * n2 / 2.0
    z = (abs(u1 - mu) - 0.5) / np.sqrt(var)
    p = float(min(1.0, special.erfc(max(z, 0.0) / np.sqrt(2.0)) if z > 0 else 1.0))
    return MannWhitney(first=labels[0], second=labels[1], u=u1, pvalue=p,
                       method="normal approximation, ties and continuity corrected",
                       probability=u1 / (n1 * n2), z=float(np.sign(u1 - mu) * max(z, 0.0)), notes=notes)
