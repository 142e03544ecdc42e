"""Two studies of the same data side by side: a colleague's challenge, edit by edit.

``study.compare(other)`` takes a second study of the same data (usually a colleague's
study file loaded onto this study's data with :meth:`Study.load_other`) and gives:

* the two edit logs side by side: edits in both (with both reasons), only in mine, only
  in theirs (each with its reason);
* the two analyses side by side (rows used, the decision's statistic and p-value, R²,
  residual SD, the decision), with the model choices that differ (test, alpha, transform);
* which edits make the decisions differ, found by replaying the difference one edit at a
  time: from my current view, my own edits are taken back one at a time (latest first),
  then the colleague's are added one at a time (in their order), each step analysed under
  my model; a step whose decision differs from the step before is where the decision
  turns. Beside the path, each differing edit is also tried alone against my view (my
  edit taken back, or their edit added), which does not depend on the order.

Edits are the same when they do the same thing (kind and fields); reasons and times may
differ and are shown. Only edits in effect are compared (undone ones are not).
A colleague's edits are adopted one by one with :meth:`StudyComparison.adopt`, each
recorded in the study's ledger with its origin.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any

import pandas as pd

from ..engine.analysis import analyze
from ..engine.dataset import Dataset
from ..engine.edits import Edit, utc_now
from ..engine.errors import DesignError, EditError, ExplorerError
from ..engine.results import Results
from ..engine.spec import ModelSpec
from ..engine.tables import html_table
from ..engine.view import DataView, initial_view
from ..formatting import format_value, scale
from ..rendering import block, html_repr, note, small
from .decision import Decision, decide

if TYPE_CHECKING:
    from .study import Study

__all__ = ["EditEffect", "ReplayStep", "SharedEdit", "StudyComparison", "adopted_copy", "compare_studies", "edit_key"]


def edit_key(edit: Edit) -> str:
    """What an edit does, without its reason and time: two edits with the same key are the same edit."""
    d = {k: v for k, v in edit.to_dict().items() if k not in ("reason", "at")}
    return json.dumps(d, sort_keys=True, default=str)


@dataclass(frozen=True)
class SharedEdit:
    """An edit in both logs, with the reason each side gave."""

    mine: Edit
    theirs: Edit


@dataclass(frozen=True)
class ReplayStep:
    """One step of the replay from my view to theirs.

    ``action`` is 'start' (my current view), 'take back mine', 'add theirs' or 'their
    model' (their test, alpha or transform on the end state); ``applies`` is False when
    the edit could not be applied at that point (``note`` says why; the step is skipped).
    ``turns`` is True when the decision differs from the step before.
    """

    step: int
    action: str
    edit: Edit | None
    decision: Decision | None
    n_used: int | None
    applies: bool = True
    turns: bool = False
    note: str = ""

    def describe(self) -> str:
        what = self.edit.describe() if self.edit is not None else self.note
        return f"{self.action}: {what}" if self.action != "start" else "my current view"


@dataclass(frozen=True)
class EditEffect:
    """One differing edit tried alone against my current view (mine taken back, or theirs added)."""

    side: str  # 'mine' or 'theirs'
    edit: Edit
    decision: Decision | None
    flips: bool | None  # None when the edit does not apply to my view
    note: str = ""


def _fold(dataset: Dataset, edits: Sequence[Edit]) -> DataView:
    view = initial_view(dataset)
    for e in edits:
        view = e.apply(view, dataset)
    return view


def _analyse(dataset: Dataset, spec: ModelSpec, edits: Sequence[Edit]) -> tuple[Results, Decision]:
    res = analyze(dataset, _fold(dataset, edits), spec)
    return res, decide(res)


def _split(mine: Sequence[Edit], theirs: Sequence[Edit]) -> tuple[list[SharedEdit], list[Edit], list[Edit]]:
    """Match the two logs edit by edit (as multisets of what the edits do), keeping each log's order."""
    pool: dict[str, list[Edit]] = {}
    for e in theirs:
        pool.setdefault(edit_key(e), []).append(e)
    shared, only_mine = [], []
    matched: set[int] = set()
    for e in mine:
        hits = pool.get(edit_key(e))
        if hits:
            t = hits.pop(0)
            matched.add(id(t))
            shared.append(SharedEdit(e, t))
        else:
            only_mine.append(e)
    only_theirs = [e for e in theirs if id(e) not in matched]
    return shared, only_mine, only_theirs


