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
    counts alternative analyses examined: each specification choice (test, comparisons,
    alpha, response, factors, transform, terms) and each case a sensitivity tool computed
    (sweeps, scans). ``note`` says what a reader must know about the counts (for instance
    that they come from an older study file that kept less). Computed by the study's
    ledger (:class:`explorer.study.ledger.Ledger`).
    """

    edits_in_effect: int
    edits_made: int
    undos: int
    specifications: int
    note: str = ""

    def sentence(self) -> str:
        return (
            f"{self.edits_in_effect} edit(s) in effect; {self.edits_made} made in all ({self.undos} undone); "
            f"{self.specifications} alternative analyses examined" + (f" ({self.note})" if self.note else "")
        )

    def sentence_then(self) -> str:
        """The sentence as a result computed under these counts shows it: the count of that moment, said so
        (the study's own count, ``study.disclosure``, is read live and may have grown since)."""
        return f"Searching when this was computed: {self.sentence()}"
