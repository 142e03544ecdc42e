"""``analyze(dataset, view, spec)``: the one pure entry point from a view to results."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..formatting import Scale
from .dataset import Dataset, RowId
from .oneway import fit_oneway
from .response_unit import unit_note
from .results import Results
from .spec import ModelSpec
from .transforms import transform_label, with_transform
from .view import DataView

__all__ = ["analyze"]


def analyze(dataset: Dataset, view: DataView, spec: ModelSpec) -> Results:
    """Fit ``spec`` on the kept rows of ``view``; raise :class:`DesignError` if it cannot be fitted.

    The response is ``spec.transform`` of the measured one (:mod:`.transforms`; the same
    dataset when it holds that transform already).
    """
    dataset = with_transform(dataset, spec.transform)
    positions = np.flatnonzero(view.kept)
    dropped = view.dropped_ids(dataset)
    y = dataset.y[positions]
    results = _fit(dataset, view, spec, positions, dropped, y)
    if dataset.unit_exponent:
        results = replace(results, notes=results.notes + (unit_note(spec.response, dataset.unit_exponent),))
    if spec.transform != "none":
        label = transform_label(spec.transform, spec.response)
        results = replace(results, notes=(f"Analysed on {label}: means, differences, intervals and residuals are on "
                                          "that scale.",) + results.notes)
    return _with_display(results, dataset.reading_decimals())


def _with_display(results: Results, decimals: int | None) -> Results:
    """The results with the readings' decimals and the units attached, for display only."""
    shown = Scale(decimals=decimals, units=results.spec.units)
    levels = {f: replace(t, display=shown) for f, t in results.levels.items()}
    return replace(results, reading_decimals=decimals, levels=levels)


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
