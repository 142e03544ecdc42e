"""A small bounded cache of results by log position.

A study keeps the results of the unedited data (position 0) and of the few positions
used last; any other position is recomputed when asked (undo and redo step the running
statistics by the rows the edit changed, so that costs what the edit changed). Memory
held by an edit log therefore does not grow with the number of edits times the table.
"""

from __future__ import annotations

from typing import Any, Generic, TypeVar

__all__ = ["BoundedCache", "RECENT_POSITIONS"]

#: Positions other than the baseline whose results a study keeps.
RECENT_POSITIONS = 1

V = TypeVar("V")


class BoundedCache(dict[int, V], Generic[V]):
    """A dict of position -> value that keeps key 0 and the ``recent`` keys set last."""

    def __init__(self, recent: int = RECENT_POSITIONS, *args: Any) -> None:
        super().__init__(*args)
        self.recent = recent

    def __setitem__(self, key: int, value: V) -> None:
        if key in self:
            super().__delitem__(key)
        super().__setitem__(key, value)
        if len(self) - (0 in self) <= self.recent:  # nothing to let go
            return
        others = [k for k in self if k != 0]
        for k in others[: max(len(others) - self.recent, 0)]:
            super().__delitem__(k)
