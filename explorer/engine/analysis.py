"""``analyze(dataset, view, spec)``: the one pure entry point from a view to results.

``analysis_state`` and ``analysis_after`` give the same results with what an edit log needs
to go on cheaply: for one factor without covariates, the running group statistics, so
the next edit recomputes only the groups it touches (:mod:`.running_groups`), and a fit whose per-row
arrays are made only when read; for every model the tables around the partition may be made when
first read (:mod:`.deferred`).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..formatting import Scale
from .dataset import Dataset, RowId
from .deferred import deferred, replace_deferred
from .fitrows import RowSet, row_fit
from .oneway import fit_oneway, oneway_from_stats
from .response_unit import unit_note
from .results import Fit, Results
from .running_groups import RunningGroups, running_groups, update_groups
from .spec import ModelSpec
from .transforms import transform_label, with_transform
from .view import DataView
from .view_delta import ViewDelta

__all__ = ["analyze", "AnalysisState", "analysis_state", "analysis_after"]


@dataclass(frozen=True, eq=False)
class AnalysisState:
    """Results of one view and, for a one-way model, the running group statistics behind them."""

    results: Results
    groups: RunningGroups | None = None


def analyze(dataset: Dataset, view: DataView, spec: ModelSpec) -> Results:
    """Fit ``spec`` on the kept rows of ``view``; raise :class:`DesignError` if it cannot be fitted.

    The response is ``spec.transform`` of the measured one (:mod:`.transforms`; the same
    dataset when it holds that transform already).
    """
    return analysis_state(dataset, view, spec).results


def _running(spec: ModelSpec) -> bool:
    return spec.is_oneway and not spec.covariates


def analysis_state(dataset: Dataset, view: DataView, spec: ModelSpec) -> AnalysisState:
    """The results of ``view`` (as :func:`analyze`) with what the next edit needs."""
    dataset = with_transform(dataset, spec.transform)
    if _running(spec):
        groups = running_groups(dataset.y, view, spec.factors[0], dataset.offset)
        return AnalysisState(_notes(dataset, spec, _oneway(dataset, view, spec, groups)), groups)
    positions = np.flatnonzero(view.kept)
    dropped = view.dropped_ids(dataset)
    y = dataset.y[positions]
    return AnalysisState(_finish(dataset, spec, _fit(dataset, view, spec, positions, dropped, y)))


def analysis_after(dataset: Dataset, spec: ModelSpec, state: AnalysisState, old: DataView, new: DataView,
                   delta: ViewDelta) -> AnalysisState:
    """The state of ``new = delta.forward(old)`` from that of ``old``: for a one-way model the groups the
    edit touches are recomputed (bit for bit as a full fit would) and the per-row fit is deferred; other
    models are fitted in full. Raises :class:`DesignError` as :func:`analyze` does."""
    if state.groups is None or not _running(spec):
        return analysis_state(dataset, new, spec)
    dataset = with_transform(dataset, spec.transform)
    groups = update_groups(state.groups, dataset.y, new, delta, spec.factors[0])
    return AnalysisState(_notes(dataset, spec, _oneway(dataset, new, spec, groups)), groups)


def _oneway(dataset: Dataset, view: DataView, spec: ModelSpec, groups: RunningGroups) -> Results:
    """One-way results from running statistics; the per-row fit is made when first read."""
    factor = spec.factors[0]
    full = groups.stats
    kept, codes, y = view.kept, view.codes[factor], dataset.y

    def rows() -> Fit:
        positions = np.flatnonzero(kept)
        gs = full.nonempty()
        remap = np.cumsum(full.n > 0) - 1
        group = remap[codes[positions]]
        nn = gs.n.astype(float)
        return row_fit(RowSet(y=y[positions], group=group, row_ids=dataset.ids_at(positions), positions=positions),
                       gs.mean, 1.0 / nn, full.offset)

    dropped_ids = tuple(dataset.ids_at(groups.dropped).tolist())
    shown = Scale(decimals=dataset.reading_decimals(), units=spec.units)
    return oneway_from_stats(full, spec, rows=deferred(rows), dropped=dropped_ids, display=shown)


def _finish(dataset: Dataset, spec: ModelSpec, results: Results) -> Results:
    return _with_display(_notes(dataset, spec, results), dataset.reading_decimals())


def _notes(dataset: Dataset, spec: ModelSpec, results: Results) -> Results:
    """The results with the notes on the response's unit and transform (deferred parts stay unmade)."""
    notes = results.notes
    if dataset.unit_exponent:
        notes = notes + (unit_note(spec.response, dataset.unit_exponent),)
    if spec.transform != "none":
        label = transform_label(spec.transform, spec.response)
        notes = (f"Analysed on {label}: means, differences, intervals and residuals are on that scale.",) + notes
    return results if notes is results.notes else replace_deferred(results, notes=notes)


def _with_display(results: Results, decimals: int | None) -> Results:
    """The results with the readings' decimals and the units attached, for display only (the level
    tables take them when they are made)."""
    shown = Scale(decimals=decimals, units=results.spec.units)
    levels = deferred(lambda: {f: replace(t, display=shown) for f, t in results.levels.items()})
    return replace_deferred(results, reading_decimals=decimals, levels=levels)


def _fit(dataset: Dataset, view: DataView, spec: ModelSpec, positions: np.ndarray, dropped: tuple[RowId, ...],
         y: np.ndarray) -> Results:
    if spec.is_oneway:
        f = spec.factors[0]
        return fit_oneway(
            y,
            view.codes[f][positions],
            view.levels[f],
            row_ids=dataset.row_ids[positions],
            positions=positions,
            offset=dataset.offset,
            spec=spec,
            dropped=dropped,
        )
    if spec.covariates:
        from .covariate_fit import fit_with_covariates  # least squares on the rows

        return fit_with_covariates(dataset, view, spec, positions=positions, dropped=dropped)
    from .factorial import fit_factorial  # the general least-squares engine

    return fit_factorial(dataset, view, spec, positions=positions, dropped=dropped)
