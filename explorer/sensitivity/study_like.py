"""What a sensitivity scan reads from a study, as a protocol.

The scans read a study's dataset, model specification, current view, results and
decision (the term they score and its verdict), add
the number of alternatives they examined to its disclosure count, and (the factorial
flip finder) edit a private copy made with ``from_dataset``. They never import the
study package above them: :class:`explorer.study.Study` satisfies this protocol
structurally, as does any object with the same members.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from typing import Protocol

from ..engine.dataset import Dataset, RowId
from ..engine.disclosure import Disclosure
from ..engine.edits import Edit
from ..engine.results import Results
from ..engine.spec import ModelSpec
from ..engine.view import DataView

__all__ = ["DecisionLike", "StudyLike", "VerdictLike"]


class VerdictLike(Protocol):
    """What a scan reads of the verdict on one term (:class:`explorer.study.decision.TermVerdict`)."""

    @property
    def term(self) -> str: ...

    @property
    def statistic(self) -> float | None: ...

    @property
    def pvalue(self) -> float | None: ...

    @property
    def significant(self) -> bool | None: ...


class DecisionLike(Protocol):
    """What a scan reads of the study's decision (:class:`explorer.study.decision.Decision`): the term
    it is about and the verdict on each treatment term."""

    @property
    def term(self) -> str: ...

    @property
    def terms(self) -> Sequence[VerdictLike]: ...

    def verdict_for(self, term: str) -> VerdictLike: ...


class StudyLike(Protocol):
    """The members of a study that the sensitivity scans use."""

    @property
    def dataset(self) -> Dataset: ...

    @property
    def spec(self) -> ModelSpec: ...

    @property
    def view(self) -> DataView: ...

    @property
    def results(self) -> Results: ...

    @property
    def edits(self) -> tuple[Edit, ...]: ...

    @property
    def disclosure(self) -> Disclosure: ...

    @property
    def decision(self) -> DecisionLike: ...

    def record_search(self, what: str, count: int) -> None: ...

    @classmethod
    def from_dataset(cls, dataset: Dataset, spec: ModelSpec) -> StudyLike: ...

    def apply(self, edit: Edit) -> Results: ...

    def drop(self, rows: RowId | Iterable[RowId], reason: str = "") -> Results: ...
