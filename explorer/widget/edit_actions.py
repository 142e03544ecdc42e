"""The explorer's edit actions: pick rows, leave them out, restore, move, undo, redo, reset, regroup levels.

:class:`EditActions` turns each action into one call on the study (several under
``Study.all_or_nothing`` when one action makes several edits), with the reason typed in
the reason box; a refusal shows in the status line and never raises into the notebook.
It is mixed into :class:`~explorer.widget.explorer.Explorer`. No statistics.
"""

from __future__ import annotations

from collections.abc import Sequence
from contextlib import AbstractContextManager
from typing import TYPE_CHECKING, Any

from explorer.engine import ExplorerError
from explorer.engine.moves import level_homes

if TYPE_CHECKING:
    import ipywidgets as W

    from explorer.study import Study

__all__ = ["EditActions", "level_steps"]


class EditActions:
    """The explorer's edit actions (mixed into :class:`~explorer.widget.explorer.Explorer`)."""

    study: Study
    reason_box: W.Textarea
    left_out_list: W.SelectMultiple
    _picked: tuple[Any, ...]
    _picked_from: str
    _level_boxes: dict[str, dict[str, W.Text]]

    if TYPE_CHECKING:
        def _status(self, text: str, kind: str = "ok") -> None: ...

        def _one_redraw(self) -> AbstractContextManager[None]: ...

        def _show_picked(self) -> None: ...

    def _reason(self, required: bool, what: str) -> str | None:
        reason = self.reason_box.value.strip()
        if required and not reason:
            self._status(f"Write a reason in the reason box before you {what}: leaving data out or moving it "
                         "needs a documented reason.", "error")
            return None
        return reason

    def _edit(self, what: str, fn: Any, *args: Any, done: str = "", used_reason: bool = True,
              compound: bool = False, **kwargs: Any) -> bool:
        """Run one study call; report a refusal in the status line instead of raising.

        The status line says ``done`` before the redraw starts, so it appears with the tables; on
        success the reason box is emptied, so that the next edit needs its own reason. A
        ``compound`` action (several edits under ``Study.all_or_nothing``) that fails changed nothing,
        and the status line says so.
        """
        none = " (Nothing was changed: this action applies all of its edits or none.)" if compound else ""
        try:
            with self._one_redraw():
                fn(*args, **kwargs)
                if used_reason:
                    self.reason_box.value = ""  # the next edit must not inherit this reason
                self._status(done or "Done.")
        except ExplorerError as exc:
            self._status(f"Not done ({what}): {exc}{none}", "error")
            return False
        except Exception as exc:  # noqa: BLE001  never raise into the notebook
            self._status(f"Not done ({what}): unexpected {type(exc).__name__}: {exc}{none}", "error")
            return False
        return True

    def pick(self, rows: Sequence[Any]) -> None:
        """Pick rows by id, as a click in a chart would."""
        self._picked = tuple(rows)
        self._picked_from = "code"
        self._show_picked()

    @property
    def picked(self) -> tuple[Any, ...]:
        return self._picked

    # ================================================================= actions
    def leave_out_picked(self) -> bool:
        if not self._picked:
            self._status("Pick a row first: click a point in a chart.", "error")
            return False
        reason = self._reason(True, "leave rows out")
        if reason is None:
            return False
        rows = self._picked
        ok = self._edit("leave out", self.study.drop, list(rows), reason=reason,
                        done=f"Left out row(s) {', '.join(map(str, rows))}: {reason}")
        if ok:
            self.pick(())
        return ok

    def restore_picked(self) -> bool:
        if not self._picked:
            self._status("Pick a left-out (grey) row first.", "error")
            return False
        return self._restore(self._picked)

    def restore_chosen(self) -> bool:
        chosen = list(self.left_out_list.value)
        if not chosen:
            self._status("Choose rows in the list of rows left out first.", "error")
            return False
        return self._restore(chosen)

    def _restore(self, rows: Sequence[Any]) -> bool:
        reason = self._reason(False, "restore rows") or ""
        ok = self._edit("restore", self.study.restore, list(rows), reason=reason,
                        done=f"Restored row(s) {', '.join(map(str, rows))}.")
        if ok:
            self.pick(())
        return ok

    def move_picked(self, level: str) -> bool:
        f = self.study.spec.factors[0]
        level = (level or "").strip()
        if not self._picked or not level:
            self._status(f"Pick rows and type or choose the level of {f} to move them to.", "error")
            return False
        reason = self._reason(True, "move rows to another level")
        if reason is None:
            return False
        rows = self._picked

        def move_all() -> None:
            with self.study.all_or_nothing():  # every row moves, or none does
                for r in rows:
                    self.study.reassign(r, f, level, reason=reason)

        ok = self._edit("move", move_all, done=f"Moved row(s) {', '.join(map(str, rows))} to {f} = {level}.",
                        compound=len(rows) > 1)
        if ok:
            self.pick(())
        return ok

    def undo(self) -> bool:
        return self._edit("undo", self.study.undo, done="Undid the last edit.", used_reason=False)

    def redo(self) -> bool:
        return self._edit("redo", self.study.redo, done="Redid the next edit.", used_reason=False)

    def reset(self) -> bool:
        return self._edit("back to unedited", self.study.reset, used_reason=False,
                          done="Back to the unedited data; the edits can be redone step by step.")

    def apply_regrouping(self) -> bool:
        """Turn the level editor's new names into merges and renames (one edit each, all of them or none;
        a swap of two names passes one level through a temporary name, see :func:`level_steps`)."""
        reason = self._reason(True, "merge or rename levels")
        if reason is None:
            return False
        plans: list[tuple[str, list[str], str]] = []
        for f, boxes in self._level_boxes.items():
            current = self._original_to_current(f)
            target_of: dict[str, set[str]] = {}
            for orig, box in boxes.items():
                now = current.get(orig)
                if now is None:
                    continue
                new = box.value.strip()
                if not new:
                    self._status(f"Level {orig!r} of {f} needs a name (an empty name is not allowed).", "error")
                    return False
                target_of.setdefault(now, set()).add(new)
            for now, targets in target_of.items():
                if len(targets) > 1:
                    self._status(f"Level {now!r} of {f} cannot be split into {sorted(targets)} here; undo the merge "
                                 "instead.", "error")
                    return False
            final = {now: next(iter(targets)) for now, targets in target_of.items()}
            plans += [(f, sources, target) for sources, target in level_steps(self.study.levels(f), final)]
        if not plans:
            self._status("No level changes to apply: type a new name beside a level (the same name for two "
                         "levels merges them).", "warn")
            return False

        def run() -> None:
            with self.study.all_or_nothing():  # every change, or none
                for f, sources, target in plans:
                    if len(sources) > 1:
                        self.study.merge_levels(f, sources, into=target, reason=reason)
                    else:
                        self.study.rename_level(f, sources[0], target, reason=reason)

        return self._edit("level changes", run, done=f"Applied {len(plans)} level change(s).", compound=True)

    def _original_to_current(self, f: str) -> dict[str, str | None]:
        """Where each recorded level of ``f`` is now, after the merges and renames in effect.

        Rows moved one by one do not count (they are listed in the comparison panel), so a
        level stays editable after one of its rows was moved away; ``None`` only for a
        level whose name no longer exists (every row of it moved elsewhere).
        """
        homes = level_homes(self.study.dataset, self.study.edits)[f]
        levels_now = set(self.study.levels(f))
        return {orig: (home if home in levels_now else None) for orig, home in homes.items()}


