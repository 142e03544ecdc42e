"""Permutation tests of the classic F on many alternative analyses from one set of permutations.

With the multiset of responses fixed, the permutation distribution of F depends only on
the group sizes, and F is an increasing function of ``T = sum_g S_g^2 / n_g`` (``S_g``
the group sums of the centred response). Contiguous blocks of a uniformly random
ordering of the values are a uniformly random partition into groups of those sizes, so
one set of ``B`` seeded orderings gives the null distribution of ``T`` for *every*
grouping of the same values: each merge of two levels and each move of a row is one
layout of block boundaries, read from the cumulative sums of each ordering (O(k) per
ordering and layout).

Leaving a row out changes the values themselves. Every ordering serves every deletion:
given where row ``i``'s value landed, the other ``n - 1`` values fill the other positions
uniformly at random. If it landed in its own level's block, taking it out leaves a
uniformly random grouping into the reduced sizes. If it landed in another block, the
value at the first position of its own level's block is moved into its place: a fixed
one-to-one map of positions, so the result is again a uniformly random grouping of the
other ``n - 1`` values into the reduced sizes. The null of each deletion is thus read
from all ``B`` orderings, O(1) per ordering and row, O(B n) in all.

p-values are ``(b + 1) / (B' + 1)`` with ``b`` the orderings at least as extreme out of the
``B'`` used (Good 2005), as in :func:`.omnibus.permutation_f`. Rows are held sorted by
level (stably), so the ordering that groups the values as they are is the permutation
F's own and the unchanged layout gives the decision's p-value exactly.

Orderings are drawn sequentially (:mod:`..inference.sequential_mc`): at each look every
alternative's decision at alpha is examined and drawing stops once all are settled
(each with resampling risk at most ``RESAMPLING_RISK``); an alternative whose p-value
is near alpha keeps the drawing going to the budget ``B``. Using one set of orderings
for every alternative (common random numbers) makes differences between alternatives'
p-values far less noisy than independent runs would (Glasserman 2004, sec. 4.2), which is
what a scan compares.

References
----------
Good, P. (2005). Permutation, Parametric and Bootstrap Tests of Hypotheses, 3rd ed.,
Springer, ch. 3 and 5.
Glasserman, P. (2004). Monte Carlo Methods in Financial Engineering, Springer, sec. 4.2
(common random numbers).
"""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np

from ..inference.sequential_mc import looks, ordering_chunks, settled

__all__ = ["SharedPermutations"]

_TIE = 1 - 1e-12  # a statistic equal to the observed one up to rounding counts as extreme
_DELETION_CELLS = 1_000_000  # the deletion pass holds about eight arrays of this many cells


