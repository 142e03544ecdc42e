"""Per-term effect sizes of a multi-factor partition, with intervals and power.

For a term with sum of squares SS_t on df_t degrees of freedom, residual sum of squares
SS_E and mean square MS_E, corrected total SS_T and N observations:

* eta squared           = SS_t / SS_T  (share of the total variation; Cohen 1973)
* omega squared         = (SS_t - df_t MS_E) / (SS_T + MS_E)
* partial eta squared   = SS_t / (SS_t + SS_E)
* partial omega squared = (SS_t - df_t MS_E) / (SS_t + (N - df_t) MS_E)
* Cohen's f (partial)   = sqrt(SS_t / SS_E)

The plain measures share one denominator, so they compare terms within one study; the
partial ones leave the other terms out, so they compare a term across designs
(Olejnik and Algina 2003, Table 2). Omega squared is less biased than eta squared; it
is negative when the term's mean square is below the residual mean square (reported as
computed, with a note).

Interval and power: the term's F is noncentral F on (df_t, df_E) with noncentrality
``lambda = N f^2`` (Cohen 1988, ch. 8). Inverting it (Steiger 2004) bounds ``lambda``,
hence the population partial proportion ``lambda / (lambda + N)`` and ``f =
sqrt(lambda / N)``. The plain proportion depends on every other term's effect as well,
so no interval of its own is given. The interval is ``1 - 2 alpha`` by default: its lower
limit is above zero exactly when the term's F test rejects at alpha. Power is that of
the term's F test at the observed partial f (a restatement of its p-value; Hoenig and
Heisey 2001).

References
----------
Cohen, J. (1973). Eta-squared and partial eta-squared in fixed factor ANOVA designs.
Educational and Psychological Measurement 33, 107-112.
Olejnik, S. and Algina, J. (2003). Generalized eta and omega squared statistics.
Psychological Methods 8(4), 434-447 (Table 2).
Steiger, J. H. (2004). Beyond the F test. Psychol. Methods 9, 164-182.
Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed.
Hoenig, J. M. and Heisey, D. M. (2001). The abuse of power. Am. Stat. 55, 19-24.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..formatting import result_frame
from ..rendering import html_repr
from .noncentral_f import confidence_matching_test, f_test_power, noncentrality_interval
from .tables import AnovaTable, html_table

__all__ = ["TermEffect", "TermEffects", "term_effects"]


@dataclass(frozen=True, kw_only=True)
class TermEffect:
    """Effect sizes of one term; ``None`` when undefined (see the table's notes).

    ``ci_partial`` bounds the population partial proportion of variance (estimated by
    partial eta² and omega²) and ``ci_f`` Cohen's partial f, at the table's confidence;
    ``excludes_zero`` says whether that interval excludes zero when it is the ``1 - 2
    alpha`` one (it then agrees with the term's F test); ``power`` is the power of the
    term's F test at the observed f and the table's alpha.
    """

    term: str
    df: int
    partial_eta_squared: float | None
    partial_omega_squared: float | None
    eta_squared: float | None = None
    omega_squared: float | None = None
    cohens_f: float | None = None
    ci_partial: tuple[float, float] | None = None
    ci_f: tuple[float, float] | None = None
    excludes_zero: bool | None = None
    power: float | None = None


@dataclass(frozen=True, kw_only=True)
class TermEffects:
    """Effect sizes of every model term, from the partition of type ``ss_type``."""

    rows: tuple[TermEffect, ...]
    ss_type: str
    notes: tuple[str, ...] = ()
    confidence: float | None = None
    alpha: float | None = None

    def __getitem__(self, term: str) -> TermEffect:
        for r in self.rows:
            if r.term == term:
                return r
        raise KeyError(f"no term {term!r}; terms are {[r.term for r in self.rows]}")

    def __len__(self) -> int:
        return len(self.rows)

    def to_frame(self) -> pd.DataFrame:
        pct = "" if self.confidence is None else f"{self.confidence:.0%} "

        def col(values: list[float | None]) -> pd.arrays.FloatingArray:
            return pd.array(values, dtype="Float64")

        def bound(r: TermEffect, name: str, i: int) -> float | None:
            ci = getattr(r, name)
            return None if ci is None else ci[i]

        return result_frame(
            {
                "term": [r.term for r in self.rows],
                "df": [r.df for r in self.rows],
                "eta²": col([r.eta_squared for r in self.rows]),
                "omega²": col([r.omega_squared for r in self.rows]),
                "partial eta²": col([r.partial_eta_squared for r in self.rows]),
                "partial omega²": col([r.partial_omega_squared for r in self.rows]),
                f"{pct}CI low (partial)": col([bound(r, "ci_partial", 0) for r in self.rows]),
                f"{pct}CI high (partial)": col([bound(r, "ci_partial", 1) for r in self.rows]),
                "Cohen's f (partial)": col([r.cohens_f for r in self.rows]),
                f"power at alpha {self.alpha:g}" if self.alpha is not None else "power": col(
                    [r.power for r in self.rows]),
            },
            roles={f"{pct}CI low (partial)": "share", f"{pct}CI high (partial)": "share"},
        )

    @html_repr
    def _repr_html_(self) -> str:
        return html_table(self.to_frame(), f"Effect size of each term (type {self.ss_type} sums of squares)", self.notes)


def term_effects(table: AnovaTable, terms: tuple[str, ...], n: int, *, alpha: float = 0.05,
                 confidence: float | None = None) -> TermEffects:
    """Plain and partial eta and omega squared of ``terms``, with noncentral-F intervals and power.

    ``table`` is a partition with ``residual`` and ``total (corrected)`` rows; ``n`` the
    number of observations; ``confidence`` of the intervals defaults to ``1 - 2 alpha``
    (see the module notes).
    """
    resid = table.row("residual")
    ss_e, ms_e, df_e = resid.sum_sq, resid.mean_sq, resid.df
    ss_tot = table.row("total (corrected)").sum_sq
    matched = confidence is None and 0 < alpha < 0.5
    if confidence is not None:
        conf = float(confidence)
    else:  # no interval matches a test at alpha >= 0.5; fall back to 95%
        conf = confidence_matching_test(alpha) if matched else 0.95
    rows, notes = [], []
    other_error: list[str] = []
    has_ms = ms_e is not None and ms_e > 0
    for name in terms:
        r = table.row(name)
        denom_eta = r.sum_sq + ss_e
        p_eta = r.sum_sq / denom_eta if denom_eta > 0 else None
        eta = r.sum_sq / ss_tot if ss_tot > 0 else None
        p_omega = omega = cohens_f = ci_p = ci_f = excludes = power = None
        if has_ms:
            assert ms_e is not None
            p_omega = (r.sum_sq - r.df * ms_e) / (r.sum_sq + (n - r.df) * ms_e)
            omega = (r.sum_sq - r.df * ms_e) / (ss_tot + ms_e)
            if p_omega < 0:
                notes.append(
                    f"Omega² of {name!r} is negative: its mean square is below the residual mean square "
                    "(no effect detectable); read it as zero."
                )
            cohens_f = float(np.sqrt(r.sum_sq / ss_e))
            own_error = r.error_term not in (None, "residual")  # tested against another mean square (random terms)
            if own_error:
                other_error.append(name)
            else:
                power = float(f_test_power(n * cohens_f**2, r.df, df_e, alpha))
            if r.statistic is not None and not own_error:
                lo, hi = noncentrality_interval(float(r.statistic), r.df, df_e, conf)
                ci_p = (lo / (lo + n), hi / (hi + n))
                ci_f = (float(np.sqrt(lo / n)), float(np.sqrt(hi / n)))
                if matched:
                    excludes = lo > 0
        rows.append(TermEffect(term=name, df=r.df, partial_eta_squared=p_eta, partial_omega_squared=p_omega,
                               eta_squared=eta, omega_squared=omega, cohens_f=cohens_f, ci_partial=ci_p, ci_f=ci_f,
                               excludes_zero=excludes, power=power))
    if other_error:
        notes.append(f"{', '.join(map(repr, other_error))}: tested against another error term than the residual "
                     "(random terms), so no noncentral-F interval or power is given for them here.")
    if not has_ms:
        notes.append("Omega², Cohen's f, intervals and power are undefined: the residual mean square is zero.")
    notes.append(
        f"Intervals bound the population partial proportion of variance (noncentral F, Steiger 2004) at "
        f"{conf:.0%}" + (f" (1 - 2 alpha: the lower limit is above 0 exactly when the term's F test rejects at "
                         f"alpha {alpha:g})" if matched else "") + "; eta² and omega² share the total sum of squares, "
        "the partial ones leave the other terms out."
    )
    notes.append("Power is that of each term's F test at its observed f (it restates the p-value; "
                 "plan with an effect size that matters in practice).")
    return TermEffects(rows=tuple(rows), ss_type=table.ss_type, notes=tuple(notes), confidence=conf, alpha=alpha)
