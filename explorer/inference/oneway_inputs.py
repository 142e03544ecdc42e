"""Guards shared by the one-way battery functions: right kind of results, all rows or a sample."""

from __future__ import annotations

from typing import TYPE_CHECKING

from ..engine.errors import DesignError

if TYPE_CHECKING:
    from ..engine.results import Results

__all__ = ["require_oneway", "row_sample_notes"]


def require_oneway(results: Results, what: str) -> None:
    """Raise :class:`DesignError` unless ``results`` come from a one-way model (one factor, no blocks)."""
    if not results.spec.is_oneway:
        raise DesignError(
            f"{what} needs a one-way analysis (one factor, no blocks); this study has factors "
            f"{list(results.spec.factors)} and blocks {list(results.spec.blocks)}. Use the least-squares "
            "means comparisons of the factorial results instead."
        )


def row_sample_notes(results: Results) -> tuple[str, ...]:
    """A note when the per-row fit holds only a sample of the kept rows (summary-backed studies)."""
    rows = len(results.fit.y)
    if rows != results.n_used:
        return (f"Computed on a sample of {rows} of the {results.n_used} kept rows.",)
    return ()
