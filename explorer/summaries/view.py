"""The current view of a summary-backed study: predicates, row moves, level mapping, set-aside cells.

A :class:`SummaryView` plays the part a :class:`~explorer.engine.view.DataView` plays
for rows. Its ``codes[f]`` map each *raw key* of factor ``f`` (a level label in the
data, or the key of a row-move predicate) to an index into ``levels[f]``, so the core's
level edits (:class:`~explorer.engine.edits.MergeLevels`,
:class:`~explorer.engine.edits.RenameLevel`) apply to it unchanged. ``filters`` and
``moves`` are pushed down to the engine; ``set_aside`` lists level or cell
conditions (tuples of ``(factor, level)`` pairs) whose atoms leave the analysis.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from ..engine.errors import EditError
from .predicate import Predicate

__all__ = ["Condition", "SummaryData", "SummaryView"]

Condition = tuple[tuple[str, str], ...]


@dataclass(frozen=True, kw_only=True, eq=False)
class SummaryView:
    filters: tuple[Predicate, ...]
    moves: tuple[tuple[Predicate, str], ...]
    keys: Mapping[str, tuple[str, ...]]
    codes: Mapping[str, np.ndarray]
    levels: Mapping[str, tuple[str, ...]]
    set_aside: tuple[Condition, ...] = ()

    def replace(self, **changes: object) -> SummaryView:
        return dataclasses.replace(self, **changes)  # type: ignore[arg-type]

    def level_of_key(self, factor: str, key: str) -> str:
        return self.levels[factor][int(self.codes[factor][self.keys[factor].index(key)])]

    def key_index(self, factor: str) -> dict[str, int]:
        return {k: i for i, k in enumerate(self.keys[factor])}

    def engine_state(self) -> tuple:
        """What the engine's answer depends on (the cache key of the atom table)."""
        return (tuple(p.text for p in self.filters), tuple((p.text, f) for p, f in self.moves))


class SummaryData:
    """Stands in for a row dataset when core edits are applied to a summary view.

    Row-level edits (leave out, restore or move rows by id) ask a dataset for row
    positions; a summary-backed study has no row ids, so this refuses with what to do.
    """

    notes: tuple[str, ...] = ()

    def __init__(self, describe: str, columns: tuple[str, ...], kinds: Mapping[str, str] | None = None,
                 types: Mapping[str, str] | None = None) -> None:
        self._describe = describe
        self.columns = columns
        self.kinds = dict(kinds) if kinds is not None else None  # column -> kind, for type-checking conditions
        self.types = dict(types or {})  # column -> the engine's type name, for messages

    def positions(self, rows: object) -> np.ndarray:
        raise EditError(
            f"this study works on cell summaries computed by {self._describe}, so single rows cannot be left out, "
            "restored or moved by id. Leave rows out by a condition on columns with "
            "study.drop_where(\"gauge_reading > 120\", reason=...), move them with study.move_where(...), "
            "set aside a whole level or cell (study.drop_level / study.drop_cell), or load a sample of the rows "
            "into a row study (Study(study.sample_frame(), ...)) to work row by row"
        )
