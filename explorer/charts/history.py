"""The p-value and R² after every step the user took (edits, undos, redos, resets).

The steps come from the widget's record of what it showed, so the chart also shows
the path of the search: going back and forth is visible, not only the final state.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import altair as alt
import pandas as pd

from .style import CURRENT, GUIDE, WIDTH, finish, shown

R2 = "#5b9a48"

__all__ = ["HistoryStep", "history_chart"]


@dataclass(frozen=True, kw_only=True)
class HistoryStep:
    """One step: what was done and the decision that followed it (``term``, ``test``, p-value)."""

    step: int
    action: str
    pvalue: float | None
    r_squared: float | None
    edits_in_effect: int
    term: str = ""
    test: str = ""
    significant: bool | None = None


def history_chart(steps: Sequence[HistoryStep], alpha: float, *, width: int | str = WIDTH, height: int = 160
                  ) -> alt.TopLevelMixin:
    """p-value (log scale, left axis, with the alpha line) and R² (right axis), one point per step."""
    frame = pd.DataFrame([{
        "step": s.step, "action": s.action, "p": s.pvalue, "r2": s.r_squared, "edits": s.edits_in_effect,
        "decision": f"{s.term} ({s.test})" if s.term else "",
    } for s in steps])
    if frame.empty:
        frame = pd.DataFrame({"step": [], "action": [], "p": [], "r2": [], "edits": [], "decision": []})
    tip = [alt.Tooltip("step:Q"), alt.Tooltip("action:N", title="what was done"),
           alt.Tooltip("edits:Q", title="edits in effect"), alt.Tooltip("decision:N", title="decision on"),
           alt.Tooltip(f"{shown(frame, 'p', 'p')}:N", title="p-value"),
           alt.Tooltip(f"{shown(frame, 'r2', 'share')}:N", title="R²")]
    x = alt.X("step:O", title="step", axis=alt.Axis(labelAngle=0))
    base = alt.Chart(frame).encode(x=x, tooltip=tip)
    pv = base.mark_line(point=True, color=CURRENT).encode(
        y=alt.Y("p:Q", title="p-value (log, left)", scale=alt.Scale(type="log"),
                axis=alt.Axis(titleColor=CURRENT, orient="left")))
    cut = alt.Chart().mark_rule(color=GUIDE, strokeDash=[4, 3]).encode(y=alt.datum(alpha))
    r2 = base.mark_line(point=alt.OverlayMarkDef(shape="square"), color=R2, strokeDash=[2, 2]).encode(
        y=alt.Y("r2:Q", title="R² (right)", scale=alt.Scale(domain=[0, 1]), axis=alt.Axis(titleColor=R2, orient="right")))
    chart = alt.layer(alt.layer(pv, cut), r2).resolve_scale(y="independent").properties(width=width, height=height)
    sub = [f"Blue line: p-value of the decision (its term and test in the hover text; left axis), red dashes: "
           f"alpha = {alpha:g}; green dotted line: R² (right axis).",
           "Every step counts, undone ones too."]
    return finish(chart, "p-value and R² after each step", sub)
