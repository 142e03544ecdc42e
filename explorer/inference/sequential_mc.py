"""Sequential Monte Carlo decisions: stop drawing orderings once the decision at alpha is settled.

A Monte Carlo permutation test estimates the exact permutation p-value ``p`` (the share
of all groupings at least as extreme) from ``L`` random orderings, ``b`` of them at least
as extreme: ``p_hat = (b + 1) / (L + 1)``. When ``p`` is far from alpha a few hundred
orderings already say on which side of alpha it lies; only p-values near alpha need the
full budget. Orderings are drawn in the fixed, seeded sequence of the fixed-count test and
examined at the looks :func:`looks` (99, 199, 399, ... up to the budget). At each look the
Clopper-Pearson interval for ``p`` at level ``RESAMPLING_RISK / J`` (``J`` looks) is
computed; drawing stops once it lies wholly below or wholly above alpha (and ``p_hat`` is
on the same side). By the union bound over the looks, the decision stated differs from
the decision of the exact permutation p-value with probability at most
``RESAMPLING_RISK`` whatever ``p`` is, except when the budget is reached unsettled (then
``p`` is within Monte Carlo error of alpha and the fixed-count reading is given, as
without the rule). The reported p-value is ``(b + 1)/(L + 1)`` with its Monte Carlo
standard error ``sqrt(p_hat (1 - p_hat) / L)``; the first ``L`` orderings are those of
the fixed-count test with the same seed.

References
----------
Besag, J. and Clifford, P. (1991). Sequential Monte Carlo p-values. Biometrika 78,
301-304 (stopping early when the p-value is clearly large).
Fay, M. P. and Follmann, D. A. (2002). Designing Monte Carlo implementations of
permutation or bootstrap hypothesis tests. Amer. Statist. 56, 63-70 (the resampling risk).
Gandy, A. (2009). Sequential implementation of Monte Carlo tests with uniformly bounded
resampling risk. JASA 104, 1504-1511 (bounding it over all p by sequential intervals).
"""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np
from scipy import special

__all__ = ["RESAMPLING_RISK", "FIRST_LOOK", "looks", "ordering_chunks", "settled", "stopping_sentence"]

#: Largest chance that a stopped decision differs from the exact permutation p's decision.
RESAMPLING_RISK = 1e-3
#: Orderings drawn before the first look.
FIRST_LOOK = 99
_CELLS_PER_CHUNK = 2_000_000


def looks(budget: int) -> tuple[int, ...]:
    """Ordering counts at which the decision is examined: 99, 199, 399, ... (doubling + 1), then ``budget``."""
    out: list[int] = []
    b = FIRST_LOOK
    while b < budget:
        out.append(b)
        b = 2 * b + 1
    out.append(int(budget))
    return tuple(out)


def settled(hits: np.ndarray, used: np.ndarray, alpha: float, n_looks: int) -> np.ndarray:
    """Whether each Clopper-Pearson interval for ``p`` (``hits`` of ``used``, two-sided level
    ``RESAMPLING_RISK / n_looks``) lies wholly on one side of ``alpha``, with ``(hits + 1) / (used + 1)``
    on that side."""
    hits = np.asarray(hits, dtype=float)
    used = np.asarray(used, dtype=float)
    tail = RESAMPLING_RISK / n_looks / 2
    with np.errstate(divide="ignore", invalid="ignore"):
        upper = np.where(hits >= used, 1.0, special.betaincinv(hits + 1, np.maximum(used - hits, 1), 1 - tail))
        lower = np.where(hits <= 0, 0.0, special.betaincinv(np.maximum(hits, 1), used - hits + 1, tail))
    p_hat = (hits + 1) / (used + 1)
    below = (upper < alpha) & (p_hat < alpha)
    above = (lower > alpha) & (p_hat >= alpha)
    out: np.ndarray = (used > 0) & (below | above)
    return out


def ordering_chunks(size: int, budget: int, seed: int, stops: tuple[int, ...] = (),
                    cells: int | None = None) -> Iterator[np.ndarray]:
    """Chunks ``(c, size)`` of row indices, each line a uniformly random ordering, ``budget`` lines in all.

    The same seed gives the same sequence of orderings whatever the chunking (the lines of
    ``Generator.permuted(..., axis=1)`` on the same seed); no chunk crosses a count in
    ``stops`` (so a caller can examine the decision there); a chunk holds about ``cells``
    indices (default two million).
    """
    rng = np.random.default_rng(seed)
    chunk = max(1, (cells or _CELLS_PER_CHUNK) // max(size, 1))
    marks = sorted({s for s in stops if 0 < s < budget} | {int(budget)})
    done = 0
    for mark in marks:
        while done < mark:
            c = min(chunk, mark - done)
            out = np.empty((c, size), dtype=np.int64)
            for line in out:  # one Fisher-Yates shuffle per line: twice as fast as Generator.permuted(axis=1),
                line[:] = rng.permutation(size)  # and the same stream of orderings
            yield out
            done += c


def stopping_sentence(used: int, budget: int, alpha: float, stopped: bool) -> str:
    """How many orderings a sequential Monte Carlo decision drew and why it stopped there."""
    if stopped:
        return (f"Stopped after {used} of up to {budget} orderings: the decision at alpha = {alpha:g} was settled "
                f"(sequential rule; the chance it differs from the exact permutation p's decision is at most "
                f"{RESAMPLING_RISK:g}).")
    return (f"All {budget} orderings drawn: the p-value is within Monte Carlo error of alpha = {alpha:g}, "
            "so the decision carries that uncertainty (see the Monte Carlo SE).")
