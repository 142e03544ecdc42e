"""Multi-factor analysis of variance: crossed factors, interactions, additive blocks.

``fit_factorial`` takes the kept rows of a view to cells (one O(n) pass), checks the
design (:mod:`.design_checks`), fits the model to the cell summaries
(:func:`.cellfit.fit_cells`) and assembles :class:`~.results.Results`: the partition
for each type of sums of squares (the spec's type is ``partition``), per-term effect
sizes, marginal means of each factor, the relative efficiency of blocking, the cell
counts, and the per-row fit (fitted value, residual and leverage of each kept row).

References
----------
Montgomery, D. C. Design and Analysis of Experiments, ch. 4 (randomized complete
block design) and ch. 5 (factorial designs).
Searle, S. R. (1987). Linear Models for Unbalanced Data. Wiley.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import replace

import numpy as np

from ..formatting import p_equals
from .balanced import METHOD as BALANCED_METHOD
from .balanced import balanced_counts, balanced_ems, fit_balanced
from .blocking import BlockingEfficiency, blocking_efficiency
from .cellfit import SS_TYPES, CellFit, fit_cells
from .cells import CellLayout, CellTable, layout_cells
from .dataset import Dataset, RowId
from .deferred import deferred
from .design import fitted_terms
from .design_checks import check_design
from .design_layout import layout_notes
from .distributions import f_sf, t_ppf
from .ems import ExpectedMeanSquares
from .fitrows import RowSet, row_fit
from .groupstats import GroupStats, group_stats, pool_groups
from .marginal_means import MarginalMeans, marginal_means
from .mixed_partition import mixed_tables
from .numerics import is_zero_ss, response_scale
from .oneway import NOT_FINITE
from .results import LevelTable, Results
from .spec import ModelSpec
from .tables import AnovaTable, TermRow
from .term_effects import term_effects
from .variance_components import estimate_components
from .view import DataView

__all__ = ["factorial_from_cells", "factorial_tables", "fit_factorial", "level_stats_from_cells", "raw_level_table", "layout_of"]

CODING = "sum-to-zero"


def _finite(fit: CellFit) -> bool:
    return bool(np.isfinite(fit.ss_resid) and all(np.isfinite(v) for table in fit.ss.values() for v in table.values()))


def _zero_residual(fit: CellFit) -> bool:
    return bool(is_zero_ss(fit.ss_resid, fit.n, response_scale(fit.stats.offset, fit.stats.mean)))


def _partition(fit: CellFit, ss_type: str, zero_resid: bool) -> AnovaTable:
    ms_e = fit.ss_resid / fit.df_resid
    finite = _finite(fit)
    rows = []
    for t in fit.terms:
        ss, df = fit.ss[ss_type][t], fit.df[ss_type][t]
        ms = ss / df
        F = p = None
        if finite and not zero_resid:
            F = ms / ms_e
            p = float(f_sf(F, df, fit.df_resid))
        rows.append(TermRow(source=fit.name(t), df=df, sum_sq=ss, mean_sq=ms, statistic=F, pvalue=p))
    rows.append(TermRow(source="residual", df=fit.df_resid, sum_sq=fit.ss_resid, mean_sq=0.0 if zero_resid else ms_e))
    rows.append(TermRow(source="total (corrected)", df=fit.n - 1, sum_sq=fit.ss_total))
    notes: list[str] = []
    if ss_type == "I":
        order = ", ".join(fit.name(t) for t in fit.sequence)
        notes.append(f"Sequential sums of squares, terms entered in the order {order}.")
    elif ss_type == "II":
        notes.append("Each term adjusted for every other term that does not contain it.")
    else:
        notes.append("Each term adjusted for every other term, sum-to-zero coding.")
    if not finite:
        notes.append(NOT_FINITE)
    elif zero_resid:
        notes.append("F is undefined: the residual sum of squares is zero (the model fits every observation).")
    notes.extend(a.sentence() for a in fit.aliased)
    aliased = tuple((a.name, ", ".join(a.aliased_with)) for a in fit.aliased)
    return AnovaTable(rows=tuple(rows), ss_type=ss_type, coding=CODING, notes=tuple(notes), aliased=aliased,
                      types_coincide=len(fit.terms) == 1)


def _types_agree(tables: dict[str, AnovaTable], fit: CellFit) -> bool:
    scale = max(fit.ss_total, 1e-300)
    return all(
        abs(fit.ss[k][t] - fit.ss["I"][t]) <= 1e-9 * scale for k in SS_TYPES for t in fit.terms
    )


def _type_notes(tables: dict[str, AnovaTable], fit: CellFit, balanced: bool, alpha: float) -> list[str]:
    if balanced:
        return [
            ("Balanced design (every combination of levels has the same count): types I, II and III give the "
            "same sums of squares.")
        ]
    counts = fit.stats.n
    if int(counts.min()) == int(counts.max()):
        if _types_agree(tables, fit):
            return [("Not every combination of levels is observed, but the fitted terms are orthogonal here: "
                     "types I, II and III give the same sums of squares.")]
        notes = [(f"Not every combination of levels is observed (each observed cell holds {int(counts.min())}); "
                  "types I, II and III can differ.")]
    else:
        notes = [
            (f"Unbalanced design: cell counts run from {int(counts.min())} to {int(counts.max())} over "
            f"{fit.stats.k} cells (see results.cells); types I, II and III can differ.")
        ]
    for t in fit.terms:
        name = fit.name(t)
        ps = {k: tables[k].row(name).pvalue for k in SS_TYPES}
        if any(p is None for p in ps.values()):
            continue
        verdicts = {k: p < alpha for k, p in ps.items()}  # type: ignore[operator]
        if len(set(verdicts.values())) > 1:
            detail = ", ".join(f"type {k} {p_equals(p)}" for k, p in ps.items())
            notes.append(f"The types disagree about {name!r} at alpha {alpha:g}: {detail}.")
    return notes


def _uncorrected(fit: CellFit) -> AnovaTable:
    gm = float(np.dot(fit.stats.n, fit.stats.mean) / fit.n) + fit.stats.offset
    ct = fit.n * gm * gm
    rows = [TermRow(source="mean (correction term)", df=1, sum_sq=ct)]
    rows += [TermRow(source=fit.name(t), df=fit.df["I"][t], sum_sq=fit.ss["I"][t]) for t in fit.terms]
    rows += [
        TermRow(source="residual", df=fit.df_resid, sum_sq=fit.ss_resid),
        TermRow(source="total (uncorrected)", df=fit.n, sum_sq=ct + fit.ss_total),
    ]
    return AnovaTable(
        title="Uncorrected decomposition of the raw sum of squares (sequential terms)",
        rows=tuple(rows), ss_type="I", coding=CODING,
    )


def factorial_tables(
    fit: CellFit, spec: ModelSpec, balanced: bool, layout: CellLayout | None = None
) -> tuple[dict[str, AnovaTable], list[str]]:
    """The partition for each SS type, and notes on balance and disagreement between types.

    With random terms (``spec.is_mixed``; ``layout`` needed) each F is tested against its
    own error term (:mod:`.mixed_partition`).
    """
    tables, _ = _tables_and_ems(fit, spec, layout)
    return tables, _type_notes(tables, fit, balanced, spec.alpha)


def _tables_and_ems(
    fit: CellFit, spec: ModelSpec, layout: CellLayout | None, counts: dict[str, int] | None = None
) -> tuple[dict[str, AnovaTable], dict[str, ExpectedMeanSquares]]:
    zero = _zero_residual(fit)
    if spec.is_mixed and layout is not None:
        ems = balanced_ems(fit, spec, counts) if counts is not None else None
        return mixed_tables(fit, spec, layout.cell_levels, layout.columns, zero, balanced_ems=ems)
    return {k: _partition(fit, k, zero) for k in SS_TYPES}, {}


def raw_level_table(gs: GroupStats, factor: str, ms_resid: float, df_resid: float, confidence: float) -> LevelTable:
    """Raw level means with pooled-SD (model residual) and own-SD intervals."""
    nn = gs.n.astype(float)
    with np.errstate(invalid="ignore"):
        sd = np.sqrt(gs.variances())
        t_own = np.where(gs.n > 1, t_ppf(0.5 + confidence / 2, np.maximum(gs.n - 1, 1)), np.nan)
    se = sd / np.sqrt(nn)
    means = gs.original_means
    half_pool = t_ppf(0.5 + confidence / 2, df_resid) * np.sqrt(ms_resid / nn)
    half_own = t_own * se
    singles = [lab for lab, c in zip(gs.labels, gs.n) if c == 1]
    notes = (f"Level(s) {singles} have one observation: their own SD and own-SD interval are undefined.",) if singles else ()
    return LevelTable(
        factor=factor, labels=gs.labels, n=gs.n, mean=means, sd=sd, se=se,
        pooled_low=means - half_pool, pooled_high=means + half_pool,
        own_low=means - half_own, own_high=means + half_own, confidence=confidence, notes=notes,
    )


def _blocking(table: AnovaTable, fit: CellFit, spec: ModelSpec, balanced: bool) -> BlockingEfficiency | None:
    if not spec.blocks:
        return None
    blk = [table.row(b) for b in spec.blocks]
    trt = [table.row(fit.name(t)) for t in fit.terms if not (len(t) == 1 and t[0] in spec.blocks)]
    eff = blocking_efficiency(
        ss_blocks=sum(r.sum_sq for r in blk), df_blocks=sum(r.df for r in blk),
        ss_resid=fit.ss_resid, df_resid=fit.df_resid, df_treatments=sum(r.df for r in trt),
    )
    if not balanced and eff.relative_efficiency is not None:
        eff = replace(eff, notes=eff.notes + (
            (f"The design is not a complete balanced block design; the efficiency uses the type {table.ss_type} "
            "block sum of squares and is approximate."),
        ))
    return eff


def fit_factorial(
    dataset: Dataset,
    view: DataView,
    spec: ModelSpec,
    *,
    positions: np.ndarray,
    dropped: tuple[RowId, ...] = (),
    confidence: float | None = None,
) -> Results:
    """Analyse the kept rows ``positions`` of ``view`` with the multi-factor model ``spec``.

    Raises :class:`DesignError` (from the design checks or the fit) when the model
    cannot be fitted on this view, saying which cells or terms are the problem and
    what to do.
    """
    columns = spec.columns
    y = dataset.y[positions]
    codes = [view.codes[c][positions] for c in columns]
    layout, row_cell = layout_cells(codes, [view.levels[c] for c in columns], columns)
    cells = group_stats(y, row_cell, layout.cell_labels(), dataset.offset)
    rows = RowSet(y=y, group=row_cell, row_ids=dataset.row_ids[positions], positions=positions)
    # Level statistics are pooled from the cells (exact merge formula): no further pass over the rows.
    return factorial_from_cells(
        layout, cells, spec, rows=rows, dataset_notes=dataset.notes,
        dropped=dropped, confidence=confidence,
    )


def _error_of(table: AnovaTable, source: str, ms_e: float, df_e: float) -> tuple[float, float]:
    """The error mean square and df a factor's F used (the residual for fixed-effects models)."""
    try:
        row = table.row(source)
    except KeyError:
        return ms_e, df_e
    if row.error_term is None or row.ms_error is None or row.ms_error <= 0 or row.df_error is None:
        return ms_e, df_e
    return row.ms_error, row.df_error


