"""Variance components: how much of the variation each random term and the residual carry.

Two estimators:

* **Method of moments (ANOVA estimates)**: equate each random row's mean square to its
  expectation (:mod:`.ems`) and solve; on balanced data these are the classic
  closed forms, e.g. (MS_A - MS_AB) / (b n). Each estimate is a linear combination
  sum c_j MS_j, so its interval is Satterthwaite's: nu = (sum c_j MS_j)^2 /
  sum (c_j MS_j)^2 / df_j and [nu s^2 / chi^2_{1-a/2, nu}, nu s^2 / chi^2_{a/2, nu}]
  (the residual's is the exact chi-square interval).
* **REML** (:mod:`.reml`), used for unbalanced data, where the moment estimates depend
  on the type of sums of squares. Intervals: the same chi-square form with
  nu = 2 s^4 / Var(s^2), Var from the inverse REML information.

**Negative estimates.** A moment estimate can be negative (REML stops at zero). The
rule here: the computed value is shown as it is, counted as zero in the total, the
shares and the standard deviations, and a note says so and suggests the reduced model
without that term (Searle, Casella & McCulloch 1992, ch. 3-4, and Montgomery, Design and
Analysis of Experiments, 8th ed., ch. 13, both discuss negative ANOVA estimates and these
remedies; from memory).

Shares: each component (negatives as zero) over their sum, the total variance of one
new observation under the random terms (fixed effects excluded).

References
----------
Satterthwaite, F. E. (1946). Biometrics Bulletin 2, 110-114.
Searle, S. R., Casella, G. and McCulloch, C. E. (1992). Variance Components. Wiley.
"""

from __future__ import annotations

import math
import weakref
from collections.abc import Sequence
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np
import pandas as pd
from scipy import special

from ..formatting import result_frame
from ..rendering import html_repr
from .cellfit import CellFit
from .deferred import deferrable, deferred
from .design import Term
from .ems import RESIDUAL, ExpectedMeanSquares, is_random, random_indicators
from .reml import reml_fit
from .spec import ModelSpec
from .tables import AnovaTable, html_table

__all__ = ["CombinedComponents", "VarianceComponent", "VarianceComponents", "estimate_components", "moment_components",
           "reml_components",
           "NEGATIVE_RULE"]

NEGATIVE_RULE = (
    "A negative estimate is shown as computed and counted as zero in the total, the shares and the "
    "standard deviations; it suggests the term's variance is small, and the reduced model without that "
    "term re-estimates the others."
)


def chi2_interval(estimate: float, df: float | None, confidence: float) -> tuple[float | None, float | None]:
    """nu s^2 / chi^2 quantiles (Satterthwaite 1946); undefined for non-positive estimates or df."""
    return chi2_intervals([estimate], [df], confidence)[0]


def chi2_intervals(
    estimates: list[float], dfs: list[float | None], confidence: float
) -> list[tuple[float | None, float | None]]:
    """:func:`chi2_interval` of several estimates, the quantiles found in one call (the same numbers)."""
    out: list[tuple[float | None, float | None]] = [(None, None)] * len(estimates)
    valid = [i for i, (e, df) in enumerate(zip(estimates, dfs))
             if not (df is None or not math.isfinite(df) or df <= 0 or e <= 0)]
    if not valid:
        return out
    a = 1 - confidence
    nu = np.array([dfs[i] for i in valid], dtype=float)
    hi_qs = special.chdtri(nu, a / 2)  # upper a/2 quantiles
    lo_qs = special.chdtri(nu, 1 - a / 2)  # lower a/2 quantiles: underflow to 0 for tiny df
    for i, hi_q, lo_q in zip(valid, hi_qs.tolist(), lo_qs.tolist()):
        df, estimate = float(dfs[i]), estimates[i]  # type: ignore[arg-type]
        low = df * estimate / hi_q if hi_q > 0 else None
        high = df * estimate / lo_q if lo_q > 0 and math.isfinite(df * estimate / lo_q) else None
        out[i] = (low, high)
    return out


@deferrable("df", "ci_low", "ci_high")
@dataclass(frozen=True, kw_only=True)
class VarianceComponent:
    """One component: the estimate as computed, its df and interval, share of the total.

    The df and interval may be made when first read (:mod:`.deferred`; moment estimates after an edit).
    """

    source: str
    estimate: float
    df: float | None
    ci_low: float | None
    ci_high: float | None
    share: float
    combination: tuple[tuple[str, float], ...] = ()  # moments: (mean square, coefficient)

    @property
    def truncated(self) -> float:
        return max(self.estimate, 0.0)

    @property
    def sd(self) -> float:
        return float(np.sqrt(self.truncated))