def _model_differences(a: ModelSpec, b: ModelSpec) -> list[str]:
    out = []
    for name in ("test", "alpha", "transform", "ss_type", "interactions", "blocks", "covariates", "max_order"):
        va, vb = getattr(a, name, None), getattr(b, name, None)
        if va != vb:
            out.append(f"{name}: mine {va!r}, theirs {vb!r}")
    return out


@dataclass(frozen=True)
class StudyComparison:
    """Two studies of the same data side by side (see the module docstring).

    ``shared``, ``only_mine`` and ``only_theirs`` are the edit logs matched; ``steps`` the
    replay from my view to theirs; ``effects`` each differing edit tried alone;
    ``model_differences`` the model choices that differ. Results and decisions are those
    of the moment of comparing; ``mine`` is kept to adopt their edits into.
    """

    mine_label: str
    theirs_label: str
    mine: Study
    baseline_results: Results
    my_results: Results
    their_results: Results
    baseline_decision: Decision
    my_decision: Decision
    their_decision: Decision
    theirs_edits_in_effect: int
    shared: tuple[SharedEdit, ...]
    only_mine: tuple[Edit, ...]
    only_theirs: tuple[Edit, ...]
    steps: tuple[ReplayStep, ...]
    effects: tuple[EditEffect, ...]
    model_differences: tuple[str, ...]

    # ------------------------------------------------------------- reading
    @property
    def decisions_differ(self) -> bool:
        return not self.my_decision.agrees_with(self.their_decision)

    @property
    def turning_steps(self) -> tuple[ReplayStep, ...]:
        """The replay steps at which the decision turns."""
        return tuple(s for s in self.steps if s.turns)

    @property
    def decisive_edits(self) -> tuple[Edit, ...]:
        """The differing edits that turn the decision, on the replay path or alone against my view."""
        out: list[Edit] = []
        for e in [s.edit for s in self.turning_steps] + [x.edit for x in self.effects if x.flips]:
            if e is not None and all(e is not o for o in out):
                out.append(e)
        return tuple(out)

    def summary(self) -> str:
        """One sentence: do the decisions differ, and which edits (or model choices) make them differ."""
        if not self.decisions_differ:
            same = "The two decisions agree"
            if self.only_mine or self.only_theirs or self.model_differences:
                return same + " although the analyses differ (see the edits and figures below)."
            return same + " and the two studies make the same edits."
        turns = [s.describe() for s in self.turning_steps]
        if not turns:
            return "The decisions differ, but no single step of the replay turns the decision."
        return "The decisions differ; replaying the difference one edit at a time, the decision turns at: " + \
            "; ".join(turns) + "."

    def edits_frame(self) -> pd.DataFrame:
        """The two logs side by side: one line per edit, where it is ('both', 'only mine', 'only theirs')
        and the reason given on each side."""
        rows: list[dict[str, Any]] = []
        for s in self.shared:
            rows.append({"edit": s.mine.describe(), "in": "both", "my reason": s.mine.reason or "(none given)",
                         "their reason": s.theirs.reason or "(none given)"})
        for e in self.only_mine:
            rows.append({"edit": e.describe(), "in": "only mine", "my reason": e.reason or "(none given)",
                         "their reason": ""})
        for e in self.only_theirs:
            rows.append({"edit": e.describe(), "in": "only theirs", "my reason": "",
                         "their reason": e.reason or "(none given)"})
        return pd.DataFrame(rows, columns=["edit", "in", "my reason", "their reason"])

    def to_frame(self) -> pd.DataFrame:
        """The edit logs side by side (same as :meth:`edits_frame`)."""
        return self.edits_frame()

    def analyses_frame(self) -> pd.DataFrame:
        """The two analyses side by side: unedited data, mine, theirs."""
        b, m, t = self.baseline_results, self.my_results, self.their_results
        db, dm, dt = self.baseline_decision, self.my_decision, self.their_decision
        rows = [
            ("edits in effect", 0, len(self.shared) + len(self.only_mine), self.theirs_edits_in_effect, "count"),
            ("rows in analysis", b.n_used, m.n_used, t.n_used, "count"),
            ("the decision is about", db.term, dm.term, dt.term, "text"),
            ("test", db.test_label, dm.test_label, dt.test_label, "text"),
            ("statistic", db.statistic, dm.statistic, dt.statistic, "stat"),
            ("p-value", db.pvalue, dm.pvalue, dt.pvalue, "p"),
            ("R²", b.r_squared, m.r_squared, t.r_squared, "share"),
            ("residual SD", b.residual_sd, m.residual_sd, t.residual_sd, "measure"),
            ("decision", db.sentence(), dm.sentence(), dt.sentence(), "text"),
        ]
        frame = pd.DataFrame(
            [{"": label, "unedited data": _shown(u, role), self.mine_label: _shown(a, role),
              self.theirs_label: _shown(c, role)} for label, u, a, c, role in rows])
        return frame

    def steps_frame(self) -> pd.DataFrame:
        """The replay one edit at a time: each step's decision and whether it turned there."""
        rows = []
        for s in self.steps:
            d = s.decision
            rows.append({"step": s.step, "what": s.describe(), "rows in analysis": s.n_used,
                         "p-value": None if d is None else d.pvalue,
                         "decision": "(skipped: " + s.note + ")" if not s.applies else (d.verdict if d else ""),
                         "turns here": "yes" if s.turns else ""})
        return pd.DataFrame(rows)

    def effects_frame(self) -> pd.DataFrame:
        """Each differing edit tried alone against my view."""
        rows = []
        for x in self.effects:
            what = ("without my edit: " if x.side == "mine" else "with their edit: ") + x.edit.describe()
            rows.append({"tried alone": what, "p-value": None if x.decision is None else x.decision.pvalue,
                         "decision": x.note if x.decision is None else x.decision.verdict,
                         "changes my decision": "" if x.flips is None else ("yes" if x.flips else "no")})
        return pd.DataFrame(rows)

    # ------------------------------------------------------------- adopting
    def adopt(self, edit: Edit | int) -> Results:
        """Apply one of their edits (an edit of ``only_theirs`` or its index there) to my study, keeping
        their reason and recording its origin; returns my new results. Refused (my study unchanged)
        when it does not apply to my current view."""
        if isinstance(edit, int):
            if not 0 <= edit < len(self.only_theirs):
                raise EditError(f"no edit {edit} among their {len(self.only_theirs)} edit(s) not in mine")
            edit = self.only_theirs[edit]
        if all(edit is not e for e in self.only_theirs):
            raise EditError(f"{edit.describe()!r} is not one of their edits missing from mine")
        return self.mine.adopt(edit, origin=f"adopted from {self.theirs_label} (made there {edit.at})")

    # ------------------------------------------------------------- display
    def to_text(self) -> str:
        with scale(of=self.mine.display_scale()):
            lines = [f"Comparison of {self.mine_label} with {self.theirs_label}",
                     f"  mine:   {self.my_decision.sentence()}",
                     f"  theirs: {self.their_decision.sentence()}",
                     f"  {self.summary()}",
                     f"  edits: {len(self.shared)} in both, {len(self.only_mine)} only mine, "
                     f"{len(self.only_theirs)} only theirs"]
            lines += [f"  model: {d}" for d in self.model_differences]
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.to_text()

    @html_repr
    def _repr_html_(self) -> str:
        with scale(of=self.mine.display_scale()):
            head = note(self.summary()) if self.decisions_differ else small(self.summary())
            parts = [head, *(small(f"Model choice differs: {d}") for d in self.model_differences),
                     html_table(self.edits_frame(), "The two edit logs"),
                     html_table(self.analyses_frame(), "The two analyses"),
                     html_table(self.steps_frame(), "Replaying the difference one edit at a time (under my model)")]
            if self.effects:
                parts.append(html_table(self.effects_frame(), "Each differing edit alone against my view"))
            return block("study-compare", parts)


