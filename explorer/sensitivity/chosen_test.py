"""The study's chosen overall test, scored on many alternative analyses of a one-factor study.

The sensitivity scans ask what the decision would be with a row left out, two levels
merged, a row moved or a set of rows removed. They ask it under the test the decision
is read from (``study.spec.test``), each test with the fastest exact route:

* classic F, Welch F, Brown-Forsythe F*: closed-form updates of each group's count,
  mean and centred sum of squares (:func:`.alternatives.evaluate_alternatives`);
* Kruskal-Wallis H: exact rank-sum updates without re-ranking (:mod:`.rank_updates`);
* permutation F: one set of seeded orderings shared by every alternative
  (:mod:`.shared_permutations`): merges and moves exactly as a permutation test of each
  alternative, deletions from the orderings that place the row's value in its own level;
  drawn sequentially, stopping once every alternative's decision at alpha is settled
  (:mod:`..inference.sequential_mc`).

Every result keeps the classic partition's sums of squares and eta squared beside the
test's own statistic and p-value, and :attr:`ChosenTest.how` says how it was computed.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from ..engine.errors import DesignError
from ..engine.oneway import fit_oneway
from ..engine.results import Results
from ..engine.spec import ModelSpec
from ..inference.omnibus import PERMUTATION_SEED, PERMUTATIONS, overall_test
from ..inference.omnibus_batch import kruskal_batch
from ..inference.sequential_mc import RESAMPLING_RISK
from .alternatives import (
    MOMENT_TESTS,
    AlternativeFits,
    OnewayInput,
    deletion_fits,
    evaluate_alternatives,
    leave_one_out,
    with_test,
)
from .moment_deletion import brown_forsythe_deletion, welch_deletion
from .rank_updates import RankData, rank_data
from .shared_permutations import SharedPermutations

__all__ = ["HOW", "STATISTIC_NAMES", "ChosenTest", "RowDeletions"]

#: Column name of each test's statistic in scan tables.
STATISTIC_NAMES = {"classic": "F", "welch": "F", "brown-forsythe": "F*", "kruskal": "H", "permutation": "F"}
#: How the scans compute each test (a sentence for their notes).
HOW = {
    "classic": "classic F from closed-form updates of each level's count, mean and sum of squares",
    "welch": "Welch F from closed-form updates of each level's count, mean and variance",
    "brown-forsythe": ("Brown-Forsythe F* (Mehrotra df) from closed-form updates of each level's count, mean and "
                       "variance"),
    "kruskal": "Kruskal-Wallis H from exact rank-sum updates (no re-ranking; ties kept as mid-ranks)",
    "permutation": (f"permutation F from one set of up to {PERMUTATIONS} seeded orderings shared by every alternative "
                    f"(seed {PERMUTATION_SEED}), drawn until every alternative's decision at alpha is settled "
                    f"(sequential rule, resampling risk at most {RESAMPLING_RISK:g} each) or all are drawn; "
                    "for a row left out, every ordering with the row's value taken out (and, when it landed "
                    "in another level, the first value of its own level's block moved into its place); "
                    "each p's Monte Carlo SE is sqrt(p (1 - p) / L), L the orderings drawn"),
}


@dataclass(frozen=True, kw_only=True, eq=False)
class RowDeletions:
    """The chosen test with each row left out: ``fits`` (one alternative per row), the
    downdated count ``n`` and ``mean`` of each row's level, and the permutation orderings
    used (``None`` unless the test is the permutation F)."""

    fits: AlternativeFits
    n: np.ndarray
    mean: np.ndarray
    permutations_used: np.ndarray | None


class ChosenTest:
    """Score alternatives of the one-factor data ``data`` under the overall test of ``spec`` (decisions at
    ``alpha``, default the study's)."""

    def __init__(self, data: OnewayInput, spec: ModelSpec, alpha: float | None = None) -> None:
        self.data = data
        self.spec = spec
        self.test = spec.test
        self._ranks: RankData | None = None
        self._perms: SharedPermutations | None = None
        self._critical: dict[float, float] = {}
        self._drawn: list[tuple[str, int]] = []
        self.alpha = float(data.alpha if alpha is None else alpha)  # level at which sequential draws settle

    @property
    def how(self) -> str:
        """How the scans compute the test; under the permutation F, with the orderings this scan drew."""
        if self.test == "permutation" and self._drawn:
            drawn = ", ".join(f"{count} for the {what}" for what, count in self._drawn)
            return f"{HOW[self.test]}; orderings drawn: {drawn}"
        return HOW[self.test]

    @property
    def statistic_name(self) -> str:
        return STATISTIC_NAMES[self.test]

    @property
    def ranks(self) -> RankData:
        if self._ranks is None:
            d = self.data
            self._ranks = rank_data(d.y, d.codes, d.k)
        return self._ranks

    @property
    def permutations(self) -> SharedPermutations:
        if self._perms is None:
            d = self.data
            self._perms = SharedPermutations(d.y, d.codes, d.k, PERMUTATIONS, PERMUTATION_SEED)
        return self._perms

    # ------------------------------------------------------------------ helpers
    def _moments(self, n: np.ndarray, mean: np.ndarray, m2: np.ndarray) -> AlternativeFits:
        """Classic fits of ``(m, k)`` group statistics, under the test itself when it is a moment test."""
        test = self.test if self.test in MOMENT_TESTS else "classic"
        return evaluate_alternatives(n, mean, m2, self.data.scale(), test)

    def _ranked(self, fits: AlternativeFits, parts: tuple[np.ndarray, np.ndarray, np.ndarray]) -> AlternativeFits:
        return with_test(fits, kruskal_batch(*parts))

    def _permuted(self, fits: AlternativeFits, pvalues: np.ndarray) -> AlternativeFits:
        p = np.where(fits.status == 0, pvalues, np.nan)
        return AlternativeFits(**{**{f: getattr(fits, f) for f in AlternativeFits.__dataclass_fields__},
                                  "pvalue": p})

    # ------------------------------------------------------------------ alternatives
    def deletion(self) -> RowDeletions:
        """Each row left out: the fits, the downdated count and mean of the row's level, the orderings used."""
        classic, new_n, new_mean = deletion_fits(self.data)
        used = None
        if self.test in ("welch", "brown-forsythe"):
            gs, g = self.data.stats, self.data.codes
            _, _, new_m2 = leave_one_out(self.data)
            with np.errstate(divide="ignore", invalid="ignore"):
                new_var = np.where(new_n > 1, new_m2 / (new_n - 1), 0.0)
            var = gs.variances()
            if self.test == "welch":
                batch = welch_deletion(gs.n, gs.mean, var, g, new_n, new_mean, new_var)
            else:
                batch = brown_forsythe_deletion(gs.n, var, g, new_n, new_var, classic.ss_between)
            fits = with_test(classic, batch)
        elif self.test == "kruskal":
            fits = self._ranked(classic, self.ranks.deletion())
        elif self.test == "permutation":
            p, used = self.permutations.deletion_pvalues(self.alpha)
            self._drawn.append(("deletions", self.permutations.drawn))
            fits = self._permuted(classic, p)
        else:
            fits = classic
        return RowDeletions(fits=fits, n=new_n, mean=new_mean, permutations_used=used)

    def merges(self, n: np.ndarray, mean: np.ndarray, m2: np.ndarray, pairs: list[tuple[int, int]]) -> AlternativeFits:
        """Each pair of levels pooled (``(P, k)`` pooled statistics, second level emptied)."""
        fits = self._moments(n, mean, m2)
        if self.test == "kruskal":
            return self._ranked(fits, self.ranks.merges(pairs))
        if self.test == "permutation":
            sums = self._sums(n, mean)
            layout = np.arange(len(pairs))
            p = self.permutations.layout_pvalues(n, layout, self.permutations.observed(n, sums), self.alpha)
            self._drawn.append(("merges", self.permutations.drawn))
            return self._permuted(fits, p)
        return fits

    def moves(self, n: np.ndarray, mean: np.ndarray, m2: np.ndarray, rows: np.ndarray,
              targets: np.ndarray) -> AlternativeFits:
        """Row ``rows[j]`` moved to level ``targets[j]`` (``(m, k)`` updated statistics)."""
        fits = self._moments(n, mean, m2)
        if self.test == "kruskal":
            return self._ranked(fits, self.ranks.moves(rows, targets))
        if self.test == "permutation":
            k = self.data.k
            src = self.data.codes[rows]
            layout_key = src * k + np.asarray(targets)
            keys, layout = np.unique(layout_key, return_inverse=True)
            sizes = np.repeat(self.data.stats.n[None, :].astype(float), keys.size, axis=0)
            sizes[np.arange(keys.size), keys // k] -= 1
            sizes[np.arange(keys.size), keys % k] += 1
            sums = self._sums(n, mean)
            obs = self.permutations.observed(n, sums)
            p = self.permutations.layout_pvalues(sizes, layout, obs, self.alpha)
            self._drawn.append(("moves", self.permutations.drawn))
            return self._permuted(fits, p)
        return fits

    def removal(self, sets: np.ndarray, n: np.ndarray, mean: np.ndarray, m2: np.ndarray,
                kept: np.ndarray | None = None) -> AlternativeFits:
        """Each row set removed (``(m, s)`` positions; statistics after removal given).

        ``kept`` marks rows already removed by earlier steps (rank test: re-ranked first).
        Under the permutation test the classic F is returned; the flip finder refers it to
        the permutation critical value (:meth:`critical`).
        """
        fits = self._moments(n, mean, m2)
        if self.test == "kruskal":
            return self._ranked(fits, self.rank_parts(sets, kept))
        return fits

    def rank_parts(self, sets: np.ndarray, kept: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(count, rank sum of each level, tie term) after removing each row set from the kept rows
        (mid-ranks of the remaining rows, by exact downdates)."""
        ranks = self.ranks
        if kept is not None and not kept.all():
            ranks = self._kept_ranks(kept)
            sets = np.searchsorted(np.flatnonzero(kept), sets)
        return ranks.removal(sets)

    def _kept_ranks(self, kept: np.ndarray) -> RankData:
        d = self.data
        return rank_data(d.y[kept], d.codes[kept], d.k)

    def _sums(self, n: np.ndarray, mean: np.ndarray) -> np.ndarray:
        """Group sums of the response centred at its overall mean (the permutation statistic's scale)."""
        centre = float(np.mean(self.data.y))
        return np.where(n > 0, n * (mean - centre), 0.0)

    # ------------------------------------------------------------------ decisions
    def critical(self, fits: AlternativeFits, alpha: float) -> np.ndarray:
        """Critical value of each alternative's statistic at ``alpha`` (NaN where undefined)."""
        ok = fits.status == 0
        out = np.full(ok.shape, np.nan)
        if not ok.any():
            return out
        d1 = np.asarray(fits.df_between, dtype=float)[ok]
        if self.test == "kruskal":
            out[ok] = special.chdtri(d1, alpha)
        elif self.test == "permutation":
            out[ok] = self.critical_value(alpha)
        else:
            out[ok] = special.fdtri(d1, np.asarray(fits.df_within, dtype=float)[ok], 1 - alpha)
        return out

    def critical_value(self, alpha: float) -> float:
        """Permutation test only: the (1 - alpha) point of the permutation distribution of F on all rows."""
        if alpha not in self._critical:
            self._critical[alpha] = self.permutations.critical_f(alpha)
        return self._critical[alpha]

    def refit_results(self, keep: np.ndarray) -> Results | None:
        """A fresh two-pass analysis of the kept rows (``None`` when the design cannot be fitted)."""
        d = self.data
        try:
            return fit_oneway(d.y[keep], d.codes[keep], d.labels, row_ids=d.row_ids[keep], positions=d.positions[keep],
                              offset=d.offset, spec=self.spec)
        except DesignError:
            return None

    def refit(self, keep: np.ndarray) -> float | None:
        """The test's p-value on the kept rows, computed afresh as the decision would be after leaving
        the others out (a two-pass fit, then the study's overall test on it)."""
        res = self.refit_results(keep)
        return None if res is None else overall_test(res, self.test).pvalue
