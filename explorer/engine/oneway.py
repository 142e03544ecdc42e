"""One-way analysis of variance from group sufficient statistics.

The partition is computed from per-group counts, means and centred sums of squares
(:mod:`.groupstats`), so it loses no digits to cancellation (checked against the NIST
StRD analysis-of-variance sets) and an edit costs O(levels) plus one pass over the
kept rows for the residuals.

References
----------
Montgomery, D. C. Design and Analysis of Experiments, ch. 3 (the one-way partition).
NIST/SEMATECH e-Handbook of Statistical Methods, section 7.4.3 (one-way ANOVA).
"""

from __future__ import annotations

import numpy as np

from ..formatting import Scale
from .dataset import RowId
from .deferred import deferred
from .distributions import f_sf, t_ppf, t_two_sided_p
from .errors import DesignError, preview
from .fitrows import RowSet, row_fit
from .groupstats import GroupStats, group_stats
from .numerics import is_zero_ss, response_scale
from .results import Fit, LevelTable, Results, TwoSampleT
from .spec import ModelSpec
from .tables import AnovaTable, TermRow

__all__ = ["NOT_FINITE", "fit_oneway", "oneway_from_stats", "oneway_partition"]

#: Why a partition has no F test when its sums of squares are not finite (never a decision from NaN).
NOT_FINITE = ("F is undefined: the sums of squares are not finite numbers (the response's values overflow the "
              "64-bit float range); no decision is drawn.")


def _zero_residual(ss_within: float, n: int, gs: GroupStats) -> bool:
    return bool(is_zero_ss(ss_within, n, response_scale(gs.offset, gs.mean)))


def _sums(gs: GroupStats) -> tuple[int, float, float]:
    """(n, between-groups SS, within-groups SS) of the non-empty groups ``gs``, each computed once."""
    n = gs.n_total
    d = gs.mean - float(np.dot(gs.n, gs.mean) / n)  # GroupStats.ss_between, with n summed once
    return n, float(np.dot(gs.n, d * d)), gs.ss_within


def oneway_partition(gs: GroupStats, factor: str, ss_type: str = "I") -> tuple[AnovaTable, AnovaTable, tuple[str, ...]]:
    """Corrected and uncorrected partitions from sufficient statistics (non-empty groups).

    With one factor the three types of sums of squares coincide; the table records the
    type asked for (``ss_type``) and says that they coincide.
    """
    n, ssb, ssw = _sums(gs)
    table, notes = _partition(gs, factor, ss_type, n, ssb, ssw)
    return table, _uncorrected(gs, factor, n, ssb, ssw), notes


def _partition(gs: GroupStats, factor: str, ss_type: str, n: int, ssb: float, ssw: float
               ) -> tuple[AnovaTable, tuple[str, ...]]:
    """The corrected partition (the F test of ``factor``) and its notes."""
    k = gs.k
    df_b, df_w = k - 1, n - k
    notes: tuple[str, ...] = ()
    msb = ssb / df_b
    msw = ssw / df_w
    if not (np.isfinite(ssb) and np.isfinite(ssw)):
        F = p = None
        notes = (NOT_FINITE,)
    elif _zero_residual(ssw, n, gs):
        F = p = None
        msw = 0.0
        notes = ("F is undefined: the residual sum of squares is zero (every observation equals its level mean).",)
    else:
        F = msb / msw
        p = float(f_sf(F, df_b, df_w))
    table = AnovaTable(
        rows=(
            TermRow(source=factor, df=df_b, sum_sq=ssb, mean_sq=msb, statistic=F, pvalue=p),
            TermRow(source="residual", df=df_w, sum_sq=ssw, mean_sq=msw),
            TermRow(source="total (corrected)", df=n - 1, sum_sq=ssb + ssw),
        ),
        ss_type=ss_type,
        types_coincide=True,
        notes=notes,
    )
    return table, notes


def _uncorrected(gs: GroupStats, factor: str, n: int, ssb: float, ssw: float) -> AnovaTable:
    """The raw sum of squares split into the correction for the mean, the factor and the residual."""
    df_b, df_w = gs.k - 1, n - gs.k
    gm = gs.grand_mean + gs.offset
    ct = n * gm * gm
    return AnovaTable(
        title="Uncorrected decomposition of the raw sum of squares",
        rows=(
            TermRow(source="mean (correction term)", df=1, sum_sq=ct),
            TermRow(source=factor, df=df_b, sum_sq=ssb),
            TermRow(source="residual", df=df_w, sum_sq=ssw),
            TermRow(source="total (uncorrected)", df=n, sum_sq=ct + ssb + ssw),
        ),
        ss_type="I",
    )


def fit_oneway(
    y: np.ndarray,
    codes: np.ndarray,
    labels: tuple[str, ...],
    *,
    row_ids: np.ndarray,
    positions: np.ndarray,
    offset: float,
    spec: ModelSpec,
    dropped: tuple[RowId, ...] = (),
    confidence: float | None = None,
) -> Results:
    """One-way analysis of the shifted response ``y`` grouped by ``codes`` into ``labels``.

    Levels without observations are left out (and named in the notes). Raises
    :class:`DesignError` when fewer than two levels remain or no residual df is left.
    """
    full = group_stats(y, codes, labels, offset)
    rows = RowSet(y=y, group=codes, row_ids=row_ids, positions=positions)
    return oneway_from_stats(full, spec, rows=rows, dropped=dropped, confidence=confidence)


