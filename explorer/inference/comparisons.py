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

from typing import TYPE_CHECKING, Literal

import numpy as np
from scipy import optimize, special

from ..engine.distributions import t_ppf, t_two_sided_p
from ..engine.errors import DesignError, ExplorerError, closest_names, preview
from ..engine.groupstats import GroupStats
from ..engine.numerics import read_only_copy
from ..engine.pairwise import (
    PairwiseTable,
    adjust_pvalues,
    check_confidence,
    labels_at,
    pair_indices,
    simultaneous_pairs,
)
from ..engine.studentized_range import outer_grid, srange_ppf, srange_sf
from .oneway_inputs import require_oneway

if TYPE_CHECKING:
    from ..engine.results import Results

__all__ = [
    "PairwiseTable",
    "adjust_pvalues",
    "dunnett",
    "games_howell",
    "pairwise_t",
    "simultaneous_pairs",
    "tukey",
    "MAX_DUNNETT", "Alternative",
]

Alternative = Literal["two-sided", "greater", "less"]

#: Dunnett's p-values and quantile are computed for at most this many comparisons with the control.
MAX_DUNNETT = 100
Adjustment = Literal["holm", "bonferroni", "none"]


def _confidence_for(results: Results, confidence: float | None) -> float:
    """``confidence``, or ``1 - alpha`` of the analysis when not given, so that an interval
    excludes zero exactly when its test rejects at the alpha the decisions and letters use."""
    return check_confidence(1 - results.spec.alpha if confidence is None else confidence)


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
def tukey(results: Results, *, confidence: float | None = None) -> PairwiseTable:
    """Tukey (equal sizes) / Tukey-Kramer (unequal sizes) comparisons of all level means.

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study (``study.results``).
    confidence : float, optional
        Coverage of the intervals; ``1 - alpha`` of the analysis when not given.

    Returns
    -------
    PairwiseTable
        Every pair's difference, standard error, studentized-range p-value and
        simultaneous interval; ``method`` says Tukey or Tukey-Kramer.

    Notes
    -----
    Uses the residual mean square of the one-way model. Always the same computation:
    only the name in the table changes with the balance of the groups.

    References
    ----------
    Tukey, J. W. (1953). The problem of multiple comparisons. Unpublished manuscript.
    Kramer, C. Y. (1956). Extension of multiple range tests to group means with unequal
    numbers of replications. Biometrics 12, 307-310.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> pairs = ex.stats.tukey(results)
    >>> pairs.method, pairs.difference.round(2).tolist()
    ('Tukey', [-1.15, 0.22, 1.37])
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

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study (``study.results``).
    confidence : float, optional
        Coverage of the intervals; ``1 - alpha`` of the analysis when not given.

    Returns
    -------
    PairwiseTable
        Every pair's difference, its own standard error and df, p-value and interval;
        pairs with a one-observation level are undefined and a note says so.

    Notes
    -----
    ``se_ij = sqrt(v_i/n_i + v_j/n_j)``; df by Welch-Satterthwaite; p from the
    studentized range with k means at ``q = sqrt(2) |d| / se_ij``.

    References
    ----------
    Games, P. A. and Howell, J. F. (1976). Pairwise multiple comparison procedures with
    unequal n's and/or variances. J. Educ. Stat. 1, 113-125.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> pairs = ex.stats.games_howell(results)
    >>> pairs.method, pairs.df.round(1).tolist(), pairs.pvalue.round(4).tolist()
    ('Games-Howell', [6.0, 6.0, 6.0], [0.0015, 0.477, 0.0007])
    """
    confidence = _confidence_for(results, confidence)
    gs, n, means, var = _level_stats(results)
    k = gs.k
    i, j = pair_indices(k)
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
        family_size=len(d), labels=gs.labels, estimates=read_only_copy(gs.original_means),
        first=labels_at(gs.labels, i), second=labels_at(gs.labels, j),
        difference=read_only_copy(d), se=read_only_copy(np.where(bad, np.nan, se)),
        df=read_only_copy(np.where(bad, np.nan, dfs)), statistic=read_only_copy(np.where(bad, np.nan, t)),
        pvalue=read_only_copy(p), ci_low=read_only_copy(lo), ci_high=read_only_copy(hi),
        confidence=confidence, range_based=True, notes=tuple(notes),
    )


