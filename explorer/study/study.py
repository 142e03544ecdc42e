"""A study: a dataset, a model spec and an edit log with undo/redo, events and save/load.

The study is the only stateful object of the statistical layers. Its state is the list of edits and
a cursor into it; the current view is the fold of the edits up to the cursor over the
dataset's initial view, and ``results`` is ``analyze`` of that view. The log keeps each edit's
change (the changed rows only, :mod:`explorer.engine.view_delta`), one current view, and the
results of the baseline and the last position used (:mod:`.result_cache`); undo and redo step
the current view and the running statistics by the changed rows.
"""

from __future__ import annotations

import json
import warnings
import weakref
from collections.abc import Callable, Iterable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import pandas as pd

from ..engine.analysis import AnalysisState, analysis_after, analysis_state, analyze
from ..engine.dataset import Dataset, RowId, SetAsideRow, build_dataset
from ..engine.disclosure import Disclosure
from ..engine.edits import DropRows, DropUnit, Edit, MergeLevels, Reassign, RenameLevel, RestoreRows, RestoreUnit
from ..engine.errors import DesignError, EditError, ExplorerError, ReplayError
from ..engine.moves import MovedRow, moved_rows
from ..engine.results import Results
from ..engine.spec import ModelSpec
from ..engine.table_checks import column_names
from ..engine.transforms import with_transform
from ..engine.view import DataView, initial_view
from ..engine.view_delta import ViewDelta
from ..formatting import Scale
from .analysis_methods import AnalysisMethods
from .compare import StudyComparison, adopted_copy, compare_studies
from .decision import Decision, decide
from .decision_card import DecisionCard, decision_card
from .ledger import Ledger
from .output_files import write_text_atomic
from .persistence import (
    check_ledger,
    check_study_doc,
    describe_mismatch,
    describe_order_mismatch,
    edits_from_doc,
    ledger_from_doc,
    read_study_file,
    study_to_dict,
)
from .planned import PlannedAnalyses, planned_from_doc
from .result_cache import RECENT_POSITIONS, BoundedCache

__all__ = ["COMPARISON_METHODS", "Study", "StudyEvent", "Disclosure"]

#: The methods the pairwise comparisons between levels are read from (``Study.set_comparisons``).
COMPARISON_METHODS = ("tukey-kramer", "games-howell", "dunnett", "holm")


@dataclass(frozen=True)
class StudyEvent:
    """What changed: ``kind`` is 'edit', 'undo', 'redo', 'reset', 'search' or 'spec' (a specification choice)."""

    kind: str
    edit: Edit | None
    position: int


def _set_aside_hint(dataset: Dataset) -> str:
    """'. N row(s) were set aside at load ...' when rows were set aside for missing values (else '')."""
    aside = getattr(dataset, "set_aside", ())
    if not aside:
        return ""
    counts: dict[str, int] = {}
    for row in aside:
        for why in str(row.reason).split("; "):
            counts[why] = counts.get(why, 0) + 1
    said = ", ".join(f"{why}: {n}" for why, n in sorted(counts.items(), key=lambda kv: -kv[1])[:4])
    return f". {len(aside)} row(s) were set aside at load for missing values ({said}); see study.set_aside"


