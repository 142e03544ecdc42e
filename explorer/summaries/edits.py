"""Edits that work at scale: conditions pushed down to the engine, levels and cells set aside.

These register with :func:`explorer.engine.edits.register_edit`, so they save, load
and replay like every other edit. They apply to a
:class:`~explorer.summaries.view.SummaryView`; the core's level edits (merge, rename)
apply to it unchanged, and row-by-id edits are refused with what to do instead.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np

from ..engine.edits import Edit, level_name, register_edit, require_factor, require_levels
from ..engine.errors import EditError
from ..engine.numerics import read_only
from .atoms import MOVE_PREFIX
from .predicate import Predicate, parse_predicate
from .view import Condition, SummaryView

__all__ = ["DropCell", "DropLevel", "DropWhere", "MoveWhere", "RestoreCell", "RestoreLevel", "RestoreWhere"]


def _summary_view(view: Any, what: str) -> SummaryView:
    if not isinstance(view, SummaryView):
        raise EditError(f"{what} works on summary-backed studies (explorer.summaries.SummaryStudy)")
    return view


def _parse(text: str, dataset: Any) -> Predicate:
    """Parse a condition against the study's columns, type-checked when the engine told their kinds."""
    kinds = getattr(dataset, "kinds", None)
    columns = kinds if kinds else tuple(getattr(dataset, "columns", ()))
    return parse_predicate(text, columns, getattr(dataset, "types", None))


@register_edit
@dataclass(frozen=True, kw_only=True)
class DropWhere(Edit):
    """Leave out every row for which a condition on columns holds (pushed down to the engine).

    Rows where the condition is unknown (a compared value is missing) stay in.
    """

    kind: ClassVar[str] = "drop_where"
    predicate: str

    def apply(self, view: Any, dataset: Any) -> Any:
        v = _summary_view(view, "leaving rows out by a condition")
        p = _parse(self.predicate, dataset)
        if any(f.text == p.text for f in v.filters):
            raise EditError(f"rows where {p.text} are already left out")
        return v.replace(filters=v.filters + (p,))

    def describe(self) -> str:
        return f"leave out rows where {self.predicate}"


@register_edit
@dataclass(frozen=True, kw_only=True)
class RestoreWhere(Edit):
    """Bring back the rows an earlier condition left out (the condition text must match)."""

    kind: ClassVar[str] = "restore_where"
    predicate: str

    def apply(self, view: Any, dataset: Any) -> Any:
        v = _summary_view(view, "restoring rows by a condition")
        text = self.predicate.strip()
        kept = tuple(f for f in v.filters if f.text != text)
        if len(kept) == len(v.filters):
            known = [f.text for f in v.filters] or ["(none)"]
            raise EditError(f"no condition {text!r} is in effect; conditions in effect: {known}")
        return v.replace(filters=kept)

    def describe(self) -> str:
        return f"restore rows where {self.predicate}"


@register_edit
@dataclass(frozen=True, kw_only=True)
class MoveWhere(Edit):
    """Move every row for which a condition holds to another (new or existing) level of a factor."""

    kind: ClassVar[str] = "move_where"
    predicate: str
    factor: str
    level: str

    def __post_init__(self) -> None:
        object.__setattr__(self, "level", level_name(self.level))

    def apply(self, view: Any, dataset: Any) -> Any:
        v = _summary_view(view, "moving rows by a condition")
        require_factor(v, self.factor)  # type: ignore[arg-type]
        p = _parse(self.predicate, dataset)
        levels = v.levels[self.factor]
        if self.level not in levels:
            levels = levels + (self.level,)
        key = MOVE_PREFIX + str(len(v.moves) + 1)
        codes = read_only(np.append(v.codes[self.factor], levels.index(self.level)).astype(np.int64))
        return v.replace(
            moves=v.moves + ((p, self.factor),),
            keys={**v.keys, self.factor: v.keys[self.factor] + (key,)},
            codes={**v.codes, self.factor: codes},
            levels={**v.levels, self.factor: levels},
        )

    def describe(self) -> str:
        return f"move rows where {self.predicate} to {self.factor} = {self.level}"


def _condition(view: SummaryView, factors: tuple[str, ...], levels: tuple[str, ...]) -> Condition:
    if not factors or len(factors) != len(levels):
        raise EditError("name one level for each factor of the cell, e.g. factors=('line', 'shift'), levels=('L3', 'night')")
    if len(set(factors)) != len(factors):
        raise EditError(f"a factor is named twice in {list(factors)}")
    for f, lv in zip(factors, levels):
        require_factor(view, f)  # type: ignore[arg-type]
        require_levels(view, f, (lv,))  # type: ignore[arg-type]
    return tuple(zip(factors, levels))


def _describe(cond: Condition) -> str:
    return ", ".join(f"{f} = {lv}" for f, lv in cond)


@dataclass(frozen=True, kw_only=True)
class _SetAside(Edit):
    factors: tuple[str, ...]
    levels: tuple[str, ...]
    restore: ClassVar[bool] = False

    def __post_init__(self) -> None:
        for name in ("factors", "levels"):
            v = getattr(self, name)
            object.__setattr__(self, name, (str(v),) if isinstance(v, str) else tuple(str(x) for x in v))

    def apply(self, view: Any, dataset: Any) -> Any:
        v = _summary_view(view, "setting aside levels or cells")
        cond = _condition(v, self.factors, self.levels)
        if self.restore:
            if cond not in v.set_aside:
                shown = [_describe(c) for c in v.set_aside] or ["(none)"]
                raise EditError(f"{_describe(cond)} is not set aside; set aside now: {shown}")
            return v.replace(set_aside=tuple(c for c in v.set_aside if c != cond))
        if cond in v.set_aside:
            raise EditError(f"{_describe(cond)} is already set aside")
        return v.replace(set_aside=v.set_aside + (cond,))

    def describe(self) -> str:
        what = "level" if len(self.factors) == 1 else "cell"
        return f"{'restore' if self.restore else 'set aside'} {what} {_describe(tuple(zip(self.factors, self.levels)))}"


@register_edit
@dataclass(frozen=True, kw_only=True)
class DropLevel(_SetAside):
    """Set aside every row at one level of a factor (e.g. a day, a lot)."""

    kind: ClassVar[str] = "drop_level"


@register_edit
@dataclass(frozen=True, kw_only=True)
class RestoreLevel(_SetAside):
    """Bring back a level set aside earlier."""

    kind: ClassVar[str] = "restore_level"
    restore: ClassVar[bool] = True


@register_edit
@dataclass(frozen=True, kw_only=True)
class DropCell(_SetAside):
    """Set aside every row of one combination of levels (e.g. line L3 on the night shift)."""

    kind: ClassVar[str] = "drop_cell"


@register_edit
@dataclass(frozen=True, kw_only=True)
class RestoreCell(_SetAside):
    """Bring back a cell set aside earlier."""

    kind: ClassVar[str] = "restore_cell"
    restore: ClassVar[bool] = True
