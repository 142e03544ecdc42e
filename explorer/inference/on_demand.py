"""Parts of a result that are computed the first time they are read.

With thousands of levels a table of all pairwise comparisons has millions of rows, and
some of them (Games-Howell: a studentized-range quantile per pair) take minutes. A
result can hold such a part as :class:`OnDemand`: it is computed once, on first
access, and until then the result's display says how large it is and how to read it.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

__all__ = ["OnDemand", "resolve"]


class OnDemand:
    """A value computed by ``compute()`` the first time :meth:`get` is called, then kept."""

    __slots__ = ("what", "size", "_compute", "_value", "_ready")

    def __init__(self, what: str, size: int, compute: Callable[[], Any]) -> None:
        self.what = what
        self.size = int(size)
        self._compute = compute
        self._value: Any = None
        self._ready = False

    @property
    def ready(self) -> bool:
        return self._ready

    def get(self) -> Any:
        if not self._ready:
            self._value = self._compute()
            self._ready = True
            self._compute = _done
        return self._value

    def __repr__(self) -> str:
        state = "computed" if self._ready else "computed when first read"
        return f"OnDemand({self.what!r}, {self.size:,} rows, {state})"


def _done() -> Any:  # pragma: no cover - replaces the closure once the value is kept
    raise AssertionError("already computed")


def resolve(value: Any) -> Any:
    """``value``, or what it stands for when it is an :class:`OnDemand`."""
    return value.get() if type(value) is OnDemand else value
