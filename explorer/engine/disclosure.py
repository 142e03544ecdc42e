"""How much searching stands behind a state: the counts every surface shows beside a result.

A plain value, so that sensitivity results can carry the count they were computed
under without importing the study that keeps it.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Disclosure"]


@dataclass(frozen=True)
class Disclosure:
    """How much searching stands behind the current state.

    ``edits_made`` counts every edit ever applied (undone ones too); ``specifications``
    counts alternative analyses computed by sensitivity tools (sweeps, scans).
    """

    edits_in_effect: int
    edits_made: int
    undos: int
    specifications: int

    def sentence(self) -> str:
        return (
            f"{self.edits_in_effect} edit(s) in effect; {self.edits_made} made in all ({self.undos} undone); "
            f"{self.specifications} alternative analyses examined"
        )
