"""Omnibus tests of equal level means beside the classic F.

Welch's F and the Brown-Forsythe test of means need only per-level n, mean and
variance; Kruskal-Wallis and the permutation F read the kept rows once. Each result
names its method and what it assumes.

References
----------
Welch, B. L. (1951). On the comparison of several mean values: an alternative
approach. Biometrika 38, 330-336.
Brown, M. B. and Forsythe, A. B. (1974). The small sample behavior of some statistics
which test the equality of several means. Technometrics 16, 129-132.
Mehrotra, D. V. (1997). Improving the Brown-Forsythe solution to the generalized
Behrens-Fisher problem. Commun. Stat. Simul. Comput. 26, 1139-1145.
Kruskal, W. H. and Wallis, W. A. (1952). Use of ranks in one-criterion variance
analysis. JASA 47, 583-621.
Good, P. (2005). Permutation, Parametric and Bootstrap Tests of Hypotheses, 3rd ed.,
Springer (permutation F; p-value (b + 1) / (B + 1)).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, ClassVar

import numpy as np
import pandas as pd

from ..engine.errors import ExplorerError
from ..engine.spec import check_alpha
from ..engine.tables import esc
from ..formatting import p_equals, result_frame, show_df, show_number, show_stat
from ..rendering import html_repr, note
from .omnibus_batch import brown_forsythe_batch, kruskal_batch, welch_batch
from .oneway_inputs import require_oneway, row_sample_notes
from .result_extras import WithExtras
from .sequential_mc import looks, ordering_chunks, settled, stopping_sentence

if TYPE_CHECKING:
    from ..engine.results import Results

__all__ = [
    "PERMUTATIONS", "PERMUTATION_SEED", "OmnibusTest", "brown_forsythe_f", "classic_f", "kruskal_wallis", "midranks",
    "overall_test", "permutation_f", "welch_f",
]

#: Permutations and seed of the permutation F when it is a study's chosen test.
PERMUTATIONS = 9999
PERMUTATION_SEED = 0


@dataclass(frozen=True, kw_only=True)
class OmnibusTest(WithExtras):
    """One test of 'all level means (or distributions) are equal'.

    ``statistic``/``pvalue`` are ``None`` when the test is undefined on this view, and
    ``notes`` say why. Method-specific extras are typed fields, ``None`` where they do
    not apply: ``tie_correction`` (Kruskal-Wallis), ``permutations``, ``seed`` and
    ``monte_carlo_se`` (the permutation F's count, seed and the Monte-Carlo standard
    error of its p-value); ``extras()`` lists the ones set with their labels.
    ``original_df_num``/``original_pvalue`` are a second reading of the same statistic
    with the numerator df its authors first proposed, where the reported ``pvalue`` uses
    a later correction (Brown-Forsythe: k - 1 against Mehrotra's df); ``None`` otherwise.
    """

    method: str
    statistic: float | None
    df_num: float | None
    df_den: float | None
    pvalue: float | None
    assumes: str
    notes: tuple[str, ...] = field(default=())
    original_df_num: float | None = None
    original_pvalue: float | None = None
    tie_correction: float | None = None
    permutations: int | None = None
    seed: int | None = None
    monte_carlo_se: float | None = None

    EXTRAS: ClassVar[tuple[tuple[str, str], ...]] = (
        ("tie correction", "tie_correction"), ("permutations", "permutations"), ("seed", "seed"),
        ("Monte-Carlo SE of p", "monte_carlo_se"))

    def row(self) -> dict[str, object]:
        return {
            "test": self.method, "statistic": self.statistic, "df (numerator)": self.df_num,
            "df (denominator)": self.df_den, "p-value": self.pvalue, "assumes": self.assumes,
        }

    def to_frame(self) -> pd.DataFrame:
        return result_frame([self.row()])

    @html_repr
    def _repr_html_(self) -> str:
        dfs = ", ".join(show_number(x) for x in (self.df_num, self.df_den) if x is not None)
        extra = "; ".join(f"{esc(k)} {show_stat(v) if not isinstance(v, str) else esc(v)}"
                          for k, v in self.extras())
        if self.original_pvalue is not None:
            first = (f"with the original k - 1 = {show_df(self.original_df_num)} numerator df, "
                     f"{p_equals(self.original_pvalue)} (liberal when variances differ)")
            extra = f"{extra}; {first}" if extra else first
        notes = "".join(note(n) for n in self.notes)
        return (
            f"<div><b>{esc(self.method)}</b>: statistic {show_stat(self.statistic)}"
            f"{f' on ({dfs}) df' if dfs else ''}, {p_equals(self.pvalue)}"
            f"{'; ' + extra if extra else ''}. <i>Assumes {esc(self.assumes)}.</i>{notes}</div>"
        )


def _stats(results: Results) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    require_oneway(results, "this test")
    gs = results.groups
    return gs.n.astype(float), gs.mean, gs.variances(), gs.k


def classic_f(results: Results) -> OmnibusTest:
    """The classic F test of the one-way partition, as an :class:`OmnibusTest`.

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study (``study.results``).

    Returns
    -------
    OmnibusTest
        F of the factor against the residual mean square, with its df and p-value
        (``None`` with a note when F is undefined).

    References
    ----------
    Fisher, R. A. (1925). Statistical Methods for Research Workers, ch. 7.
    Montgomery, D. C. (2017). Design and Analysis of Experiments, 9th ed., ch. 3.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> test = ex.stats.classic_f(results)
    >>> round(test.statistic, 2), test.df_num, test.df_den
    (33.47, 2.0, 9.0)
    """
    row = results.partition.row(results.spec.factors[0])
    resid = results.partition.rows[1]
    return OmnibusTest(
        method="classic F", statistic=row.statistic, df_num=float(row.df), df_den=float(resid.df),
        pvalue=row.pvalue, assumes="independent observations, normal residuals, equal variances",
        notes=results.partition.notes,
    )


def _unequal_var_guard(n: np.ndarray, var: np.ndarray, labels: tuple[str, ...], method: str) -> str | None:
    singles = [lab for lab, c in zip(labels, n) if c < 2]
    if singles:
        return f"{method} is undefined: level(s) {', '.join(map(repr, singles))} have one observation, so no own variance."
    flat = [lab for lab, v in zip(labels, var) if not v > 0]
    if flat:
        return f"{method} is undefined: level(s) {', '.join(map(repr, flat))} have zero spread (all values equal)."
    return None


def welch_f(results: Results) -> OmnibusTest:
    """Welch's (1951) F for equal means without assuming equal variances.

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study (``study.results``).

    Returns
    -------
    OmnibusTest
        F, its numerator and (fractional) denominator df and the p-value; ``None`` with
        a note when a level has one observation or zero spread.

    Notes
    -----
    ``w_i = n_i / s_i^2``; ``F = [sum w_i (m_i - m_w)^2 / (k-1)] / [1 + 2(k-2)/(k^2-1) L]``
    with ``L = sum (1 - w_i/W)^2 / (n_i - 1)`` and denominator df ``(k^2 - 1) / (3 L)``.

    References
    ----------
    Welch, B. L. (1951). On the comparison of several mean values: an alternative
    approach. Biometrika 38, 330-336.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> test = ex.stats.welch_f(results)
    >>> round(test.statistic, 2), round(test.df_den, 2), bool(test.pvalue < 0.01)
    (30.42, 6.0, True)
    """
    n, mean, var, k = _stats(results)
    assumes = "independent observations, normal residuals within each level (variances may differ)"
    problem = _unequal_var_guard(n, var, results.groups.labels, "Welch's F")
    if problem:
        return OmnibusTest(method="Welch F", statistic=None, df_num=float(k - 1), df_den=None, pvalue=None,
                           assumes=assumes, notes=(problem,))
    out = welch_batch(n[None, :], mean[None, :], var[None, :])
    f, df2 = float(out.statistic[0]), float(out.df_den[0])
    return OmnibusTest(method="Welch F", statistic=f, df_num=float(k - 1), df_den=df2,
                       pvalue=float(out.pvalue[0]), assumes=assumes)


def brown_forsythe_f(results: Results) -> OmnibusTest:
    """Brown and Forsythe's (1974) F* test of equal means under unequal variances.

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study (``study.results``).

    Returns
    -------
    OmnibusTest
        F*, Mehrotra's numerator df and Satterthwaite's denominator df, the p-value on
        those df, and the original ``k - 1`` reading in ``original_df_num`` and
        ``original_pvalue``.

    Notes
    -----
    ``F* = sum n_i (m_i - m)^2 / sum (1 - n_i/N) s_i^2`` with Satterthwaite denominator
    df. The reported p-value uses Mehrotra's (1997) numerator df
    ``(sum c_i s_i^2)^2 / (sum s_i^4 + (sum p_i s_i^2)^2 - 2 sum p_i s_i^4)`` (``c_i =
    1 - p_i``, ``p_i = n_i / N``), which keeps the type I error near its nominal level
    where the original ``k - 1`` is liberal under unequal variances (statsmodels
    ``anova_oneway(use_var="bf")`` reports the same pair as ``pvalue``/``pvalue2``).
    Not to be confused with the Brown-Forsythe test of equal spreads, which is Levene's
    test centred at the median (:func:`levene`).

    References
    ----------
    Brown, M. B. and Forsythe, A. B. (1974). The small sample behavior of some
    statistics which test the equality of several means. Technometrics 16, 129-132.
    Mehrotra, D. V. (1997). Improving the Brown-Forsythe solution to the generalized
    Behrens-Fisher problem. Commun. Stat. Simul. Comput. 26, 1139-1145.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> test = ex.stats.brown_forsythe_f(results)
    >>> round(test.statistic, 2), round(test.df_num, 2), test.original_df_num
    (33.47, 2.0, 2.0)
    """
    n, _mean, var, k = _stats(results)
    assumes = "independent observations, normal residuals within each level (variances may differ)"
    method = "Brown-Forsythe F* (means, Mehrotra df)"
    problem = _unequal_var_guard(n, var, results.groups.labels, "The Brown-Forsythe test of means")
    if problem:
        return OmnibusTest(method=method, statistic=None, df_num=None, df_den=None, pvalue=None, assumes=assumes,
                           notes=(problem,), original_df_num=float(k - 1))
    out = brown_forsythe_batch(n[None, :], _mean[None, :], var[None, :])
    return OmnibusTest(
        method=method, statistic=float(out.statistic[0]), df_num=float(out.df_num[0]), df_den=float(out.df_den[0]),
        pvalue=float(out.pvalue[0]), assumes=assumes,
        original_df_num=float(k - 1), original_pvalue=float(out.original_pvalue[0]),  # type: ignore[index]
    )


def midranks(y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mid-ranks of ``y`` (1-based) and the sizes of its tie blocks."""
    order = np.argsort(y)  # tie order is irrelevant: tied values share their mid-rank
    ys = y[order]
    n = len(y)
    starts = np.flatnonzero(np.r_[True, ys[1:] != ys[:-1]])
    sizes = np.diff(np.r_[starts, n])
    mid = starts + (sizes + 1) / 2.0  # average of ranks starts+1 .. starts+sizes
    ranks = np.empty(n)
    ranks[order] = np.repeat(mid, sizes)
    return ranks, sizes


def kruskal_wallis(results: Results) -> OmnibusTest:
    """Kruskal-Wallis H test on mid-ranks, corrected for ties.

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study (``study.results``).

    Returns
    -------
    OmnibusTest
        H, its chi-square df (``k - 1``) and p-value; the tie correction in
        ``tie_correction``.

    Notes
    -----
    ``H = 12 / (N (N+1)) sum n_i (Rbar_i - (N+1)/2)^2 / C`` with
    ``C = 1 - sum (t^3 - t) / (N^3 - N)``; chi-square on ``k - 1`` df.

    References
    ----------
    Kruskal, W. H. and Wallis, W. A. (1952). Use of ranks in one-criterion variance
    analysis. JASA 47, 583-621.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> test = ex.stats.kruskal_wallis(results)
    >>> round(test.statistic, 2), test.df_num, round(test.tie_correction, 4)
    (8.0, 2.0, 1.0)
    """
    require_oneway(results, "Kruskal-Wallis")
    fit = results.fit
    g = fit.group
    k = results.groups.k
    n = np.bincount(g, minlength=k).astype(float)
    ranks, ties = midranks(np.asarray(fit.y, dtype=float))
    rsum = np.bincount(g, weights=ranks, minlength=k)
    t = ties.astype(float)
    out = kruskal_batch(n[None, :], rsum[None, :], np.array([np.sum(t**3 - t)]))
    assumes = "independent observations; a shift in location with similar shapes and spreads across levels"
    if out.status[0]:
        return OmnibusTest(method="Kruskal-Wallis H", statistic=None, df_num=float(k - 1), df_den=None,
                           pvalue=None, assumes=assumes, notes=("All observations are tied: H is undefined.",))
    big_n = float(n.sum())
    corr = 1 - np.sum(t**3 - t) / (big_n**3 - big_n)
    notes: tuple[str, ...] = row_sample_notes(results)
    if n[n > 0].min() < 5:
        notes += ("Some levels have fewer than 5 observations; the chi-square approximation to H is rough there.",)
    return OmnibusTest(
        method="Kruskal-Wallis H", statistic=float(out.statistic[0]), df_num=float(k - 1), df_den=None,
        pvalue=float(out.pvalue[0]), assumes=assumes,
        tie_correction=float(corr), notes=notes,
    )


def permutation_f(results: Results, permutations: int = 9999, *, seed: int = 0,
                  alpha: float | None = None) -> OmnibusTest:
    """Permutation test of the classic F: shuffle the responses over the kept rows.

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study (``study.results``).
    permutations : int, default 9999
        Number of random permutations ``B`` (the budget, when ``alpha`` is given).
    seed : int, default 0
        Seed of the permutations; the same seed and count give the same p-value.
    alpha : float, optional
        When given, orderings are drawn sequentially and drawing stops once the decision
        at ``alpha`` is settled (:mod:`.sequential_mc`); ``permutations`` is then the most
        drawn. Without it, exactly ``permutations`` are drawn.

    Returns
    -------
    OmnibusTest
        The classic F and its permutation p-value, with ``permutations`` (the number
        drawn), ``seed`` and the Monte-Carlo standard error of the p-value
        (``monte_carlo_se``).

    Notes
    -----
    With the group sizes fixed, F is an increasing function of ``sum_i S_i^2 / n_i``
    (``S_i`` the level sums of the centred response), which is what each permutation
    computes. The p-value is ``(b + 1) / (B + 1)`` with ``b`` the permutations at least
    as extreme; its Monte-Carlo standard error is ``sqrt(p (1-p) / B)``. The first ``L``
    orderings of a sequential run are the first ``L`` of the fixed-count run.

    References
    ----------
    Good, P. (2005). Permutation, Parametric and Bootstrap Tests of Hypotheses, 3rd ed.,
    Springer, ch. 3 and 5.
    Besag, J. and Clifford, P. (1991). Sequential Monte Carlo p-values. Biometrika 78, 301-304.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> test = ex.stats.permutation_f(results, 999, seed=1)
    >>> test.pvalue, test.permutations
    (0.001, 999)
    """
    b_total = int(permutations)
    if b_total < 1:
        raise ExplorerError(f"permutations must be a positive whole number (e.g. 9999), not {permutations!r}")
    if alpha is not None:
        alpha = check_alpha(alpha)
    require_oneway(results, "the permutation F")
    fit = results.fit
    g = np.asarray(fit.group)
    k = results.groups.k
    n = np.bincount(g, minlength=k).astype(float)
    by_level = np.argsort(g, kind="stable")
    y = np.asarray(fit.y, dtype=float)[by_level]
    y = y - y.mean()
    inv_n = np.where(n > 0, 1 / np.maximum(n, 1), 0.0)
    present = n > 0
    starts = np.concatenate([[0], np.cumsum(n)[:-1]]).astype(np.int64)[present]
    obs_stat = float(np.dot(np.add.reduceat(y, starts) ** 2, inv_n[present]))
    marks = looks(b_total) if alpha is not None else ()
    hits = 0
    done = 0
    stopped = False
    for order in ordering_chunks(len(y), b_total, seed, marks):
        # rows sorted by level: contiguous blocks of a random ordering are a random grouping of these sizes
        stat = (np.add.reduceat(y[order], starts, axis=1) ** 2) @ inv_n[present]
        hits += int(np.sum(stat >= obs_stat * (1 - 1e-12)))
        done += order.shape[0]
        if alpha is not None and done in marks and done < b_total and bool(
                settled(np.array([hits]), np.array([done]), alpha, len(marks))[0]):
            stopped = True
            break
    p = (hits + 1) / (done + 1)
    se = float(np.sqrt(p * (1 - p) / done))
    classic = results.partition.row(results.spec.factors[0])
    notes = row_sample_notes(results)
    if alpha is not None:
        notes += (stopping_sentence(done, b_total, alpha, stopped),)
    return OmnibusTest(
        method="permutation F", statistic=classic.statistic, df_num=None, df_den=None, pvalue=float(p),
        assumes="exchangeable observations under the null (same distribution in every level)",
        permutations=done, seed=int(seed), monte_carlo_se=se,
        notes=notes,
    )


def overall_test(results: Results, test: str) -> OmnibusTest:
    """The one-factor overall test named ``test`` (a key of :data:`.spec.OVERALL_TESTS`) on ``results``.

    The permutation F draws at most :data:`PERMUTATIONS` orderings with seed :data:`PERMUTATION_SEED`,
    stopping once its decision at the study's alpha is settled (:mod:`.sequential_mc`).
    """
    if test == "classic":
        return classic_f(results)
    if test == "welch":
        return welch_f(results)
    if test == "brown-forsythe":
        return brown_forsythe_f(results)
    if test == "kruskal":
        return kruskal_wallis(results)
    if test == "permutation":
        return permutation_f(results, PERMUTATIONS, seed=PERMUTATION_SEED, alpha=float(results.spec.alpha))
    raise ExplorerError(f"no overall test named {test!r}")