@dataclass(frozen=True, kw_only=True)
class CombinedComponents:
    """The sum of several variance components: its estimate, the df of that estimate
    (Satterthwaite, or from the REML covariance) and its chi-square interval (``None``
    when the df or a positive sum is missing)."""

    sources: tuple[str, ...]
    estimate: float
    df: float | None
    ci_low: float | None
    ci_high: float | None


@dataclass(frozen=True, kw_only=True, eq=False)
class VarianceComponents:
    """Variance components of the random terms and the residual, with the method and notes."""

    components: tuple[VarianceComponent, ...]
    method: str
    confidence: float
    interval_method: str
    notes: tuple[str, ...] = field(default=())
    mean_squares: tuple[tuple[str, float, float], ...] = ()  # moments: (row, mean square, df)
    covariance: np.ndarray | None = None  # REML: asymptotic covariance of the estimates (residual last)

    @property
    def total(self) -> float:
        return float(sum(c.truncated for c in self.components))

    def component(self, source: str) -> VarianceComponent:
        for c in self.components:
            if c.source == source:
                return c
        raise KeyError(f"no component {source!r}; components are {[c.source for c in self.components]}")

    def combined(self, sources: list[str] | tuple[str, ...]) -> CombinedComponents:
        """Estimate, df and interval of the sum of several components (see :class:`CombinedComponents`).

        Moments: the sum is one linear combination of mean squares (Satterthwaite's df);
        REML: df = 2 s^4 / Var(s) with Var from the estimates' covariance. Negative
        components count as computed in the estimate of the sum (it is unbiased); an
        interval needs a positive sum.
        """
        return self.combined_many([sources])[0]

    def combined_many(self, groups: Sequence[Sequence[str]]) -> list[CombinedComponents]:
        """:meth:`combined` of each list of sources in ``groups`` (the quantiles found in one call)."""
        ms = {row: (m, d) for row, m, d in self.mean_squares}
        ests: list[float] = []
        dfs: list[float | None] = []
        for sources in groups:
            picked = [self.component(s) for s in sources]
            est = float(sum(c.estimate for c in picked))
            df: float | None = None
            if self.mean_squares:
                coef: dict[str, float] = {}
                for c in picked:
                    for row, k in c.combination:
                        coef[row] = coef.get(row, 0.0) + k
                denom = sum((k * ms[row][0]) ** 2 / ms[row][1] for row, k in coef.items() if abs(k) > 1e-15)
                df = est**2 / denom if denom > 0 and est > 0 else None
            elif self.covariance is not None:
                idx = [self.components.index(c) for c in picked]
                var = float(np.sum(self.covariance[np.ix_(idx, idx)]))
                df = 2 * est**2 / var if var > 0 and est > 0 else None
            ests.append(est)
            dfs.append(df)
        bounds = chi2_intervals(ests, dfs, self.confidence)
        return [CombinedComponents(sources=tuple(sources), estimate=est, df=df, ci_low=lo, ci_high=hi)
                for sources, est, df, (lo, hi) in zip(groups, ests, dfs, bounds)]

    def to_frame(self) -> pd.DataFrame:
        pct = f"{self.confidence:.0%}"
        return result_frame({
            "source": [c.source for c in self.components],
            "variance": [c.estimate for c in self.components],
            "SD": [c.sd for c in self.components],
            "share of variance": [c.share for c in self.components],
            "df": pd.array([c.df for c in self.components], dtype="Float64"),
            f"{pct} CI low": pd.array([c.ci_low for c in self.components], dtype="Float64"),
            f"{pct} CI high": pd.array([c.ci_high for c in self.components], dtype="Float64"),
        })

    @html_repr
    def _repr_html_(self) -> str:
        return html_table(self.to_frame(), f"Variance components ({self.method}; intervals: {self.interval_method})",
                          self.notes)


def _shares(estimates: list[float]) -> list[float]:
    pos = [max(e, 0.0) for e in estimates]
    tot = sum(pos)
    return [p / tot if tot > 0 else 0.0 for p in pos]


def _negative_notes(names: list[str], estimates: list[float]) -> list[str]:
    neg = [n for n, e in zip(names, estimates) if e < 0]
    return [f"Negative estimate for {', '.join(neg)}. {NEGATIVE_RULE}"] if neg else []


_INVERSES: dict[bytes, tuple[np.ndarray, np.ndarray] | None] = {}


