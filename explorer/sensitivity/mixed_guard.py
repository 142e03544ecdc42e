"""The row-level scans read F against the residual; models with random terms need their own."""

from __future__ import annotations

from ..engine.errors import ExplorerError
from .study_like import StudyLike

__all__ = ["refuse_mixed"]


def refuse_mixed(study: StudyLike, scan: str) -> None:
    """Raise for a model with random, nested or subject terms, naming the scans that fit it."""
    spec = getattr(study, "spec", None)
    if spec is not None and getattr(spec, "is_mixed", False):
        raise ExplorerError(
            f"the {scan} tests every term against the residual, which is the wrong error term for terms of a model "
            "with random, nested or subject factors; use study.unit_deletion(column) (each subject, operator, part "
            "or other unit left out in turn, refitted with the right error terms) or study.row_deletion()"
        )
