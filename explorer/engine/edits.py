"""Edits are small frozen values: each maps one :class:`~.view.DataView` to the next.

Every edit carries a reason (free text; the API invites one) and the UTC time it was
made. ``to_dict``/``edit_from_dict`` round-trip through JSON losslessly. New kinds of
edit register themselves with :func:`register_edit` and plug into the study unchanged.
"""

from __future__ import annotations

import dataclasses
import re
import time
from dataclasses import dataclass, field
from datetime import datetime, timezone
from typing import Any, ClassVar

import numpy as np

from .dataset import Dataset, RowId
from .errors import EditError, ReplayError, closest_names, preview
from .numerics import read_only
from .view import DataView
from .view_delta import CodeChange, ViewDelta, diff_views

__all__ = [
    "Edit",
    "DropRows",
    "RestoreRows",
    "Reassign",
    "MergeLevels",
    "RenameLevel",
    "DropUnit",
    "RestoreUnit",
    "edit_from_dict",
    "register_edit",
    "utc_now",
    "require_factor", "require_levels", "level_name", "check_utc_time",
]

EDIT_KINDS: dict[str, type["Edit"]] = {}


_LAST_SECOND: list[tuple[int, str]] = [(-1, "")]  # the last whole second written, with its text


def utc_now() -> str:
    """The time now in UTC to the second (truncated), as ISO 8601 text (``2026-03-01T09:30:00Z``); the text of
    a second is made once (the edits and ledger entries of one second share it)."""
    second = int(time.time())
    last = _LAST_SECOND[0]
    if last[0] != second:
        text = datetime.fromtimestamp(second, timezone.utc).isoformat().replace("+00:00", "Z")
        last = _LAST_SECOND[0] = (second, text)
    return last[1]


_UTC_TIME = re.compile(r"\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}(\.\d{1,6})?(Z|\+00:00)", re.ASCII)


def check_utc_time(text: object, where: str = "time") -> str:
    """``text`` if it is an ISO 8601 UTC time as the kit writes it (``2026-03-01T09:30:00Z``), else ReplayError."""
    if not isinstance(text, str) or not _UTC_TIME.fullmatch(text):
        raise ReplayError(f"{where}: {text!r} is not an ISO 8601 UTC time such as '2026-03-01T09:30:00Z'")
    try:
        datetime.fromisoformat(text.replace("Z", "+00:00"))
    except ValueError as exc:
        raise ReplayError(f"{where}: {text!r} is not a real time ({exc})") from None
    return text


def register_edit(cls: type["Edit"]) -> type["Edit"]:
    EDIT_KINDS[cls.kind] = cls
    return cls


def level_name(name: object) -> str:
    """A new or target level name as text; refuse an empty one (every edit that names a level uses this)."""
    text = str(name)
    if not text.strip():
        raise EditError("a level name cannot be empty")
    return text


def require_factor(view: DataView, factor: str) -> None:
    if factor not in view.levels:
        near = closest_names(factor, view.levels)
        hint = f" Did you mean {near[0]!r}?" if near else ""
        raise EditError(f"{factor!r} is not a factor of this study (factors: {list(view.levels)}).{hint}")


def require_levels(view: DataView, factor: str, levels: tuple[str, ...]) -> list[int]:
    known = view.levels[factor]
    missing = [lv for lv in levels if lv not in known]
    if missing:
        raise EditError(f"factor {factor!r} has no level(s) {preview(missing)}; its levels now are {list(known)}")
    return [known.index(lv) for lv in levels]


@dataclass(frozen=True, kw_only=True)
class Edit:
    """Base of every edit: a reason and a UTC timestamp."""

    kind: ClassVar[str] = "edit"
    reason: str = ""
    at: str = field(default_factory=utc_now)

    def apply(self, view: DataView, dataset: Dataset) -> DataView:  # pragma: no cover - abstract
        raise NotImplementedError

    def change(self, view: DataView, dataset: Dataset) -> ViewDelta:
        """What this edit changes in ``view``: the changed rows only (:mod:`.view_delta`).

        ``change(view, dataset).forward(view)`` is ``apply(view, dataset)``. The kinds of
        this module say it directly in O(changed rows); a kind that does not is diffed
        against its ``apply`` (one pass over the rows).
        """
        return diff_views(view, self.apply(view, dataset))

    def describe(self) -> str:  # pragma: no cover - abstract
        raise NotImplementedError

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {"kind": self.kind}
        for f in dataclasses.fields(self):
            v = getattr(self, f.name)
            out[f.name] = list(v) if isinstance(v, tuple) else v
        return out


