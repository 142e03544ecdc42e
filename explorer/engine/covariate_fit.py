"""Analysis of covariance: factors and blocks with numeric covariates, fitted on the rows.

The model is the study's factorial or block model plus one common slope per covariate
(``ModelSpec.covariates``), fitted by least squares on the kept rows
(:mod:`.row_model`); covariate columns are centred at their kept-row means. Sums of
squares of every type come from projections, as in the factorial engine: type I enters
blocks, then covariates, then the treatment terms (the treatments adjusted for the
covariate); types II and III adjust each term for the covariates and the covariates for
the terms.

Before the adjusted test, the homogeneity of slopes is checked: the model with a
separate slope for each level (or cell) of the treatment terms is compared with the
common-slope model by an F test (Montgomery, Design and Analysis of Experiments, sec.
15.3; Maxwell, Delaney and Kelley, ch. 9). Its result leads the notes of the partition.

Adjusted means are the least-squares means at the covariate means (the covariate
columns are zero there), with their covariance ``MS_E L (X'X)^-1 L'``; their pairs are
compared by Tukey-Kramer (:class:`.marginal_means.MarginalMeans`). With one factor the
adjusted mean of level i is ``ybar_i - b (xbar_i - xbar)``, b the pooled within-level slope.

References
----------
Montgomery, D. C. Design and Analysis of Experiments, ch. 15 (analysis of covariance).
Maxwell, S. E., Delaney, H. D. and Kelley, K. (2018). Designing Experiments and Analyzing
Data, 3rd ed., ch. 9 (ANCOVA; heterogeneity of regression).
Searle, S. R. (1987). Linear Models for Unbalanced Data, ch. 10.
"""

from __future__ import annotations

import html
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..formatting import p_equals, show_stat
from ..rendering import html_repr
from .cells import CellTable, layout_cells
from .dataset import Dataset, RowId
from .design import cell_design, fitted_terms, sequential_order
from .design_checks import check_design
from .design_layout import layout_notes
from .distributions import f_sf, t_ppf, t_two_sided_p
from .errors import DesignError
from .fitrows import RowSet
from .groupstats import group_stats
from .marginal_means import MarginalMeans
from .numerics import is_zero_ss, response_scale
from .results import Fit, LevelTable, Results
from .row_model import RowDesign, RowFit, expand_cells, fit_rows
from .spec import ModelSpec
from .tables import AnovaTable, TermRow, html_table
from .term_effects import term_effects
from .view import DataView

__all__ = ["CovariateSummary", "SlopeCheck", "covariate_sequence", "fit_with_covariates"]

CODING = "sum-to-zero"


@dataclass(frozen=True, kw_only=True)
class SlopeCheck:
    """F test of separate covariate slopes per level (or cell) against one common slope."""

    statistic: float | None
    df_num: int
    df_den: int
    pvalue: float | None
    alpha: float
    by: tuple[str, ...]
    problem: str | None = None

    @property
    def slopes_differ(self) -> bool:
        return self.pvalue is not None and self.pvalue < self.alpha

    def sentence(self) -> str:
        by = " × ".join(self.by)
        if self.problem is not None:
            return f"Homogeneity of slopes (covariate × {by}) could not be checked: {self.problem}"
        head = (f"Homogeneity of slopes, checked before the adjusted test: separate slopes for each level of {by} "
                f"against one common slope, F = {show_stat(self.statistic)} on ({self.df_num}, {self.df_den}) df, "
                f"{p_equals(self.pvalue)}.")
        if self.slopes_differ:
            return head + (f" The slopes differ at alpha {self.alpha:g}: the adjusted comparison depends on the "
                           "covariate value, and the adjusted means below hold at the covariate mean only.")
        return head + f" No evidence against a common slope at alpha {self.alpha:g}; the adjusted test assumes one."


@dataclass(frozen=True, kw_only=True, eq=False)
class CovariateSummary:
    """The covariates of an analysis of covariance: slopes, the means adjusted to, the slope check.

    ``values`` are each covariate's values of the kept rows in ``Results.fit`` order.
    """

    names: tuple[str, ...]
    means: tuple[float, ...]
    slope: np.ndarray
    se: np.ndarray
    statistic: np.ndarray
    pvalue: np.ndarray
    df: int
    slope_check: SlopeCheck
    values: Mapping[str, np.ndarray] = field(default_factory=dict)

    def to_frame(self) -> pd.DataFrame:
        return pd.DataFrame({"covariate": list(self.names), "mean (means adjusted to it)": list(self.means),
                             "common slope": self.slope, "standard error": self.se, "t": self.statistic,
                             "df": np.full(len(self.names), self.df), "p-value": self.pvalue})

    @html_repr
    def _repr_html_(self) -> str:
        return html_table(self.to_frame(), "Covariates: common slopes", (self.slope_check.sentence(),))

    def __str__(self) -> str:
        return self.slope_check.sentence()


