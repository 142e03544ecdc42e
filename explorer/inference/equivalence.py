"""Equivalence of level means: two one-sided tests against a margin the user gives.

For a difference ``d = mu_a - mu_b`` and a margin ``(low, high)`` in response units
(``low < 0 < high``; one number m means ``(-m, m)``), equivalence is claimed when both

    H01: d <= low   is rejected by  t_low  = (d_hat - low) / se  > t(1 - alpha; df)
    H02: d >= high  is rejected by  t_high = (d_hat - high) / se < -t(1 - alpha; df)

(Schuirmann 1987). The p-value of the pair is the larger of the two one-sided p-values,
and the claim at level alpha is the same as the 1 - 2 alpha interval of d lying inside
the margin, which is why that interval is the one shown. ``d_hat`` and ``se`` come from
the means of :mod:`.level_means` (level means with the residual mean square; least-
squares or adjusted means with their covariance in factorial or covariate models).

The margin is the user's: the smallest difference that matters in practice, fixed
before looking at the data. The kit never proposes one.

Several pairs: each claim is its own intersection-union test; claiming that every pair
listed is equivalent needs no adjustment (Berger 1982), claiming some of them while
others fail does: ``adjust='holm'`` or ``'bonferroni'`` applies to the pair p-values.

References
----------
Schuirmann, D. J. (1987). A comparison of the two one-sided tests procedure and the
power approach for assessing the equivalence of average bioavailability. J.
Pharmacokinet. Biopharm. 15, 657-680.
Berger, R. L. (1982). Multiparameter hypothesis testing and acceptance sampling.
Technometrics 24, 295-300.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from numbers import Real
from typing import Any

import numpy as np
import pandas as pd

from ..engine.distributions import t_ppf, t_sf
from ..engine.errors import DesignError, ExplorerError
from ..engine.pairwise import adjust_pvalues
from ..engine.results import Results
from ..engine.spec import alpha_or
from ..engine.tables import html_table
from ..formatting import show_measure
from ..rendering import html_repr
from .level_means import level_means

__all__ = ["EquivalenceTable", "equivalence", "parse_margin"]


@dataclass(frozen=True, kw_only=True, eq=False)
class EquivalenceTable:
    """Two one-sided tests for each pair ``first - second`` against ``(low, high)``.

    ``p_low``/``p_high`` are the one-sided p-values against the lower and upper margin,
    ``pvalue`` the larger (adjusted by ``adjustment`` when asked); ``ci_low``/``ci_high``
    the ``1 - 2 alpha`` interval of the difference; ``equivalent`` whether the claim holds
    at ``alpha``.
    """

    factor: str
    means: str
    first: tuple[str, ...]
    second: tuple[str, ...]
    low: float
    high: float
    difference: np.ndarray
    se: np.ndarray
    df: float
    t_low: np.ndarray
    t_high: np.ndarray
    p_low: np.ndarray
    p_high: np.ndarray
    pvalue: np.ndarray
    ci_low: np.ndarray
    ci_high: np.ndarray
    alpha: float
    adjustment: str
    equivalent: np.ndarray
    notes: tuple[str, ...] = field(default=())

    @property
    def interval_level(self) -> float:
        return 1 - 2 * self.alpha

    @property
    def title(self) -> str:
        return (f"Equivalence of the {self.means} of {self.factor} within ({show_measure(self.low)}, {show_measure(self.high)}): "
                f"two one-sided tests at alpha {self.alpha:g}"
                + ("" if self.adjustment == "none" else f", {self.adjustment} over {len(self.first)} pairs"))

    def to_frame(self) -> pd.DataFrame:
        pct = f"{self.interval_level:.0%}"
        return pd.DataFrame({
            "first": list(self.first), "second": list(self.second), "difference": self.difference,
            "standard error": self.se, "df": np.full(len(self.first), self.df),
            "t vs lower margin": self.t_low, "p vs lower margin": self.p_low,
            "t vs upper margin": self.t_high, "p vs upper margin": self.p_high,
            "p-value (larger)" if self.adjustment == "none" else f"p-value ({self.adjustment})": self.pvalue,
            f"{pct} low": self.ci_low, f"{pct} high": self.ci_high,
            "equivalent": ["yes" if e else "no" for e in self.equivalent],
        })

    @html_repr
    def _repr_html_(self) -> str:
        return html_table(self.to_frame(), self.title, self.notes)

    def to_text(self) -> str:
        frame = self.to_frame()
        return f"{self.title}\n{frame.astype(object).where(frame.notna(), '').to_string(index=False)}\n" + "\n".join(self.notes)


def _real(v: Any, what: str) -> float:
    if isinstance(v, bool) or not isinstance(v, (Real, np.integer, np.floating)) or not np.isfinite(float(v)):
        raise ExplorerError(f"{what} must be a finite number in response units, not {v!r}")
    return float(v)


def parse_margin(margin: Any) -> tuple[float, float]:
    """``m`` -> ``(-m, m)``; ``(low, high)`` kept; both checked (low < 0 < high)."""
    if margin is None:
        raise ExplorerError("give the equivalence margin in response units (the smallest difference that matters, "
                            "fixed before seeing the data); the kit does not propose one")
    if isinstance(margin, Sequence) and not isinstance(margin, (str, bytes)):
        if len(margin) != 2:
            raise ExplorerError(f"margin is one number m (for -m to m) or a pair (low, high), not {margin!r}")
        low, high = _real(margin[0], "the lower margin"), _real(margin[1], "the upper margin")
    else:
        m = _real(margin, "the margin")
        if m <= 0:
            raise ExplorerError(f"the margin must be positive (the test is -m < difference < m), not {m!r}")
        low, high = -m, m
    if not low < 0 < high:
        raise ExplorerError(f"the margin ({low:g}, {high:g}) must have its lower end below zero and its upper end "
                            "above zero")
    return low, high


def equivalence(
    results: Results,
    factor: str | None = None,
    *,
    margin: Any,
    pairs: Sequence[Sequence[str]] | None = None,
    control: str | None = None,
    adjust: str = "none",
    alpha: float | None = None,
) -> EquivalenceTable:
    """Two one-sided tests of equivalence for ``pairs`` of levels, or each level against ``control``.

    Parameters
    ----------
    results : Results
        The analysis (``study.results``) of a one-factor or fixed-effects factorial study.
    factor : str, optional
        The factor (default the study's first).
    margin : float or (float, float)
        The user's equivalence margin in response units: ``d`` for (-d, d), or
        ``(low, high)``.
    pairs : sequence of (str, str), optional
        Pairs of levels, difference first minus second (e.g. ``[("new", "current")]``).
    control : str, optional
        Each other level against this one. Exactly one of ``pairs`` and ``control``.
    adjust : {'none', 'holm', 'bonferroni'}, default 'none'
        Adjustment over the pairs.
    alpha : float, optional
        Level of each one-sided test; the analysis alpha when not given.

    Returns
    -------
    EquivalenceTable
        For each pair the two one-sided t tests, the larger p-value, the ``1 - 2 alpha``
        interval and whether equivalence is shown.

    References
    ----------
    Schuirmann, D. J. (1987). A comparison of the two one-sided tests procedure and the
    power approach for assessing the equivalence of average bioavailability. J.
    Pharmacokinet. Biopharm. 15, 657-680.
    Berger, R. L. (1982). Multiparameter hypothesis testing and acceptance sampling.
    Technometrics 24, 295-300.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> table = ex.stats.equivalence(results, "nozzle", margin=0.5, pairs=[("C", "A")])
    >>> round(float(table.difference[0]), 3), table.equivalent.tolist()
    (-0.225, [False])
    """
    low, high = parse_margin(margin)
    lm = level_means(results, factor)
    a = alpha_or(alpha, results.spec.alpha)
    if not 0 < a < 0.5:
        raise ExplorerError(f"alpha must be between 0 and 0.5 for two one-sided tests, not {alpha!r}")
    if (pairs is None) == (control is None):
        raise ExplorerError("give either pairs=[(level, level), ...] or control=level")
    if control is not None:
        c0 = lm.index(control, what="control level")
        idx = [(i, c0) for i in range(len(lm.labels)) if i != c0]
    else:
        if isinstance(pairs, (str, bytes)) or not pairs:
            raise ExplorerError("pairs is a list of (level, level), e.g. [('new', 'current')]")
        pair_list: list[Any] = [list(pairs)] if len(pairs) == 2 and all(isinstance(q, str) for q in pairs) else list(pairs)
        idx = []
        for pair in pair_list:
            if isinstance(pair, (str, bytes)) or len(pair) != 2:
                raise ExplorerError(f"each pair names two levels, not {pair!r}")
            i, j = lm.index(pair[0]), lm.index(pair[1])
            if i == j:
                raise ExplorerError(f"pair {list(pair)} names one level twice")
            idx.append((i, j))
    if adjust not in ("none", "holm", "bonferroni"):
        raise ExplorerError(f"adjust must be 'none', 'holm' or 'bonferroni', not {adjust!r}")
    ii = np.array([i for i, _ in idx])
    jj = np.array([j for _, j in idx])
    d = lm.shifted[ii] - lm.shifted[jj]
    v = lm.covariance
    se = np.sqrt(np.maximum(v[ii, ii] + v[jj, jj] - 2 * v[ii, jj], 0.0))
    if not np.all(se > 0):
        raise DesignError("the differences have no standard error: the residual mean square is zero")
    df = lm.df
    with np.errstate(over="ignore"):  # a margin near 1e308: t is infinite and its p-value 0, as it should be
        t_lo = (d - low) / se
        t_hi = (d - high) / se
    p_lo = np.asarray(t_sf(t_lo, df), dtype=float)
    p_hi = np.asarray(t_sf(-t_hi, df), dtype=float)
    p = adjust_pvalues(np.maximum(p_lo, p_hi), adjust)
    crit = float(t_ppf(1 - a, df))
    lo, hi = d - crit * se, d + crit * se
    notes = [
        f"The margin ({show_measure(low)}, {show_measure(high)}) is the user's, in response units; the kit does not propose "
        "margins. Fix it before looking at the data.",
        f"Equivalence at alpha {a:g} is the same claim as the {1 - 2 * a:.0%} interval lying inside the margin.",
    ]
    if len(idx) > 1 and adjust == "none":
        notes.append("Each pair is its own claim; claiming every listed pair equivalent at once needs no adjustment "
                     "(intersection-union), claiming some of them does (adjust='holm').")
    return EquivalenceTable(
        factor=lm.factor, means=lm.kind, first=tuple(lm.labels[i] for i in ii),
        second=tuple(lm.labels[j] for j in jj), low=low, high=high, difference=d, se=se, df=df, t_low=t_lo,
        t_high=t_hi, p_low=p_lo, p_high=p_hi, pvalue=p, ci_low=lo, ci_high=hi, alpha=a, adjustment=adjust,
        equivalent=np.asarray(p < a), notes=tuple(notes),
    )
