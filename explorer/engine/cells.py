"""Cells of a crossed design: the observed combinations of factor (and block) levels.

One pass over the kept rows turns the per-column level codes into a cell code per
row; every later step of a factorial analysis works on the cells' sufficient
statistics (n, mean, centred sum of squares), so its cost depends on the number of
cells, not the number of rows.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from functools import cached_property
from itertools import product

import numpy as np
import pandas as pd

from ..formatting import result_frame
from ..rendering import html_repr
from .groupstats import GroupStats
from .tables import html_table

__all__ = ["CellLayout", "CellTable", "layout_cells"]

#: Above this many possible combinations the cell codes are found by sorting instead of counting.
_DENSE_LIMIT = 4_000_000


#: Cell labels of recent layouts of at most this many cells.
_LABELS_KEPT_UP_TO = 4096
_LABELS: dict[object, tuple[str, ...]] = {}


@dataclass(frozen=True, kw_only=True, eq=False)
class CellLayout:
    """Which level combinations occur.

    ``levels[j]`` are the levels of ``columns[j]`` that have kept rows (in display
    order); ``cell_levels`` is a (cells x columns) array of codes into them, one row per
    observed cell; ``absent_levels`` names levels of the view that have no kept rows.
    """

    columns: tuple[str, ...]
    levels: tuple[tuple[str, ...], ...]
    cell_levels: np.ndarray
    absent_levels: dict[str, tuple[str, ...]]

    @property
    def n_cells(self) -> int:
        return int(self.cell_levels.shape[0])

    @cached_property
    def n_levels(self) -> tuple[int, ...]:
        return tuple(len(lv) for lv in self.levels)

    def cell_labels(self) -> tuple[str, ...]:
        """One label per cell, e.g. ``"machine=M1, shift=day"`` (kept for recent small layouts, which an
        edit that drops and restores whole units revisits)."""
        small = self.n_cells <= _LABELS_KEPT_UP_TO
        key = (self.columns, self.levels, self.cell_levels.tobytes()) if small else None
        labels = _LABELS.get(key) if small else None
        if labels is None:
            pieces = [[f"{c}={lv}" for lv in levels] for c, levels in zip(self.columns, self.levels)]
            labels = tuple(", ".join([p[code] for p, code in zip(pieces, row)]) for row in self.cell_levels.tolist())
            if small:
                if len(_LABELS) >= 32:
                    _LABELS.clear()
                _LABELS[key] = labels
        return labels

    def missing_combinations(self, columns: Sequence[str]) -> list[tuple[str, ...]]:
        """Level combinations of ``columns`` that no kept row has (empty cells of that sub-table)."""
        if self.n_cells == math.prod(len(lv) for lv in self.levels):
            return []  # every combination of every column is observed, so every sub-table is complete
        idx = [self.columns.index(c) for c in columns]
        seen = {tuple(row) for row in self.cell_levels[:, idx].tolist()}
        sizes = [range(len(self.levels[j])) for j in idx]
        return [
            tuple(self.levels[j][k] for j, k in zip(idx, combo))
            for combo in product(*sizes)
            if combo not in seen
        ]


def layout_cells(
    codes: Sequence[np.ndarray], levels: Sequence[tuple[str, ...]], columns: Sequence[str]
) -> tuple[CellLayout, np.ndarray]:
    """Cell layout of rows with the given per-column codes, and each row's cell code.

    Levels without rows are left out of the layout (and listed in ``absent_levels``).
    Cells are numbered in lexicographic order of their level codes.
    """
    present_levels: list[tuple[str, ...]] = []
    compact: list[np.ndarray] = []
    absent: dict[str, tuple[str, ...]] = {}
    for c, col_codes, lv in zip(columns, codes, levels):
        counts = np.bincount(col_codes, minlength=len(lv))
        if counts.all():  # every level has rows
            compact.append(np.asarray(col_codes))
            present_levels.append(tuple(lv))
            continue
        present = counts > 0
        absent[c] = tuple(name for name, p in zip(lv, present) if not p)
        remap = np.cumsum(present) - 1
        compact.append(remap[col_codes])
        present_levels.append(tuple(name for name, p in zip(lv, present) if p))
    sizes = [len(lv) for lv in present_levels]
    total = math.prod(sizes)
    if total <= _DENSE_LIMIT:
        key = np.zeros(compact[0].shape[0], dtype=np.int64)
        for c_codes, k in zip(compact, sizes):
            key = key * k + c_codes
        seen = np.bincount(key, minlength=total) > 0
        if seen.all():  # a complete layout: the cell codes are the combination codes
            row_cell, keys = key, np.arange(total, dtype=np.int64)
        else:
            remap = np.cumsum(seen) - 1
            row_cell, keys = remap[key], np.flatnonzero(seen)
    else:  # pragma: no cover - very many combinations
        stacked = np.stack(compact, axis=1)
        uniq, row_cell = np.unique(stacked, axis=0, return_inverse=True)
        row_cell = row_cell.reshape(-1)
        layout = CellLayout(columns=tuple(columns), levels=tuple(present_levels), cell_levels=uniq, absent_levels=absent)
        return layout, row_cell
    cell_levels = np.empty((keys.size, len(sizes)), dtype=np.int64)
    rest = keys.copy()
    for j in range(len(sizes) - 1, -1, -1):
        rest, cell_levels[:, j] = np.divmod(rest, sizes[j])
    layout = CellLayout(columns=tuple(columns), levels=tuple(present_levels), cell_levels=cell_levels, absent_levels=absent)
    return layout, row_cell


@dataclass(frozen=True, kw_only=True, eq=False)
class CellTable:
    """Counts, raw means and model-fitted means of the observed cells (original scale).

    ``balanced`` is True when every combination of levels occurs with the same count.
    ``fitted`` (when given) are the model's cell means: equal to the raw means under the
    full factorial, smoothed towards additivity when interactions are left out.
    """

    columns: tuple[str, ...]
    labels: tuple[tuple[str, ...], ...]
    n: np.ndarray
    mean: np.ndarray
    balanced: bool
    fitted: np.ndarray | None = None
    #: (cells x columns) level codes into ``levels`` (as :class:`CellLayout`), for row-level designs.
    cell_levels: np.ndarray | None = None
    levels: tuple[tuple[str, ...], ...] | None = None

    @classmethod
    def from_stats(cls, layout: CellLayout, stats: GroupStats, fitted: np.ndarray | None = None) -> CellTable:
        labels = tuple(
            tuple(layout.levels[j][k] for j, k in enumerate(row)) for row in layout.cell_levels.tolist()
        )
        full = layout.n_cells == int(np.prod(layout.n_levels))
        balanced = bool(full and np.all(stats.n == stats.n[0]))
        return cls(columns=layout.columns, labels=labels, n=stats.n, mean=stats.original_means, balanced=balanced,
                   fitted=None if fitted is None else fitted + stats.offset, cell_levels=layout.cell_levels,
                   levels=layout.levels)

    def to_frame(self) -> pd.DataFrame:
        frame = pd.DataFrame(list(self.labels), columns=list(self.columns))
        frame["n"] = self.n
        frame["mean"] = self.mean
        if self.fitted is not None:
            frame["fitted mean"] = self.fitted
        return result_frame(frame)

    def counts(self, rows: str, cols: str) -> pd.DataFrame:
        """Cell counts as a two-way table of ``rows`` by ``cols`` (summed over other columns)."""
        return self.to_frame().pivot_table(index=rows, columns=cols, values="n", aggfunc="sum", fill_value=0, sort=False)

    @html_repr
    def _repr_html_(self) -> str:
        caption = "Cells: " + ("balanced" if self.balanced else "unbalanced") + " (count, raw and fitted mean of each)"
        return html_table(self.to_frame(), caption)