def _level_table(gs, factor: str, ms: float, df: float, confidence: float) -> LevelTable:  # type: ignore[no-untyped-def]
    from .factorial import raw_level_table as level_table

    return level_table(gs, factor, ms, df, confidence)


def _tables(fit: RowFit, design: RowDesign, zero: bool, notes_first: tuple[str, ...]) -> dict[str, AnovaTable]:
    ms_e = fit.ss_resid / fit.df_resid
    finite = np.isfinite(fit.ss_resid)
    out = {}
    for kind in ("I", "II", "III"):
        rows = []
        for t in design.terms:
            ss, df = fit.ss[kind][t], fit.df[kind][t]
            ms = ss / df
            F = p = None
            if finite and not zero:
                F = ms / ms_e
                p = float(f_sf(F, df, fit.df_resid))
            rows.append(TermRow(source=design.name(t), df=df, sum_sq=ss, mean_sq=ms, statistic=F, pvalue=p))
        rows.append(TermRow(source="residual", df=fit.df_resid, sum_sq=fit.ss_resid, mean_sq=0.0 if zero else ms_e))
        rows.append(TermRow(source="total (corrected)", df=fit.n - 1, sum_sq=fit.ss_total))
        how = {"I": "Sequential sums of squares, entered in the order " + ", ".join(design.name(t) for t in fit.sequence)
               + " (treatments adjusted for the covariates).",
               "II": "Each term adjusted for every other term that does not contain it (treatments adjusted for "
                     "the covariates, covariates for the treatments).",
               "III": "Each term adjusted for every other term, sum-to-zero coding."}[kind]
        notes = (*notes_first, how)
        if zero:
            notes += ("F is undefined: the residual sum of squares is zero.",)
        out[kind] = AnovaTable(rows=tuple(rows), ss_type=kind, coding=CODING, notes=notes)
    return out


def _slope_check(cells_design, row_cell, covs, y, base: RowFit, treatment, spec) -> SlopeCheck:  # type: ignore[no-untyped-def]
    by = tuple(f for f in spec.factors)
    if not treatment:
        return SlopeCheck(statistic=None, df_num=0, df_den=base.df_resid, pvalue=None, alpha=spec.alpha, by=by,
                          problem="the model has no treatment term")
    big = expand_cells(cells_design, row_cell, covs, slopes_by=treatment)
    try:
        wide = fit_rows(big, y, types=())
    except DesignError as exc:
        return SlopeCheck(statistic=None, df_num=0, df_den=base.df_resid, pvalue=None, alpha=spec.alpha, by=by,
                          problem=str(exc))
    df_num = base.df_resid - wide.df_resid
    ss = float(np.sum((wide.fitted - base.fitted) ** 2))
    if wide.ss_resid <= 0 or df_num < 1:
        return SlopeCheck(statistic=None, df_num=df_num, df_den=wide.df_resid, pvalue=None, alpha=spec.alpha, by=by,
                          problem="the separate-slopes model leaves no residual variation")
    f = (ss / df_num) / (wide.ss_resid / wide.df_resid)
    return SlopeCheck(statistic=f, df_num=df_num, df_den=wide.df_resid, pvalue=float(f_sf(f, df_num, wide.df_resid)),
                      alpha=spec.alpha, by=by)


def covariate_sequence(terms: tuple, spec: ModelSpec) -> tuple:  # type: ignore[type-arg]
    """Type I order with covariates: blocks, then the covariates, then the treatment terms."""
    cov = tuple((c,) for c in spec.covariates)
    rest = [t for t in terms if t not in cov]
    ordered = sequential_order(rest, spec.blocks)
    blocks = tuple(t for t in ordered if len(t) == 1 and t[0] in spec.blocks)
    return blocks + cov + tuple(t for t in ordered if t not in blocks)


