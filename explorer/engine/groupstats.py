"""Per-group sufficient statistics: counts, means and centred sums of squares.

Everything a fixed-effects partition needs is a function of these three numbers per
group (or per cell). They are computed with a corrected two-pass algorithm and
combined or downdated with the pairwise formulas, never from raw sums of squares.

References
----------
Chan, T. F., Golub, G. H. and LeVeque, R. J. (1983). Algorithms for computing the
sample variance: analysis and recommendations. The American Statistician 37(3), 242-247.
Welford, B. P. (1962). Note on a method for calculating corrected sums of squares and
products. Technometrics 4(3), 419-420.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .numerics import read_only

__all__ = ["GroupStats", "group_stats", "pool_groups"]


@dataclass(frozen=True, kw_only=True, eq=False)
class GroupStats:
    """Counts, means and centred sums of squares of a response split into groups.

    ``mean`` is on the shifted scale: the mean of the original values is
    ``mean + offset``. ``m2`` is the within-group centred sum of squares
    (sum of squared deviations from the group mean).
    """

    labels: tuple[str, ...]
    n: np.ndarray
    mean: np.ndarray
    m2: np.ndarray
    offset: float = 0.0

    @property
    def k(self) -> int:
        return len(self.labels)

    @property
    def n_total(self) -> int:
        return int(self.n.sum())

    @property
    def grand_mean(self) -> float:
        """Weighted mean of the group means (shifted scale)."""
        return float(np.dot(self.n, self.mean) / self.n_total)

    @property
    def ss_within(self) -> float:
        return float(self.m2.sum())

    @property
    def ss_between(self) -> float:
        d = self.mean - self.grand_mean
        return float(np.dot(self.n, d * d))

    @property
    def original_means(self) -> np.ndarray:
        return self.mean + self.offset

    def variances(self) -> np.ndarray:
        """Sample variances (ddof=1); NaN where a group has one observation."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(self.n > 1, self.m2 / np.maximum(self.n - 1, 1), np.nan)

    def nonempty(self) -> "GroupStats":
        """The same statistics without groups that have no observations."""
        keep = self.n > 0
        if keep.all():
            return self
        return GroupStats(
            labels=tuple(lab for lab, k in zip(self.labels, keep) if k),
            n=read_only(self.n[keep].copy()),
            mean=read_only(self.mean[keep].copy()),
            m2=read_only(self.m2[keep].copy()),
            offset=self.offset,
        )

    def merged(self, groups: list[int], label: str) -> "GroupStats":
        """Pool the listed groups into one (parallel-merge formula of Chan et al. 1983).

        The pooled group takes the position of the first listed group.
        """
        groups = sorted(groups)
        idx = np.asarray(groups)
        n_p = self.n[idx].sum()
        if n_p > 0:
            mean_p = np.dot(self.n[idx], self.mean[idx]) / n_p
            dev = self.mean[idx] - mean_p
            m2_p = self.m2[idx].sum() + np.dot(self.n[idx], dev * dev)
        else:
            mean_p, m2_p = 0.0, 0.0
        keep = [i for i in range(self.k) if i not in set(groups[1:])]
        n = self.n.copy()
        mean = self.mean.copy()
        m2 = self.m2.copy()
        n[groups[0]], mean[groups[0]], m2[groups[0]] = n_p, mean_p, m2_p
        labels = list(self.labels)
        labels[groups[0]] = label
        return GroupStats(
            labels=tuple(labels[i] for i in keep),
            n=read_only(n[keep]),
            mean=read_only(mean[keep]),
            m2=read_only(m2[keep]),
            offset=self.offset,
        )


def group_stats(y: np.ndarray, codes: np.ndarray, labels: tuple[str, ...], offset: float = 0.0) -> GroupStats:
    """Sufficient statistics of ``y`` split by integer ``codes`` (0..k-1).

    Corrected two-pass algorithm (Chan, Golub and LeVeque 1983, eq. 1.7): a first
    pass for the means, a second for the deviations, and the sum of the deviations
    used to correct both the mean and the sum of squares for rounding in pass one.
    """
    k = len(labels)
    codes = np.asarray(codes, dtype=np.intp)  # np.bincount reads intp: convert once, not in each of its four calls
    n = np.bincount(codes, minlength=k).astype(np.int64)
    s = np.bincount(codes, weights=y, minlength=k)
    with np.errstate(divide="ignore", invalid="ignore"):
        mean = np.where(n > 0, s / np.maximum(n, 1), 0.0)
    r = mean[codes]  # one row-sized temporary: y - mean, then its square, in place
    np.subtract(y, r, out=r)
    rs = np.bincount(codes, weights=r, minlength=k)
    np.multiply(r, r, out=r)
    r2 = np.bincount(codes, weights=r, minlength=k)
    del r, codes
    with np.errstate(divide="ignore", invalid="ignore"):
        corr = np.where(n > 0, rs / np.maximum(n, 1), 0.0)
    mean = mean + corr
    m2 = np.maximum(r2 - rs * corr, 0.0)
    return GroupStats(labels=tuple(labels), n=read_only(n), mean=read_only(mean), m2=read_only(m2), offset=offset)


def pool_groups(
    n: np.ndarray, mean: np.ndarray, m2: np.ndarray, codes: np.ndarray, labels: tuple[str, ...], offset: float = 0.0
) -> GroupStats:
    """Pool partial statistics (n, mean, centred SS) into ``len(labels)`` groups by ``codes``.

    The k-way form of the parallel-merge formula of Chan, Golub and LeVeque (1983):
    ``mean = sum n_i mean_i / N`` (made exact by one correction step) and
    ``m2 = sum m2_i + sum n_i (mean_i - mean)^2``. Partials can be cells, row batches
    or partitions of a cluster; groups without partials get n = 0.
    """
    k = len(labels)
    codes = np.asarray(codes, dtype=np.int64)
    nf = np.asarray(n, dtype=np.float64)
    mean = np.asarray(mean, dtype=np.float64)
    tot = np.bincount(codes, weights=nf, minlength=k)
    safe = np.maximum(tot, 1.0)
    pooled = np.bincount(codes, weights=nf * mean, minlength=k) / safe
    pooled = pooled + np.bincount(codes, weights=nf * (mean - pooled[codes]), minlength=k) / safe
    dev = mean - pooled[codes]
    m2_p = np.bincount(codes, weights=np.asarray(m2, dtype=np.float64) + nf * dev * dev, minlength=k)
    return GroupStats(labels=tuple(labels), n=read_only(np.rint(tot).astype(np.int64)), mean=read_only(pooled),
                      m2=read_only(m2_p), offset=offset)