def level_stats_from_cells(layout: CellLayout, cells: GroupStats, j: int) -> GroupStats:
    """Statistics of the levels of column ``j``, pooled from the cells (Chan et al. 1983)."""
    return pool_groups(cells.n, cells.mean, cells.m2, layout.cell_levels[:, j], layout.levels[j], cells.offset)


def factorial_from_cells(
    layout: CellLayout,
    cells: GroupStats,
    spec: ModelSpec,
    *,
    rows: RowSet,
    level_stats: list[GroupStats] | None = None,
    dataset_notes: tuple[str, ...] = (),
    dropped: tuple[RowId, ...] = (),
    confidence: float | None = None,
    method: str | None = None,
) -> Results:
    """Multi-factor results from cell statistics alone (the rows-free entry point).

    ``cells`` are the statistics of the observed cells of ``layout`` (in its order);
    ``rows`` are the rows whose fitted values and residuals the results report (all kept
    rows, a sample of them, or none), their ``group`` codes indexing the cells.
    ``level_stats`` (per treatment factor) default to pooling the cells. Intervals (level
    and least-squares means) are ``1 - alpha`` of ``spec`` unless ``confidence`` is given.
    """
    if confidence is None:  # intervals follow the analysis alpha
        confidence = 1 - spec.alpha
    notes = list(check_design(layout, cells.n, spec, dataset_notes))
    notes += layout_notes(layout, cells.n, spec)
    terms = fitted_terms(spec, cells.n)
    if spec.subject is not None and (spec.subject, *spec.within) not in terms:
        top = " × ".join((spec.subject, *spec.within))
        notes.append(f"One observation per subject and cell: the residual is the {top} interaction.")
    # Complete balanced layouts: closed form from marginal means; anything else: the least-squares engine.
    counts = balanced_counts(layout, cells.n, terms, spec.nesting)
    closed = fit_balanced(cells, layout, spec, terms, counts) if counts is not None else None
    if closed is None:
        counts = None
    fit = closed or fit_cells(cells, layout.cell_levels, layout.columns, layout.n_levels, spec, terms=terms)
    balanced = bool(layout.n_cells == math.prod(layout.n_levels) and np.all(cells.n == cells.n[0]))
    tables, ems_by_type = _tables_and_ems(fit, spec, layout, counts)
    type_notes = _type_notes(tables, fit, balanced, spec.alpha)
    notes += [a.sentence() for a in fit.aliased]
    notes += type_notes
    table = tables[spec.ss_type]
    zero = table.row("residual").mean_sq == 0.0
    ms_e = 0.0 if zero else fit.ms_resid
    ems = ems_by_type.get(spec.ss_type)
    tables_around = _around(layout, cells, spec, fit, table, ms_e, level_stats, confidence)
    kind = "randomized block" if spec.blocks else "factorial"
    return Results(
        spec=spec,
        partition=table,
        uncorrected=deferred(lambda: _uncorrected(fit)),
        r_squared=1.0 - fit.ss_resid / fit.ss_total if fit.ss_total > 0 else 0.0,
        residual_sd=float(np.sqrt(ms_e)),
        df_resid=fit.df_resid,
        ms_resid=ms_e,
        levels=deferred(lambda: tables_around()[0]),
        groups=cells,
        fit=deferred(lambda: row_fit(rows, fit.cell_fitted, fit.cell_leverage, cells.offset)),
        n_used=fit.n,
        dropped=dropped,
        method=method or (f"least squares, {kind} ({BALANCED_METHOD})" if closed is not None
                          else f"least squares, {kind} (cell sufficient statistics, QR)"),
        notes=tuple(notes),
        partitions=tables,
        marginal_means=deferred(lambda: tables_around()[1]),
        term_effects=deferred(lambda: term_effects(table, fit.term_names(), fit.n, alpha=spec.alpha)),
        cells=deferred(lambda: CellTable.from_stats(layout, cells, fit.cell_fitted)),
        blocking=None if spec.is_mixed else _blocking(table, fit, spec, balanced),
        expected_mean_squares=ems,
        variance_components=None if ems is None else estimate_components(
            fit, spec, layout.cell_levels, layout.columns, ems, table, confidence),
        aliased=fit.aliased,
    )