def edit_from_dict(d: dict[str, Any]) -> Edit:
    """Rebuild an edit saved with :meth:`Edit.to_dict` (as in a study file's log).

    Parameters
    ----------
    d : dict
        The saved edit: its ``kind``, its fields, ``reason`` and ``at`` (UTC time).

    Returns
    -------
    Edit
        The frozen edit record, ready for ``study.apply``.

    Raises
    ------
    ReplayError
        For an unknown kind, a missing or ill-typed field, a non-text reason or a time
        that is not ISO 8601 UTC, naming the field.

    References
    ----------
    ISO 8601-1:2019, Date and time (the ``at`` field).

    Examples
    --------
    >>> import explorer as ex
    >>> edit = ex.edit_from_dict({"kind": "drop", "rows": [3], "reason": "smudged panel",
    ...                           "at": "2026-01-05T09:30:00Z"})
    >>> type(edit).__name__, edit.rows, edit.reason
    ('DropRows', (3,), 'smudged panel')
    """
    kind = d.get("kind")
    cls = EDIT_KINDS.get(str(kind))
    if cls is None:
        raise ReplayError(f"unknown edit kind {kind!r} in the saved log; known kinds: {sorted(EDIT_KINDS)}")
    names = {f.name: f for f in dataclasses.fields(cls)}
    kwargs: dict[str, Any] = {}
    for k, v in d.items():
        if k == "kind":
            continue
        if k not in names:
            raise ReplayError(f"edit of kind {kind!r} has an unknown field {k!r}")
        kwargs[k] = tuple(v) if isinstance(v, list) else v
    if not isinstance(kwargs.get("reason", ""), str):
        raise ReplayError(f"reason: must be text, not {type(kwargs['reason']).__name__}")
    if "at" in kwargs:
        check_utc_time(kwargs["at"], "at")
    return cls(**kwargs)


def _rows(rows: Any) -> tuple[RowId, ...]:
    if isinstance(rows, (str, int, np.integer)) and not isinstance(rows, (bool, np.bool_)):
        rows = [rows]
    if rows is None or isinstance(rows, (bool, np.bool_, float, bytes, dict)) or not hasattr(rows, "__iter__"):
        raise EditError(f"rows are row ids (integers or text), one or a list, e.g. [3, 17], not {rows!r}")
    out = tuple(int(r) if isinstance(r, np.integer) else r for r in rows)
    odd = [r for r in out if isinstance(r, (bool, np.bool_)) or not isinstance(r, (int, str))]
    if odd:
        raise EditError(f"row ids are integers or text, not {odd[0]!r} ({type(odd[0]).__name__})")
    return out


@dataclass(frozen=True, kw_only=True)
class _RowsEdit(Edit):
    """Shared shape of the edits that set whether rows are kept."""

    keep: ClassVar[bool]
    verb: ClassVar[str]
    rows: tuple[RowId, ...]

    def __post_init__(self) -> None:
        object.__setattr__(self, "rows", _rows(self.rows))
        if not self.rows:
            raise EditError(f"{self.kind} needs at least one row id")

    def apply(self, view: DataView, dataset: Dataset) -> DataView:
        return self.change(view, dataset).forward(view)

    def change(self, view: DataView, dataset: Dataset) -> ViewDelta:
        asked = dataset.positions(self.rows)
        pos = asked if asked.size == 1 else np.unique(asked)
        flips = pos[view.kept[pos] != self.keep]
        if not flips.size:
            unchanged = [dataset.row_id(int(p)) for p in asked]
            state = "in the analysis; nothing to restore" if self.keep else "already left out"
            raise EditError(f"rows {preview(unchanged)} are {state}")
        return ViewDelta.keep(flips, self.keep)

    def describe(self) -> str:
        return f"{self.verb} row(s) {preview(list(self.rows))}"


