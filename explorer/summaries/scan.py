"""Which level or cell, if set aside, flips the decision; which two levels, if pooled, do.

At scale the question "does the conclusion hold without that day, that lot, that
line?" is asked of whole levels and cells, not single readings. Each alternative only
removes or pools atoms of the current view, so it is refitted exactly from the cell
summaries already at hand (no engine query): O(cells x parameters^2) per alternative.
Alternatives that flip the decision at alpha are listed first. The count of
alternatives is recorded in the study's disclosure.

References
----------
Cook, R. D. and Weisberg, S. (1982). Residuals and Influence in Regression, ch. 3
(deleting groups of cases).
Chan, T. F., Golub, G. H. and LeVeque, R. J. (1983). The American Statistician 37(3),
242-247 (pooling group statistics).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from itertools import combinations
from typing import Any

import pandas as pd

from ..engine.edits import MergeLevels
from ..engine.errors import DesignError
from ..engine.spec import alpha_or
from ..engine.tables import html_table
from ..formatting import p_equals, result_frame
from ..inference.omnibus import overall_test
from ..rendering import html_repr
from .view import Condition, SummaryView

__all__ = ["SetAsideScan", "set_aside_scan"]


@dataclass(frozen=True, kw_only=True, eq=False)
class SetAsideScan:
    """The decision on ``term`` with each level or cell set aside (and each pair of levels pooled).

    ``table`` has one line per alternative: what changes, n, F, p-value, decision and
    whether it differs from the current one (``None`` where the model cannot be fitted,
    with the reason in ``note``).
    """

    term: str
    alpha: float
    current_pvalue: float | None
    table: pd.DataFrame
    examined: int
    test: str = "classic"

    @property
    def flips(self) -> pd.DataFrame:
        return self.table[self.table["flips"] == True]  # noqa: E712  (a nullable column: NA is not a flip)

    def to_frame(self) -> pd.DataFrame:
        return result_frame(self.table.copy())

    @html_repr
    def _repr_html_(self) -> str:
        caption = (f"Set-aside scan of {self.term} at alpha {self.alpha:g}: {len(self.flips)} of "
                   f"{self.examined} alternatives flip the decision (now {p_equals(self.current_pvalue)})")
        return html_table(self.table, caption)


def _decision(p: float | None, alpha: float) -> str | None:
    if p is None or not math.isfinite(p):  # never a verdict from NaN
        return None
    return "differences detected" if p < alpha else "no differences detected"


def set_aside_scan(
    study: Any, *, term: str | None = None, alpha: float | None = None, cells: bool = True, merges: bool = True,
    record: bool = True,
) -> SetAsideScan:
    """Refit the current view of a :class:`~explorer.summaries.SummaryStudy` with each level
    of each factor and block (and, with ``cells``, each observed cell) set aside, and with
    ``merges`` each pair of levels of each treatment factor pooled.

    ``term`` is the term whose decision is scored (default the study's decision's term),
    under the study's overall test (Welch and Brown-Forsythe from each alternative's
    level summaries, exactly as the decision reads them)."""
    view: SummaryView = study.summary_view
    spec = study.spec
    a = alpha_or(alpha, spec.alpha)
    now = study.results
    t = term or study.decision.term
    p_now = study.decision.verdict_for(t).pvalue
    test = spec.test
    alts: list[tuple[str, SummaryView]] = []
    set_aside = set(view.set_aside)
    for f in spec.columns:
        for lv in view.levels[f]:
            cond = ((f, lv),)
            if cond not in set_aside:
                alts.append((f"set aside {f} = {lv}", view.replace(set_aside=view.set_aside + (cond,))))
    if cells and len(spec.columns) > 1 and now.cells is not None:
        for labels in now.cells.labels:
            cell: Condition = tuple(zip(spec.columns, labels))
            what = "set aside cell " + ", ".join(f"{f} = {lv}" for f, lv in cell)
            alts.append((what, view.replace(set_aside=view.set_aside + (cell,))))
    if merges:
        busy = {(f, lv) for c in view.set_aside for f, lv in c}
        for f in spec.factors:
            for x, y in combinations(view.levels[f], 2):
                if (f, x) in busy or (f, y) in busy:
                    continue
                merged: SummaryView = MergeLevels(factor=f, levels=(x, y), into=f"{x}+{y}").apply(
                    view, study.summary_data)  # type: ignore[arg-type,assignment]
                alts.append((f"pool {f} levels {x} and {y}", merged))
    rows = []
    for what, alt in alts:
        try:
            r = study._analyze(alt, with_sample=False)
            row = r.partition.row(t) if t in [x.source for x in r.partition.rows] else None
            p = row.pvalue if row is not None else None
            F = row.statistic if row is not None else None
            note = "" if row is not None else f"term {t!r} is not in this model"
            if test != "classic" and row is not None:  # one factor: the study's own test on the alternative
                out = overall_test(r, test)
                p, F = out.pvalue, out.statistic
                note = " ".join(out.notes) if p is None else ""
            n = r.n_used
        except DesignError as exc:
            p = F = n = None
            note = str(exc)
        dec = _decision(p, a)
        rows.append({"change": what, "n": n, "F": F, "p-value": p, "decision": dec,
                     "flips": None if dec is None or p_now is None else dec != _decision(p_now, a), "note": note})
    table = pd.DataFrame(rows, columns=["change", "n", "F", "p-value", "decision", "flips", "note"])
    table = table.astype({"n": "Int64", "F": "Float64", "p-value": "Float64", "flips": "boolean"})
    order = table["flips"].fillna(False).astype(bool).map({True: 0, False: 1})
    table = table.assign(_o=order).sort_values(["_o", "p-value"], kind="stable").drop(columns="_o").reset_index(drop=True)
    if record:
        study.record_search("set-aside scan", len(alts))
    return SetAsideScan(term=t, alpha=a, current_pvalue=p_now, table=table, examined=len(alts), test=test)
