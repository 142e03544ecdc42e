"""What a row-level scan scores, and by which route: the one dispatch point of the scans.

Every scan that re-scores the study's decision on many alternatives (case deletion, the
flip finder, the regroup scan, the robustness sweep) starts the same way: refuse models
whose terms are tested against other error terms (:mod:`.mixed_guard`), pick the term
it scores (the study's decision's term unless one is named) with its current verdict,
and choose the route by design:

* one factor, no blocks, no covariates (``spec.is_oneway``): the group sufficient
  statistics of the kept rows (:class:`~.alternatives.OnewayInput`), so that every
  alternative is a closed-form update, under any of the one-factor tests;
* any other fixed-effects design: the cell-level route of each scan (``oneway is None``),
  which refits cell summaries with the classic F test of the term.

:func:`scan_target` is that start; the scans branch on ``target.oneway`` only.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..engine.errors import ExplorerError, closest_names
from .alternatives import OnewayInput, oneway_input
from .mixed_guard import refuse_mixed
from .study_like import StudyLike, VerdictLike

__all__ = ["ScanTarget", "scan_target", "scored_term"]


@dataclass(frozen=True, kw_only=True, eq=False)
class ScanTarget:
    """The term a scan scores, its verdict on the current view and the route.

    ``oneway`` holds the group statistics of a one-factor study; ``None`` sends the
    scan down its cell-level route (several factors, blocks or covariates).
    """

    term: str
    verdict: VerdictLike
    oneway: OnewayInput | None


def scored_term(study: StudyLike, term: str | None) -> tuple[str, VerdictLike]:
    """The term a scan scores (``term``, else the one the study's decision is about) and its verdict.

    Raises :class:`ExplorerError` naming the treatment terms when ``term`` is not one.
    """
    decision = study.decision
    name = decision.term if term is None else str(term)
    try:
        return name, decision.verdict_for(name)
    except KeyError:
        names = [t.term for t in decision.terms]
        near = closest_names(name, names)
        hint = f" Did you mean {near[0]!r}?" if near else ""
        raise ExplorerError(f"{name!r} is not a treatment term of this study; terms: {names}.{hint}") from None


def scan_target(study: StudyLike, scan: str, term: str | None = None) -> ScanTarget:
    """Refuse models with random terms, pick the scored term and choose the route of ``scan``.

    Parameters
    ----------
    study : the study the scan reads (never edited).
    scan : the scan's name as the messages say it ("case-deletion scan", "flip finder", ...).
    term : the term to score; ``None`` for the term of the study's decision.

    Returns
    -------
    ScanTarget
        The term, its verdict and, for a one-factor study, its group statistics.
    """
    refuse_mixed(study, scan)
    name, verdict = scored_term(study, term)
    oneway = oneway_input(study, f"the {scan}") if study.spec.is_oneway else None
    return ScanTarget(term=name, verdict=verdict, oneway=oneway)
