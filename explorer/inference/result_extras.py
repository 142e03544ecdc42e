"""Method-specific extras of a result as typed fields, with their labels for display.

A result type lists its extras in ``EXTRAS``: (label shown to readers, field name). The
values are ordinary typed fields of the frozen result (``test.permutations``,
``screen.smallest_pvalue``), read by attribute like every other number; ``extras()``
gives the (label, value) pairs that are set, for HTML and text views.

The string-keyed reading of earlier releases (``result.detail("permutations")``,
``result.details``) still works for one release with a :class:`DeprecationWarning`
naming the field.
"""

from __future__ import annotations

import warnings
from typing import Any, ClassVar

__all__ = ["WithExtras"]


class WithExtras:
    """Mixin of frozen results whose method-specific numbers are typed fields (see the module docstring)."""

    EXTRAS: ClassVar[tuple[tuple[str, str], ...]] = ()

    def extras(self) -> tuple[tuple[str, Any], ...]:
        """(label, value) of each extra this result has (fields left at ``None`` are left out)."""
        return tuple((label, getattr(self, name)) for label, name in self.EXTRAS if getattr(self, name) is not None)

    @property
    def details(self) -> tuple[tuple[str, Any], ...]:
        """Deprecated: the extras as (label, value) pairs; read the typed fields instead."""
        warnings.warn(f"{type(self).__name__}.details is deprecated and will be removed in the next release; read "
                      f"the fields {[name for _, name in self.EXTRAS]} (or .extras() for labelled pairs)",
                      DeprecationWarning, stacklevel=2)
        return self.extras()

    def detail(self, name: str) -> Any:
        """Deprecated: one extra by its label; read the typed field instead."""
        fields = dict(self.EXTRAS)
        if name not in fields or getattr(self, fields[name]) is None:
            raise KeyError(f"no detail {name!r}; available: {[label for label, _ in self.extras()]}")
        warnings.warn(f"{type(self).__name__}.detail({name!r}) is deprecated and will be removed in the next release; "
                      f"read .{fields[name]}", DeprecationWarning, stacklevel=2)
        return getattr(self, fields[name])
