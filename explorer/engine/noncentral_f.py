"""Noncentral F: interval of the noncentrality, the interval that matches the F test, power.

Shared by the one-way effect sizes (:mod:`.effect_sizes`), the per-term effect sizes of
multi-factor designs (:mod:`.term_effects`) and the power of the design (:mod:`.power`).

References
----------
Steiger, J. H. (2004). Beyond the F test: effect size confidence intervals and tests
of close fit in the analysis of variance and contrast analysis. Psychol. Methods 9,
164-182.
Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed., ch. 8.
"""

from __future__ import annotations

import numpy as np
from scipy import optimize, special, stats

from .errors import ExplorerError

__all__ = ["confidence_matching_test", "f_test_power", "noncentrality_interval", "zero_statement"]


def noncentrality_interval(f_obs: float, df1: float, df2: float, confidence: float = 0.95) -> tuple[float, float]:
    """Confidence limits for the noncentrality of F by inverting the noncentral F cdf.

    Parameters
    ----------
    f_obs : float
        The observed F.
    df1, df2 : float
        Its numerator and denominator df.
    confidence : float, default 0.95
        Two-sided coverage.

    Returns
    -------
    tuple of float
        ``(lower, upper)``: the lower limit solves ``P(F <= f_obs; lambda) = (1 +
        confidence)/2``, the upper ``= (1 - confidence)/2``; each is 0 when even
        ``lambda = 0`` puts ``f_obs`` below its target.

    References
    ----------
    Steiger, J. H. (2004). Beyond the F test: effect size confidence intervals and tests
    of close fit in the analysis of variance and contrast analysis. Psychol. Methods 9,
    164-182.

    Examples
    --------
    >>> import explorer as ex
    >>> low, high = ex.stats.noncentrality_interval(8.0, 2, 27, confidence=0.90)
    >>> round(low, 2), round(high, 2)
    (3.62, 32.93)
    """
    if not 0 < confidence < 1:
        raise ExplorerError(f"confidence must be between 0 and 1, not {confidence!r}")
    if not (f_obs >= 0 and np.isfinite(f_obs)):
        raise ExplorerError(f"the observed F must be a finite non-negative number, not {f_obs!r}")
    upper_p, lower_p = (1 - confidence) / 2, (1 + confidence) / 2

    def cdf(lam: float) -> float:
        return float(special.ncfdtr(df1, df2, lam, f_obs)) if lam > 0 else float(special.fdtr(df1, df2, f_obs))

    def solve(target: float) -> float:
        if cdf(0.0) <= target:
            return 0.0
        # Bracket the root by doubling from 1, so both ends stay near it: far beyond the root the
        # noncentral F cdf underflows into its least accurate range (scipy's ncfdtr then returns
        # non-monotone values or NaN, e.g. df 1499 and 19500 with lambda near 3000).
        lo, hi = 0.0, 1.0
        while True:
            value = cdf(hi)
            if not np.isfinite(value):
                raise ExplorerError(
                    f"the noncentral F distribution (df {df1:g} and {df2:g}) could not be evaluated at "
                    f"noncentrality {hi:.6g}; no interval"
                )
            if value <= target:
                break
            if hi > 1e15:
                raise ExplorerError(f"no noncentrality up to 1e15 puts F = {f_obs:.6g} in the interval's tail; no interval")
            lo, hi = hi, hi * 2
        return float(optimize.brentq(lambda lam: cdf(lam) - target, lo, hi, xtol=1e-10, rtol=1e-12))

    return solve(lower_p), solve(upper_p)


def confidence_matching_test(alpha: float) -> float:
    """``1 - 2 alpha``: the coverage whose noncentrality interval excludes zero exactly when
    the F test rejects at ``alpha`` (Steiger 2004)."""
    if not 0 < alpha < 0.5:
        raise ExplorerError(f"an interval that matches the F test needs alpha between 0 and 0.5, not {alpha!r}")
    return 1 - 2 * alpha


def zero_statement(f_obs: float, df1: float, df2: float, alpha: float, what: str = "the effect",
                   lower: float | None = None) -> tuple[bool, str]:
    """Whether the ``1 - 2 alpha`` noncentrality interval excludes zero, and the sentence that says so.

    Its lower limit is above zero exactly when ``P(F >= f_obs; lambda = 0) < alpha``
    (Steiger 2004), so the sentence never contradicts the F test. ``lower`` is that
    interval's lower limit when the caller has it already.
    """
    conf = confidence_matching_test(alpha)
    lo = noncentrality_interval(f_obs, df1, df2, conf)[0] if lower is None else lower
    pct = f"{conf:.0%}"
    if lo > 0:
        return True, (f"The {pct} interval of {what} (1 - 2 alpha, which matches the F test at alpha {alpha:g}; "
                      "Steiger 2004) excludes zero, as the F test does.")
    return False, (f"The {pct} interval of {what} (1 - 2 alpha, which matches the F test at alpha {alpha:g}; "
                   "Steiger 2004) reaches zero: the F test does not exclude no effect.")


def f_test_power(lam: float | np.ndarray, df1: float, df2: float | np.ndarray, alpha: float) -> np.ndarray:
    """Power ``P(F' > F_(1-alpha)(df1, df2); lam)`` of the F test at noncentrality ``lam``.

    ``lam = N f^2`` for Cohen's ``f`` of a fixed-effects term (Cohen 1988, ch. 8); at
    ``lam = 0`` the power is ``alpha``. Vectorised over ``lam`` and ``df2``.
    """
    crit = special.fdtri(df1, df2, 1 - alpha)  # the (1 - alpha) quantile, not a tail probability
    lam_a = np.asarray(lam, dtype=float)
    out = np.asarray(stats.ncf.sf(crit, df1, df2, np.maximum(lam_a, 1e-300)), dtype=float)
    return np.where(lam_a > 0, out, float(alpha))
