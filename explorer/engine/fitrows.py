"""The rows a fit reports on: all kept rows, or a stated sample of them.

The partition, tests and level tables of a fixed-effects model need only group or
cell sufficient statistics. The per-row part of the results (fitted values,
residuals, leverage: what residual charts draw) needs rows. A :class:`RowSet` carries
whichever rows are at hand: every kept row of an in-memory study, or a seeded sample
drawn by the engine that holds the data of a summary-backed study.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import DesignError
from .results import Fit

__all__ = ["RowSet", "every_kept_row", "row_fit"]


def every_kept_row(fit: Fit, n_used: int, what: str) -> Fit:
    """``fit`` when it holds every kept row; else (a summary-backed study's seeded sample) refuse ``what``.

    A rank test, a trimmed mean or a heteroscedasticity-consistent covariance computed on
    a sample would be a number about the sample presented as one about all the rows.
    """
    m = int(np.asarray(fit.y).size)
    if m != int(n_used):
        raise DesignError(
            f"every kept row is needed for {what}, and this study's fit holds a sample of {m} of its {int(n_used)} "
            "rows (a summary-backed study keeps cell summaries); run it on study.sample_study() (a seeded sample, "
            "and it says so)")
    return fit


@dataclass(frozen=True, kw_only=True, eq=False)
class RowSet:
    """Rows with their group (or cell) code.

    ``y`` is on the shifted scale of the group statistics; ``group`` indexes the
    groups (or cells) the statistics were computed for; ``positions`` are the rows'
    positions in the row table they came from.
    """

    y: np.ndarray
    group: np.ndarray
    row_ids: np.ndarray
    positions: np.ndarray

    @classmethod
    def empty(cls) -> RowSet:
        return cls(y=np.empty(0), group=np.empty(0, dtype=np.int64), row_ids=np.empty(0, dtype=np.int64),
                   positions=np.empty(0, dtype=np.int64))

    def regrouped(self, remap: np.ndarray) -> RowSet:
        """The same rows with group codes mapped through ``remap``."""
        return RowSet(y=self.y, group=np.asarray(remap)[self.group], row_ids=self.row_ids, positions=self.positions)


def row_fit(rows: RowSet, group_fitted: np.ndarray, group_leverage: np.ndarray, offset: float) -> Fit:
    """Fitted values, residuals and leverage of ``rows`` from per-group fitted means and hat values."""
    g = np.asarray(rows.group, dtype=np.int64)
    fitted = np.asarray(group_fitted)[g]
    return Fit(
        row_ids=rows.row_ids, positions=rows.positions, y=rows.y + offset, fitted=fitted + offset,
        residuals=rows.y - fitted, leverage=np.asarray(group_leverage)[g], group=g,
    )
