"""Rank-based follow-ups: Dunn's pairwise test after Kruskal-Wallis, Friedman's test for blocks.

Dunn (1964): with mid-ranks over all kept rows, the pair (i, j) is compared by
``z = (Rbar_i - Rbar_j) / sqrt(s2 (1/n_i + 1/n_j))``, ``s2 = N (N + 1)/12 -
sum(t^3 - t) / (12 (N - 1))`` (tie-corrected variance of a rank), two-sided normal
p-values adjusted over the k (k - 1)/2 pairs by Holm's step-down method by default.

Friedman (1937): a randomized complete block design, one observation of each treatment
in each of b blocks. Within each block the k observations are ranked (mid-ranks for
ties); with rank sums R_j, ``Q = (12 / (b k (k + 1)) sum R_j^2 - 3 b (k + 1)) / C``,
``C = 1 - sum(t^3 - t) / (b k (k^2 - 1))`` over the tie blocks within blocks,
chi-square on k - 1 df. Kendall's W = Q / (b (k - 1)) is given beside it.

References
----------
Dunn, O. J. (1964). Multiple comparisons using rank sums. Technometrics 6, 241-252.
Friedman, M. (1937). The use of ranks to avoid the assumption of normality implicit in
the analysis of variance. JASA 32, 675-701.
Hollander, M., Wolfe, D. A. and Chicken, E. (2014). Nonparametric Statistical Methods,
3rd ed., sec. 6.5 and 7.1 (ties).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import special

from ..engine.errors import DesignError
from ..engine.fitrows import every_kept_row
from ..engine.pairwise import adjust_pvalues
from ..engine.results import Results
from ..engine.tables import esc, html_table
from ..formatting import p_equals, show_share, show_stat
from ..rendering import html_repr, note
from .oneway_inputs import require_oneway, row_sample_notes
from .two_levels import mid_ranks

__all__ = ["DunnTable", "FriedmanTest", "dunn", "dunn_holm", "friedman"]


@dataclass(frozen=True, kw_only=True, eq=False)
class DunnTable:
    """Dunn's comparisons of every pair of levels on mean ranks."""

    labels: tuple[str, ...]
    mean_rank: np.ndarray
    first: tuple[str, ...]
    second: tuple[str, ...]
    z: np.ndarray
    pvalue: np.ndarray
    adjusted: np.ndarray
    adjustment: str
    alpha: float
    notes: tuple[str, ...] = field(default=())

    def to_frame(self) -> pd.DataFrame:
        return pd.DataFrame({"first": list(self.first), "second": list(self.second), "z": self.z,
                             "p-value": self.pvalue, f"p-value ({self.adjustment})": self.adjusted,
                             "different": ["yes" if p < self.alpha else "no" for p in self.adjusted]})

    def matrix(self) -> pd.DataFrame:
        """Adjusted p-values as a symmetric level x level table (1 on the diagonal)."""
        k = len(self.labels)
        m = np.ones((k, k))
        for a, b, p in zip(self.first, self.second, self.adjusted):
            i, j = self.labels.index(a), self.labels.index(b)
            m[i, j] = m[j, i] = p
        return pd.DataFrame(m, index=list(self.labels), columns=list(self.labels))

    @property
    def title(self) -> str:
        return f"Dunn's rank comparisons: {self.adjustment} adjustment, family of {len(self.first)}"

    @html_repr
    def _repr_html_(self) -> str:
        return html_table(self.to_frame(), self.title, self.notes)

    def to_text(self) -> str:
        f = self.to_frame()
        return f"{self.title}\n{f.to_string(index=False)}"


