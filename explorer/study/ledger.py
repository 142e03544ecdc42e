"""The disclosure ledger: the study's record of everything done that bears on how much searching
stands behind a result.

One :class:`Ledger` per study keeps, in the order they happened and each with its ISO 8601
UTC time:

* every edit applied (undone ones too, with their reasons and saved form, so that an edit
  undone and then replaced by another is still on the record);
* every undo, redo and reset;
* every specification choice (overall test, comparison method, alpha, response, factors,
  transform, model terms, column roles) with the old and new value;
* every sensitivity search with the number of alternative analyses it examined.

The :class:`~explorer.engine.disclosure.Disclosure` every surface shows is computed from
the ledger at the moment it is read, so there is one number everywhere. The study file
keeps the whole ledger (schema 2); a file of schema 1 kept only the edits still in the log
and the searches, and a ledger rebuilt from one says so (:attr:`Ledger.complete`).

An entry may carry an ``origin``: plain text saying where it came from when it was not made
in this study (an edit adopted from a colleague's study file, for instance); ``""`` means
made here. Disclosure of the searching done elsewhere is the reason the field exists.

The idea of counting every analysis examined, not only the one reported, follows
Simmons, Nelson and Simonsohn (2011), "False-positive psychology", Psychological Science
22(11), 1359-1366, and Steegen et al. (2016), "Increasing transparency through a
multiverse analysis", Perspectives on Psychological Science 11(5), 702-712.
"""

from __future__ import annotations

import numbers
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Any

from ..engine.deferred import deferrable, deferred
from ..engine.disclosure import Disclosure
from ..engine.edits import Edit, check_utc_time, utc_now
from ..engine.errors import EditError, ReplayError

__all__ = ["KINDS", "Ledger", "LedgerEntry", "OLDER_FILE_NOTE", "choice_text"]

#: The kinds of ledger entry, in the words the study file uses.
KINDS = ("edit", "undo", "redo", "reset", "specification", "search")

#: Said beside the counts of a ledger rebuilt from a study file of schema 1.
OLDER_FILE_NOTE = ("counts from an older study file, which kept no record of edits undone and then replaced, "
                   "nor of when undos and searches happened: read them as at least these many")


def choice_text(value: object) -> str:
    """A specification value as the ledger writes it: text as it is, sequences joined with ', '."""
    if isinstance(value, str):
        return value
    if isinstance(value, (list, tuple)):
        return ", ".join(choice_text(v) for v in value) if value else "(none)"
    if value is None:
        return "(none)"
    return format(value, "g") if isinstance(value, float) else str(value)


@deferrable("what", "edit")
@dataclass(frozen=True)
class LedgerEntry:
    """One thing done to a study, with when and (for edits) why.

    ``kind`` is one of :data:`KINDS`. ``what`` is the kit's description (an edit's
    ``describe()``, ``"overall test"``, ``"flip finder"``). ``count`` is what the entry adds
    to its tally: 1 for an edit, undo, redo or specification choice, the number of edits
    undone for a reset, the alternatives examined for a search. ``edit`` is an edit's saved
    form (``Edit.to_dict()``), ``old``/``new`` a choice's values as text, ``origin`` where an
    entry came from when it was not made in this study (``""``: made here). ``at`` is
    ``None`` only for entries rebuilt from an older study file that did not keep the time.
    An edit's ``what`` and ``edit`` are written from the (frozen) edit when first read.
    """

    kind: str
    what: str
    at: str | None
    count: int = 1
    reason: str = ""
    edit: dict[str, Any] | None = None
    old: str | None = None
    new: str | None = None
    origin: str = ""

    def describe(self) -> str:
        """One line for a reader: what, when, why and from where."""
        when = self.at or "time not recorded"
        text = {
            "edit": f"edit: {self.what}" + (f" ({self.reason})" if self.reason else " (no reason given)"),
            "undo": f"undo of: {self.what}",
            "redo": f"redo of: {self.what}",
            "reset": f"back to the unedited data ({self.count} edit(s) undone)",
            "specification": f"specification: {self.what} {self.old} -> {self.new}",
            "search": f"search: {self.what} ({self.count} alternative analyses)",
        }.get(self.kind, self.what)
        return f"{when}  {text}" + (f" [from {self.origin}]" if self.origin else "")

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {"kind": self.kind, "what": self.what, "at": self.at, "count": self.count}
        if self.reason:
            out["reason"] = self.reason
        if self.edit is not None:
            out["edit"] = self.edit
        if self.old is not None or self.new is not None:
            out["old"], out["new"] = self.old, self.new
        if self.origin:
            out["origin"] = self.origin
        return out


