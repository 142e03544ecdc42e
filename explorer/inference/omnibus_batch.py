"""Overall tests of equal level means on many alternatives at once.

Each function takes ``(m, k)`` arrays, one row per alternative analysis (the data with
one row left out, two levels merged, a row moved, a set of rows removed...), and
returns one statistic, df pair and p-value per alternative. Groups with ``n == 0`` are
absent from that alternative. The single-analysis tests of :mod:`.omnibus` call the
same functions with ``m = 1``, so a scan and the headline can never disagree on a
formula.

* Welch (1951) and Brown-Forsythe (1974, with Mehrotra's 1997 numerator df) need only
  each group's n, mean and variance;
* Kruskal-Wallis (1952) needs each group's n and rank sum and the tie term
  ``sum (t^3 - t)`` of the pooled sample.

``status`` is 0 where the test is defined, else a key of :data:`UNDEFINED`.

References
----------
Welch, B. L. (1951). Biometrika 38, 330-336.
Brown, M. B. and Forsythe, A. B. (1974). Technometrics 16, 129-132.
Mehrotra, D. V. (1997). Commun. Stat. Simul. Comput. 26, 1139-1145.
Kruskal, W. H. and Wallis, W. A. (1952). JASA 47, 583-621.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from ..engine.distributions import f_sf

__all__ = ["UNDEFINED", "TestBatch", "brown_forsythe_batch", "kruskal_batch", "welch_batch"]

#: Why a batched test is undefined (status code -> plain sentence). Codes 1-4 are shared
#: with the classic F of :mod:`.alternatives`.
UNDEFINED: dict[int, str] = {
    1: "fewer than two levels with observations: no test",
    5: "a level has one observation, so no variance of its own: Welch and Brown-Forsythe are undefined",
    6: "a level has zero spread (all its values equal): Welch and Brown-Forsythe are undefined",
    7: "all observations are tied: the rank test is undefined",
}


@dataclass(frozen=True, kw_only=True, eq=False)
class TestBatch:
    """One test on ``m`` alternatives: arrays of length ``m`` (NaN where ``status`` > 0).

    ``df_den`` is NaN for chi-square tests (Kruskal-Wallis). ``original_df_num`` and
    ``original_pvalue`` are Brown-Forsythe's k - 1 reading (NaN for the other tests).
    """

    statistic: np.ndarray
    df_num: np.ndarray
    df_den: np.ndarray
    pvalue: np.ndarray
    status: np.ndarray
    levels: np.ndarray
    original_df_num: np.ndarray | None = None
    original_pvalue: np.ndarray | None = None


def _prepare(n: np.ndarray, mean: np.ndarray, var: np.ndarray) -> tuple[np.ndarray, ...]:
    n = np.atleast_2d(np.asarray(n, dtype=np.float64))
    mean = np.atleast_2d(np.asarray(mean, dtype=np.float64))
    var = np.atleast_2d(np.asarray(var, dtype=np.float64))
    present = n > 0
    levels = present.sum(axis=1)
    status = np.zeros(n.shape[0], dtype=np.int8)
    with np.errstate(invalid="ignore"):
        status[np.any(present & ~(var > 0), axis=1)] = 6
    status[np.any(present & (n < 2), axis=1)] = 5
    status[levels < 2] = 1
    return n, mean, var, present, levels, status


def welch_batch(n: np.ndarray, mean: np.ndarray, var: np.ndarray) -> TestBatch:
    """Welch's F per alternative from group counts, means and variances.

    ``w_i = n_i / s_i^2``; ``F = [sum w_i (m_i - m_w)^2 / (k-1)] / [1 + 2(k-2)/(k^2-1) L]``
    with ``L = sum (1 - w_i/W)^2 / (n_i - 1)`` and denominator df ``(k^2 - 1) / (3 L)``.
    """
    n, mean, var, present, levels, status = _prepare(n, mean, var)
    ok = status == 0
    m = n.shape[0]
    stat, df1, df2, p = (np.full(m, np.nan) for _ in range(4))
    if ok.any():
        nn, mm, vv, pr = n[ok], mean[ok], var[ok], present[ok]
        k = levels[ok].astype(np.float64)
        w = np.where(pr, nn / np.where(pr, vv, 1.0), 0.0)
        sw = w.sum(axis=1)
        mw = (w * np.where(pr, mm, 0.0)).sum(axis=1) / sw
        dev = np.where(pr, mm - mw[:, None], 0.0)
        a = (w * dev * dev).sum(axis=1) / (k - 1)
        lam = np.where(pr, (1 - w / sw[:, None]) ** 2 / np.where(pr, nn - 1, 1.0), 0.0).sum(axis=1)
        b = 1 + 2 * (k - 2) / (k * k - 1) * lam
        stat[ok] = a / b
        df1[ok] = k - 1
        df2[ok] = (k * k - 1) / (3 * lam)
        p[ok] = f_sf(stat[ok], df1[ok], df2[ok])
    return TestBatch(statistic=stat, df_num=df1, df_den=df2, pvalue=p, status=status, levels=levels)


def brown_forsythe_batch(n: np.ndarray, mean: np.ndarray, var: np.ndarray) -> TestBatch:
    """Brown and Forsythe's F* per alternative, p-value on Mehrotra's numerator df.

    ``F* = sum n_i (m_i - m)^2 / sum (1 - n_i/N) s_i^2``, Satterthwaite denominator df
    ``(sum c_i s_i^2)^2 / sum (c_i s_i^2)^2 / (n_i - 1)``; Mehrotra's numerator df
    ``(sum c_i s_i^2)^2 / (sum s_i^4 + (sum p_i s_i^2)^2 - 2 sum p_i s_i^4)`` with
    ``p_i = n_i / N``, ``c_i = 1 - p_i``. The original ``k - 1`` reading is kept beside it.
    """
    n, mean, var, present, levels, status = _prepare(n, mean, var)
    ok = status == 0
    m = n.shape[0]
    stat, df1, df2, p, df1_o, p_o = (np.full(m, np.nan) for _ in range(6))
    if ok.any():
        nn, mm, pr = n[ok], mean[ok], present[ok]
        vv = np.where(pr, var[ok], 0.0)
        big_n = nn.sum(axis=1)
        gm = (nn * np.where(pr, mm, 0.0)).sum(axis=1) / big_n
        dev = np.where(pr, mm - gm[:, None], 0.0)
        ssb = (nn * dev * dev).sum(axis=1)
        share = nn / big_n[:, None]
        c = np.where(pr, 1 - share, 0.0)
        denom = (c * vv).sum(axis=1)
        stat[ok] = ssb / denom
        df2[ok] = denom**2 / np.where(pr, (c * vv) ** 2 / np.where(pr, nn - 1, 1.0), 0.0).sum(axis=1)
        df1[ok] = denom**2 / ((vv**2).sum(axis=1) + (share * vv).sum(axis=1) ** 2 - 2 * (share * vv**2).sum(axis=1))
        p[ok] = f_sf(stat[ok], df1[ok], df2[ok])
        df1_o[ok] = levels[ok] - 1
        p_o[ok] = f_sf(stat[ok], df1_o[ok], df2[ok])
    return TestBatch(statistic=stat, df_num=df1, df_den=df2, pvalue=p, status=status, levels=levels,
                     original_df_num=df1_o, original_pvalue=p_o)


def kruskal_batch(n: np.ndarray, rank_sum: np.ndarray, tie_term: np.ndarray) -> TestBatch:
    """Kruskal-Wallis H per alternative from group counts, rank sums and the tie term.

    ``H = 12 / (N (N+1)) sum n_i (Rbar_i - (N+1)/2)^2 / C`` with
    ``C = 1 - sum (t^3 - t) / (N^3 - N)``; chi-square on ``k - 1`` df. Ranks are mid-ranks
    of the pooled sample of that alternative.
    """
    n = np.atleast_2d(np.asarray(n, dtype=np.float64))
    rank_sum = np.atleast_2d(np.asarray(rank_sum, dtype=np.float64))
    tie_term = np.atleast_1d(np.asarray(tie_term, dtype=np.float64))
    present = n > 0
    levels = present.sum(axis=1)
    big_n = n.sum(axis=1)
    m = n.shape[0]
    with np.errstate(divide="ignore", invalid="ignore"):
        corr = 1 - tie_term / (big_n**3 - big_n)
    status = np.zeros(m, dtype=np.int8)
    status[~(corr > 0)] = 7
    status[levels < 2] = 1
    ok = status == 0
    stat, df1, p = (np.full(m, np.nan) for _ in range(3))
    if ok.any():
        nn, rr, nt = n[ok], rank_sum[ok], big_n[ok]
        with np.errstate(divide="ignore", invalid="ignore"):
            dev = np.where(nn > 0, rr / np.maximum(nn, 1) - (nt[:, None] + 1) / 2, 0.0)
        h = 12.0 / (nt * (nt + 1)) * (nn * dev * dev).sum(axis=1) / corr[ok]
        stat[ok] = h
        df1[ok] = levels[ok] - 1
        p[ok] = special.chdtrc(df1[ok], h)
    return TestBatch(statistic=stat, df_num=df1, df_den=np.full(m, np.nan), pvalue=p, status=status,
                     levels=levels)