@register_edit
@dataclass(frozen=True, kw_only=True)
class DropRows(_RowsEdit):
    """Leave rows out of the analysis (they stay in the data and can be restored)."""

    kind: ClassVar[str] = "drop"
    keep: ClassVar[bool] = False
    verb: ClassVar[str] = "leave out"


@register_edit
@dataclass(frozen=True, kw_only=True)
class RestoreRows(_RowsEdit):
    """Bring left-out rows back into the analysis."""

    kind: ClassVar[str] = "restore"
    keep: ClassVar[bool] = True
    verb: ClassVar[str] = "restore"


@register_edit
@dataclass(frozen=True, kw_only=True)
class Reassign(Edit):
    """Move one row to another level of a factor (e.g. a unit logged under the wrong machine)."""

    kind: ClassVar[str] = "reassign"
    row: RowId
    factor: str
    level: str

    def __post_init__(self) -> None:
        if isinstance(self.row, np.integer):
            object.__setattr__(self, "row", int(self.row))
        object.__setattr__(self, "level", level_name(self.level))

    def apply(self, view: DataView, dataset: Dataset) -> DataView:
        return self.change(view, dataset).forward(view)

    def change(self, view: DataView, dataset: Dataset) -> ViewDelta:
        require_factor(view, self.factor)
        pos = int(dataset.positions([self.row])[0])
        before = view.levels[self.factor]
        old = int(view.codes[self.factor][pos])
        if self.level == before[old]:
            raise EditError(f"row {self.row} is already at level {self.level!r} of {self.factor!r}")
        after = before if self.level in before else before + (self.level,)
        move = CodeChange(self.factor, before, after, read_only(np.array([pos], dtype=np.int64)),
                          read_only(np.array([old], dtype=np.int32)),
                          read_only(np.array([after.index(self.level)], dtype=np.int32)))
        return ViewDelta(codes=(move,))

    def describe(self) -> str:
        return f"move row {self.row} to {self.factor} = {self.level}"


@register_edit
@dataclass(frozen=True, kw_only=True)
class MergeLevels(Edit):
    """Pool several levels of a factor into one (new or existing) level."""

    kind: ClassVar[str] = "merge"
    factor: str
    levels: tuple[str, ...]
    into: str

    def __post_init__(self) -> None:
        if isinstance(self.levels, str):
            raise EditError("merge_levels takes a list of level names, e.g. ['N2', 'N3']")
        object.__setattr__(self, "levels", tuple(str(x) for x in self.levels))
        object.__setattr__(self, "into", level_name(self.into))

    def _plan(self, view: DataView) -> tuple[list[int], int]:
        """The level codes merged (sorted) and the one whose place the merged level takes."""
        require_factor(view, self.factor)
        known = view.levels[self.factor]
        sources = require_levels(view, self.factor, self.levels)
        if self.into in known and self.into not in self.levels:
            sources.append(known.index(self.into))
        sources = sorted(set(sources))
        if len(sources) < 2:
            raise EditError(f"merging needs two or more distinct levels of {self.factor!r}; got {list(self.levels)}")
        return sources, (known.index(self.into) if self.into in known else sources[0])

    def change(self, view: DataView, dataset: Dataset) -> ViewDelta:
        sources, target = self._plan(view)
        known = view.levels[self.factor]
        remap, new_levels = self._remap(known, sources, target)
        unmap = np.empty(len(new_levels), dtype=np.int32)
        for i in range(len(known)):
            if i not in sources or i == target:
                unmap[remap[i]] = i
        codes = view.codes[self.factor]
        moved = [i for i in sources if i != target]
        pos = np.flatnonzero(np.isin(codes, moved)) if len(moved) > 1 else np.flatnonzero(codes == moved[0])
        merge = CodeChange(self.factor, known, new_levels, read_only(pos), read_only(codes[pos].astype(np.int32)),
                           read_only(np.full(pos.size, remap[target], dtype=np.int32)), read_only(remap),
                           read_only(unmap))
        return ViewDelta(codes=(merge,))

    def _remap(self, known: tuple[str, ...], sources: list[int], target: int) -> tuple[np.ndarray, tuple[str, ...]]:
        new_levels: list[str] = []
        remap = np.empty(len(known), dtype=np.int32)
        for i, name in enumerate(known):
            if i in sources and i != target:
                continue
            remap[i] = len(new_levels)
            new_levels.append(self.into if i == target else name)
        for i in sources:
            remap[i] = remap[target]
        return remap, tuple(new_levels)

    def apply(self, view: DataView, dataset: Dataset) -> DataView:
        sources, target = self._plan(view)
        remap, new_levels = self._remap(view.levels[self.factor], sources, target)
        codes = remap[view.codes[self.factor]]
        return view.replace(
            codes={**view.codes, self.factor: read_only(codes)},
            levels={**view.levels, self.factor: new_levels},
        )

    def describe(self) -> str:
        return f"merge {self.factor} levels {', '.join(self.levels)} into {self.into}"