def level_steps(levels_now: Sequence[str], final: dict[str, str]) -> list[tuple[list[str], str]]:
    """The renames and merges (``(sources, target)``; one source renames, several merge) that give each
    current level of a factor its ``final`` name, in an order that never merges a level into a name
    another level still holds: a swap or a cycle of names passes one level through a temporary name.
    """
    name = {lv: lv for lv in levels_now if lv in final}
    groups: dict[str, list[str]] = {}
    for lv in name:
        groups.setdefault(final[lv], []).append(lv)
    todo = {t: srcs for t, srcs in groups.items() if srcs != [t]}
    steps: list[tuple[list[str], str]] = []
    while todo:
        held = {name.get(lv, lv): lv for lv in levels_now}
        ready = [t for t, srcs in todo.items() if t not in held or held[t] in srcs]
        if ready:
            t = ready[0]
            srcs = todo.pop(t)
            steps.append(([name[x] for x in srcs], t))
            for x in srcs:
                name[x] = t
            continue
        blocker = held[next(iter(todo))]  # a cycle of names: move one level aside first
        temp, k = f"{name[blocker]} (renaming)", 2
        while temp in held or temp in groups:
            temp, k = f"{name[blocker]} (renaming {k})", k + 1
        steps.append(([name[blocker]], temp))
        name[blocker] = temp
    return steps