def dunn(results: Results, *, adjust: str = "holm") -> DunnTable:
    """Dunn's pairwise rank test of a one-factor study (the follow-up of Kruskal-Wallis).

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study (``study.results``).
    adjust : {'holm', 'bonferroni', 'none'}, default 'holm'
        Family-wise adjustment over the pairs.

    Returns
    -------
    DunnTable
        The mean rank of each level, and for each pair z (from the joint ranking, tie
        corrected), p-value and adjusted p-value.

    References
    ----------
    Dunn, O. J. (1964). Multiple comparisons using rank sums. Technometrics 6, 241-252.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> table = ex.stats.dunn(results)
    >>> table.mean_rank.tolist(), table.adjusted.round(4).tolist()
    ([5.5, 10.5, 3.5], [0.0997, 0.4328, 0.0181])
    """
    require_oneway(results, "Dunn's test")
    fit = every_kept_row(results.fit, results.n_used, "Dunn's test")
    g = np.asarray(fit.group)
    k = results.groups.k
    ranks, ties = mid_ranks(np.asarray(fit.y, dtype=float))
    n = np.bincount(g, minlength=k).astype(float)
    big_n = float(n.sum())
    rbar = np.bincount(g, weights=ranks, minlength=k) / n
    t = ties.astype(float)
    s2 = big_n * (big_n + 1) / 12.0 - np.sum(t**3 - t) / (12.0 * (big_n - 1))
    i, j = np.triu_indices(k, 1)
    if not s2 > 0:
        raise DesignError("every kept observation is tied: Dunn's test is undefined")
    z = (rbar[i] - rbar[j]) / np.sqrt(s2 * (1 / n[i] + 1 / n[j]))
    p = special.erfc(np.abs(z) / np.sqrt(2.0))
    labels = tuple(results.groups.labels)
    notes = row_sample_notes(results) + (
        "Mean ranks are from one ranking of all kept rows, as in the Kruskal-Wallis test (Dunn 1964).",)
    return DunnTable(labels=labels, mean_rank=rbar, first=tuple(labels[a] for a in i),
                     second=tuple(labels[b] for b in j), z=z, pvalue=p, adjusted=adjust_pvalues(p, adjust),
                     adjustment=adjust, alpha=float(results.spec.alpha), notes=notes)


