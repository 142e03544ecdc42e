"""Rows moved to another level: which, from where, to where, and why.

A row is *moved* when its current level differs from its *home*: the level its recorded
level has become through the merges and renames in effect. Merging N2 and N3 into
"N2+N3" moves no row (every N2 row is where N2 went); reassigning panel P1040 from N2 to
N1 moves that row, and it stays moved after a later merge of N2 into "N2+N3" (its home is
then "N2+N3"). Moving a row back to its home makes it unmoved again.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from .dataset import Dataset
from .view import DataView

__all__ = ["MovedRow", "level_homes", "moved_mask", "moved_rows"]


@dataclass(frozen=True, kw_only=True)
class MovedRow:
    """One moved row: ``recorded`` is its level in the data, ``home`` where that level is now,
    ``now`` its current level; ``reason`` of the latest move in effect."""

    row: Any
    factor: str
    recorded: str
    home: str
    now: str
    reason: str = ""

    def describe(self) -> str:
        """``row P1040: nozzle N2 → N1`` (with the home level when a merge or rename renamed it)."""
        src = self.recorded if self.home == self.recorded else f"{self.recorded} (now {self.home})"
        return f"row {self.row}: {self.factor} {src} → {self.now}"


def level_homes(dataset: Dataset, edits: Sequence[Any]) -> dict[str, dict[str, str]]:
    """Per factor, each recorded level's current name after the merges and renames in ``edits``."""
    homes = {f: {lv: lv for lv in levels} for f, levels in dataset.levels.items()}
    for e in edits:
        kind = getattr(e, "kind", "")
        if kind == "merge" and e.factor in homes:
            sources = set(e.levels)
            homes[e.factor] = {k: (e.into if v in sources else v) for k, v in homes[e.factor].items()}
        elif kind == "rename" and e.factor in homes:
            homes[e.factor] = {k: (e.new if v == e.old else v) for k, v in homes[e.factor].items()}
    return homes


def moved_mask(dataset: Dataset, view: DataView, edits: Sequence[Any], factor: str,
               homes: Mapping[str, Mapping[str, str]] | None = None) -> np.ndarray:
    """Boolean mask over the usable rows: True where the row is not at its home level of ``factor``."""
    homes = homes if homes is not None else level_homes(dataset, edits)
    recorded = np.asarray(dataset.levels[factor], dtype=object)[dataset.codes[factor]]
    home = np.asarray([homes[factor][str(r)] for r in recorded], dtype=object) if len(recorded) else recorded
    return np.asarray(view.labels(factor) != home, dtype=bool)


def moved_rows(dataset: Dataset, view: DataView, edits: Sequence[Any]) -> tuple[MovedRow, ...]:
    """Every moved row of every factor, in table order, with the reason of its latest move."""
    homes = level_homes(dataset, edits)
    reasons: dict[tuple[Any, str], str] = {}
    for e in edits:
        if getattr(e, "kind", "") == "reassign":
            reasons[(e.row, e.factor)] = e.reason
    out = []
    for f in dataset.levels:
        mask = moved_mask(dataset, view, edits, f, homes)
        for pos in np.flatnonzero(mask):
            rec = dataset.levels[f][int(dataset.codes[f][pos])]
            row = dataset.row_id(int(pos))
            out.append(MovedRow(row=row, factor=f, recorded=rec, home=homes[f][rec], now=view.level_of(int(pos), f),
                                reason=reasons.get((row, f), "")))
    return tuple(out)
