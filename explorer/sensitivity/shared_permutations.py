"""Permutation tests of the classic F on many alternative analyses from one set of permutations.

With the multiset of responses fixed, the permutation distribution of F depends only on
the group sizes, and F is an increasing function of ``T = sum_g S_g^2 / n_g`` (``S_g``
the group sums of the centred response). Contiguous blocks of a uniformly random
ordering of the values are a uniformly random partition into groups of those sizes, so
one set of ``B`` seeded orderings gives the null distribution of ``T`` for *every*
grouping of the same values: each merge of two levels and each move of a row is one
layout of block boundaries, read from the cumulative sums of each ordering (O(k) per
ordering and layout).

Leaving a row out changes the values themselves. Among the orderings of all ``n``
values, those that place row ``i``'s value in its own group are, once that value is
removed, uniformly random groupings of the other ``n - 1`` values into the reduced
sizes: the null of the deletion of row ``i`` is read from them (about ``B n_g / n``
orderings for a row of group ``g``; the count is reported per row). O(B n) in all.

p-values are ``(b + 1) / (B' + 1)`` with ``b`` the orderings at least as extreme out of the
``B'`` used (Good 2005), as in :func:`.omnibus.permutation_f`.

References
----------
Good, P. (2005). Permutation, Parametric and Bootstrap Tests of Hypotheses, 3rd ed.,
Springer, ch. 3 and 5.
"""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np

__all__ = ["SharedPermutations"]

_CELLS_PER_CHUNK = 2_000_000
_TIE = 1 - 1e-12  # a statistic equal to the observed one up to rounding counts as extreme


class SharedPermutations:
    """``B`` seeded orderings of the centred response of a one-factor study, for many alternatives."""

    def __init__(self, y: np.ndarray, codes: np.ndarray, k: int, permutations: int, seed: int) -> None:
        y = np.asarray(y, dtype=np.float64)
        self.y = y - y.mean()
        self.codes = np.asarray(codes, dtype=np.int64)
        self.k = k
        self.n = np.bincount(self.codes, minlength=k).astype(np.float64)
        self.permutations = int(permutations)
        self.seed = int(seed)

    def _orderings(self) -> Iterator[np.ndarray]:
        """Chunks ``(c, n)`` of row indices, each line a uniformly random ordering (same seed, same orderings)."""
        size = self.y.size
        rng = np.random.default_rng(self.seed)
        chunk = max(1, min(self.permutations, _CELLS_PER_CHUNK // max(size, 1)))
        base = np.arange(size)
        done = 0
        while done < self.permutations:
            c = min(chunk, self.permutations - done)
            yield rng.permuted(np.broadcast_to(base, (c, size)), axis=1)
            done += c

    def observed(self, n: np.ndarray, sums: np.ndarray) -> np.ndarray:
        """``T = sum S_g^2 / n_g`` for ``(m, k')`` group counts and sums of the centred response."""
        n = np.atleast_2d(n)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(n > 0, np.atleast_2d(sums) ** 2 / np.maximum(n, 1), 0.0).sum(axis=1)

    def layout_pvalues(self, sizes: np.ndarray, layout: np.ndarray, observed: np.ndarray) -> np.ndarray:
        """p-value of each alternative from the null of its layout.

        ``sizes`` is ``(L, k')``: group sizes of each distinct layout (zeros allowed);
        alternative ``j`` has layout ``layout[j]`` and observed statistic ``observed[j]``.
        """
        sizes = np.atleast_2d(np.asarray(sizes, dtype=np.float64))
        null = self.layout_nulls(sizes)
        p = np.empty(np.asarray(observed).size)
        for lay in np.unique(layout):
            sel = np.flatnonzero(layout == lay)
            srt = np.sort(null[:, lay])
            extreme = srt.size - np.searchsorted(srt, np.asarray(observed)[sel] * _TIE, side="left")
            p[sel] = (extreme + 1) / (self.permutations + 1)
        return p

    def layout_nulls(self, sizes: np.ndarray) -> np.ndarray:
        """``(B, L)``: the statistic ``T`` of every ordering under every layout of group sizes."""
        sizes = np.atleast_2d(np.asarray(sizes, dtype=np.float64))
        bounds = np.hstack([np.zeros((sizes.shape[0], 1)), np.cumsum(sizes, axis=1)]).astype(np.int64)
        inv_n = np.where(sizes > 0, 1 / np.maximum(sizes, 1), 0.0)
        out = []
        for order in self._orderings():
            cum = np.zeros((order.shape[0], order.shape[1] + 1))
            np.cumsum(self.y[order], axis=1, out=cum[:, 1:])
            s = cum[:, bounds[:, 1:]] - cum[:, bounds[:, :-1]]  # (c, L, k')
            out.append((s * s * inv_n[None, :, :]).sum(axis=2))
        return np.vstack(out)

    def critical_f(self, alpha: float) -> float:
        """The (1 - alpha) point of the permutation distribution of F for the grouping as it is."""
        t = self.layout_nulls(self.n[None, :])[:, 0]
        big_n, k = self.y.size, int((self.n > 0).sum())
        sst = float(np.dot(self.y, self.y))
        ssb = t  # the response is centred, so the correction term is zero
        with np.errstate(divide="ignore", invalid="ignore"):
            f = (ssb / (k - 1)) / ((sst - ssb) / (big_n - k))
        return float(np.quantile(f, 1 - alpha))

    def deletion_pvalues(self) -> tuple[np.ndarray, np.ndarray]:
        """(p-value, orderings used) for the data with each row left out in turn (see the module docstring)."""
        size = self.y.size
        g, y, k = self.codes, self.y, self.k
        n = self.n
        inv_n = np.where(n > 0, 1 / np.maximum(n, 1), 0.0)
        inv_n1 = np.where(n > 1, 1 / np.maximum(n - 1, 1), 0.0)
        sums = np.bincount(g, weights=y, minlength=k)
        obs_all = float(np.dot(sums**2, inv_n))
        obs = obs_all - sums[g] ** 2 * inv_n[g] + (sums[g] - y) ** 2 * inv_n1[g]
        hits = np.zeros(size)
        used = np.zeros(size)
        for order in self._orderings():
            c = order.shape[0]
            landed = np.empty_like(order)
            np.put_along_axis(landed, order, np.broadcast_to(g, order.shape), axis=1)  # group each value landed in
            s = np.bincount((np.arange(c)[:, None] * k + g[None, :]).ravel(), weights=y[order].ravel(),
                            minlength=c * k).reshape(c, k)
            t_all = (s * s) @ inv_n
            own = landed == g[None, :]
            s_own = s[:, g]
            t_del = t_all[:, None] - s_own**2 * inv_n[g][None, :] + (s_own - y[None, :]) ** 2 * inv_n1[g][None, :]
            used += own.sum(axis=0)
            hits += (own & (t_del >= obs[None, :] * _TIE)).sum(axis=0)
        return (hits + 1) / (used + 1), used