class SharedPermutations:
    """``B`` seeded orderings of the centred response of a one-factor study, for many alternatives.

    ``drawn`` is the number of orderings the last call used (at most ``permutations``).
    """

    def __init__(self, y: np.ndarray, codes: np.ndarray, k: int, permutations: int, seed: int) -> None:
        codes = np.asarray(codes, dtype=np.int64)
        self.by_level = np.argsort(codes, kind="stable")  # internal position -> row
        y = np.asarray(y, dtype=np.float64)[self.by_level]
        self.y = y - y.mean()
        self.codes = codes[self.by_level]
        self.k = k
        self.n = np.bincount(self.codes, minlength=k).astype(np.float64)
        self.permutations = int(permutations)
        self.seed = int(seed)
        self.drawn = 0

    def orderings(self, count: int | None = None, stops: tuple[int, ...] = (),
                  cells: int | None = None) -> Iterator[np.ndarray]:
        """Chunks ``(c, n)`` of internal positions, each line a uniformly random ordering (same seed, same
        orderings); ``count`` lines in all (default ``permutations``), no chunk crossing a count in ``stops``."""
        return ordering_chunks(self.y.size, self.permutations if count is None else count, self.seed, stops, cells)

    def _looks(self, alpha: float | None) -> tuple[int, ...]:
        return looks(self.permutations) if alpha is not None else (self.permutations,)

    def observed(self, n: np.ndarray, sums: np.ndarray) -> np.ndarray:
        """``T = sum S_g^2 / n_g`` for ``(m, k')`` group counts and sums of the centred response."""
        n = np.atleast_2d(n)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(n > 0, np.atleast_2d(sums) ** 2 / np.maximum(n, 1), 0.0).sum(axis=1)

    def layout_pvalues(self, sizes: np.ndarray, layout: np.ndarray, observed: np.ndarray,
                       alpha: float | None = None) -> np.ndarray:
        """p-value of each alternative from the null of its layout.

        ``sizes`` is ``(L, k')``: group sizes of each distinct layout (zeros allowed);
        alternative ``j`` has layout ``layout[j]`` and observed statistic ``observed[j]``.
        With ``alpha``, drawing stops once every alternative's decision at alpha is settled.
        """
        sizes = np.atleast_2d(np.asarray(sizes, dtype=np.float64))
        layout = np.asarray(layout)
        observed = np.asarray(observed, dtype=np.float64)
        marks = self._looks(alpha)
        groups = [(lay, np.flatnonzero(layout == lay)) for lay in np.unique(layout)]
        nulls: list[np.ndarray] = []
        p = np.empty(observed.size)
        done = 0
        for part in self._layout_chunks(sizes, marks):
            nulls.append(part)
            done += part.shape[0]
            if done not in marks:
                continue
            null = np.vstack(nulls) if len(nulls) > 1 else nulls[0]
            nulls = [null]
            hits = np.empty(observed.size)
            for lay, sel in groups:
                srt = np.sort(null[:, lay])
                hits[sel] = srt.size - np.searchsorted(srt, observed[sel] * _TIE, side="left")
            p = (hits + 1) / (done + 1)
            if alpha is not None and done < self.permutations and bool(
                    settled(hits, np.full(hits.size, done), alpha, len(marks)).all()):
                break
        self.drawn = done
        return p

    def _layout_chunks(self, sizes: np.ndarray, marks: tuple[int, ...]) -> Iterator[np.ndarray]:
        """``(c, L)`` chunks: the statistic ``T`` of every ordering under every layout of group sizes."""
        bounds = np.hstack([np.zeros((sizes.shape[0], 1)), np.cumsum(sizes, axis=1)]).astype(np.int64)
        inv_n = np.where(sizes > 0, 1 / np.maximum(sizes, 1), 0.0)
        for order in self.orderings(stops=marks):
            cum = np.zeros((order.shape[0], order.shape[1] + 1))
            np.cumsum(self.y[order], axis=1, out=cum[:, 1:])
            s = cum[:, bounds[:, 1:]] - cum[:, bounds[:, :-1]]  # (c, L, k')
            yield (s * s * inv_n[None, :, :]).sum(axis=2)

    def layout_nulls(self, sizes: np.ndarray) -> np.ndarray:
        """``(B, L)``: the statistic ``T`` of every one of the ``B`` orderings under every layout of group sizes."""
        sizes = np.atleast_2d(np.asarray(sizes, dtype=np.float64))
        return np.vstack(list(self._layout_chunks(sizes, (self.permutations,))))

    def critical_f(self, alpha: float) -> float:
        """The (1 - alpha) point of the permutation distribution of F for the grouping as it is (all ``B``)."""
        t = self.layout_nulls(self.n[None, :])[:, 0]
        big_n, k = self.y.size, int((self.n > 0).sum())
        sst = float(np.dot(self.y, self.y))
        ssb = t  # the response is centred, so the correction term is zero
        with np.errstate(divide="ignore", invalid="ignore"):
            f = (ssb / (k - 1)) / ((sst - ssb) / (big_n - k))
        return float(np.quantile(f, 1 - alpha))

    def deletion_pvalues(self, alpha: float | None = None) -> tuple[np.ndarray, np.ndarray]:
        """(p-value, orderings used) for the data with each row left out in turn (see the module docstring),
        in the rows' own order. With ``alpha``, drawing stops once every row's decision at alpha is settled."""
        size = self.y.size
        g, y, k = self.codes, self.y, self.k
        n = self.n
        inv_n = np.where(n > 0, 1 / np.maximum(n, 1), 0.0)
        inv_n1 = np.where(n > 1, 1 / np.maximum(n - 1, 1), 0.0)
        present = n > 0
        starts = np.concatenate([[0], np.cumsum(n)[:-1]]).astype(np.int64)[present]
        levels = np.flatnonzero(present)
        sums = np.bincount(g, weights=y, minlength=k)
        obs_all = float(np.dot(sums**2, inv_n))
        obs = obs_all - sums[g] ** 2 * inv_n[g] + (sums[g] - y) ** 2 * inv_n1[g]
        hits = np.zeros(size)
        marks = self._looks(alpha)
        done = 0
        code_type = np.int8 if k < 128 else np.int64
        spread = np.broadcast_to(g.astype(code_type), (1, size))
        blocks = [(int(h), slice(int(a), int(a + n[h]))) for h, a in zip(levels, starts)]
        for order in self.orderings(stops=marks, cells=_DELETION_CELLS):
            c = order.shape[0]
            landed = np.empty(order.shape, dtype=code_type)
            np.put_along_axis(landed, order, np.broadcast_to(spread, order.shape), axis=1)  # level each value landed in
            yo = y[order]
            s = np.zeros((c, k))
            s[:, levels] = np.add.reduceat(yo, starts, axis=1)  # positions are blocks of the levels
            first = np.zeros((c, k))
            first[:, levels] = yo[:, starts]  # the value at the first position of each level's block
            t_all = (s * s) @ inv_n
            mean_sum = s * inv_n[None, :]
            for h, cols in blocks:
                yi = y[cols][None, :]
                land = landed[:, cols]
                s_own, v = s[:, h:h + 1], first[:, h:h + 1]
                base = t_all[:, None] - s_own**2 * inv_n[h]
                # landed in its own level: take it out
                t_own = base + (s_own - yi) ** 2 * inv_n1[h]
                # landed in level l: the first value v of its own block takes its place, so S_l gains v - y_i
                d = v - yi
                t_other = (base + (s_own - v) ** 2 * inv_n1[h]) + d * (d * inv_n[land] + 2 * np.take_along_axis(
                    mean_sum, land.astype(np.intp), axis=1))
                t_del = np.where(land == h, t_own, t_other)
                hits[cols] += (t_del >= obs[cols][None, :] * _TIE).sum(axis=0)
            done += c
            if alpha is not None and done in marks and done < self.permutations and bool(
                    settled(hits, np.full(size, done), alpha, len(marks)).all()):
                break
        self.drawn = done
        p = np.empty(size)
        p[self.by_level] = (hits + 1) / (done + 1)
        return p, np.full(size, float(done))