class Ledger:
    """The record of one study (see the module's docstring); the disclosure is computed from it.

    A study owns one ledger and records into it from its own methods (``apply``, ``undo``,
    ``redo``, ``reset``, ``set_test`` and the other ``set_*`` choices, ``record_search``);
    code outside the study reads it (``study.ledger``) and never counts by hand.
    """

    def __init__(self, entries: Iterable[LedgerEntry] = (), *, complete: bool = True) -> None:
        self._entries: list[LedgerEntry] = list(entries)
        self.complete = complete
        self._tally = _tally(self._entries)  # edits made, undone, redone, alternatives: kept as entries come

    # ----------------------------------------------------------------- recording
    def _add(self, entry: LedgerEntry) -> LedgerEntry:
        self._entries.append(entry)
        self._tally = _tally([entry], self._tally)
        return entry

    def record_edit(self, edit: Edit, *, origin: str = "") -> LedgerEntry:
        """An edit applied (``origin``: where it came from, when not made in this study)."""
        return self._add(LedgerEntry("edit", deferred(edit.describe), utc_now(), 1, reason=edit.reason,
                                     edit=deferred(edit.to_dict), origin=_text(origin, "origin")))

    def record_undo(self, edit: Edit) -> LedgerEntry:
        return self._add(LedgerEntry("undo", edit.describe(), utc_now(), 1))

    def record_redo(self, edit: Edit) -> LedgerEntry:
        return self._add(LedgerEntry("redo", edit.describe(), utc_now(), 1))

    def record_reset(self, undone: int) -> LedgerEntry:
        """Back to the unedited data: ``undone`` edits were in effect."""
        return self._add(LedgerEntry("reset", "back to the unedited data", utc_now(), int(undone)))

    def record_choice(self, what: str, old: object, new: object, *, origin: str = "") -> LedgerEntry:
        """A specification choice: ``what`` ('overall test', 'alpha', ...) changed from ``old`` to ``new``."""
        return self._add(LedgerEntry("specification", _text(what, "what"), utc_now(), 1,
                                     old=choice_text(old), new=choice_text(new), origin=_text(origin, "origin")))

    def record_search(self, what: str, count: int, *, origin: str = "") -> LedgerEntry:
        """A sensitivity search that examined ``count`` alternative analyses."""
        if isinstance(count, bool) or not isinstance(count, numbers.Real) or not float(count).is_integer() or count < 0:
            raise EditError(f"a search examines a whole number of alternatives (0 or more), not {count!r}"[:300])
        return self._add(LedgerEntry("search", _text(what, "what"), utc_now(), int(count),
                                     origin=_text(origin, "origin")))

    # ----------------------------------------------------------------- reading
    @property
    def entries(self) -> tuple[LedgerEntry, ...]:
        """Every entry, oldest first."""
        return tuple(self._entries)

    def of_kind(self, *kinds: str) -> tuple[LedgerEntry, ...]:
        return tuple(e for e in self._entries if e.kind in kinds)

    @property
    def edits_made(self) -> int:
        """Every edit ever applied, undone ones included (redos are not new edits)."""
        return self._tally[0]

    @property
    def undos(self) -> int:
        """Edits undone, one by one or by a reset."""
        return self._tally[1]

    @property
    def redos(self) -> int:
        return self._tally[2]

    @property
    def specifications(self) -> int:
        """Alternative analyses examined: each specification choice and each search's count."""
        return self._tally[3]

    @property
    def note(self) -> str:
        """What a reader must know about the counts ('' for a ledger kept from the start)."""
        return "" if self.complete else OLDER_FILE_NOTE

    def disclosure(self, edits_in_effect: int) -> Disclosure:
        """The counts every surface shows, computed now."""
        return Disclosure(edits_in_effect=int(edits_in_effect), edits_made=self.edits_made, undos=self.undos,
                          specifications=self.specifications, note=self.note)

    def since(self, mark: int) -> tuple[LedgerEntry, ...]:
        """Entries recorded after the first ``mark`` (take ``mark = len(ledger)`` before an action)."""
        return tuple(self._entries[mark:])

    def rollback_to(self, mark: int) -> None:
        """Forget the entries after the first ``mark``: only for an all-or-nothing action that was rolled
        back, so none of its edits ever took effect (see ``Study.all_or_nothing``)."""
        del self._entries[mark:]
        self._tally = _tally(self._entries)

    def __len__(self) -> int:
        return len(self._entries)

    def copy(self) -> "Ledger":
        return Ledger(self._entries, complete=self.complete)

    def __repr__(self) -> str:
        return (f"Ledger({len(self._entries)} entries: {self.edits_made} edits made, {self.undos} undone, "
                f"{self.specifications} alternative analyses{'' if self.complete else '; from an older file'})")

    def to_text(self) -> str:
        """Every entry, one line each, oldest first."""
        lines = [e.describe() for e in self._entries] or ["(nothing recorded)"]
        return "\n".join(([f"Note: {self.note}."] if self.note else []) + lines)

    # ----------------------------------------------------------------- files
    def to_dict(self) -> dict[str, Any]:
        return {"complete": self.complete, "entries": [e.to_dict() for e in self._entries]}

    @classmethod
    def from_dict(cls, doc: Any, where: str = "ledger") -> "Ledger":
        """A ledger from its saved form; any break is a :class:`ReplayError` naming the field.

        The study file's schema checks the shape first; this checks it again (the ledger can
        also come from replay code), the times, and each edit's saved form.
        """
        if not isinstance(doc, dict):
            raise ReplayError(f"{where}: must be an object with 'entries', not {type(doc).__name__}")
        complete = doc.get("complete", True)
        if not isinstance(complete, bool):
            raise ReplayError(f"{where}.complete: must be true or false, not {complete!r}"[:300])
        raw = doc.get("entries")
        if not isinstance(raw, list):
            raise ReplayError(f"{where}.entries: must be a list")
        return cls((_entry_from_dict(d, f"{where}.entries[{i}]") for i, d in enumerate(raw)), complete=complete)

    @classmethod
    def from_older_file(cls, edits: Sequence[Edit], position: int, searches: Iterable[dict[str, Any]]) -> "Ledger":
        """What a schema-1 study file tells: the edits in its log (those after ``position`` were undone)
        and its searches; the undos and searches have no time, and earlier undone edits are lost."""
        entries = [LedgerEntry("edit", e.describe(), e.at, 1, reason=e.reason, edit=e.to_dict()) for e in edits]
        entries += [LedgerEntry("undo", e.describe(), None, 1) for e in reversed(edits[position:])]
        for s in searches:
            what, count = str(s.get("what", "")), int(s.get("count", 0))
            kind = "search"
            old = new = None
            if what.startswith("specification: "):
                kind, what = "specification", what[len("specification: "):]
                if " -> " in what:
                    head, new = what.rsplit(" -> ", 1)
                    what, _, old = head.rpartition(" ")
            entries.append(LedgerEntry(kind, what, None, count, old=old, new=new))
        return cls(entries, complete=False)