def oneway_from_stats(
    full: GroupStats,
    spec: ModelSpec,
    *,
    rows: RowSet | Fit,
    dropped: tuple[RowId, ...] = (),
    confidence: float | None = None,
    method: str = "least squares, one-way (group sufficient statistics)",
    display: Scale | None = None,
) -> Results:
    """One-way results from group statistics alone (the rows-free entry point).

    ``full`` holds every level of the factor (empty ones allowed); ``rows`` are the rows
    whose fitted values and residuals the results report (all kept rows, a sample of
    them, or none), their ``group`` codes indexing ``full``'s levels; or the fit of those rows
    already made or ``deferred(make)`` (:mod:`.deferred`), whose groups index the non-empty
    levels. Intervals (level means, the two-level difference) are ``1 - alpha`` of ``spec``
    unless ``confidence`` is given. ``display`` (the readings' decimals and the units) is
    attached to the level tables for showing.

    The partition (the decision's F and p) is made at once; the level table and the
    two-level t are made when first read.
    """
    if confidence is None:  # intervals follow the analysis alpha
        confidence = 1 - spec.alpha
    factor = spec.factors[0]
    offset = full.offset
    notes: list[str] = []
    empty = [lab for lab, c in zip(full.labels, full.n.tolist()) if c == 0] if full.n.size and full.n.min() == 0 else []
    if empty:
        notes.append(f"Level(s) {preview(empty)} of {factor!r} have no observations in this view and are left out.")
    gs = full.nonempty()
    if gs.k < 2:
        only = f" (only {gs.labels[0]!r} is left)" if gs.k == 1 else ""
        raise DesignError(
            f"fewer than two levels of {factor!r} have observations{only}; restore rows or undo a merge to compare groups"
        )
    n, ssb, ssw = _sums(gs)
    k = gs.k
    if n - k < 1:
        raise DesignError(
            f"no residual degrees of freedom: each of the {k} levels of {factor!r} has one observation; "
            "the F test needs at least one level with two or more"
        )
    table, part_notes = _partition(gs, factor, spec.ss_type, n, ssb, ssw)
    notes.extend(part_notes)
    df_w = n - k
    msw = float(table.rows[1].mean_sq or 0.0)
    singles = [lab for lab, c in zip(gs.labels, gs.n.tolist()) if c == 1] if gs.n.min() == 1 else []
    lt_notes: tuple[str, ...] = ()
    if singles:
        lt_notes = (f"Level(s) {preview(singles)} have one observation: their own SD and own-SD interval are undefined.",)
        notes.extend(lt_notes)

    if isinstance(rows, RowSet):
        remap = np.cumsum(full.n > 0) - 1
        fit = row_fit(rows.regrouped(remap) if empty else rows, gs.mean, 1.0 / gs.n.astype(float), offset)
    else:
        fit = rows
    two = deferred(lambda: _two_sample_t(gs, msw, df_w, confidence)) if k == 2 else None
    sst = ssb + ssw
    return Results(
        spec=spec,
        partition=table,
        uncorrected=deferred(lambda: _uncorrected(gs, factor, n, ssb, ssw)),
        r_squared=ssb / sst if sst > 0 else 0.0,
        residual_sd=float(np.sqrt(msw)) if msw > 0 else 0.0,
        df_resid=df_w,
        ms_resid=msw,
        levels=deferred(lambda: {factor: _level_table(gs, factor, msw, df_w, confidence, lt_notes, display)}),
        groups=gs,
        fit=fit,
        n_used=n,
        dropped=dropped,
        two_groups=two,
        method=method,
        notes=tuple(notes),
        reading_decimals=None if display is None else display.decimals,
    )


def _level_table(gs: GroupStats, factor: str, msw: float, df_w: int, confidence: float, notes: tuple[str, ...] = (),
                display: Scale | None = None) -> LevelTable:
    """Per-level n, mean, SD, standard error and two intervals (pooled residual SD on ``df_w`` df; own SD on
    n - 1 df) of the non-empty groups ``gs``."""
    var = gs.variances()
    sd = np.sqrt(var)
    nn = gs.n.astype(float)
    se = sd / np.sqrt(nn)
    means = gs.original_means
    t_pool = float(t_ppf(0.5 + confidence / 2, df_w))
    half_pool = t_pool * np.sqrt(msw / nn)
    with np.errstate(invalid="ignore"):
        t_own = np.where(gs.n > 1, t_ppf(0.5 + confidence / 2, np.maximum(gs.n - 1, 1)), np.nan)
    half_own = t_own * se
    return LevelTable(
        factor=factor, labels=gs.labels, n=gs.n, mean=means, sd=sd, se=se,
        pooled_low=means - half_pool, pooled_high=means + half_pool,
        own_low=means - half_own, own_high=means + half_own, confidence=confidence, notes=notes, display=display,
    )


def _two_sample_t(gs: GroupStats, msw: float, df_w: int, confidence: float) -> TwoSampleT:
    """Pooled two-sample t of the first level minus the second (two non-empty groups)."""
    nn = gs.n.astype(float)
    t_pool = float(t_ppf(0.5 + confidence / 2, df_w))
    diff = float(gs.mean[0] - gs.mean[1])
    se_d = float(np.sqrt(msw * (1 / nn[0] + 1 / nn[1])))
    t_stat: float | None
    p2: float | None
    lo: float | None
    hi: float | None
    if se_d > 0:
        t_stat = diff / se_d
        p2 = float(t_two_sided_p(t_stat, df_w))
        lo, hi = diff - t_pool * se_d, diff + t_pool * se_d
    else:
        t_stat = p2 = lo = hi = None
    return TwoSampleT(first=gs.labels[0], second=gs.labels[1], difference=diff, statistic=t_stat, df=df_w,
                      pvalue=p2, ci_low=lo, ci_high=hi, confidence=confidence)
