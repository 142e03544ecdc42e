"""Power of the one-way F test and the group size needed for a target power.

Under an effect of Cohen's size ``f`` (``f^2`` = between-level variance of the true
means over the error variance) the F statistic is noncentral F with ``k - 1`` and
``N - k`` df and noncentrality ``lambda = N f^2`` (Cohen 1988, ch. 8), so the power at
level ``alpha`` is ``P(F' > F_(1-alpha)(k-1, N-k); lambda)``.

Power computed at the *observed* effect is a re-expression of the p-value and adds no
evidence about a non-significant result (Hoenig and Heisey 2001); the result says so.
Plan with an effect size that matters in practice.

References
----------
Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed., ch. 8.
Hoenig, J. M. and Heisey, D. M. (2001). The abuse of power. Am. Stat. 55, 19-24.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from ..engine.errors import ExplorerError
from ..engine.noncentral_f import f_test_power as _f_power
from ..engine.spec import alpha_or
from ..engine.tables import esc
from ..formatting import show_share
from ..rendering import html_repr, note
from .oneway_inputs import require_oneway

if TYPE_CHECKING:
    from ..engine.results import Results

__all__ = ["PowerPlan", "f_test_power", "group_size_for_power", "power_plan"]


def _check_args(effect_f: float, k: int, alpha: float) -> None:
    if k < 2:
        raise ExplorerError(f"power needs at least 2 levels, not {k}")
    if not effect_f >= 0:
        raise ExplorerError(f"the effect size f must be zero or positive, not {effect_f!r}")
    if not 0 < alpha < 1:
        raise ExplorerError(f"alpha must be between 0 and 1, not {alpha!r}")


def _power(effect_f: float, k: int, n_total: np.ndarray, alpha: float) -> np.ndarray:
    """Power for an array of total sizes (vectorised noncentral F upper tail)."""
    n_total = np.asarray(n_total, dtype=float)
    return np.broadcast_to(_f_power(n_total * effect_f**2, k - 1, n_total - k, alpha), n_total.shape).astype(float)


def f_test_power(effect_f: float, k: int, n_total: int, alpha: float = 0.05) -> float:
    """Power of the one-way F test for Cohen's ``effect_f`` with ``k`` levels and ``n_total`` observations.

    Parameters
    ----------
    effect_f : float
        Cohen's f (the SD of the level means over the within-level SD).
    k : int
        Number of levels.
    n_total : int
        Total number of observations (noncentrality ``f^2 n_total``).
    alpha : float, default 0.05
        Level of the test.

    Returns
    -------
    float
        The probability that F exceeds its ``1 - alpha`` quantile.

    References
    ----------
    Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed.,
    ch. 8.

    Examples
    --------
    >>> import explorer as ex
    >>> round(ex.stats.f_test_power(0.25, 4, 180), 3)
    0.804
    """
    _check_args(effect_f, k, alpha)
    if n_total <= k:
        raise ExplorerError(f"power needs more observations than levels (k={k}, N={n_total})")
    return float(_power(effect_f, k, np.array([float(n_total)]), alpha)[0])


def group_size_for_power(effect_f: float, k: int, *, power: float = 0.8, alpha: float = 0.05,
                         max_n: int = 10_000_000) -> int:
    """Smallest per-level n (equal sizes) whose F test reaches ``power`` at ``alpha`` for ``effect_f``.

    Parameters
    ----------
    effect_f : float
        Cohen's f to detect.
    k : int
        Number of levels.
    power : float, default 0.8
        Target power.
    alpha : float, default 0.05
        Level of the test.
    max_n : int, default 10_000_000
        Largest per-level n searched.

    Returns
    -------
    int
        The per-level n. Power grows with n, so a geometric grid brackets the answer and
        the integers in the bracket are scanned in one vectorised call.

    References
    ----------
    Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed.,
    ch. 8 (table 8.4.4 gives n = 45 per level for f = 0.25, k = 4, power 0.80).

    Examples
    --------
    >>> import explorer as ex
    >>> ex.stats.group_size_for_power(0.25, 4)
    45
    """
    _check_args(effect_f, k, alpha)
    if not 0 < power < 1:
        raise ExplorerError(f"target power must be between 0 and 1, not {power!r}")
    if not effect_f > 0:
        raise ExplorerError("the group size for a target power needs a positive effect size f")
    grid = 2 ** np.arange(1, 25, dtype=np.int64)
    grid = grid[grid <= max_n]
    pw = _power(effect_f, k, grid * float(k), alpha)
    ok = np.flatnonzero(pw >= power)
    if ok.size == 0:
        raise ExplorerError(f"more than {max_n} observations per level would be needed for f = {effect_f:g}")
    j = int(ok[0])
    if j == 0:
        return int(grid[0])
    lo, hi = int(grid[j - 1]), int(grid[j])
    cand = np.arange(lo + 1, hi + 1)
    if cand.size > 4096:  # very small effects: bisection on the bracket
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if _power(effect_f, k, np.array([mid * float(k)]), alpha)[0] >= power:
                hi = mid
            else:
                lo = mid
        return hi
    pw = _power(effect_f, k, cand * float(k), alpha)
    return int(cand[np.flatnonzero(pw >= power)[0]])


@dataclass(frozen=True, kw_only=True)
class PowerPlan:
    """Power of the current design and the per-level n for a target power."""

    effect_f: float
    effect_source: str
    alpha: float
    k: int
    n_total: int
    power: float
    target_power: float
    n_per_level_needed: int | None
    power_at_needed: float | None
    notes: tuple[str, ...] = field(default=())

    def sentence(self) -> str:
        need = (f"{self.n_per_level_needed} per level ({self.n_per_level_needed * self.k} in all) reach power "
                f"{show_share(self.target_power)}" if self.n_per_level_needed else "no group size computed")
        return (f"With Cohen's f = {show_share(self.effect_f)} ({self.effect_source}), alpha {self.alpha:g}, "
                f"{self.k} levels and {self.n_total} observations, the F test has power {show_share(self.power)}; {need}.")

    @html_repr
    def _repr_html_(self) -> str:
        notes = "".join(note(n) for n in self.notes)
        return f"<div><b>Power</b>: {esc(self.sentence())}{notes}</div>"


def power_plan(results: Results, *, effect_f: float | None = None, alpha: float | None = None,
               target_power: float = 0.8) -> PowerPlan:
    """Power of the current design for ``effect_f`` (the observed Cohen's f when not given).

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study (``study.results``).
    effect_f : float, optional
        Cohen's f to plan for; the observed one when not given (then the result says
        that observed power restates the p-value and is not evidence).
    alpha : float, optional
        The analysis alpha when not given.
    target_power : float, default 0.8
        Power the needed group size is computed for.

    Returns
    -------
    PowerPlan
        Power of the current design and the per-level n that reaches ``target_power``.

    References
    ----------
    Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed., ch. 8.
    Hoenig, J. M. and Heisey, D. M. (2001). The abuse of power. Am. Stat. 55, 19-24.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> plan = ex.stats.power_plan(results, effect_f=0.5)
    >>> round(plan.power, 3), plan.n_per_level_needed
    (0.241, 14)
    """
    require_oneway(results, "the power of the one-way F test")
    gs = results.groups
    a = alpha_or(alpha, results.spec.alpha)
    notes: list[str] = []
    if effect_f is None:
        ssb, ssw = gs.ss_between, gs.ss_within
        if ssw <= 0:
            raise ExplorerError("the observed effect size is infinite (zero residual sum of squares); pass effect_f")
        f_val = float(np.sqrt(ssb / ssw))
        source = "observed"
        notes.append("Power at the observed effect restates the p-value (Hoenig and Heisey 2001); "
                     "plan with an effect size that matters in practice.")
    else:
        f_val = float(effect_f)
        source = "given"
    if not np.all(gs.n == gs.n[0]):
        notes.append("Group sizes differ: the power uses the total N (lambda = N f^2), the needed n assumes equal sizes.")
    pw = f_test_power(f_val, gs.k, gs.n_total, a)
    need = at = None
    if f_val > 0:
        need = group_size_for_power(f_val, gs.k, power=target_power, alpha=a)
        at = f_test_power(f_val, gs.k, need * gs.k, a)
    else:
        notes.append("Effect size 0: no group size reaches the target power.")
    return PowerPlan(effect_f=f_val, effect_source=source, alpha=a, k=gs.k, n_total=gs.n_total, power=pw,
                     target_power=target_power, n_per_level_needed=need, power_at_needed=at, notes=tuple(notes))