@register_edit
@dataclass(frozen=True, kw_only=True)
class RenameLevel(Edit):
    """Give a level of a factor a new name."""

    kind: ClassVar[str] = "rename"
    factor: str
    old: str
    new: str

    def __post_init__(self) -> None:
        object.__setattr__(self, "old", str(self.old))
        object.__setattr__(self, "new", level_name(self.new))

    def apply(self, view: DataView, dataset: Dataset) -> DataView:
        require_factor(view, self.factor)
        (i,) = require_levels(view, self.factor, (self.old,))
        known = view.levels[self.factor]
        if self.new in known:
            raise EditError(
                f"factor {self.factor!r} already has a level {self.new!r}; to pool the two, merge them instead"
            )
        levels = known[:i] + (self.new,) + known[i + 1 :]
        return view.replace(levels={**view.levels, self.factor: levels})

    def change(self, view: DataView, dataset: Dataset) -> ViewDelta:
        new = self.apply(view, dataset)  # names only: no row changes
        return ViewDelta(codes=(CodeChange(self.factor, view.levels[self.factor], new.levels[self.factor]),))

    def describe(self) -> str:
        return f"rename {self.factor} level {self.old} to {self.new}"


@dataclass(frozen=True, kw_only=True)
class _UnitEdit(Edit):
    """Shared shape of the edits that set whether every row of one level (a unit) is kept."""

    keep: ClassVar[bool]
    verb: ClassVar[str]
    column: str
    level: str

    def __post_init__(self) -> None:
        object.__setattr__(self, "level", str(self.level))

    def apply(self, view: DataView, dataset: Dataset) -> DataView:
        return self.change(view, dataset).forward(view)

    def change(self, view: DataView, dataset: Dataset) -> ViewDelta:
        require_factor(view, self.column)
        (code,) = require_levels(view, self.column, (self.level,))
        rows = np.flatnonzero(view.codes[self.column] == code)
        flips = rows[view.kept[rows] != self.keep]
        if not flips.size:
            state = "in the analysis; nothing to restore" if self.keep else "already left out"
            raise EditError(f"every row of {self.column} = {self.level!r} is {state}")
        return ViewDelta.keep(flips, self.keep)

    def describe(self) -> str:
        return f"{self.verb} every row of {self.column} = {self.level}"


@register_edit
@dataclass(frozen=True, kw_only=True)
class DropUnit(_UnitEdit):
    """Leave out every row of one level of a column: a whole subject, operator, part, lot or plot."""

    kind: ClassVar[str] = "drop_unit"
    keep: ClassVar[bool] = False
    verb: ClassVar[str] = "leave out"


@register_edit
@dataclass(frozen=True, kw_only=True)
class RestoreUnit(_UnitEdit):
    """Bring back every row of one level of a column."""

    kind: ClassVar[str] = "restore_unit"
    keep: ClassVar[bool] = True
    verb: ClassVar[str] = "restore"


# The names these had before they were shared between modules; kept for code written against them, removed in the
# next release.
_check_factor = require_factor
_check_levels = require_levels