def _exact_inverse(a: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
    """Rows of a^-1 as integer numerators over one denominator per row, when ``a`` is an integer matrix.

    Memoised on the matrix (a balanced design's counts repeat from one edit to the next).
    """
    if a.shape[0] != a.shape[1] or not np.all(a == np.round(a)) or a.shape[0] > 40:
        return None
    key = a.shape[0].to_bytes(2, "little") + np.ascontiguousarray(a, dtype=np.float64).tobytes()
    if key not in _INVERSES:
        if len(_INVERSES) > 256:
            _INVERSES.clear()
        _INVERSES[key] = _rational_inverse(a)
    return _INVERSES[key]


def _rational_inverse(a: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
    """Gauss-Jordan elimination in exact rationals."""
    k = a.shape[0]
    m = [[Fraction(int(v)) for v in row] + [Fraction(int(i == j)) for j in range(k)] for i, row in enumerate(a)]
    for col in range(k):  # Gauss-Jordan in exact rationals
        piv = next((r for r in range(col, k) if m[r][col] != 0), None)
        if piv is None:
            return None
        m[col], m[piv] = m[piv], m[col]
        p = m[col][col]
        m[col] = [v / p for v in m[col]]
        for r in range(k):
            if r != col and m[r][col] != 0:
                f = m[r][col]
                m[r] = [v - f * w for v, w in zip(m[r], m[col])]
    inv = [row[k:] for row in m]
    dens = np.array([float(np.lcm.reduce([v.denominator for v in row])) for row in inv])
    nums = np.array([[float(v * int(d)) for v in row] for row, d in zip(inv, dens)])
    return nums, dens


@dataclass(frozen=True, eq=False)
class _MomentPlan:
    """What the moment estimates need from an E(MS) table alone (the same for every edit of a balanced layout)."""

    row_names: tuple[str, ...]  # the random rows, whose mean squares are equated to their expectations
    names: list[str]  # the components
    exact: tuple[np.ndarray, np.ndarray] | None  # rational inverse (numerators, denominators) when integer
    inverse: np.ndarray
    combinations: list[tuple[tuple[str, float], ...]]  # each estimate as (mean square, coefficient)


_MOMENT_PLANS: "weakref.WeakKeyDictionary[ExpectedMeanSquares, _MomentPlan]" = weakref.WeakKeyDictionary()


def _moment_plan(ems: ExpectedMeanSquares) -> _MomentPlan:
    plan = _MOMENT_PLANS.get(ems)
    if plan is None:
        rows = [i for i, r in enumerate(ems.rows) if ems.random_rows[i]]
        a = ems.coefficients[rows]  # random rows x components
        exact = _exact_inverse(a)
        if exact is not None:
            nums, dens = exact
            inv = nums / dens[:, None]
        else:
            inv = np.linalg.solve(a, np.eye(len(rows))) if a.shape[0] == a.shape[1] else np.linalg.pinv(a)
        combos = [tuple((ems.rows[rows[i]], c) for i, c in enumerate(inv[j].tolist()) if abs(c) > 1e-12)
                  for j in range(len(ems.components))]
        plan = _MOMENT_PLANS[ems] = _MomentPlan(row_names=tuple(ems.rows[i] for i in rows),
                                                names=list(ems.components), exact=exact, inverse=inv,
                                                combinations=combos)
    return plan


def moment_components(
    ems: ExpectedMeanSquares, table: AnovaTable, confidence: float = 0.95, extra_notes: tuple[str, ...] = ()
) -> VarianceComponents:
    """Method-of-moments (ANOVA) estimates from the random rows' mean squares and their E(MS)
    (``extra_notes`` follow the note on negative estimates)."""
    plan = _moment_plan(ems)
    by_source = {r.source: r for r in table.rows}
    ms = np.array([by_source[name].mean_sq or 0.0 for name in plan.row_names])
    dfs = np.array([float(by_source[name].df) for name in plan.row_names])
    if plan.exact is not None:  # balanced: integer E(MS) coefficients, rational inverse, one division per estimate
        nums, dens = plan.exact
        est = np.array([float(np.dot(nums[j], ms)) / dens[j] for j in range(len(dens))])
    else:
        est = plan.inverse @ ms
    names = plan.names
    estimates = est.tolist()
    shares = _shares(estimates)
    combos = plan.combinations
    made: list[list[tuple[float | None, float | None, float | None]]] = []

    def intervals() -> list[tuple[float | None, float | None, float | None]]:
        """Satterthwaite's df and the chi-square interval of every component (made once, when first read)."""
        if not made:
            comp_dfs: list[float | None] = []
            for j, name in enumerate(names):
                terms = np.array([c * by_source[r].mean_sq for r, c in combos[j]])  # type: ignore[operator]
                denom = float(np.sum(terms**2 / np.array([by_source[r].df for r, _ in combos[j]])))
                df = float(est[j] ** 2 / denom) if denom > 0 and est[j] > 0 else None
                if name == RESIDUAL:
                    df = float(by_source[RESIDUAL].df)
                comp_dfs.append(df)
            bounds = chi2_intervals(estimates, comp_dfs, confidence)
            made.append([(df, lo, hi) for df, (lo, hi) in zip(comp_dfs, bounds)])
        return made[0]

    comps = [VarianceComponent(source=name, estimate=estimates[j], share=shares[j], combination=combos[j],
                               df=deferred(lambda j=j: intervals()[j][0]),  # type: ignore[misc]
                               ci_low=deferred(lambda j=j: intervals()[j][1]),  # type: ignore[misc]
                               ci_high=deferred(lambda j=j: intervals()[j][2]))  # type: ignore[misc]
             for j, name in enumerate(names)]
    notes = _negative_notes(names, estimates) + list(extra_notes)
    if ems.method.startswith("unbalanced"):
        notes.append(f"Unbalanced data: these moment estimates depend on the type {ems.ss_type} sums of squares "
                     "used; REML estimates do not.")
    mean_squares = tuple((name, float(ms[k]), float(dfs[k])) for k, name in enumerate(plan.row_names))
    return VarianceComponents(
        components=tuple(comps), method="method of moments (ANOVA estimates)", confidence=confidence,
        interval_method="Satterthwaite's chi-square approximation", notes=tuple(notes), mean_squares=mean_squares,
    )


def reml_components(
    names: list[str], variances: np.ndarray, sigma2: float, covariance: np.ndarray | None, confidence: float = 0.95,
    notes: tuple[str, ...] = (),
) -> VarianceComponents:
    """Components from a REML fit (:func:`.reml.reml_fit`), residual last."""
    est = list(map(float, variances)) + [float(sigma2)]
    shares = _shares(est)
    all_names = list(names) + [RESIDUAL]
    dfs: list[float | None] = []
    for j in range(len(all_names)):
        df = None
        if covariance is not None and covariance[j, j] > 0:
            df = 2.0 * est[j] ** 2 / float(covariance[j, j])
        dfs.append(df)
    bounds = chi2_intervals(est, dfs, confidence)
    comps = [VarianceComponent(source=name, estimate=est[j], df=dfs[j], ci_low=bounds[j][0], ci_high=bounds[j][1],
                               share=shares[j]) for j, name in enumerate(all_names)]
    extra = list(notes)
    zero = [n for n, e in zip(names, est) if e <= 0]
    if zero:
        extra.append(f"REML puts {', '.join(zero)} at zero (the boundary): no interval for it.")
    if covariance is None:
        extra.append("The REML information could not be inverted (an estimate on the boundary): intervals are "
                     "missing where their df cannot be found.")
    return VarianceComponents(
        components=tuple(comps), method="REML", confidence=confidence,
        interval_method="chi-square with df 2 s⁴ / Var(s²) from the REML information", notes=tuple(extra),
        covariance=covariance,
    )


def estimate_components(
    fit: CellFit, spec: ModelSpec, cell_levels: np.ndarray, columns: tuple[str, ...],
    ems: ExpectedMeanSquares, table: AnovaTable, confidence: float = 0.95,
    indicators: list[tuple[Term, np.ndarray]] | None = None,
) -> VarianceComponents | None:
    """The variance components of ``fit`` by ``spec.variance_method`` (``None`` without random terms).

    ``"auto"``: moments on balanced data (exact closed forms), REML on unbalanced data.
    """
    if len(ems.components) < 2:
        return None
    balanced = ems.method.startswith("balanced")
    if spec.variance_method == "auto" and balanced:
        return moment_components(ems, table, confidence,
                                 ("Balanced data: moment estimates (equal to REML when none is negative).",))
    moments = moment_components(ems, table, confidence)
    if spec.variance_method == "moments":
        return moments
    if indicators is None:
        indicators = random_indicators(fit, spec, cell_levels, columns)
    fixed = [t for t in fit.terms if not is_random(t, spec)]
    x = fit.design.matrix[:, fit.design.columns_of(fixed)]
    resid = moments.component(RESIDUAL).estimate
    start = [np.sqrt(max(moments.components[j].estimate, 0.0) / resid) if resid > 0 else 1.0
             for j in range(len(indicators))]
    start = [max(s0, 0.05) for s0 in start]
    r = reml_fit(x, [z for _, z in indicators], fit.stats.n, fit.stats.mean, float(np.sum(fit.stats.m2)), start)
    notes: tuple[str, ...] = ()
    if spec.variance_method == "auto":
        notes = ("Unbalanced data: REML estimates (the moment estimates would depend on the type of sums of "
                 "squares).",)
    if not r.converged:
        notes += ("The REML search stopped before its convergence test was met; treat the estimates with care.",)
    return reml_components([fit.name(u) for u, _ in indicators], r.variances, r.sigma2, r.covariance, confidence,
                           notes)