def dunn_holm(n: np.ndarray, rank_sum: np.ndarray, tie_term: np.ndarray) -> np.ndarray:
    """Dunn's Holm-adjusted p-values of every pair for many alternatives at once.

    ``n`` and ``rank_sum`` are ``(m, k)`` level counts and mid-rank sums (each line one
    ranking of its kept rows), ``tie_term`` the ``(m,)`` sums of ``t^3 - t`` over tie
    blocks. Returns ``(m, k (k - 1) / 2)`` adjusted p-values, pairs in upper-triangle
    order (as :func:`dunn`); pairs with an empty level are NaN and left out of the family,
    as :func:`dunn` leaves out a level with no kept rows.
    """
    n = np.atleast_2d(np.asarray(n, dtype=float))
    rank_sum = np.atleast_2d(np.asarray(rank_sum, dtype=float))
    tie_term = np.atleast_1d(np.asarray(tie_term, dtype=float))
    big_n = n.sum(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        s2 = big_n * (big_n + 1) / 12.0 - tie_term / (12.0 * (big_n - 1))
        rbar = np.where(n > 0, rank_sum / n, np.nan)
        i, j = np.triu_indices(n.shape[1], 1)
        z = (rbar[:, i] - rbar[:, j]) / np.sqrt(s2[:, None] * (1 / n[:, i] + 1 / n[:, j]))
    p = special.erfc(np.abs(z) / np.sqrt(2.0))
    p[~(s2 > 0)] = np.nan
    finite = np.isfinite(p)
    order = np.argsort(np.where(finite, p, np.inf), axis=1, kind="stable")
    ps = np.take_along_axis(p, order, axis=1)
    mult = finite.sum(axis=1, keepdims=True) - np.arange(p.shape[1])[None, :]
    adj = np.minimum(np.maximum.accumulate(np.where(np.isfinite(ps), ps * mult, -np.inf), axis=1), 1.0)
    adj[~np.isfinite(ps)] = np.nan
    out = np.empty_like(adj)
    np.put_along_axis(out, order, adj, axis=1)
    return out


@dataclass(frozen=True, kw_only=True)
class FriedmanTest:
    """Friedman's rank test of the treatments of a randomized complete block design."""

    factor: str
    block: str
    statistic: float | None
    df: int
    pvalue: float | None
    blocks: int
    kendall_w: float | None
    rank_sums: tuple[tuple[str, float], ...]
    notes: tuple[str, ...] = field(default=())

    @html_repr
    def _repr_html_(self) -> str:
        sums = ", ".join(f"{esc(k)} {show_stat(v)}" for k, v in self.rank_sums)
        return (f"<div><b>Friedman rank test</b> of {esc(self.factor)} within {esc(self.block)} "
                f"({self.blocks} blocks): chi-square = {show_stat(self.statistic)} on {self.df} df, {p_equals(self.pvalue)}; "
                f"Kendall's W = {show_share(self.kendall_w)}; rank sums: {sums}</div>"
                + "".join(note(n) for n in self.notes))

    def to_text(self) -> str:
        return (f"Friedman rank test of {self.factor} within {self.block} ({self.blocks} blocks): "
                f"chi-square = {show_stat(self.statistic)} on {self.df} df, {p_equals(self.pvalue)}; "
                f"Kendall's W = {show_share(self.kendall_w)}")


def friedman(results: Results) -> FriedmanTest:
    """Friedman's test: one treatment factor, one block, one observation per treatment and block.

    Parameters
    ----------
    results : Results
        The analysis of a study with one factor and one block (``blocks=``), each
        combination observed once.

    Returns
    -------
    FriedmanTest
        The tie-corrected chi-square, its df and p-value, Kendall's W and the rank sums.

    References
    ----------
    Friedman, M. (1937). The use of ranks to avoid the assumption of normality implicit
    in the analysis of variance. JASA 32, 675-701.
    Hollander, M., Wolfe, D. A. and Chicken, E. (2014). Nonparametric Statistical
    Methods, 3rd ed., sec. 7.1.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("cure"), "hardness", "time", blocks="panel").results
    >>> test = ex.stats.friedman(results)
    >>> round(test.statistic, 3), test.df, round(test.kendall_w, 3)
    (11.565, 2, 0.964)
    """
    spec = results.spec
    if len(spec.factors) != 1 or len(spec.blocks) != 1 or spec.is_mixed or bool(getattr(spec, "covariates", ())):
        raise DesignError("Friedman's test needs a randomized complete block design: one treatment factor and one "
                          f"block (this study has factors {list(spec.factors)} and blocks {list(spec.blocks)})")
    cells = results.cells
    if cells is None or cells.cell_levels is None:
        raise DesignError("Friedman's test needs the cell layout of the block design")
    k, b = (len(lv) for lv in cells.levels)  # type: ignore[union-attr]
    if len(cells.n) != k * b or np.any(np.asarray(cells.n) != 1):
        raise DesignError(
            f"Friedman's test needs exactly one observation of each level of {spec.factors[0]!r} in each "
            f"{spec.blocks[0]!r} ({k} x {b} = {k * b} cells); this view has {int(np.sum(cells.n))} rows in "
            f"{len(cells.n)} cells. Average replicates yourself or use the F test of the block design."
        )
    fit = every_kept_row(results.fit, results.n_used, "Friedman's test")
    y = np.asarray(fit.y, dtype=float)
    cl = np.asarray(cells.cell_levels)[np.asarray(fit.group)]
    grid = np.empty((b, k))
    grid[cl[:, 1], cl[:, 0]] = y
    ranks = np.empty_like(grid)
    tie_term = 0.0
    for r in range(b):
        rr, tt = mid_ranks(grid[r])
        ranks[r] = rr
        tf = tt.astype(float)
        tie_term += float(np.sum(tf**3 - tf))
    rsum = ranks.sum(axis=0)
    c = 1 - tie_term / (b * k * (k * k - 1))
    labels = cells.levels[0]  # type: ignore[index]
    sums = tuple((lab, float(s)) for lab, s in zip(labels, rsum))
    if not c > 0:
        return FriedmanTest(factor=spec.factors[0], block=spec.blocks[0], statistic=None, df=k - 1, pvalue=None,
                            blocks=b, kendall_w=None, rank_sums=sums,
                            notes=("Every block is tied throughout: the statistic is undefined.",))
    q = (12.0 / (b * k * (k + 1)) * float(np.sum(rsum**2)) - 3.0 * b * (k + 1)) / c
    notes = ("The chi-square approximation is rough with few blocks; with k = 3 and fewer than about 10 blocks "
             "compare with exact tables.",) if b < 10 else ()
    return FriedmanTest(factor=spec.factors[0], block=spec.blocks[0], statistic=q, df=k - 1,
                        pvalue=float(special.chdtrc(k - 1, q)), blocks=b, kendall_w=q / (b * (k - 1)),
                        rank_sums=sums, notes=notes)