def _tally(entries: Iterable[LedgerEntry], start: tuple[int, int, int, int] = (0, 0, 0, 0)) -> tuple[int, int, int, int]:
    """(edits made, edits undone, edits redone, alternatives examined) of ``entries``, added to ``start``."""
    made, undone, redone, alternatives = start
    for e in entries:
        if e.kind == "edit":
            made += 1
        elif e.kind in ("undo", "reset"):
            undone += e.count
        elif e.kind == "redo":
            redone += e.count
        else:
            alternatives += e.count
    return made, undone, redone, alternatives


def _text(value: object, name: str) -> str:
    if not isinstance(value, str):
        raise EditError(f"the ledger's {name} must be text, not {type(value).__name__} ({value!r})"[:300])
    return value


def _entry_from_dict(d: Any, where: str) -> LedgerEntry:
    if not isinstance(d, dict):
        raise ReplayError(f"{where}: must be an object, not {type(d).__name__}")
    kind = d.get("kind")
    if kind not in KINDS:
        raise ReplayError(f"{where}.kind: must be one of {list(KINDS)}, not {kind!r}"[:300])
    unknown = set(d) - {"kind", "what", "at", "count", "reason", "edit", "old", "new", "origin"}
    if unknown:
        raise ReplayError(f"{where}: unknown field(s) {sorted(unknown)}"[:300])
    for name in ("what", "reason", "origin"):
        if not isinstance(d.get(name, ""), str):
            raise ReplayError(f"{where}.{name}: must be text (a string), not {type(d[name]).__name__}")
    for name in ("old", "new"):
        if d.get(name) is not None and not isinstance(d[name], str):
            raise ReplayError(f"{where}.{name}: must be text (a string) or null, not {type(d[name]).__name__}")
    count = d.get("count", 1)
    if isinstance(count, bool) or not isinstance(count, int) or count < 0:
        raise ReplayError(f"{where}.count: must be a whole number from 0, not {count!r}"[:300])
    at = d.get("at")
    if at is not None:
        check_utc_time(at, f"{where}.at")
    edit = d.get("edit")
    if kind == "edit":
        # Kept as data (it is shown, never replayed); a study file's schema checks its fields and time.
        if not isinstance(edit, dict) or not isinstance(edit.get("kind"), str):
            raise ReplayError(f"{where}.edit: an edit entry needs the edit's saved form (an object with a kind)")
        if not isinstance(edit.get("reason", ""), str):
            raise ReplayError(f"{where}.edit.reason: must be text (a string)")
    elif edit is not None:
        raise ReplayError(f"{where}.edit: only edit entries carry an edit")
    return LedgerEntry(kind, d.get("what", ""), at, count, reason=d.get("reason", ""), edit=edit,
                       old=d.get("old"), new=d.get("new"), origin=d.get("origin", ""))
