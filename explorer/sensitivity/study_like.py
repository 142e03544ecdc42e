"""What a sensitivity scan reads from a study, as a protocol.

The scans read a study's dataset, model specification, current view and results, add
the number of alternatives they examined to its disclosure count, and (the factorial
flip finder) edit a private copy made with ``from_dataset``. They never import the
study package above them: :class:`explorer.study.Study` satisfies this protocol
structurally, as does any object with the same members.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Protocol

from ..engine.dataset import Dataset, RowId
from ..engine.disclosure import Disclosure
from ..engine.edits import Edit
from ..engine.results import Results
from ..engine.spec import ModelSpec
from ..engine.view import DataView

__all__ = ["StudyLike"]


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

    def record_search(self, what: str, count: int) -> None: ...

    @classmethod
    def from_dataset(cls, dataset: Dataset, spec: ModelSpec) -> StudyLike: ...

    def apply(self, edit: Edit) -> Results: ...

    def drop(self, rows: RowId | Iterable[RowId], reason: str = "") -> Results: ...
