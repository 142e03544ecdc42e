"""Kruskal-Wallis after removing, pooling or moving observations, without re-ranking.

The Kruskal-Wallis H of a grouping needs each group's count and rank sum and the tie
term ``sum (t^3 - t)`` of the pooled sample (:func:`.omnibus_batch.kruskal_batch`).
Pooling two groups or moving a row to another group changes no rank: rank sums are
added or moved. Removing a set ``D`` of rows changes the mid-rank of every kept value
``v`` by ``-#{j in D: y_j < y_v} - #{j in D: y_j = y_v} / 2``, so each group's new rank
sum is exact from counts of the group's values above and tied with each removed value
(corrected for pairs inside ``D``), and the tie term from the sizes of the tie blocks
the removed values leave. Cost: O(n k log n) once, then O(k s^2) per removed set of
``s`` rows; mid-ranks are half-integers, exact in floating point.

References
----------
Kruskal, W. H. and Wallis, W. A. (1952). Use of ranks in one-criterion variance
analysis. JASA 47, 583-621 (H with the tie correction).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..inference.omnibus import midranks

__all__ = ["RankData", "rank_data"]


def _tie_f(t: np.ndarray) -> np.ndarray:
    t = np.asarray(t, dtype=np.float64)
    return t * t * t - t


@dataclass(frozen=True, kw_only=True, eq=False)
class RankData:
    """Ranks of the kept rows of a one-factor study and what rank updates need.

    ``ranks`` are mid-ranks (1-based), ``block`` the tie block of each row and
    ``block_size`` each block's size; ``above[i, g]`` / ``tied[i, g]`` count the values
    of group ``g`` greater than / equal to ``y[i]`` (``i`` itself included in ``tied``).
    """

    y: np.ndarray
    codes: np.ndarray
    k: int
    n: np.ndarray
    ranks: np.ndarray
    rank_sum: np.ndarray
    block: np.ndarray
    block_size: np.ndarray
    tie_term: float
    above: np.ndarray
    tied: np.ndarray

    @property
    def size(self) -> int:
        return int(self.y.size)

    def base(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(n, rank sums, tie term) of the data as they are, as a batch of one."""
        return self.n[None, :], self.rank_sum[None, :], np.array([self.tie_term])

    def removal(self, sets: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(n, rank sums, tie term) after removing each row set (``(m, s)`` row positions, no repeats)."""
        sets = np.atleast_2d(np.asarray(sets, dtype=np.int64))
        m, s = sets.shape
        k = self.k
        g = self.codes[sets]  # (m, s)
        yv = self.y[sets]
        onehot = np.zeros((m, s, k))
        np.put_along_axis(onehot, g[:, :, None], 1.0, axis=2)
        n_new = self.n[None, :] - onehot.sum(axis=1)
        own = (onehot * self.ranks[sets][:, :, None]).sum(axis=1)
        above = self.above[sets].astype(np.float64)  # (m, s, k)
        tied = self.tied[sets].astype(np.float64)
        for a in range(s):  # pairs inside the set: removed values are not kept values
            for b in range(s):
                higher = (yv[:, b] > yv[:, a]).astype(np.float64)
                same = (yv[:, b] == yv[:, a]).astype(np.float64)
                above[:, a, :] -= higher[:, None] * onehot[:, b, :]
                tied[:, a, :] -= same[:, None] * onehot[:, b, :]
        r_new = self.rank_sum[None, :] - own - above.sum(axis=1) - 0.5 * tied.sum(axis=1)
        blk = self.block[sets]
        removed_from_block = (blk[:, :, None] == blk[:, None, :]).sum(axis=2).astype(np.float64)  # (m, s)
        t = self.block_size[blk].astype(np.float64)
        change = (_tie_f(t - removed_from_block) - _tie_f(t)) / removed_from_block
        return n_new, r_new, self.tie_term + change.sum(axis=1)

    def deletion(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(n, rank sums, tie term) with each row left out in turn (O(n k))."""
        rows = np.arange(self.size)
        onehot = np.zeros((self.size, self.k))
        onehot[rows, self.codes] = 1.0
        n_new = self.n[None, :] - onehot
        r_new = (self.rank_sum[None, :] - onehot * self.ranks[:, None] - self.above
                 - 0.5 * (self.tied - onehot))
        t = self.block_size[self.block].astype(np.float64)
        return n_new, r_new, self.tie_term + _tie_f(t - 1) - _tie_f(t)

    def merges(self, pairs: list[tuple[int, int]]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(n, rank sums, tie term) with the groups of each pair pooled (into the first; ranks unchanged)."""
        m = len(pairs)
        n = np.repeat(self.n[None, :], m, axis=0)
        r = np.repeat(self.rank_sum[None, :], m, axis=0)
        for i, (a, b) in enumerate(pairs):
            n[i, a] += n[i, b]
            r[i, a] += r[i, b]
            n[i, b] = r[i, b] = 0.0
        return n, r, np.full(m, self.tie_term)

    def moves(self, rows: np.ndarray, targets: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(n, rank sums, tie term) with row ``rows[j]`` moved to group ``targets[j]`` (ranks unchanged)."""
        rows = np.asarray(rows, dtype=np.int64)
        m = rows.size
        idx = np.arange(m)
        n = np.repeat(self.n[None, :], m, axis=0)
        r = np.repeat(self.rank_sum[None, :], m, axis=0)
        src = self.codes[rows]
        n[idx, src] -= 1
        r[idx, src] -= self.ranks[rows]
        n[idx, targets] += 1
        r[idx, targets] += self.ranks[rows]
        return n, r, np.full(m, self.tie_term)


def rank_data(y: np.ndarray, codes: np.ndarray, k: int) -> RankData:
    """Mid-ranks, tie blocks and per-group counts above/tied for each row (O(n k log n))."""
    y = np.asarray(y, dtype=np.float64)
    codes = np.asarray(codes, dtype=np.int64)
    ranks, sizes = midranks(y)
    order = np.argsort(y, kind="stable")
    ys = y[order]
    block_sorted = np.cumsum(np.r_[True, ys[1:] != ys[:-1]]) - 1 if y.size else np.zeros(0, dtype=np.int64)
    block = np.empty(y.size, dtype=np.int64)
    block[order] = block_sorted
    # Counts per level at or below each value: cumulative counts along the sorted order, read at the
    # last (and just before the first) position of each tie block. O(n k), no search per level.
    size = y.size
    last = np.r_[np.flatnonzero(ys[1:] != ys[:-1]), size - 1] if size else np.zeros(0, dtype=np.int64)
    first = np.r_[0, last[:-1] + 1] if size else np.zeros(0, dtype=np.int64)
    onehot = np.zeros((size + 1, k), dtype=np.int64)
    onehot[np.arange(1, size + 1), codes[order]] = 1
    np.cumsum(onehot, axis=0, out=onehot)  # onehot[p, g]: level-g values among the p smallest
    le = onehot[last + 1][block]  # values <= y[i], per level
    lt = onehot[first][block]  # values < y[i], per level
    n_levels = onehot[size]
    above = n_levels[None, :] - le
    tied = le - lt
    n = np.bincount(codes, minlength=k).astype(np.float64)
    return RankData(y=y, codes=codes, k=k, n=n, ranks=ranks, rank_sum=np.bincount(codes, weights=ranks, minlength=k),
                    block=block, block_size=np.asarray(sizes, dtype=np.int64),
                    tie_term=float(_tie_f(sizes).sum()), above=above, tied=tied)
