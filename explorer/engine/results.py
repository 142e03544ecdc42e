"""Result values of an analysis: frozen, full precision, with ``to_frame`` and HTML reprs."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ..formatting import (
    Scale,
    measurement_decimals,
    p_equals,
    result_frame,
    scale,
    show_measure,
    show_share,
    show_stat,
    text_table,
)
from ..rendering import block, html_repr, note
from .dataset import RowId
from .deferred import deferrable
from .disclosure import Disclosure
from .errors import ExplorerError
from .groupstats import GroupStats
from .spec import ModelSpec
from .tables import AnovaTable, esc, html_table

if TYPE_CHECKING:  # multi-factor result parts (see factorial.py)
    from .aliasing import AliasedTerm
    from .blocking import BlockingEfficiency
    from .cells import CellTable
    from .covariate_fit import CovariateSummary
    from .ems import ExpectedMeanSquares
    from .marginal_means import MarginalMeans
    from .term_effects import TermEffects
    from .variance_components import VarianceComponents

__all__ = ["LevelTable", "TwoSampleT", "Fit", "Results", "DEFERRABLE"]


@dataclass(frozen=True, kw_only=True, eq=False)
class LevelTable:
    """Per-level summary: n, mean, SD, standard error and two confidence intervals.

    ``pooled_ci`` uses the residual mean square of the model (df of the residual);
    ``own_ci`` uses the level's own SD (df n-1). Undefined entries are NaN in the
    arrays and listed in ``notes``.
    """

    factor: str
    labels: tuple[str, ...]
    n: np.ndarray
    mean: np.ndarray
    sd: np.ndarray
    se: np.ndarray
    pooled_low: np.ndarray
    pooled_high: np.ndarray
    own_low: np.ndarray
    own_high: np.ndarray
    confidence: float = 0.95
    notes: tuple[str, ...] = ()
    display: Scale | None = None  # the readings' decimals and the units, for showing the table on its own

    def to_frame(self) -> pd.DataFrame:
        pct = f"{self.confidence:.0%}"
        frame = result_frame(
            {
                "level": list(self.labels),
                "n": self.n,
                "mean": self.mean,
                "SD": self.sd,
                "standard error": self.se,
                f"{pct} CI low (pooled SD)": self.pooled_low,
                f"{pct} CI high (pooled SD)": self.pooled_high,
                f"{pct} CI low (own SD)": self.own_low,
                f"{pct} CI high (own SD)": self.own_high,
            }
        )
        if self.display is not None:
            frame.attrs.update(units=self.display.units, decimals=self.display.measure_decimals)
        return frame

    @html_repr
    def _repr_html_(self) -> str:
        return html_table(self.to_frame(), f"Levels of {self.factor}", self.notes)


@dataclass(frozen=True, kw_only=True)
class TwoSampleT:
    """Pooled-variance two-sample t test of the difference ``first - second``.

    With two levels, ``statistic**2`` equals the partition's F and the p-values agree.
    """

    first: str
    second: str
    difference: float
    statistic: float | None
    df: int
    pvalue: float | None
    ci_low: float | None
    ci_high: float | None
    confidence: float = 0.95

    def confidence_interval(self) -> tuple[float | None, float | None]:
        return (self.ci_low, self.ci_high)

    @html_repr
    def _repr_html_(self) -> str:
        return (
            f"<div>Pooled t test, {esc(self.first)} − {esc(self.second)}: difference "
            f"{show_measure(self.difference)}, t = {show_stat(self.statistic)} on {self.df} df, {p_equals(self.pvalue)}, "
            f"{self.confidence:.0%} CI ({show_measure(self.ci_low)}, {show_measure(self.ci_high)})</div>"
        )


@dataclass(frozen=True, kw_only=True, eq=False)
class Fit:
    """Per-row quantities of the fitted model for the kept rows (original response scale)."""

    row_ids: np.ndarray
    positions: np.ndarray
    y: np.ndarray
    fitted: np.ndarray
    residuals: np.ndarray
    leverage: np.ndarray
    group: np.ndarray  # group (or cell) code of each kept row, into Results.groups

    def to_frame(self) -> pd.DataFrame:
        return result_frame(
            {"row": self.row_ids, "observed": self.y, "fitted": self.fitted,
             "residual": self.residuals, "leverage": self.leverage}
        )


#: Fields of :class:`Results` a builder may give as ``deferred(make)`` (:mod:`.deferred`): made on first read.
DEFERRABLE = ("uncorrected", "levels", "fit", "two_groups", "partitions", "marginal_means", "term_effects", "cells",
              "blocking", "expected_mean_squares", "variance_components", "covariates")


@deferrable(*DEFERRABLE)
@dataclass(frozen=True, kw_only=True, eq=False)
class Results:
    """Everything the analysis of one view produces.

    ``partition`` is the corrected partition (terms, residual, corrected total);
    ``uncorrected`` the raw decomposition (correction for the mean + terms + residual =
    raw sum of squares). ``levels`` maps each treatment factor to its level table
    (least-squares means for factorial designs). ``groups`` are the sufficient
    statistics of the groups (one-way) or cells (factorial) that were fitted.

    The fields in :data:`DEFERRABLE` may be computed on first read (:mod:`.deferred`): an
    edit's recompute makes the partition, and the tables around it when they are read.
    """

    spec: ModelSpec
    partition: AnovaTable
    uncorrected: AnovaTable
    r_squared: float
    residual_sd: float | None
    df_resid: int
    ms_resid: float | None
    levels: Mapping[str, LevelTable]
    groups: GroupStats
    fit: Fit
    n_used: int
    dropped: tuple[RowId, ...] = ()
    two_groups: TwoSampleT | None = None
    method: str = "least squares, one-way"
    notes: tuple[str, ...] = field(default=())
    # Multi-factor designs (factorial.py); empty/None for one-way results.
    partitions: Mapping[str, AnovaTable] = field(default_factory=dict)  # SS type ("I", "II", "III") -> partition
    marginal_means: Mapping[str, "MarginalMeans"] = field(default_factory=dict)  # least-squares means per factor
    term_effects: "TermEffects | None" = None  # partial eta² and omega² per term
    cells: "CellTable | None" = None  # counts and raw means of the observed cells
    blocking: "BlockingEfficiency | None" = None  # relative efficiency of blocks vs no blocks
    # Models with random, nested or subject terms (ems.py, mixed_partition.py); empty/None otherwise.
    expected_mean_squares: "ExpectedMeanSquares | None" = None  # E(MS) of each row of the spec's type
    variance_components: "VarianceComponents | None" = None  # random terms and residual: estimates, intervals, shares
    reading_decimals: int | None = None  # decimals the response was recorded with (display only)
    aliased: "tuple[AliasedTerm, ...]" = ()  # terms left out because the cells cannot separate them
    # Analysis of covariance (covariate_fit.py): slopes, the means adjusted to, the homogeneity-of-slopes check.
    covariates: "CovariateSummary | None" = None
    #: Reads the disclosure of the study these results belong to when they are shown (set by the study).
    disclosure_source: "Callable[[], Disclosure | None] | None" = field(default=None, repr=False, compare=False)

    @property
    def covariate_values(self) -> Mapping[str, np.ndarray] | None:
        """Each covariate's values of the kept rows in ``fit`` order (``None`` without covariates)."""
        return None if self.covariates is None else self.covariates.values

    def compare_means(self, factor: str | None = None, confidence: float | None = None) -> Any:
        """Tukey-Kramer comparisons of the marginal (least-squares) means of ``factor`` (default the first)."""
        f = factor or self.spec.factors[0]
        if f not in self.marginal_means:
            raise KeyError(f"no marginal means for {f!r}; they exist for {list(self.marginal_means)}")
        return self.marginal_means[f].compare(confidence)

    def _term(self, term: str | None) -> str:
        if term is not None:
            return term
        if self.spec.is_oneway:
            return self.spec.factors[0]
        raise ExplorerError(
            f"name the term: this model has rows {[r.source for r in self.partition.rows]}; the term a "
            "conclusion is about is the study's decision (study.decision.term)")

    def pvalue(self, term: str | None = None) -> float | None:
        """The classic F test's p-value of one term of the partition (``term`` may be left out with one factor);
        ``None`` when its test is undefined (never NaN, so no decision rests on NaN).

        This is a number, not a decision: which term and test a conclusion is read from is
        the study's decision (``study.decision``).
        """
        p = self.partition.row(self._term(term)).pvalue
        return p if p is not None and np.isfinite(p) else None

    def statistic(self, term: str | None = None) -> float | None:
        """The classic F statistic of one term of the partition (``term`` may be left out with one factor)."""
        return self.partition.row(self._term(term)).statistic

    def display_scale(self) -> Scale:
        """How this result's numbers are shown: the decimals the readings were recorded with (from the
        whole data set when known, else from the rows analysed) and the response's units."""
        d = self.reading_decimals if self.reading_decimals is not None else measurement_decimals(self.fit.y)
        return Scale(decimals=d, units=self.spec.units)

    def to_frame(self) -> pd.DataFrame:
        """The partition (full precision; it displays with the kit's digits and the response's units)."""
        frame = self.partition.to_frame()
        frame.attrs.update(units=self.spec.units)
        return frame

    def summary_line(self) -> str:
        """``n = 114, R² = 0.077, residual SD = 2.35 µm``."""
        units = f" {self.spec.units}" if self.spec.units and self.residual_sd is not None else ""
        return (f"n = {self.n_used}, R² = {show_share(self.r_squared)}, "
                f"residual SD = {show_measure(self.residual_sd)}{units}")

    def to_text(self) -> str:
        """Short plain text: the partition, one summary line and the level tables (``study.decision``
        states what they conclude)."""
        with scale(of=self.display_scale()):
            parts = [self.partition.title_line(), text_table(self.partition.to_frame()), self.summary_line()]
            for factor, table in self.levels.items():
                parts += ["", f"Levels of {factor}:", text_table(table.to_frame().iloc[:, :5])]
            parts += [f"Note: {n}" for n in self.notes]
        return "\n".join(parts)

    def __str__(self) -> str:
        return self.to_text()

    def __repr__(self) -> str:
        factors = " × ".join(self.spec.factors)
        return f"<Results {self.spec.response} by {factors}: n = {self.n_used}; print() for the tables>"

    @html_repr
    def _repr_html_(self) -> str:
        with scale(of=self.display_scale()):
            return self._html()

    def _html(self) -> str:
        parts = [self.partition._repr_html_()]
        parts.append(f"<div>{esc(self.summary_line())}</div>")
        for table in self.levels.values():
            parts.append(table._repr_html_())
        extras: list[Any] = [self.covariates, *self.marginal_means.values(), self.term_effects, self.blocking,
                             self.expected_mean_squares, self.variance_components]
        if self.cells is not None and not self.cells.balanced:
            extras.append(self.cells)
        parts.extend(x._repr_html_() for x in extras if x is not None)
        if self.two_groups is not None:
            parts.append(self.two_groups._repr_html_())
        parts.extend(note(n) for n in self.notes)
        disclosure = self.disclosure_source() if self.disclosure_source is not None else None
        if disclosure is not None:
            parts.append(f"<div class='vx-disclosure'><b>Searching so far:</b> {esc(disclosure.sentence())}</div>")
        return block("results", parts)
