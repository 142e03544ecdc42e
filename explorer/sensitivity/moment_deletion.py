"""Welch's F and Brown-Forsythe's F* with each row left out, in O(1) per row.

Leaving out a row changes one level's count, mean and variance. Welch's statistic and
Brown-Forsythe's are sums over levels, so each is "the other levels" (precomputed once
per level) plus the changed level's term. The weighted between-level sum of Welch's
numerator is written as two clusters (the other levels around their own weighted mean,
and the changed level against that mean), a sum of non-negative terms, as the classic
F's deletion is (:func:`.alternatives.deletion_fits`). The formulas are those of
:func:`.omnibus_batch.welch_batch` and :func:`.omnibus_batch.brown_forsythe_batch`; the
tests check both against statsmodels ``anova_oneway``.

References
----------
Welch, B. L. (1951). Biometrika 38, 330-336.
Brown, M. B. and Forsythe, A. B. (1974). Technometrics 16, 129-132.
Mehrotra, D. V. (1997). Commun. Stat. Simul. Comput. 26, 1139-1145.
"""

from __future__ import annotations

import numpy as np

from ..engine.distributions import f_sf
from ..inference.omnibus_batch import TestBatch

__all__ = ["brown_forsythe_deletion", "welch_deletion"]


def _others(values: np.ndarray) -> np.ndarray:
    """For each level, the sum of ``values`` over the other levels (``values`` is per level, ``(k, ...)``)."""
    return values.sum(axis=0, keepdims=True) - values


def _status(n: np.ndarray, var: np.ndarray, g: np.ndarray, new_n: np.ndarray, new_var: np.ndarray) -> np.ndarray:
    """Status codes of :data:`.omnibus_batch.UNDEFINED` for each row's deletion (levels = present levels)."""
    k = n.size
    one = n < 2
    flat = ~(var > 0)
    st = np.zeros(g.size, dtype=np.int8)
    # other levels with one observation or no spread make the test undefined whatever row leaves
    others_one = _others(one.astype(np.int64)[:, None])[:, 0][g] > 0
    others_flat = _others((flat & ~one).astype(np.int64)[:, None])[:, 0][g] > 0
    with np.errstate(invalid="ignore"):
        st[others_flat | ((new_n >= 2) & ~(new_var > 0))] = 6
    st[others_one | (new_n == 1)] = 5
    levels = k - (new_n == 0)
    st[levels < 2] = 1
    return st


def welch_deletion(n: np.ndarray, mean: np.ndarray, var: np.ndarray, g: np.ndarray, new_n: np.ndarray,
                   new_mean: np.ndarray, new_var: np.ndarray) -> TestBatch:
    """Welch's F with each row left out: per-level ``n, mean, var`` (all rows), each row's level ``g`` and the
    downdated count, mean and variance of that level."""
    n = n.astype(np.float64)
    st = _status(n, var, g, new_n, new_var)
    ok = st == 0
    m = g.size
    stat, df1, df2, p = (np.full(m, np.nan) for _ in range(4))
    with np.errstate(divide="ignore", invalid="ignore"):
        w = np.where(n > 1, n / var, 0.0)
        inv1 = np.where(n > 1, 1 / (n - 1), 0.0)
        wo, inv_o = _others(w[:, None])[:, 0], _others(inv1[:, None])[:, 0]
        co = np.where(wo > 0, _others((w * mean)[:, None])[:, 0] / wo, 0.0)
        ro = np.array([np.dot(np.delete(w, h), (np.delete(mean, h) - co[h]) ** 2) for h in range(n.size)])
        a1 = _others((w * inv1)[:, None])[:, 0]
        a2 = _others((w * w * inv1)[:, None])[:, 0]
        gi = g[ok]
        kept = new_n[ok] > 0  # a level of one row disappears with it
        wn = np.where(kept, new_n[ok] / np.where(kept, new_var[ok], 1.0), 0.0)
        big_w = wo[gi] + wn
        between = ro[gi] + wo[gi] * wn / big_w * (new_mean[ok] - co[gi]) ** 2
        k = float(n.size) - (~kept)
        own = np.where(kept, (1 - wn / big_w) ** 2 / np.where(kept, new_n[ok] - 1, 1.0), 0.0)
        lam = (inv_o[gi] - 2 * a1[gi] / big_w + a2[gi] / big_w**2) + own
        b = 1 + 2 * (k - 2) / (k * k - 1) * lam
        stat[ok] = between / (k - 1) / b
        df1[ok] = k - 1
        df2[ok] = (k * k - 1) / (3 * lam)
    p[ok] = f_sf(stat[ok], df1[ok], df2[ok])
    return TestBatch(statistic=stat, df_num=df1, df_den=df2, pvalue=p, status=st, levels=np.full(m, n.size))


def brown_forsythe_deletion(n: np.ndarray, var: np.ndarray, g: np.ndarray, new_n: np.ndarray, new_var: np.ndarray,
                            ss_between: np.ndarray) -> TestBatch:
    """Brown-Forsythe's F* (Mehrotra df) with each row left out; ``ss_between`` is each deletion's between-level
    sum of squares (the classic F's, :func:`.alternatives.deletion_fits`)."""
    n = n.astype(np.float64)
    st = _status(n, var, g, new_n, new_var)
    ok = st == 0
    m = g.size
    stat, df1, df2, p, df1_o = (np.full(m, np.nan) for _ in range(5))
    big_n = float(n.sum()) - 1
    with np.errstate(divide="ignore", invalid="ignore"):
        v = np.where(n > 1, var, 0.0)
        inv1 = np.where(n > 1, 1 / (n - 1), 0.0)
        sums = {name: _others(x[:, None])[:, 0] for name, x in {
            "v": v, "nv": n * v, "v2": v * v, "nv2": n * v * v,
            "v2i": v * v * inv1, "nv2i": n * v * v * inv1, "n2v2i": n * n * v * v * inv1}.items()}
        gi = g[ok]
        nn = new_n[ok]
        kept = nn > 0  # a level of one row disappears with it
        vv = np.where(kept, new_var[ok], 0.0)
        sum_v = sums["v"][gi] + vv
        sum_nv = sums["nv"][gi] + nn * vv
        denom = sum_v - sum_nv / big_n
        sat = (sums["v2i"][gi] - 2 * sums["nv2i"][gi] / big_n + sums["n2v2i"][gi] / big_n**2
               + np.where(kept, (1 - nn / big_n) ** 2 * vv * vv / np.where(kept, nn - 1, 1.0), 0.0))
        sum_v2 = sums["v2"][gi] + vv * vv
        sum_pv = sum_nv / big_n
        sum_pv2 = (sums["nv2"][gi] + nn * vv * vv) / big_n
        stat[ok] = ss_between[ok] / denom
        df2[ok] = denom**2 / sat
        df1[ok] = denom**2 / (sum_v2 + sum_pv**2 - 2 * sum_pv2)
        df1_o[ok] = float(n.size) - (~kept) - 1
    p[ok] = f_sf(stat[ok], df1[ok], df2[ok])
    # The original k - 1 reading is not computed here (a scan reads the reported p-value only).
    return TestBatch(statistic=stat, df_num=df1, df_den=df2, pvalue=p, status=st, levels=np.full(m, n.size),
                     original_df_num=df1_o)