class Study(PlannedAnalyses, AnalysisMethods):
    """An analysis of variance whose data can be edited, with every edit logged.

    Parameters
    ----------
    data : DataFrame or path to a CSV/Parquet/Excel file (copied once, never changed).
    response : numeric column to analyse.
    factors : one factor name or a list of them (treatment factors).
    blocks : additive block factors (randomized complete block designs).
    interactions : cross the treatment factors (full factorial) when True.
    ss_type : 'I', 'II' or 'III' sums of squares for multi-factor designs.
    alpha : level at which decisions are read.
    test : the overall test the decision is read from: 'classic' (the F tests of the
        model's terms), or for one factor without blocks 'welch', 'brown-forsythe',
        'kruskal' or 'permutation' (see :data:`explorer.engine.spec.OVERALL_TESTS`).
    id_column : column of unique row labels (panel, sample or plot ids) used as row ids
        in edits, charts and saved files; by default the index (or row positions).
    terms : the treatment terms explicitly, e.g. ``["N", "P", "K", "N × P"]``.
    max_order : keep interactions of at most this many factors (1 = additive).
    random : factors or blocks whose levels are a sample of many (operators, days, lots).
    nested : ``{"lot": "supplier"}``: each lot belongs to one supplier.
    subject : the unit measured repeatedly (panel, animal, whole plot); random, nested in
        the between-subject factors.
    within : the factors that vary within a subject (repeated-measures factors).
    variance_method : variance-component estimator: 'auto' (moments on balanced data, REML
        otherwise), 'moments' or 'reml'.
    transform : analyse 'log', 'sqrt' or a Box-Cox power of the response (default 'none').
    covariates : numeric columns measured on each row to adjust for (analysis of covariance:
        common slopes, the homogeneity-of-slopes check, means adjusted to the covariate means).
    units : units of the response (e.g. ``"µm"``): shown in axis titles and table headings
        (sums of squares in squared units); saved with the study.
    See :class:`~explorer.engine.spec.ModelSpec` for how these build the model.
    """

    def __init__(
        self,
        data: pd.DataFrame | str | Path,
        response: str,
        factors: str | Sequence[str],
        *,
        blocks: str | Sequence[str] = (),
        interactions: bool = True,
        ss_type: str = "II",
        alpha: float = 0.05,
        test: str = "classic",
        id_column: str | None = None,
        terms: Sequence[str | Sequence[str]] | None = None,
        max_order: int | None = None,
        random: str | Sequence[str] = (),
        nested: dict[str, str | Sequence[str]] | None = None,
        subject: str | None = None,
        within: str | Sequence[str] = (),
        variance_method: str = "auto",
        transform: str | float = "none",
        covariates: str | Sequence[str] = (),
        units: str = "",
    ) -> None:
        factors_t = column_names(factors, "factors")
        blocks_t = column_names(blocks, "blocks") if isinstance(blocks, str) or blocks else ()
        spec = ModelSpec(response=response, factors=factors_t, blocks=blocks_t,
                         interactions=interactions, ss_type=ss_type, alpha=alpha,  # type: ignore[arg-type]
                         terms=terms if terms is None or isinstance(terms, str) else tuple(terms),  # type: ignore[arg-type]
                         max_order=max_order, random=random, nested=nested or (),  # type: ignore[arg-type]
                         subject=subject, within=within,  # type: ignore[arg-type]
                         variance_method=variance_method, test=test, transform=transform,  # type: ignore[arg-type]
                         covariates=covariates, units=units)  # type: ignore[arg-type]
        self._init(build_dataset(data, response, spec.columns, id_column, spec.covariates), spec,
                   data_source=data if isinstance(data, (str, Path)) else None)

    def _init(self, dataset: Dataset, spec: ModelSpec, data_source: str | Path | None = None,
              baseline: DataView | None = None) -> None:
        self.dataset = with_transform(dataset, spec.transform)  # the response as the model reads it
        self._baseline_view = baseline
        self.spec = spec
        self.data_source = data_source  # the file the data came from, for replay code
        self._read_files: list[Path] = [Path(data_source).resolve()] if data_source is not None else []
        self._own_files: list[Path] = []  # study files this study was loaded from or saved to
        self._log: list[Edit] = []
        self._deltas: list[ViewDelta] = []  # what each edit of the log changes, for undo and redo
        self._results: dict[int, Results] = BoundedCache()
        self._decisions: dict[int, tuple[Results, Decision]] = BoundedCache()
        self._position = 0
        self._ledger = Ledger()  # every edit, undo, redo, reset, choice and search, with times
        self._comparisons = COMPARISON_METHODS[0]  # how levels are compared pairwise (set_comparisons)
        self.edits_not_carried: tuple[Edit, ...] = ()  # edits respecify could not carry over
        self._listeners: list[Callable[["Study", StudyEvent], None]] = []
        self._planned = []  # planned analyses asked for (see explorer.study.planned)
        try:
            self._forget_results()
            self._results[0] = self._base[2].results
        except DesignError as exc:
            raise DesignError(f"{exc}{_set_aside_hint(dataset)}") from None

    @classmethod
    def from_dataset(cls, dataset: Dataset, spec: ModelSpec, *, baseline: DataView | None = None) -> "Study":
        """A study of ``dataset``; ``baseline`` is the view its edits start from (all rows by default)."""
        study = cls.__new__(cls)
        study._init(dataset, spec, baseline=baseline)
        return study

    # ----------------------------------------------------------------- state
    @property
    def edits(self) -> tuple[Edit, ...]:
        """The edits in effect, oldest first."""
        return tuple(self._log[: self._position])

    @property
    def redo_edits(self) -> tuple[Edit, ...]:
        return tuple(self._log[self._position :])

    @property
    def view(self) -> DataView:
        return self._sync()[1]

    def _forget_results(self) -> None:
        """Drop every result (the spec or the response changed); the baseline is fitted again."""
        self._results = BoundedCache()
        self.__dict__["_decisions"] = BoundedCache()
        given: DataView | None = getattr(self, "_baseline_view", None)
        view = given if given is not None else initial_view(self.dataset)
        self._base: tuple[int, DataView, AnalysisState] = (0, view, analysis_state(self.dataset, view, self.spec))
        self._now = self._base

    def _sync(self) -> tuple[int, DataView, AnalysisState]:
        """The current view and its analysis state, stepped from the last ones by the edits' changes."""
        at, view, state = self._now
        target = self._position
        if at == target:
            return self._now
        if target < abs(at - target):  # nearer the baseline: start there
            at, view, state = self._base
        stepped = state.groups is not None  # running statistics step with the view; other fits only at the end
        while at != target:
            forward = at < target
            delta = self._deltas[at] if forward else self._deltas[at - 1].inverse()
            new_view = delta.forward(view)
            if stepped:
                state = analysis_after(self.dataset, self.spec, state, view, new_view, delta)
            at, view = at + (1 if forward else -1), new_view
        if not stepped:
            state = analysis_state(self.dataset, view, self.spec)
        self._now = (at, view, state)
        self._results[at] = state.results
        return self._now

    @property
    def results(self) -> Results:
        """Results on the current view (their HTML shows the study's live disclosure)."""
        return self._with_disclosure(self._results_at(self._position))

    @property
    def baseline(self) -> Results:
        """Results on the unedited data."""
        return self._with_disclosure(self._results_at(0))

    def _with_disclosure(self, res: Results) -> Results:
        """Let ``res`` show this study's disclosure, read when it is shown (a weak link: no cycle)."""
        if getattr(res, "disclosure_source", None) is None:
            object.__setattr__(res, "disclosure_source", _LiveDisclosure(self))
        return res

    @property
    def decision(self) -> Decision:
        """What the current view concludes, about which term, under the chosen test (see :mod:`.decision`).

        Computed once per view and test; every surface (header, history, comparison,
        scans, report, command line) reads this value.
        """
        return self._decision_at(self._position)

    @property
    def baseline_decision(self) -> Decision:
        """The decision on the unedited data, under the same test and alpha."""
        return self._decision_at(0)

    def _decision_at(self, pos: int) -> Decision:
        res = self._results_at(pos)
        cache = self.__dict__.setdefault("_decisions", {})  # position -> (results, decision)
        hit = cache.get(pos)
        if hit is None or hit[0] is not res:  # a redo branch or a new test made other results
            hit = cache[pos] = (res, decide(res))
        return hit[1]

    def decision_card(self) -> DecisionCard:
        """The unedited and current decisions, what changed, the searching so far and the cautions, as they
        are now (see :mod:`.decision_card`); the explorer and the report show it first."""
        return decision_card(self)

    def set_test(self, test: str) -> Decision:
        """Read the decision from another overall test; recorded as a specification choice.

        ``test`` is a key of :data:`explorer.engine.spec.OVERALL_TESTS`; the tests other
        than 'classic' need one factor without blocks. Returns the new decision.
        """
        new_spec = replace(self.spec, test=test)
        if new_spec.test == self.spec.test:
            return self.decision
        old = self.spec.test
        self.spec = new_spec
        self._forget_results()
        self._record_choice("overall test", old, new_spec.test)
        self._emit("spec", None)
        return self.decision

    def set_alpha(self, alpha: float) -> Decision:
        """Read the decision at another level; recorded as a specification choice. Returns the new decision."""
        new_spec = replace(self.spec, alpha=alpha)
        if new_spec.alpha == self.spec.alpha:
            return self.decision
        self._respec(new_spec, "alpha", self.spec.alpha, new_spec.alpha)
        return self.decision

    @property
    def comparisons(self) -> str:
        """The method levels are compared by (one of :data:`COMPARISON_METHODS`; change it with :meth:`set_comparisons`)."""
        return self.__dict__.get("_comparisons", COMPARISON_METHODS[0])

    def set_comparisons(self, method: str) -> str:
        """Compare the levels pairwise by another method; recorded as a specification choice.

        ``method`` is one of :data:`COMPARISON_METHODS`: 'tukey-kramer' (all pairs),
        'games-howell' (all pairs, unequal variances), 'dunnett' (each level against the
        first), 'holm' (t tests, Holm-adjusted). Returns the method now in use.
        """
        if method not in COMPARISON_METHODS:
            raise EditError(f"comparison method {method!r} is not one of {list(COMPARISON_METHODS)}")
        if method != self.comparisons:
            old, self._comparisons = self.comparisons, method
            self._record_choice("comparison method", old, method)
            self._emit("spec", None)
        return self.comparisons

    def set_terms(self, terms: Sequence[str | Sequence[str]] | None = None, *, max_order: int | None = None,
                  interactions: bool | None = None) -> Results:
        """Fit other model terms (``terms``, ``max_order`` or ``interactions`` as in the constructor);
        recorded as a specification choice. The edits stay in effect; a model the current view
        cannot fit is refused and the study is unchanged."""
        changes: dict[str, Any] = {"terms": None if terms is None else tuple(terms), "max_order": max_order}
        if interactions is not None:
            changes["interactions"] = interactions
        new_spec = replace(self.spec, **changes)
        if _term_key(new_spec) == _term_key(self.spec):
            return self.results
        return self._respec(new_spec, "model terms", _term_text(self.spec), _term_text(new_spec))

    def _respec(self, new_spec: ModelSpec, what: str, old: object, new: object) -> Results:
        """Analyse under ``new_spec`` (same data, edits in effect), or refuse and change nothing; record the choice.

        Every result is dropped and the current view fitted again (``_refit_current``: a
        summary-backed study fits it its own way); a refusal puts everything back.
        """
        view = self._view_to_refit()
        saved: dict[str, Any] = {k: self.__dict__[k] for k in ("_results", "_decisions", "_base", "_now")
                                 if k in self.__dict__}
        old_spec, self.spec = self.spec, new_spec
        try:
            self._forget_results()
            self._refit_current(view)
        except DesignError as exc:
            self.spec = old_spec
            self.__dict__.update(saved)
            raise EditError(f"{what} refused ({new}): {exc}") from None
        self._record_choice(what, old, new)
        self._emit("spec", None)
        return self.results

    def _view_to_refit(self) -> DataView:
        """The current view, read before a new spec drops the results (``_refit_current`` fits it again)."""
        return self.view

    def _refit_current(self, view: DataView) -> None:
        """Fit the current view under the spec now set (after ``_forget_results``)."""
        state = analysis_state(self.dataset, view, self.spec)
        self._now = (self._position, view, state)
        self._results[self._position] = state.results

    def respecify(self, *, response: str | None = None, factors: str | Sequence[str] | None = None,
                  **spec_changes: Any) -> "Study":
        """A new study of the same data with another response, factors or column roles.

        ``spec_changes`` are constructor arguments (``blocks``, ``random``, ``nested``,
        ``subject``, ``within``, ``alpha``, ...). The data are read again from the original
        file when there is one. The edits in effect are replayed; those that no longer apply
        are listed in ``edits_not_carried`` of the new study. The new study continues this
        study's ledger, with each change recorded as a specification choice.
        """
        if hasattr(self, "sample_study"):
            raise EditError("a summary-backed study keeps its model; build a new one for another response or factors")
        o = self.spec
        factors_t = o.factors if factors is None else column_names(factors, "factors")
        response = o.response if response is None else response
        kept = set(factors_t) | set(o.blocks)
        subject = o.subject if o.subject is not None and o.subject not in factors_t else None
        args: dict[str, Any] = dict(
            blocks=o.blocks, interactions=o.interactions, ss_type=o.ss_type, alpha=o.alpha,
            test=o.test if len(factors_t) == 1 and not o.blocks else "classic",
            id_column=self.dataset.id_column, variance_method=o.variance_method,
            random=[c for c in o.random if c in kept],
            nested={c: list(p) for c, p in o.nested if c in kept and set(p) <= kept} or None,
            subject=subject, within=[w for w in o.within if w in factors_t] if subject else [],
            covariates=[c for c in o.covariates if c != response and c not in kept])
        if response == o.response:  # units and transform belong to the response
            args.update(units=o.units, transform=o.transform)
        if factors_t == o.factors:
            args.update(terms=o.terms, max_order=o.max_order)
        args.update(spec_changes)
        source = self.data_source if self.data_source is not None else self.dataset.table
        try:
            new = type(self)(source, response, factors_t, **args)
        except ExplorerError:
            if args["test"] == "classic" or "test" in spec_changes:
                raise
            args["test"] = "classic"  # the other overall tests need one fixed factor without blocks
            new = type(self)(source, response, factors_t, **args)
        new.data_source = self.data_source
        new._comparisons = self._comparisons
        skipped = []
        for e in self.edits:
            try:
                new.apply(e)
            except EditError:
                skipped.append(e)
        new.edits_not_carried = tuple(skipped)
        new._ledger = self._ledger.copy()
        for what, before, after in _spec_changes(o, new.spec):
            new._record_choice(what, before, after)
        return new

    def set_transform(self, transform: str | float, *, reason: str = "") -> Results:
        """Analyse another transform of the response: 'none', 'log', 'sqrt' or a Box-Cox power (a number).

        Recorded as a specification choice (it counts as an alternative examined, like every
        other change of the model; see :meth:`box_cox` for the evidence on a power). The
        edits stay in effect. A response the transform cannot take (zero or negative values
        for the log) is refused and the study is unchanged.
        """
        new_spec = replace(self.spec, transform=transform)
        if new_spec.transform == self.spec.transform:
            return self.results
        dataset = with_transform(self.dataset, new_spec.transform)
        try:
            analyze(dataset, self.view, new_spec)
        except DesignError as exc:
            raise EditError(f"transform refused ({new_spec.transform!r}): {exc}") from None
        old = self.spec.transform
        self.dataset, self.spec = dataset, new_spec
        self._forget_results()
        self._record_choice("transform", old, new_spec.transform)
        self._emit("spec", None)
        return self.results

    def box_cox(self, *, lambdas: Sequence[float] | None = None, record: bool = True) -> Any:
        """Box-Cox profile likelihood of the power of the response under this model, with its interval
        (see :func:`explorer.inference.box_cox.box_cox`); kept with the planned analyses."""
        chosen = lambdas if lambdas is None or isinstance(lambdas, (str, bytes)) or not hasattr(lambdas, "__iter__") \
            else list(lambdas)
        return self._ask("box_cox", None, {"lambdas": chosen}, record)

    def _record_choice(self, what: str, old: object, new: object) -> None:
        """Count a specification choice as one alternative analysis examined (kept in the ledger)."""
        self._ledger.record_choice(what, old, new)

    @property
    def ledger(self) -> Ledger:
        """The record of every edit, undo, redo, reset, specification choice and search (see :mod:`.ledger`)."""
        return self._ledger

    @property
    def set_aside(self) -> tuple[SetAsideRow, ...]:
        return self.dataset.set_aside

    @property
    def dropped(self) -> tuple[RowId, ...]:
        return self.view.dropped_ids(self.dataset)

    @property
    def disclosure(self) -> Disclosure:
        """How much searching stands behind the current state, computed from the ledger now."""
        return self._ledger.disclosure(self._position)

    def _results_at(self, pos: int) -> Results:
        if pos not in self._results:
            if pos == self._position:
                return self._sync()[2].results
            view = self._base[1]
            for delta in self._deltas[:pos]:
                view = delta.forward(view)
            self._results[pos] = analyze(self.dataset, view, self.spec)
        return self._results[pos]

    def levels(self, factor: str) -> tuple[str, ...]:
        return self.view.levels[factor]

    def moved_rows(self) -> tuple[MovedRow, ...]:
        """Rows now at another level than the one recorded (merges and renames aside), with the reason."""
        return moved_rows(self.dataset, self.view, self.edits)

    # ----------------------------------------------------------------- edits
    def apply(self, edit: Edit, *, origin: str = "") -> Results:
        """Apply any edit; refuse it (state unchanged) if the result cannot be analysed.

        ``origin`` says where the edit came from when it was not made here (it is kept in the
        ledger, e.g. ``"adopted from a colleague's study file"``).
        """
        if not isinstance(origin, str):
            raise EditError(f"the origin must be text, not {type(origin).__name__}")
        if not isinstance(edit.reason, str):
            raise EditError(f"the reason must be text, not {type(edit.reason).__name__} ({edit.reason!r})")
        _, view, state = self._sync()
        delta = edit.change(view, self.dataset)
        new_view = delta.forward(view)
        try:
            state = analysis_after(self.dataset, self.spec, state, view, new_view, delta)
        except DesignError as exc:
            raise EditError(f"edit refused ({edit.describe()}): {exc}") from None
        del self._log[self._position :]
        del self._deltas[self._position :]
        for cache in (self._results, self.__dict__.get("_decisions", {})):
            for k in [k for k in cache if k > self._position]:
                del cache[k]
        self._log.append(edit)
        self._deltas.append(delta)
        self._position += 1
        self._now = (self._position, new_view, state)
        res = self._results[self._position] = state.results
        self._ledger.record_edit(edit, origin=origin)
        self._emit("edit", edit)
        return res

    def drop(self, rows: RowId | Iterable[RowId], reason: str = "") -> Results:
        """Leave rows out of the analysis; give the reason (lab note, deviation number...)."""
        return self.apply(DropRows(rows=rows, reason=reason))  # type: ignore[arg-type]

    def restore(self, rows: RowId | Iterable[RowId], reason: str = "") -> Results:
        return self.apply(RestoreRows(rows=rows, reason=reason))  # type: ignore[arg-type]

    def reassign(self, row: RowId, factor: str, level: str, reason: str = "") -> Results:
        return self.apply(Reassign(row=row, factor=factor, level=level, reason=reason))

    def merge_levels(self, factor: str, levels: Sequence[str], into: str, reason: str = "") -> Results:
        return self.apply(MergeLevels(factor=factor, levels=tuple(levels), into=into, reason=reason))

    def rename_level(self, factor: str, old: str, new: str, reason: str = "") -> Results:
        return self.apply(RenameLevel(factor=factor, old=old, new=new, reason=reason))

    def drop_unit(self, column: str, level: str, reason: str = "") -> Results:
        """Leave out every row of one level of ``column``: a whole subject, operator, part, lot or plot."""
        return self.apply(DropUnit(column=column, level=level, reason=reason))

    def restore_unit(self, column: str, level: str, reason: str = "") -> Results:
        """Bring back every row of one level of ``column``."""
        return self.apply(RestoreUnit(column=column, level=level, reason=reason))

    @contextmanager
    def all_or_nothing(self) -> Iterator["Study"]:
        """Several edits as one action: all of them, or (when one is refused or anything raises) none.

        ``with study.all_or_nothing(): study.reassign(...); study.reassign(...)``. On an error the
        study returns exactly to where it was (edits in effect, the redo branch, cached results,
        the ledger: the partial action is not on the record, as it never took effect) and the
        error propagates. Change listeners hear of the edits only once all of them are applied.
        """
        if self.__dict__.get("_held") is not None:  # inside another all-or-nothing action: that one decides
            yield self
            return
        saved = (list(self._log), list(self._deltas), dict(self._results), self._position,
                 dict(self.__dict__.get("_decisions", {})), len(self._ledger), self._now, self._base)
        held: list[tuple[str, Edit | None, int]] = []
        self._held: list[tuple[str, Edit | None, int]] | None = held
        try:
            yield self
        except BaseException:
            self._held = None
            self._log, self._deltas, results, self._position, decisions, mark, self._now, self._base = saved
            self._results = BoundedCache(RECENT_POSITIONS, results)
            self.__dict__["_decisions"] = BoundedCache(RECENT_POSITIONS, decisions)
            self._ledger.rollback_to(mark)
            raise
        self._held = None
        for kind, edit, position in held:
            self._emit(kind, edit, position)

    def undo(self) -> Results:
        if self._position == 0:
            raise EditError("nothing to undo: the study is at its baseline")
        self._position -= 1
        self._ledger.record_undo(self._log[self._position])
        self._emit("undo", self._log[self._position])
        return self.results

    def redo(self) -> Results:
        if self._position >= len(self._log):
            raise EditError("nothing to redo")
        self._position += 1
        self._ledger.record_redo(self._log[self._position - 1])
        self._emit("redo", self._log[self._position - 1])
        return self.results

    def reset(self) -> Results:
        """Go back to the baseline; the edits stay available to redo."""
        if self._position:
            self._ledger.record_reset(self._position)
            self._position = 0
            self._emit("reset", None)
        return self.results

    def record_search(self, what: str, count: int, *, origin: str = "") -> None:
        """Count alternative analyses a sensitivity tool examined (kept in the ledger, shown in the disclosure)."""
        self._ledger.record_search(what, count, origin=origin)
        self._emit("search", None)

    # ----------------------------------------------------------------- events
    def on_change(self, callback: Callable[["Study", StudyEvent], None]) -> Callable[[], None]:
        """Call ``callback(study, event)`` after every change; returns a function that unsubscribes."""
        self._listeners.append(callback)

        def unsubscribe() -> None:
            if callback in self._listeners:
                self._listeners.remove(callback)

        return unsubscribe

    def _emit(self, kind: str, edit: Edit | None, position: int | None = None) -> None:
        held = self.__dict__.get("_held")
        if held is not None:  # inside all_or_nothing: told once the whole action stands, each at its position
            held.append((kind, edit, self._position))
            return
        event = StudyEvent(kind, edit, self._position if position is None else position)
        for cb in list(self._listeners):
            try:
                cb(self, event)
            except Exception as exc:  # a broken listener must not corrupt the study
                warnings.warn(f"a change listener failed: {exc!r}", RuntimeWarning, stacklevel=2)

    # ----------------------------------------------------------------- files
    def to_dict(self) -> dict[str, Any]:
        doc = study_to_dict(self.dataset, self.spec, self._log, self._position, self._ledger, self.comparisons)
        if self.planned_requests:
            doc["planned"] = self.planned_to_dict()
        return doc

    def save(self, path: str | Path, *, overwrite: bool = False) -> Path:
        """Write the spec, data fingerprint and edit log (with undone edits) as JSON, atomically.

        Saving over this study's own study file (the one it was loaded from or saved to
        before) is allowed; any other existing file needs ``overwrite=True``; the data
        file is never written over (:class:`~explorer.engine.errors.OutputError`).
        """
        p = write_text_atomic(path, json.dumps(self.to_dict(), indent=1), overwrite=overwrite,
                              protect=self.files_read(study_files=False), own=getattr(self, "_own_files", ()))
        self._remember_own_file(p)
        return p

    def files_read(self, *, study_files: bool = True) -> list[tuple[str, Path]]:
        """The files this study reads (data files, and its study files unless ``study_files=False``).

        No output of the kit replaces them, except ``save`` over the study's own study file.
        """
        out = [("data file", f) for f in getattr(self, "_read_files", ())]
        return out + ([("study file", f) for f in getattr(self, "_own_files", ())] if study_files else [])

    def _remember_own_file(self, path: str | Path) -> None:
        files = self.__dict__.setdefault("_own_files", [])
        resolved = Path(path).resolve()
        if resolved not in files:
            files.append(resolved)

    @classmethod
    def load(cls, path: str | Path, data: pd.DataFrame | str | Path, *, allow_mismatch: bool = False) -> "Study":
        """Replay a saved log on ``data``; refuse (saying what differs) if the data changed.

        ``allow_mismatch=True`` replays on changed rows; it never lets a factor's levels be in another
        order than the file records (``data.level_order``): that order decides 'later' contrasts and the
        sign of two-level differences for rows that did not change, so it is refused in any case (with
        the one-line fix), nothing run.
        """
        doc = read_study_file(path)
        study = cls.from_dict(doc, data, allow_mismatch=allow_mismatch)
        study._remember_own_file(path)
        return study

    @classmethod
    def from_dict(cls, doc: dict[str, Any], data: pd.DataFrame | str | Path, *, allow_mismatch: bool = False) -> "Study":
        """Replay a saved study given as a dict (checked against the study-file schema first)."""
        check_study_doc(doc)
        try:
            spec = ModelSpec.from_dict(doc["spec"])
        except ReplayError:
            raise
        except ExplorerError as exc:
            raise ReplayError(f"the study file: spec: {exc}") from None
        dataset = build_dataset(data, spec.response, spec.columns, doc["data"].get("id_column"), spec.covariates)
        problem = describe_mismatch(doc, dataset)
        if problem and not allow_mismatch:
            raise ReplayError(problem + ". Pass allow_mismatch=True to replay anyway (edits that no longer apply fail).")
        reordered = describe_order_mismatch(doc, dataset)  # allow_mismatch or not: see load
        if reordered:
            raise ReplayError(reordered)
        study = cls.from_dataset(dataset, spec)
        study.data_source = data if isinstance(data, (str, Path)) else None
        study._read_files = [Path(data).resolve()] if isinstance(data, (str, Path)) else []
        edits = edits_from_doc(doc)
        position = int(doc.get("position", len(edits)))
        for i, e in enumerate(edits):
            try:
                study.apply(e)
            except EditError as exc:
                raise ReplayError(f"edit {i + 1} of the saved log ({e.describe()}) does not apply: {exc}") from None
        for request, at in planned_from_doc(doc):
            study._keep_request(request, record=False, at=at)
        while study._position > position:
            study.undo()
        study._comparisons = doc.get("comparisons", COMPARISON_METHODS[0])
        study._ledger = ledger_from_doc(doc, edits, position)
        return study

    def restore_ledger(self, saved: dict[str, Any]) -> None:
        """Take the ledger saved with this state (``Ledger.to_dict()``), as replay code does, so that the
        replayed study discloses exactly what the original did. Refused (:class:`ReplayError`) when
        it is malformed or cannot account for the edits in effect."""
        ledger = Ledger.from_dict(saved)
        check_ledger(ledger, len(self._log), self._position, "the saved ledger")
        self._ledger = ledger

    # ----------------------------------------------------------------- a colleague's study
    def load_other(self, path: str | Path) -> "Study":
        """A colleague's study file loaded onto this study's data (refused, saying what differs, when the
        file was saved on other data)."""
        data = self.data_source if self.data_source is not None else self.dataset.table
        return Study.load(path, data)

    def compare(self, other: "Study | str | Path", *, label: str | None = None) -> StudyComparison:
        """This study beside a second study of the same data: the edit logs and analyses side by side and the
        edits that make the decisions differ (see :mod:`.compare`). ``other`` is a study or the path of a
        study file (loaded onto this study's data); ``label`` names it (the file name by default)."""
        if label is not None and not isinstance(label, str):
            raise ExplorerError(f"the label must be text, not {type(label).__name__}")
        if not isinstance(other, Study):
            if not isinstance(other, (str, Path)):
                raise ExplorerError(f"compare takes a study or the path of a study file, not {type(other).__name__}")
            label = label or Path(other).name
            other = self.load_other(other)
        return compare_studies(self, other, theirs_label=label or "theirs")

    def adopt(self, edit: Edit, *, origin: str) -> Results:
        """Apply an edit taken from another study, keeping its reason; the ledger records ``origin``
        (e.g. ``"adopted from colleague.study.json"``). Refused, state unchanged, if it does not apply."""
        if not isinstance(origin, str) or not origin.strip():
            raise EditError("an adopted edit needs its origin (where it comes from), as text")
        return self.apply(adopted_copy(edit), origin=origin)

    # ----------------------------------------------------------------- hand-off
    def report(self, path: str | Path, *, title: str | None = None, scenario: str | None = None,
               overwrite: bool = False, compare: "Study | str | Path | None" = None) -> Path:
        """Write a self-contained HTML report (opens offline), atomically; see :mod:`explorer.report`.

        An existing file needs ``overwrite=True``; the data and study files are never written over.
        ``compare``: a colleague's study of the same data (or its study file) to set beside this one
        in a section of the report.
        """
        from ..report import write_report  # lazy: the report may draw charts with altair

        return write_report(self, path, title=title, scenario=scenario, overwrite=overwrite, compare=compare)

    def to_code(self, data: str | Path | None = None, *, path: str | Path | None = None,
                overwrite: bool = False) -> str:
        """Python source that rebuilds this state from the original data (load, then each edit).

        With ``path``, the source is also written there, atomically (an existing file needs
        ``overwrite=True``; the data and study files are never written over).
        """
        from ..report import study_to_code

        code = study_to_code(self, data)
        if path is not None:
            write_text_atomic(path, code, overwrite=overwrite, protect=self.files_read())
        return code

    def __repr__(self) -> str:
        return (
            f"Study(response={self.spec.response!r}, factors={list(self.spec.columns)}, n={self.dataset.n}, "
            f"edits={self._position})"
        )

    def display_scale(self) -> Scale:
        """How the study's numbers are shown everywhere: the readings' decimals and the response's units."""
        return Scale(decimals=self.dataset.reading_decimals(), units=self.spec.units)

    def to_text(self) -> str:
        """A short readable account (``print(study)``): what is analysed, the decision on the unedited data
        and on the current view, the edits in effect with their reasons, moved rows and the searching done."""
        s, ds = self.spec, self.dataset
        units = f" ({s.units})" if s.units else ""
        by = " × ".join(s.factors) + (f", blocks {', '.join(s.blocks)}" if s.blocks else "")
        lines = [f"Study of {s.response}{units} by {by}: {ds.n} usable rows of {ds.source}; {ds.describe_ids()}",
                 f"Unedited data: {self.baseline_decision.sentence()}",
                 f"Current view:  {self.decision.sentence()}"]
        if self.edits:
            lines.append(f"Edits in effect ({len(self.edits)}):")
            lines += [f"  {i}. {e.describe()}: {e.reason or '(no reason given)'}" for i, e in enumerate(self.edits, 1)]
        else:
            lines.append("No edits in effect: the current view is the unedited data.")
        moved = self.moved_rows()
        if moved:
            lines.append("Moved to another level: " + "; ".join(m.describe() for m in moved))
        lines.append(f"Searching so far: {self.disclosure.sentence()}.")
        lines.append("print(study.results) for the tables; study.report('x.html') for the hand-off.")
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.to_text()

    def _repr_html_(self) -> str:
        """The current results with the live disclosure (read from the ledger when shown)."""
        return self.results._repr_html_()


