"""What one edit changes in a view, kept as the changed rows only.

A :class:`ViewDelta` lists the rows whose kept flag flips and, per factor, the rows
whose level code changes (with the codes before and after) and the level names before
and after. A merge of levels renumbers every code above the merged ones; it is kept as
a code-to-code map (one entry per level) plus the rows that moved into the merged
level, so its size is that of the merged levels, never of the table. A delta goes both
ways: ``forward`` makes the next view, ``backward`` the previous one, each in one copy
of the changed array plus O(changed rows); an edit log stores its deltas instead of a
full view per edit (memory of the log proportional to what the edits change).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from .numerics import read_only
from .view import DataView

__all__ = ["CodeChange", "ViewDelta", "diff_views", "NO_ROWS"]

#: An empty, read-only position array (no rows changed).
NO_ROWS: np.ndarray = read_only(np.empty(0, dtype=np.int64))
_NO_CODES: np.ndarray = read_only(np.empty(0, dtype=np.int32))


@dataclass(frozen=True, eq=False)
class CodeChange:
    """The level codes of one factor before and after an edit.

    ``remap`` (when not ``None``) maps every code before to its code after (a merge), and
    ``unmap`` maps codes after back to the codes before for the rows not listed in
    ``positions``. ``positions`` are the rows whose code is set explicitly, ``before``
    and ``after`` their codes (in ``levels_before`` and ``levels_after`` numbering).
    """

    factor: str
    levels_before: tuple[str, ...]
    levels_after: tuple[str, ...]
    positions: np.ndarray = field(default_factory=lambda: NO_ROWS)
    before: np.ndarray = field(default_factory=lambda: _NO_CODES)
    after: np.ndarray = field(default_factory=lambda: _NO_CODES)
    remap: np.ndarray | None = None
    unmap: np.ndarray | None = None

    def inverse(self) -> CodeChange:
        return CodeChange(self.factor, self.levels_after, self.levels_before, self.positions, self.after, self.before,
                          self.unmap, self.remap)

    def apply_to(self, codes: np.ndarray) -> np.ndarray:
        """The codes after this change (a new read-only array; ``codes`` is not touched)."""
        out = self.remap[codes] if self.remap is not None else codes.copy()
        if self.positions.size:
            out[self.positions] = self.after
        return read_only(out.astype(codes.dtype, copy=False))

    @property
    def nbytes(self) -> int:
        maps = sum(m.nbytes for m in (self.remap, self.unmap) if m is not None)
        return int(self.positions.nbytes + self.before.nbytes + self.after.nbytes + maps)


@dataclass(frozen=True, eq=False)
class ViewDelta:
    """Rows whose kept flag flips (``kept_after`` is their flag after) and the factors' code changes."""

    kept_positions: np.ndarray = field(default_factory=lambda: NO_ROWS)
    kept_after: np.ndarray = field(default_factory=lambda: read_only(np.empty(0, dtype=bool)))
    codes: tuple[CodeChange, ...] = ()

    @classmethod
    def keep(cls, positions: np.ndarray, keep: bool) -> ViewDelta:
        """Set the kept flag of ``positions`` (rows whose flag already is ``keep`` must be left out)."""
        pos = read_only(np.asarray(positions, dtype=np.int64))
        return cls(pos, read_only((np.ones if keep else np.zeros)(pos.size, dtype=bool)))

    def inverse(self) -> ViewDelta:
        return ViewDelta(self.kept_positions, read_only(~self.kept_after), tuple(c.inverse() for c in reversed(self.codes)))

    def forward(self, view: DataView) -> DataView:
        """The view after the edit, from the view before it."""
        kept = view.kept
        if self.kept_positions.size:
            kept = view.kept.copy()
            kept[self.kept_positions] = self.kept_after
            read_only(kept)
        codes: Mapping[str, np.ndarray] = view.codes
        levels: Mapping[str, tuple[str, ...]] = view.levels
        if self.codes:
            codes, levels = dict(view.codes), dict(view.levels)
            for c in self.codes:
                if c.positions.size or c.remap is not None:
                    codes[c.factor] = c.apply_to(codes[c.factor])
                levels[c.factor] = c.levels_after
        return DataView(kept=kept, codes=codes, levels=levels)

    def backward(self, view: DataView) -> DataView:
        """The view before the edit, from the view after it."""
        return self.inverse().forward(view)

    @property
    def nbytes(self) -> int:
        return int(self.kept_positions.nbytes + self.kept_after.nbytes + sum(c.nbytes for c in self.codes))


def diff_views(old: DataView, new: DataView) -> ViewDelta:
    """The delta between two views of the same dataset (one pass over the rows; for edits that do not say
    what they change)."""
    flips = np.flatnonzero(old.kept != new.kept)
    changes: list[CodeChange] = []
    for f, codes in new.codes.items():
        before = old.codes[f]
        if codes is before and new.levels[f] == old.levels[f]:
            continue
        pos = np.flatnonzero(before != codes)
        if pos.size or new.levels[f] != old.levels[f]:
            changes.append(CodeChange(f, tuple(old.levels[f]), tuple(new.levels[f]), read_only(pos),
                                      read_only(before[pos].astype(np.int32)), read_only(codes[pos].astype(np.int32))))
    return ViewDelta(read_only(flips), read_only(new.kept[flips].copy()), tuple(changes))