def _around(
    layout: CellLayout, cells: GroupStats, spec: ModelSpec, fit: CellFit, table: AnovaTable, ms_e: float,
    level_stats: list[GroupStats] | None, confidence: float,
) -> Callable[[], tuple[dict[str, LevelTable], dict[str, MarginalMeans]]]:
    """The level tables and marginal means, made together on the first call (results read them when shown)."""
    made: list[tuple[dict[str, LevelTable], dict[str, MarginalMeans]]] = []

    def make() -> tuple[dict[str, LevelTable], dict[str, MarginalMeans]]:
        if not made:
            levels: dict[str, LevelTable] = {}
            means: dict[str, MarginalMeans] = {}
            nested = spec.nesting
            for j, f in enumerate(spec.factors):
                gs = level_stats[j] if level_stats is not None else level_stats_from_cells(layout, cells, j)
                ms_f, df_f = _error_of(table, fit.name((f,)), ms_e, fit.df_resid)
                levels[f] = raw_level_table(gs, f, ms_f, df_f, confidence)
                if f not in nested and f not in spec.random:
                    means[f] = marginal_means(fit, f, layout.levels[j], gs.original_means, gs.n, ms_f, confidence,
                                              df=df_f)
            made.append((levels, means))
        return made[0]

    return make


def layout_of(dataset: Dataset, view: DataView, spec: ModelSpec) -> CellLayout:
    """The cell layout of the kept rows of ``view`` (for displays and sensitivity tools)."""
    positions = np.flatnonzero(view.kept)
    return layout_cells([view.codes[c][positions] for c in spec.columns], [view.levels[c] for c in spec.columns], spec.columns)[0]
