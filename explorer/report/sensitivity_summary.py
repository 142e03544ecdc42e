"""The sensitivity summary of a hand-off, composed from the kit's sensitivity scans.

For a one-factor study: the single rows whose removal flips the decision (case-deletion
scan), the fewest rows whose removal flips it (flip finder), the merges of two levels and
the moves of one row that flip it (regroup scan), and the share of a robustness sweep's
specifications that reach the current decision, with its specification curve.

The scans run with ``record=False``: a report describes the fragility of the decision
the analyst reached, it does not search for another one, so writing a report does not
add to ``study.disclosure``; the number of alternatives the summary examined is stated in
the summary itself.

References
----------
Cook, R. D. and Weisberg, S. (1982). Residuals and Influence in Regression, ch. 3.
Steegen, S. et al. (2016). Perspectives on Psychological Science 11(5), 702-712.
Simonsohn, U., Simmons, J. P. and Nelson, L. D. (2020). Nature Human Behaviour 4, 1208-1214.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import pandas as pd

from ..engine.errors import DesignError
from ..engine.tables import html_table
from ..formatting import p_equals, result_frame
from ..rendering import html_repr

if TYPE_CHECKING:
    from ..study.study import Study

__all__ = ["SensitivitySummary", "sensitivity_summary", "curve_html"]


def _ids(rows: object) -> str:
    items = [str(r.item() if hasattr(r, "item") else r) for r in rows]  # type: ignore[attr-defined]
    return ", ".join(items) if items else "none"


@dataclass(frozen=True, kw_only=True, eq=False)
class SensitivitySummary:
    """Headline fragility figures of the current decision (see the module docstring).

    A scan that does not apply to the study's design leaves its fields ``None`` and says
    why in ``notes``.
    """

    decision: str
    alpha: float
    single_flip_rows: tuple | None
    smallest_flip_rows: tuple | None
    smallest_flip_found: bool
    smallest_flip_method: str
    merge_flips: tuple[tuple[str, str], ...] | None
    merges_examined: int
    move_flips: int
    moves_examined: int
    share_agreeing: float | None
    n_specifications: int
    curve: pd.DataFrame | None
    strongest_choice: dict | None
    examined: int
    notes: tuple[str, ...] = field(default=())
    deletion: Any = None  # the case-deletion scan itself, for its chart
    sweep: Any = None  # the robustness sweep itself, for the specification curve

    def lines(self) -> list[tuple[str, str]]:
        """(question, answer) pairs, the summary's rows (scans that did not run are left out)."""
        out = [("current decision", self.decision)]
        if self.single_flip_rows is not None:
            out.append(("single rows whose removal flips it", _ids(self.single_flip_rows)))
        if self.smallest_flip_rows is not None:
            smallest = (f"{len(self.smallest_flip_rows)} row(s): {_ids(self.smallest_flip_rows)} "
                        f"({self.smallest_flip_method} search)" if self.smallest_flip_found
                        else "no set of rows within the search's reach flips it")
            out.append(("fewest rows whose removal flips it", smallest))
        if self.merge_flips is not None:
            merges = ", ".join(f"{a} + {b}" for a, b in self.merge_flips) or "none"
            out.append((f"merges of two levels that flip it (of {self.merges_examined})", merges))
            out.append(("moves of one row to another level that flip it", f"{self.move_flips} of {self.moves_examined}"))
        if self.curve is not None:
            share = "—" if self.share_agreeing is None else f"{self.share_agreeing:.0%} of {self.n_specifications}"
            out.append(("robustness sweep: specifications reaching the current decision", share))
        if self.strongest_choice:
            c = self.strongest_choice
            out.append(("the single analysis choice that moves p most",
                        f"{c['choice']} = {c['option']} ({p_equals(c['p-value'])})"))
        return out

    def to_frame(self) -> pd.DataFrame:
        return result_frame(self.lines(), columns=["question", "answer"])

    def to_text(self) -> str:
        width = max(len(q) for q, _ in self.lines())
        body = [f"{q.ljust(width)}  {a}" for q, a in self.lines()]
        return "\n".join(body + list(self.notes))

    @html_repr
    def _repr_html_(self) -> str:
        return html_table(self.to_frame(), "Sensitivity of the current decision", self.notes)


def _try(scan: Callable[[], Any], notes: list[str]) -> Any:
    """Run one scan; a design it does not cover gives ``None`` and a note."""
    try:
        return scan()
    except DesignError as exc:
        why = str(exc).split(". Make a")[0] + "."
        notes.append(why[:1].upper() + why[1:])
        return None


def sensitivity_summary(study: "Study") -> SensitivitySummary:
    """Run the scans on ``study`` (unchanged, nothing recorded) and summarise them."""
    from ..sensitivity.case_deletion import case_deletion_scan
    from ..sensitivity.flip import flip_finder
    from ..sensitivity.regroup import regroup_scan
    from ..sensitivity.sweep import robustness_sweep

    notes: list[str] = []
    deletion = _try(lambda: case_deletion_scan(study, record=False), notes)
    flip = _try(lambda: flip_finder(study, record=False), notes)
    regroup = _try(lambda: regroup_scan(study, record=False), notes)
    sweep = _try(lambda: robustness_sweep(study, record=False), notes)
    if deletion is None and flip is None and regroup is None and sweep is None:
        raise DesignError(notes[0] if notes else "no sensitivity scan applies to this study")
    examined = ((int(deletion.row_ids.size) if deletion else 0) + (int(flip.sets_examined) if flip else 0)
                + (len(regroup.merge_levels) + int(regroup.move_rows.size) if regroup else 0)
                + (int(sweep.n_specifications) if sweep else 0))
    notes.insert(0, f"These scans examined {examined} alternative analyses of the current state to describe its "
                    "fragility; they are not added to the study's count of alternatives the analyst examined.")
    if sweep is not None:
        notes.extend(sweep.notes)
    curve = None if sweep is None else sweep.table[
        ["rank", "outlier rule", "test", "transform", "merges", "p-value", "significant"]].copy()
    return SensitivitySummary(
        decision=study.decision.sentence(), alpha=study.spec.alpha,
        single_flip_rows=None if deletion is None else tuple(deletion.flip_rows),
        smallest_flip_rows=None if flip is None else tuple(flip.rows),
        smallest_flip_found=bool(flip is not None and flip.found),
        smallest_flip_method="" if flip is None else flip.method,
        merge_flips=None if regroup is None else tuple(regroup.merge_flips),
        merges_examined=0 if regroup is None else len(regroup.merge_levels),
        move_flips=0 if regroup is None else len(regroup.move_flips),
        moves_examined=0 if regroup is None else int(regroup.move_rows.size),
        share_agreeing=None if sweep is None else sweep.share_agreeing,
        n_specifications=0 if sweep is None else int(sweep.n_specifications),
        curve=curve, strongest_choice=None if sweep is None else sweep.strongest_choice, deletion=deletion, sweep=sweep,
        examined=examined, notes=tuple(dict.fromkeys(notes)),
    )


def curve_html(summary: SensitivitySummary) -> str:
    """The specification curve as a table (the chart sits beside it in the report); '' without a sweep."""
    if summary.curve is None:
        return ""
    shown = summary.curve.assign(significant=["yes" if v else "no" for v in summary.curve["significant"]])
    return html_table(shown, f"Specification curve: {summary.n_specifications} specifications ranked by p-value")