def pairwise_t(results: Results, *, adjust: Adjustment = "holm", confidence: float | None = None) -> PairwiseTable:
    """Pairwise t tests on the pooled residual variance, adjusted by Holm, Bonferroni or none.

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study (``study.results``).
    adjust : {'holm', 'bonferroni', 'none'}, default 'holm'
        Family-wise adjustment of the p-values.
    confidence : float, optional
        Coverage of the intervals; ``1 - alpha`` of the analysis when not given.

    Returns
    -------
    PairwiseTable
        Every pair's difference, t, adjusted p-value and interval. Holm's step-down
        method has no matching simultaneous intervals: its table shows the Bonferroni
        intervals (valid, wider) and says so; with ``adjust='none'`` the intervals are
        per comparison.

    References
    ----------
    Holm, S. (1979). A simple sequentially rejective multiple test procedure. Scand. J.
    Stat. 6, 65-70.
    Hochberg, Y. and Tamhane, A. C. (1987). Multiple Comparison Procedures. Wiley, ch. 2.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> pairs = ex.stats.pairwise_t(results, adjust="bonferroni")
    >>> pairs.adjustment, [bool(s) for s in pairs.significant(0.05)]
    ('Bonferroni', [True, False, True])
    """
    confidence = _confidence_for(results, confidence)
    adjust_l = str(adjust).lower()
    if adjust_l not in ("holm", "bonferroni", "none"):
        raise ExplorerError(f"adjust must be 'holm', 'bonferroni' or 'none', not {adjust!r}")
    gs, n, means, _ = _level_stats(results)
    msw = results.ms_resid or 0.0
    df = results.df_resid
    k = gs.k
    i, j = pair_indices(k)
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
        labels=gs.labels, estimates=read_only_copy(gs.original_means), first=labels_at(gs.labels, i),
        second=labels_at(gs.labels, j), difference=read_only_copy(d), se=read_only_copy(se),
        df=read_only_copy(np.full(m, float(df))), statistic=read_only_copy(t), pvalue=read_only_copy(p),
        ci_low=read_only_copy(d - crit * se), ci_high=read_only_copy(d + crit * se),
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
    s, w = outer_grid(np.array([df]))
    s = s[0]
    w = w[0]
    root = np.sqrt(1 - lam * lam)
    lz = lam[None, :, None] * _DZ[None, None, :]  # (1, m, Z)
    r = root[None, :, None]
    log_none = np.empty((s.size, _DZ.size))  # log P(no comparison exceeds | s, z)
    step = max(1, (1 << 18) // max(lam.size * _DZ.size, 1))  # nodes per block: bounded memory
    for start in range(0, s.size, step):
        cs = c * s[start:start + step, None, None]  # (S_block, 1, 1)
        upper = special.ndtr((lz - cs) / r)  # P(Z_i > c s | z)
        if alternative == "two-sided":
            a = upper + special.ndtr((-lz - cs) / r)  # + P(Z_i < -c s | z)
        else:
            a = upper
        a = np.clip(a, 0.0, 1.0)
        with np.errstate(divide="ignore"):
            log_none[start:start + step] = np.log1p(-a).sum(axis=1)
    tail = -np.expm1(log_none)  # (S, Z)
    return float(w @ (tail @ _DPHI))


def dunnett(
    results: Results,
    control: str,
    *,
    alternative: Alternative = "two-sided",
    confidence: float | None = None,
) -> PairwiseTable:
    """Dunnett's comparisons of every level with a control, two- or one-sided.

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study (``study.results``).
    control : str
        The level the others are compared with.
    alternative : {'two-sided', 'greater', 'less'}, default 'two-sided'
        'greater' tests treatment > control (intervals bounded below), 'less'
        treatment < control.
    confidence : float, optional
        Coverage of the intervals; ``1 - alpha`` of the analysis when not given.

    Returns
    -------
    PairwiseTable
        Each treatment minus the control with single-step adjusted p-values and
        simultaneous intervals.

    Notes
    -----
    Adjusted p-values are ``P(max T > |t_i|)`` under the joint multivariate t of the
    family, computed by Dunnett's one-factor product integral with deterministic
    quadrature (the same outer grid as the studentized range).

    References
    ----------
    Dunnett, C. W. (1955). A multiple comparison procedure for comparing several
    treatments with a control. JASA 50, 1096-1121.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> vs_a = ex.stats.dunnett(results, "A")
    >>> list(zip(vs_a.first, vs_a.second)), vs_a.pvalue.round(4).tolist()
    ([('B', 'A'), ('C', 'A')], [0.0002, 0.3896])
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
    if gs.k - 1 > MAX_DUNNETT:
        raise ExplorerError(
            f"Dunnett's comparisons are computed for at most {MAX_DUNNETT} treatments against the control, not "
            f"{gs.k - 1}: each p-value is an integral over all of them, so the cost grows with their square; "
            "compare fewer levels (merge or leave some out) or use pairwise t with Holm's adjustment"
        )
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
        family_size=m, labels=labels, estimates=read_only_copy(gs.original_means), first=tuple(labels[x] for x in idx),
        second=tuple(labels[c0] for _ in idx), difference=read_only_copy(d), se=read_only_copy(se),
        df=read_only_copy(np.full(m, df)), statistic=read_only_copy(t), pvalue=read_only_copy(np.clip(p, 0.0, 1.0)),
        ci_low=read_only_copy(lo), ci_high=read_only_copy(hi),
        confidence=confidence, alternative=alternative, notes=tuple(notes),
    )