class _LiveDisclosure:
    """The disclosure of a study, read when called; holds the study weakly (results may outlive it)."""

    __slots__ = ("_study",)

    def __init__(self, study: Study) -> None:
        self._study = weakref.ref(study)

    def __call__(self) -> Disclosure | None:
        study = self._study()
        return None if study is None else study.disclosure


def _term_key(spec: ModelSpec) -> tuple[object, ...]:
    return (spec.terms, spec.max_order, spec.interactions)


def _term_text(spec: ModelSpec) -> str:
    """The treatment terms as chosen: listed, or the rule that builds them."""
    if spec.terms is not None:
        return ", ".join(" × ".join(t) for t in spec.terms)
    if spec.max_order is not None:
        return f"interactions of up to {spec.max_order} factors"
    return "all interactions" if spec.interactions else "main effects only"


def _spec_changes(old: ModelSpec, new: ModelSpec) -> list[tuple[str, object, object]]:
    """The specification choices that lead from ``old`` to ``new``, as the ledger records them."""
    out: list[tuple[str, object, object]] = []
    for what, attr in (("response", "response"), ("factors", "factors"), ("blocks", "blocks"), ("alpha", "alpha"),
                       ("overall test", "test"), ("transform", "transform"), ("random factors", "random"),
                       ("subject", "subject"), ("within-subject factors", "within")):
        if getattr(old, attr) != getattr(new, attr):
            out.append((what, getattr(old, attr), getattr(new, attr)))
    if old.nested != new.nested:
        out.append(("nesting", [f"{c} in {' × '.join(p)}" for c, p in old.nested],
                    [f"{c} in {' × '.join(p)}" for c, p in new.nested]))
    if _term_key(old) != _term_key(new) and old.factors == new.factors:
        out.append(("model terms", _term_text(old), _term_text(new)))
    return out or [("model", "unchanged", "rebuilt")]
