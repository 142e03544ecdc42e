"""Multiple comparisons of level means, each table naming its multiplicity method.

Every function here needs only per-level counts, means and variances (or, for
:func:`simultaneous_pairs`, estimates and standard errors of their differences), so an
edit costs O(levels^2), not a refit. The computation never changes behind the caller's
back: Tukey's method on unequal group sizes *is* the Tukey-Kramer method, and the table
only changes its name (and says so in its notes) when an edit unbalances the groups.

References
----------
Tukey, J. W. (1953). The problem of multiple comparisons. Unpublished manuscript.
Kramer, C. Y. (1956). Extension of multiple range tests to group means with unequal
numbers of replications. Biometrics 12, 307-310.
Games, P. A. and Howell, J. F. (1976). Pairwise multiple comparison procedures with
unequal n's and/or variances. J. Educ. Stat. 1, 113-125.
Dunnett, C. W. (1955). A multiple comparison procedure for comparing several
treatments with a control. JASA 50, 1096-1121.
Holm, S. (1979). A simple sequentially rejective multiple test procedure. Scand. J.
Stat. 6, 65-70.
Hochberg, Y. and Tamhane, A. C. (1987). Multiple Comparison Procedures. Wiley.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Literal

import numpy as np
import pandas as pd
from scipy import optimize, special

from .distributions import t_ppf, t_two_sided_p
from .errors import DesignError, ExplorerError, closest_names, preview
from .groupstats import GroupStats
from .oneway_inputs import require_oneway
from .studentized_range import _outer_grid, srange_ppf, srange_sf
from .tables import html_table

if TYPE_CHECKING:
    from .results import Results

__all__ = [
    "PairwiseTable",
    "adjust_pvalues",
    "dunnett",
    "games_howell",
    "pairwise_t",
    "simultaneous_pairs",
    "tukey",
]

Alternative = Literal["two-sided", "greater", "less"]
Adjustment = Literal["holm", "bonferroni", "none"]


def _ro(a: np.ndarray) -> np.ndarray:
    a = np.asarray(a, dtype=float).copy()
    a.setflags(write=False)
    return a


@dataclass(frozen=True, kw_only=True, eq=False)
class PairwiseTable:
    """A family of comparisons between level means.

    Each row compares ``first - second``. ``statistic`` is the difference over its
    standard error (a t ratio; methods based on the studentized range also show
    ``q = sqrt(2) |t|`` in :meth:`to_frame`). ``pvalue`` is adjusted for the family by
    ``adjustment``; ``ci_low``/``ci_high`` are simultaneous intervals for the family
    (``None`` when the method has none, see ``notes``). Undefined entries are NaN and
    named in ``notes``.
    """

    method: str
    adjustment: str
    family_size: int
    labels: tuple[str, ...]
    estimates: np.ndarray
    first: tuple[str, ...]
    second: tuple[str, ...]
    difference: np.ndarray
    se: np.ndarray
    df: np.ndarray
    statistic: np.ndarray
    pvalue: np.ndarray
    ci_low: np.ndarray | None
    ci_high: np.ndarray | None
    confidence: float = 0.95
    alternative: str = "two-sided"
    range_based: bool = False
    notes: tuple[str, ...] = field(default=())

    def significant(self, alpha: float = 0.05) -> np.ndarray:
        """Which comparisons are declared different at family-wise level ``alpha``."""
        with np.errstate(invalid="ignore"):
            out: np.ndarray = np.asarray(self.pvalue < alpha) & np.isfinite(self.pvalue)
        return out

    def pair(self, a: str, b: str) -> dict[str, float | str | None]:
        """The row comparing levels ``a`` and ``b`` (in either order; the sign follows the table)."""
        for i, (f, s) in enumerate(zip(self.first, self.second)):
            if {f, s} == {a, b}:
                row = self.to_frame().iloc[i]
                return {str(c): (None if pd.isna(v) else v) for c, v in row.items()}
        raise ExplorerError(f"no comparison of {a!r} with {b!r} in this table; levels are {preview(self.labels)}")

    def to_frame(self) -> pd.DataFrame:
        pct = f"{self.confidence:.0%}"
        data: dict[str, object] = {
            "first": list(self.first),
            "second": list(self.second),
            "difference": self.difference,
            "standard error": self.se,
            "df": self.df,
            "t": self.statistic,
        }
        if self.range_based:
            data["q"] = np.sqrt(2.0) * np.abs(self.statistic)
        data[f"p-value ({self.adjustment})"] = self.pvalue
        if self.ci_low is not None and self.ci_high is not None:
            data[f"{pct} simultaneous low"] = self.ci_low
            data[f"{pct} simultaneous high"] = self.ci_high
        frame = pd.DataFrame(data)
        for c in frame.columns[2:]:
            frame[c] = pd.array(np.asarray(frame[c], dtype=float), dtype="Float64")
            frame[c] = frame[c].mask(frame[c].isna(), pd.NA)
        return frame

    @property
    def title(self) -> str:
        side = "" if self.alternative == "two-sided" else f", one-sided ({self.alternative})"
        return f"{self.method} comparisons{side}: {self.adjustment}, family of {self.family_size}"

    def _repr_html_(self) -> str:
        return html_table(self.to_frame(), self.title, self.notes)


# ---------------------------------------------------------------------- helpers
def adjust_pvalues(p: np.ndarray, method: str) -> np.ndarray:
    """Family-wise adjusted p-values: 'holm' (step-down, Holm 1979), 'bonferroni' or 'none'.

    NaN entries stay NaN and do not count towards the family size.
    """
    p = np.asarray(p, dtype=float)
    method = method.lower()
    ok = np.isfinite(p)
    m = int(ok.sum())
    out = np.full_like(p, np.nan)
    if method == "none":
        out[ok] = p[ok]
    elif method == "bonferroni":
        out[ok] = np.minimum(p[ok] * m, 1.0)
    elif method == "holm":
        pv = p[ok]
        order = np.argsort(pv, kind="mergesort")
        stepped = np.maximum.accumulate(pv[order] * (m - np.arange(m)))
        adj = np.empty(m)
        adj[order] = np.minimum(stepped, 1.0)
        out[ok] = adj
    else:
        raise ExplorerError(f"adjustment must be 'holm', 'bonferroni' or 'none', not {method!r}")
    return out


def _pairs(k: int) -> tuple[np.ndarray, np.ndarray]:
    i, j = np.triu_indices(k, 1)
    return i, j


def _check_confidence(confidence: float) -> float:
    if not 0 < float(confidence) < 1:
        raise ExplorerError(f"confidence must be between 0 and 1 (e.g. 0.95), not {confidence!r}")
    return float(confidence)


def _confidence_for(results: Results, confidence: float | None) -> float:
    """``confidence``, or ``1 - alpha`` of the analysis when not given, so that an interval
    excludes zero exactly when its test rejects at the alpha the decisions and letters use."""
    return _check_confidence(1 - results.spec.alpha if confidence is None else confidence)


def _level_stats(results: Results) -> tuple[GroupStats, np.ndarray, np.ndarray, np.ndarray]:
    """Group statistics, counts, level means on the *shifted* scale and variances.

    Differences are taken between shifted means (``gs.mean``), never between the means
    with the offset added back, which at a large offset would have lost the digits the
    difference needs; only the displayed estimates carry the offset.
    """
    require_oneway(results, "this comparison of level means")
    gs = results.groups
    n = gs.n.astype(float)
    return gs, n, gs.mean, gs.variances()


def _balance_note(n: np.ndarray) -> tuple[bool, tuple[str, ...]]:
    balanced = bool(np.all(n == n[0]))
    if balanced:
        return True, ()
    return False, (
        (f"Group sizes differ ({int(n.min())} to {int(n.max())}), so Tukey's intervals use Kramer's (1956) "
        "standard errors; the method is the same one used for equal sizes."),
    )


# ---------------------------------------------------------------------- Tukey family
def simultaneous_pairs(
    labels: Sequence[str],
    estimates: np.ndarray,
    se_diff: np.ndarray,
    df: float,
    *,
    confidence: float = 0.95,
    method: Literal["tukey", "bonferroni", "none"] = "tukey",
    offset: float = 0.0,
) -> PairwiseTable:
    """All pairwise differences of ``estimates`` with simultaneous intervals.

    Parameters
    ----------
    labels : names of the k estimates (level means or least-squares means).
    estimates : the k estimates, on a scale shifted by ``offset``.
    se_diff : k x k matrix; ``se_diff[i, j]`` is the standard error of
        ``estimates[i] - estimates[j]`` (only the upper triangle is read).
    df : degrees of freedom of the error variance behind the standard errors.
    confidence : family-wise coverage of the intervals.
    method : 'tukey' (studentized range with k means: Tukey when all standard errors
        of differences are equal, Tukey-Kramer otherwise), 'bonferroni' (t with
        ``alpha / m``) or 'none' (per-comparison t).
    offset : added back to the estimates the table shows; the differences are taken
        before, so a large offset costs no digits.

    Notes
    -----
    Tukey-Kramer: ``q = |d| / (se / sqrt(2))`` referred to the studentized range with
    k means and ``df`` df; interval ``d +- q_(1-alpha)(k, df) se / sqrt(2)``
    (Kramer 1956; Hochberg and Tamhane 1987, ch. 3). For least-squares means with
    correlated estimates the intervals are conservative (Hayter 1984).
    """
    confidence = _check_confidence(confidence)
    labels = tuple(str(x) for x in labels)
    est = np.asarray(estimates, dtype=float)
    k = len(labels)
    se_m = np.asarray(se_diff, dtype=float)
    if est.shape != (k,) or se_m.shape != (k, k):
        raise ExplorerError(
            f"simultaneous_pairs needs {k} estimates and a {k}x{k} matrix of standard errors of differences; "
            f"got shapes {est.shape} and {se_m.shape}"
        )
    if k < 2:
        raise DesignError("pairwise comparisons need at least two levels")
    if not df > 0:
        raise DesignError(f"pairwise comparisons need positive error df, not {df!r}")
    i, j = _pairs(k)
    d = est[i] - est[j]
    se = se_m[i, j]
    notes: list[str] = []
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(se > 0, d / se, np.nan)
    bad = ~(se > 0)
    if bad.any():
        notes.append(
            f"{int(bad.sum())} comparison(s) have a zero or undefined standard error; their test and interval "
            "are undefined."
        )
    m = len(d)
    dfs = np.full(m, float(df))
    alpha = 1 - confidence
    method_l = method.lower()
    if method_l == "tukey":
        finite_se = se[np.isfinite(se)]
        equal = finite_se.size > 0 and np.ptp(finite_se) <= 1e-12 * np.max(np.abs(finite_se))
        name = "Tukey" if equal else "Tukey-Kramer"
        adjustment = f"studentized range, {k} means"
        p = np.where(bad, np.nan, srange_sf(np.sqrt(2.0) * np.abs(np.nan_to_num(t)), k, df))
        crit = float(srange_ppf(confidence, k, df)[0]) / np.sqrt(2.0)
        range_based = True
    elif method_l in ("bonferroni", "none"):
        name = "pairwise t"
        adjustment = "Bonferroni" if method_l == "bonferroni" else "none (per comparison)"
        p_raw = np.where(bad, np.nan, t_two_sided_p(np.nan_to_num(t), df))
        p = adjust_pvalues(p_raw, method_l)
        crit = -float(t_ppf(alpha / 2 / (m if method_l == "bonferroni" else 1), df))
        range_based = False
    else:
        raise ExplorerError(f"method must be 'tukey', 'bonferroni' or 'none', not {method!r}")
    half = crit * se
    return PairwiseTable(
        method=name, adjustment=adjustment, family_size=m, labels=labels, estimates=_ro(est + offset),
        first=tuple(labels[a] for a in i), second=tuple(labels[b] for b in j),
        difference=_ro(d), se=_ro(se), df=_ro(dfs), statistic=_ro(t), pvalue=_ro(p),
        ci_low=_ro(np.where(bad, np.nan, d - half)), ci_high=_ro(np.where(bad, np.nan, d + half)),
        confidence=confidence, range_based=range_based, notes=tuple(notes),
    )


def tukey(results: Results, *, confidence: float | None = None) -> PairwiseTable:
    """Tukey (equal sizes) / Tukey-Kramer (unequal sizes) comparisons of all level means.

    Uses the residual mean square of the one-way model. Always the same computation:
    only the name in the table changes with the balance of the groups. Intervals are
    ``1 - alpha`` of the analysis unless ``confidence`` is given.
    """
    confidence = _confidence_for(results, confidence)
    gs, n, means, _ = _level_stats(results)
    msw = results.ms_resid or 0.0
    se = np.sqrt(msw * (1 / n[:, None] + 1 / n[None, :]))
    table = simultaneous_pairs(gs.labels, means, se, results.df_resid, confidence=confidence, method="tukey",
                               offset=gs.offset)
    balanced, bnote = _balance_note(n)
    name = "Tukey" if balanced else "Tukey-Kramer"
    return _replace(table, method=name, notes=table.notes + bnote)


def _replace(table: PairwiseTable, **changes: object) -> PairwiseTable:
    from dataclasses import replace

    return replace(table, **changes)  # type: ignore[arg-type]


def games_howell(results: Results, *, confidence: float | None = None) -> PairwiseTable:
    """Games-Howell comparisons: unequal variances, Welch df per pair, studentized range.

    ``se_ij = sqrt(v_i/n_i + v_j/n_j)``; df by Welch-Satterthwaite; p from the
    studentized range with k means at ``q = sqrt(2) |d| / se_ij`` (Games and Howell 1976).
    Levels with one observation have no variance; their comparisons are undefined.
    Intervals are ``1 - alpha`` of the analysis unless ``confidence`` is given.
    """
    confidence = _confidence_for(results, confidence)
    gs, n, means, var = _level_stats(results)
    k = gs.k
    i, j = _pairs(k)
    a, b = var[i] / n[i], var[j] / n[j]
    with np.errstate(divide="ignore", invalid="ignore"):
        se = np.sqrt(a + b)
        dfs = (a + b) ** 2 / (a * a / (n[i] - 1) + b * b / (n[j] - 1))
        d = means[i] - means[j]
        t = d / se
    bad = ~np.isfinite(t) | ~np.isfinite(dfs) | ~(se > 0)
    notes: list[str] = []
    if bad.any():
        notes.append(
            f"{int(bad.sum())} comparison(s) involve a level with one observation or no spread; Games-Howell "
            "needs each level's own variance, so they are undefined."
        )
    ok = ~bad
    p = np.full(len(d), np.nan)
    lo = np.full(len(d), np.nan)
    hi = np.full(len(d), np.nan)
    if ok.any():
        p[ok] = srange_sf(np.sqrt(2.0) * np.abs(t[ok]), k, dfs[ok])
        crit = srange_ppf(confidence, k, dfs[ok]) / np.sqrt(2.0)
        lo[ok] = d[ok] - crit * se[ok]
        hi[ok] = d[ok] + crit * se[ok]
    return PairwiseTable(
        method="Games-Howell", adjustment=f"studentized range, {k} means, Welch df per pair",
        family_size=len(d), labels=gs.labels, estimates=_ro(gs.original_means),
        first=tuple(gs.labels[x] for x in i), second=tuple(gs.labels[x] for x in j),
        difference=_ro(d), se=_ro(np.where(bad, np.nan, se)), df=_ro(np.where(bad, np.nan, dfs)),
        statistic=_ro(np.where(bad, np.nan, t)), pvalue=_ro(p), ci_low=_ro(lo), ci_high=_ro(hi),
        confidence=confidence, range_based=True, notes=tuple(notes),
    )


def pairwise_t(results: Results, *, adjust: Adjustment = "holm", confidence: float | None = None) -> PairwiseTable:
    """Pairwise t tests on the pooled residual variance, adjusted by Holm, Bonferroni or none.

    Holm's step-down method has no matching simultaneous intervals; its table shows the
    Bonferroni intervals (valid, wider) and says so. With ``adjust='none'`` the intervals
    are per comparison. Intervals are ``1 - alpha`` of the analysis unless ``confidence``
    is given.
    """
    confidence = _confidence_for(results, confidence)
    adjust_l = str(adjust).lower()
    if adjust_l not in ("holm", "bonferroni", "none"):
        raise ExplorerError(f"adjust must be 'holm', 'bonferroni' or 'none', not {adjust!r}")
    gs, n, means, _ = _level_stats(results)
    msw = results.ms_resid or 0.0
    df = results.df_resid
    k = gs.k
    i, j = _pairs(k)
    se = np.sqrt(msw * (1 / n[i] + 1 / n[j]))
    d = means[i] - means[j]
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(se > 0, d / se, np.nan)
    p_raw = t_two_sided_p(t, df)
    p = adjust_pvalues(p_raw, adjust_l)
    m = len(d)
    per = 1 - confidence
    crit = -float(t_ppf(per / 2 / (1 if adjust_l == "none" else m), df))
    notes: list[str] = []
    if adjust_l == "holm":
        notes.append("Holm's step-down method has no matching simultaneous intervals; Bonferroni intervals are shown.")
    if adjust_l == "none":
        notes.append(f"No adjustment: each of the {m} tests and intervals holds on its own, not for the family.")
    if not np.all(se > 0):
        notes.append("The residual mean square is zero: the t ratios are undefined.")
    names = {"holm": "Holm", "bonferroni": "Bonferroni", "none": "none (per comparison)"}
    return PairwiseTable(
        method="pairwise t (pooled variance)", adjustment=names[adjust_l], family_size=m,
        labels=gs.labels, estimates=_ro(gs.original_means), first=tuple(gs.labels[x] for x in i),
        second=tuple(gs.labels[x] for x in j), difference=_ro(d), se=_ro(se), df=_ro(np.full(m, float(df))),
        statistic=_ro(t), pvalue=_ro(p), ci_low=_ro(d - crit * se), ci_high=_ro(d + crit * se),
        confidence=confidence, notes=tuple(notes),
    )


# ---------------------------------------------------------------------- Dunnett
_DZ_H = 1.0 / 16.0
_DZ = np.arange(-9.0, 9.0 + _DZ_H / 2, _DZ_H)
_DPHI = np.exp(-0.5 * _DZ * _DZ) / np.sqrt(2 * np.pi) * _DZ_H


def _dunnett_exceed(c: float, lam: np.ndarray, df: float, alternative: str) -> float:
    """P(max_i T_i > c) (one-sided) or P(max_i |T_i| > c) for Dunnett's statistics.

    The correlation of comparisons i and j is ``lam_i lam_j`` with
    ``lam_i = sqrt(n_i / (n_i + n_0))``, so given a common normal ``z`` and the
    error scale ``s`` the comparisons are independent (Dunnett 1955, sec. 4):
    ``P(exceed) = E_s int phi(z) [1 - prod_i (1 - a_i(z, s))] dz``, with ``a_i`` the
    conditional tail probability, computed as ``-expm1(sum log1p(-a_i))``.
    """
    s, w = _outer_grid(np.array([df]))
    s = s[0]
    w = w[0]
    root = np.sqrt(1 - lam * lam)
    cs = c * s[:, None, None]  # (S, 1, 1)
    lz = lam[None, :, None] * _DZ[None, None, :]  # (1, m, Z)
    r = root[None, :, None]
    upper = special.ndtr((lz - cs) / r)  # P(Z_i > c s | z)
    if alternative == "two-sided":
        a = upper + special.ndtr((-lz - cs) / r)  # + P(Z_i < -c s | z)
    else:
        a = upper
    a = np.clip(a, 0.0, 1.0)
    with np.errstate(divide="ignore"):
        tail = -np.expm1(np.log1p(-a).sum(axis=1))  # (S, Z)
    return float(w @ (tail @ _DPHI))


def dunnett(
    results: Results,
    control: str,
    *,
    alternative: Alternative = "two-sided",
    confidence: float | None = None,
) -> PairwiseTable:
    """Dunnett's comparisons of every level with a control, two- or one-sided.

    ``alternative='greater'`` tests treatment > control (intervals bounded below),
    ``'less'`` treatment < control. Adjusted p-values are single-step:
    ``P(max T > |t_i|)`` under the joint multivariate t of the family, computed by
    Dunnett's (1955) one-factor product integral with deterministic quadrature (the
    same outer grid as :mod:`.studentized_range`). Intervals are ``1 - alpha`` of the
    analysis unless ``confidence`` is given.
    """
    confidence = _confidence_for(results, confidence)
    if alternative not in ("two-sided", "greater", "less"):
        raise ExplorerError(f"alternative must be 'two-sided', 'greater' or 'less', not {alternative!r}")
    gs, n, means, _ = _level_stats(results)
    labels = gs.labels
    if str(control) not in labels:
        near = closest_names(str(control), labels)
        hint = f" Did you mean {preview(near)}?" if near else ""
        raise ExplorerError(
            f"control level {control!r} is not among the levels in this view ({preview(labels)}).{hint}"
        )
    c0 = labels.index(str(control))
    idx = np.array([x for x in range(gs.k) if x != c0])
    msw = results.ms_resid or 0.0
    df = float(results.df_resid)
    d = means[idx] - means[c0]
    se = np.sqrt(msw * (1 / n[idx] + 1 / n[c0]))
    lam = np.sqrt(n[idx] / (n[idx] + n[c0]))
    m = len(idx)
    notes: list[str] = []
    if not msw > 0:
        raise DesignError("Dunnett's comparisons need a positive residual mean square; every observation equals its level mean")
    t = d / se
    if alternative == "two-sided":
        stat_for_p = np.abs(t)
    elif alternative == "greater":
        stat_for_p = t
    else:
        stat_for_p = -t
    p = np.array([_dunnett_exceed(float(x), lam, df, alternative) if x > -40 else 1.0 for x in stat_for_p])
    alpha = 1 - confidence

    def f(c: float) -> float:
        return _dunnett_exceed(c, lam, df, alternative) - alpha

    hi_c = 4.0
    while f(hi_c) > 0:
        hi_c *= 2
    crit = float(optimize.brentq(f, 0.0, hi_c, xtol=1e-10))
    if alternative == "two-sided":
        lo, hi = d - crit * se, d + crit * se
    elif alternative == "greater":
        lo, hi = d - crit * se, np.full(m, np.inf)
        notes.append("One-sided intervals (treatment minus control is at least the lower bound).")
    else:
        lo, hi = np.full(m, -np.inf), d + crit * se
        notes.append("One-sided intervals (treatment minus control is at most the upper bound).")
    return PairwiseTable(
        method=f"Dunnett (control {labels[c0]})", adjustment=f"Dunnett multivariate t, {m} comparisons",
        family_size=m, labels=labels, estimates=_ro(gs.original_means), first=tuple(labels[x] for x in idx),
        second=tuple(labels[c0] for _ in idx), difference=_ro(d), se=_ro(se), df=_ro(np.full(m, df)),
        statistic=_ro(t), pvalue=_ro(np.clip(p, 0.0, 1.0)), ci_low=_ro(lo), ci_high=_ro(hi),
        confidence=confidence, alternative=alternative, notes=tuple(notes),
    )
