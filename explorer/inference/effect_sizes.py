"""Effect sizes of a one-way analysis with confidence intervals from the noncentral F.

Estimates (Hays 1963; Kelley 1935; Cohen 1988):

* eta squared ``SSB / SST`` (biased upwards),
* omega squared ``(SSB - (k-1) MSW) / (SST + MSW)``,
* epsilon squared ``(SSB - (k-1) MSW) / SST``,
* Cohen's f ``sqrt(eta2 / (1 - eta2))``.

Omega and epsilon squared go negative when F < 1; the reported value is floored at
zero (a proportion of variance cannot be negative) and the unfloored value is kept in
``raw`` with a note. All four estimate one population quantity, the proportion of
variance explained ``P = f^2 / (1 + f^2)``. Its confidence interval comes from
inverting the noncentral F: find the noncentrality ``lambda`` at which the observed F is
the upper and the lower ``(1 - confidence)/2`` quantile, then ``f^2 = lambda / N``
and ``P = lambda / (lambda + N)`` (Steiger 2004). When the observed F is so small that
no positive ``lambda`` puts it below the upper quantile, the lower limit is zero.

Which interval: Steiger (2004, sec. "Confidence intervals and significance tests") shows
that the ``1 - 2 alpha`` interval, not the ``1 - alpha`` one, is the one whose lower
limit is above zero exactly when the F test rejects at ``alpha`` (the F test is
one-sided). So the interval shown by default is ``1 - 2 alpha`` (90% at alpha 0.05),
and the statement "the interval excludes zero" (``excludes_zero``) always reads that
interval, whatever ``confidence`` is asked for.

References
----------
Steiger, J. H. (2004). Beyond the F test: effect size confidence intervals and tests
of close fit in the analysis of variance and contrast analysis. Psychol. Methods 9,
164-182.
Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed.
Hays, W. L. (1963). Statistics for Psychologists. Kelley, T. L. (1935). An unbiased
correlation ratio measure. PNAS 21, 554-559.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from ..engine.errors import ExplorerError
from ..engine.noncentral_f import confidence_matching_test, noncentrality_interval, zero_statement
from ..engine.spec import alpha_or
from ..engine.tables import html_table
from ..formatting import result_frame, show_share
from ..rendering import html_repr
from .oneway_inputs import require_oneway

if TYPE_CHECKING:
    from ..engine.results import Results

__all__ = ["EffectSizes", "effect_sizes", "noncentrality_interval", "confidence_matching_test", "zero_statement"]


@dataclass(frozen=True, kw_only=True)
class EffectSizes:
    """Point estimates and the confidence interval of the proportion of variance explained.

    ``ci_proportion`` bounds the population proportion of variance explained (estimated
    by eta2, omega2 and epsilon2); ``ci_f`` bounds Cohen's f; ``ci_lambda`` the
    noncentrality. ``raw`` keeps omega2 and epsilon2 before the floor at zero.
    ``excludes_zero`` says whether the ``1 - 2 alpha`` interval, the one that matches the
    F test at ``alpha``, excludes zero (``None`` when there is no F test).
    """

    eta_squared: float
    omega_squared: float
    epsilon_squared: float
    cohens_f: float | None
    ci_proportion: tuple[float, float] | None
    ci_f: tuple[float, float] | None
    ci_lambda: tuple[float, float] | None
    confidence: float
    n: int
    df_num: int
    df_den: int
    raw: tuple[tuple[str, float], ...] = ()
    notes: tuple[str, ...] = field(default=())
    alpha: float | None = None
    excludes_zero: bool | None = None

    def to_frame(self) -> pd.DataFrame:
        pct = f"{self.confidence:.0%}"
        lo_p, hi_p = self.ci_proportion if self.ci_proportion else (None, None)
        lo_f, hi_f = self.ci_f if self.ci_f else (None, None)
        frame = pd.DataFrame({
            "effect size": ["eta squared", "omega squared", "epsilon squared", "Cohen's f"],
            "estimate": [self.eta_squared, self.omega_squared, self.epsilon_squared, self.cohens_f],
            f"{pct} CI low": [lo_p, lo_p, lo_p, lo_f],
            f"{pct} CI high": [hi_p, hi_p, hi_p, hi_f],
        })
        for c in frame.columns[1:]:
            frame[c] = pd.array([None if v is None else float(v) for v in frame[c]], dtype="Float64")
        return result_frame(frame, roles={c: "share" for c in frame.columns[1:]})  # proportions, not the response

    @html_repr
    def _repr_html_(self) -> str:
        return html_table(self.to_frame(), "Effect sizes (interval: population proportion of variance explained)",
                          self.notes)


def effect_sizes(results: Results, *, confidence: float | None = None, alpha: float | None = None) -> EffectSizes:
    """Eta, omega and epsilon squared and Cohen's f, with noncentral-F intervals.

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study (``study.results``).
    confidence : float, optional
        Coverage of the intervals; ``1 - 2 alpha`` when not given, the interval that
        matches the F test (its lower limit is above zero exactly when F rejects).
    alpha : float, optional
        The analysis alpha when not given.

    Returns
    -------
    EffectSizes
        The point estimates (omega and epsilon squared floored at zero, the raw values
        in ``raw``), intervals for the explained share, Cohen's f and the noncentrality.

    References
    ----------
    Steiger, J. H. (2004). Beyond the F test: effect size confidence intervals and tests
    of close fit in the analysis of variance and contrast analysis. Psychol. Methods 9,
    164-182.
    Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed.
    Hays, W. L. (1963). Statistics for Psychologists (omega squared).
    Kelley, T. L. (1935). An unbiased correlation ratio measure. PNAS 21, 554-559.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> sizes = ex.stats.effect_sizes(results)
    >>> round(sizes.eta_squared, 3), round(sizes.omega_squared, 3), sizes.confidence
    (0.881, 0.844, 0.9)
    """
    require_oneway(results, "these effect sizes")
    a = alpha_or(alpha, results.spec.alpha)
    if confidence is None:
        confidence = confidence_matching_test(a)
    gs = results.groups
    ssb, ssw = gs.ss_between, gs.ss_within
    sst = ssb + ssw
    k, n = gs.k, gs.n_total
    df1, df2 = k - 1, n - k
    msw = ssw / df2
    notes: list[str] = []
    if sst <= 0:
        raise ExplorerError("effect sizes are undefined: every observation in this view has the same value")
    eta2 = ssb / sst
    omega_raw = (ssb - df1 * msw) / (sst + msw)
    eps_raw = (ssb - df1 * msw) / sst
    omega2, eps2 = max(omega_raw, 0.0), max(eps_raw, 0.0)
    if omega_raw < 0:
        notes.append(
            f"Omega and epsilon squared are negative before the floor ({show_share(omega_raw)}, "
            f"{show_share(eps_raw)}) because F < 1; "
            "shown as 0 (no variance explained)."
        )
    cohens_f = float(np.sqrt(eta2 / (1 - eta2))) if eta2 < 1 else None
    ci_p = ci_f = ci_l = None
    excludes: bool | None = None
    f_stat = results.partition.row(results.spec.factors[0]).statistic
    if f_stat is None:
        notes.append("No interval: the F statistic is undefined (zero residual sum of squares).")
        if cohens_f is None:
            notes.append("Cohen's f is infinite: the residual sum of squares is zero.")
    else:
        lo, hi = noncentrality_interval(float(f_stat), df1, df2, confidence)
        ci_l = (lo, hi)
        ci_p = (lo / (lo + n), hi / (hi + n))
        ci_f = (float(np.sqrt(lo / n)), float(np.sqrt(hi / n)))
        if 0 < a < 0.5:
            same = abs(confidence - confidence_matching_test(a)) < 1e-12
            excludes, sentence = zero_statement(float(f_stat), df1, df2, a, "the proportion of variance explained",
                                                lower=lo if same else None)
            notes.append(sentence)
    return EffectSizes(
        eta_squared=float(eta2), omega_squared=float(omega2), epsilon_squared=float(eps2), cohens_f=cohens_f,
        ci_proportion=ci_p, ci_f=ci_f, ci_lambda=ci_l, confidence=confidence, n=n, df_num=df1, df_den=df2,
        raw=(("omega squared", float(omega_raw)), ("epsilon squared", float(eps_raw))), notes=tuple(notes),
        alpha=a, excludes_zero=excludes,
    )