def fit_with_covariates(dataset: Dataset, view: DataView, spec: ModelSpec, *, positions: np.ndarray,
                        dropped: tuple[RowId, ...] = (), confidence: float | None = None) -> Results:
    """Analysis of covariance of the kept rows ``positions`` (see the module docstring)."""
    if confidence is None:
        confidence = 1 - spec.alpha
    columns = spec.columns
    y = np.asarray(dataset.y)[positions]
    codes = [view.codes[c][positions] for c in columns]
    layout, row_cell = layout_cells(codes, [view.levels[c] for c in columns], columns)
    cells = group_stats(y, row_cell, layout.cell_labels(), dataset.offset)
    notes = list(check_design(layout, cells.n, spec, dataset.notes))
    notes += layout_notes(layout, cells.n, spec)
    terms = fitted_terms(spec, cells.n)
    cd = cell_design(terms, layout.columns, layout.n_levels, layout.cell_levels, spec.nesting)
    covs = {c: np.asarray(dataset.covariates[c])[positions] for c in spec.covariates}
    for c, v in covs.items():
        if v.size and float(np.ptp(v)) == 0.0:
            raise DesignError(f"covariate {c!r} takes one value on every kept row; it cannot be adjusted for")
    design = expand_cells(cd, row_cell, covs)
    treatment = [t for t in terms if not (len(t) == 1 and t[0] in spec.blocks)]
    sequence = covariate_sequence(design.terms, spec)
    fit = fit_rows(design, y, sequence=sequence)
    check = _slope_check(cd, row_cell, covs, y, fit, treatment, spec)
    zero = bool(is_zero_ss(fit.ss_resid, fit.n, response_scale(dataset.offset, y)))
    tables = _tables(fit, design, zero, (check.sentence(),))
    table = tables[spec.ss_type]
    ms_e = 0.0 if zero else fit.ms_resid
    notes.insert(0, check.sentence())
    notes.append("Adjusted means are least-squares means at the covariate mean"
                 + ("s" if len(covs) > 1 else "") + ": "
                 + ", ".join(f"{c} = {m:.6g}" for c, m in zip(design.covariates, design.covariate_means)) + ".")

    levels: dict[str, LevelTable] = {}
    means: dict[str, MarginalMeans] = {}
    offset = float(dataset.offset)
    for j, f in enumerate(spec.factors):
        from .factorial import level_stats_from_cells

        gs = level_stats_from_cells(layout, cells, j)
        levels[f] = _level_table(gs, f, ms_e, fit.df_resid, confidence)
        contrast = cd.contrasts[f]
        L = np.zeros((len(layout.levels[j]), design.n_params))
        L[:, 0] = 1.0
        L[:, design.slices[(f,)]] = contrast
        shifted = L @ fit.coef
        cov = ms_e * (L @ fit.cov_unscaled @ L.T)
        se = np.sqrt(np.maximum(np.diag(cov), 0.0))
        half = t_ppf(0.5 + confidence / 2, fit.df_resid) * se
        est = shifted + offset
        means[f] = MarginalMeans(
            factor=f, labels=layout.levels[j], estimate=est, se=se, ci_low=est - half, ci_high=est + half,
            covariance=cov, raw_mean=gs.original_means, n=gs.n, df=fit.df_resid, confidence=confidence,
            notes=(f"Adjusted to the covariate mean{'s' if len(covs) > 1 else ''}.",), offset=offset,
            shifted_estimate=shifted,
        )
    cslopes = np.array([fit.coef[design.slices[(c,)].start] for c in design.covariates])
    cse = np.array([np.sqrt(ms_e * fit.cov_unscaled[design.slices[(c,)].start, design.slices[(c,)].start])
                    for c in design.covariates])
    with np.errstate(divide="ignore", invalid="ignore"):
        ct = cslopes / cse
    summary = CovariateSummary(
        names=design.covariates, means=design.covariate_means, slope=cslopes, se=cse, statistic=ct,
        pvalue=np.asarray(t_two_sided_p(ct, fit.df_resid), dtype=float), df=fit.df_resid, slope_check=check,
        values=covs,
    )
    rows = RowSet(y=y, group=row_cell, row_ids=dataset.row_ids[positions], positions=positions)
    row_fit_ = Fit(row_ids=rows.row_ids, positions=positions, y=y + offset, fitted=fit.fitted + offset,
                   residuals=fit.residuals, leverage=fit.leverage, group=row_cell)
    gm = float(np.mean(y)) + offset
    ct_ = fit.n * gm * gm
    uncorrected = AnovaTable(
        title="Uncorrected decomposition of the raw sum of squares (sequential terms)",
        rows=(TermRow(source="mean (correction term)", df=1, sum_sq=ct_),
              *[TermRow(source=design.name(t), df=fit.df["I"][t], sum_sq=fit.ss["I"][t]) for t in sequence],
              TermRow(source="residual", df=fit.df_resid, sum_sq=fit.ss_resid),
              TermRow(source="total (uncorrected)", df=fit.n, sum_sq=ct_ + fit.ss_total)),
        ss_type="I", coding=CODING,
    )
    effects = term_effects(table, tuple(design.name(t) for t in design.terms), fit.n, alpha=spec.alpha)
    return Results(
        spec=spec, partition=table, uncorrected=uncorrected,
        r_squared=1.0 - fit.ss_resid / fit.ss_total if fit.ss_total > 0 else 0.0,
        residual_sd=float(np.sqrt(ms_e)), df_resid=fit.df_resid, ms_resid=ms_e, levels=levels, groups=cells,
        fit=row_fit_, n_used=fit.n, dropped=dropped,
        method="least squares with covariates (analysis of covariance; QR on the kept rows)",
        notes=tuple(notes), partitions=tables, marginal_means=means, term_effects=effects,
        cells=CellTable.from_stats(layout, cells), covariates=summary,
    )


def covariate_html(summary: CovariateSummary) -> str:
    """The covariate table with the slope check first (for reports)."""
    return f"<div>{html.escape(summary.slope_check.sentence())}</div>" + summary._repr_html_()
