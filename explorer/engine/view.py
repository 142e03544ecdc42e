"""The current view of a dataset: which rows are kept and how factor levels are coded.

A :class:`DataView` is a value. Edits (see :mod:`.edits`) map one view to the next;
the view after the whole log is a fold of the edits over the initial view.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from .dataset import Dataset, RowId
from .numerics import read_only

__all__ = ["DataView", "initial_view"]


@dataclass(frozen=True, kw_only=True, eq=False)
class DataView:
    """Kept rows and per-factor level codes over a dataset's usable rows.

    ``kept`` is a boolean mask; ``codes[f]`` gives each usable row's level index into
    ``levels[f]``. Levels may have no kept rows (the analysis then leaves them out and
    says so). Arrays are read-only; edits build new ones.
    """

    kept: np.ndarray
    codes: Mapping[str, np.ndarray]
    levels: Mapping[str, tuple[str, ...]]

    @property
    def n_kept(self) -> int:
        return int(self.kept.sum())

    def dropped_positions(self) -> np.ndarray:
        return np.flatnonzero(~self.kept)

    def dropped_ids(self, dataset: Dataset) -> tuple[RowId, ...]:
        return tuple(dataset.row_id(int(i)) for i in self.dropped_positions())

    def level_of(self, position: int, factor: str) -> str:
        return self.levels[factor][int(self.codes[factor][position])]

    def labels(self, factor: str) -> np.ndarray:
        """Current level name of every usable row (object array)."""
        labels: np.ndarray = np.asarray(self.levels[factor], dtype=object)[self.codes[factor]]
        return labels

    def replace(self, **changes: object) -> "DataView":
        fields: dict[str, Any] = {"kept": self.kept, "codes": self.codes, "levels": self.levels}
        fields.update(changes)
        return DataView(**fields)


def initial_view(dataset: Dataset) -> DataView:
    return DataView(kept=read_only(np.ones(dataset.n, dtype=bool)), codes=dict(dataset.codes), levels=dict(dataset.levels))