def _shown(v: Any, role: str) -> str:
    return "" if v is None else (str(v) if role == "text" else format_value(v, role))


def _try(dataset: Dataset, spec: ModelSpec, edits: Sequence[Edit]) -> tuple[Results, Decision] | str:
    try:
        return _analyse(dataset, spec, edits)
    except (EditError, DesignError) as exc:
        return str(exc)


def compare_studies(mine: Study, theirs: Study, *, mine_label: str = "mine", theirs_label: str = "theirs") -> StudyComparison:
    """Compare two studies of the same data (see the module docstring)."""
    for s in (mine, theirs):
        if hasattr(s, "sample_study"):
            raise ExplorerError("a summary-backed study (data kept in DuckDB or Spark) cannot be compared edit by "
                                "edit; compare their saved logs with study.to_dict()['edits']")
    if mine_label == theirs_label:
        theirs_label += " (other)"
    sm, st = mine.spec, theirs.spec
    if (sm.response, sm.factors) != (st.response, st.factors):
        raise ExplorerError(f"the two studies analyse different things: {sm.response} by {list(sm.factors)} here, "
                            f"{st.response} by {list(st.factors)} in the other")
    if mine.dataset.id_column != theirs.dataset.id_column:
        raise ExplorerError(f"the two studies name rows differently (id column {mine.dataset.id_column!r} here, "
                            f"{theirs.dataset.id_column!r} in the other), so their edits cannot be matched")
    if mine.dataset.column_fingerprint != theirs.dataset.column_fingerprint:
        raise ExplorerError("the two studies are not on the same data (their data fingerprints differ); "
                            "load the colleague's study file onto this study's data")
    shared, only_mine, only_theirs = _split(mine.edits, theirs.edits)
    ds, spec = mine.dataset, mine.spec
    steps: list[ReplayStep] = [ReplayStep(0, "start", None, mine.decision, mine.results.n_used)]
    current = list(mine.edits)
    prev = mine.decision

    def step(action: str, edit: Edit, candidate: list[Edit]) -> list[Edit]:
        nonlocal prev
        out = _try(ds, spec, candidate)
        if isinstance(out, str):
            steps.append(ReplayStep(len(steps), action, edit, None, None, applies=False, note=out))
            return current
        res, d = out
        steps.append(ReplayStep(len(steps), action, edit, d, res.n_used, turns=not d.agrees_with(prev)))
        prev = d
        return candidate

    for e in reversed(only_mine):
        current = step("take back mine", e, [x for x in current if x is not e])
    for e in only_theirs:
        current = step("add theirs", e, [*current, e])
    model = _model_differences(sm, st)
    if model:
        theirs_d = theirs.decision
        steps.append(ReplayStep(len(steps), "their model", None, theirs_d, theirs.results.n_used,
                                turns=not theirs_d.agrees_with(prev), note="; ".join(model)))
    effects: list[EditEffect] = []
    mine_now = mine.decision
    for side, edits in (("mine", only_mine), ("theirs", only_theirs)):
        for e in edits:
            trial = [x for x in mine.edits if x is not e] if side == "mine" else [*mine.edits, e]
            out = _try(ds, spec, trial)
            if isinstance(out, str):
                effects.append(EditEffect(side, e, None, None, note=f"does not apply to my view: {out}"))
            else:
                effects.append(EditEffect(side, e, out[1], not out[1].agrees_with(mine_now)))
    return StudyComparison(mine_label=mine_label, theirs_label=theirs_label, mine=mine,
                           baseline_results=mine.baseline, my_results=mine.results, their_results=theirs.results,
                           baseline_decision=mine.baseline_decision, my_decision=mine.decision,
                           their_decision=theirs.decision, theirs_edits_in_effect=len(theirs.edits),
                           shared=tuple(shared), only_mine=tuple(only_mine), only_theirs=tuple(only_theirs),
                           steps=tuple(steps), effects=tuple(effects), model_differences=tuple(model))


def adopted_copy(edit: Edit) -> Edit:
    """The edit as it enters this study: the colleague's reason kept, the time of adoption."""
    return replace(edit, at=utc_now())
