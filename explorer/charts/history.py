"""The p-value and R² after every step the user took (edits, undos, redos, resets).

The steps come from the widget's record of what it showed, so the chart also shows
the path of the search: going back and forth is visible, not only the final state.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import altair as alt
import pandas as pd

from .style import CURRENT, GUIDE, WIDTH, finish

__all__ = ["HistoryStep", "history_chart"]


@dataclass(frozen=True, kw_only=True)
class HistoryStep:
    """One step: what was done and the decision statistics that followed it."""

    step: int
    action: str
    pvalue: float | None
    r_squared: float | None
    edits_in_effect: int


def history_chart(steps: Sequence[HistoryStep], alpha: float, *, width: int = WIDTH, height: int = 110
                  ) -> alt.TopLevelMixin:
    """p-value (log scale, alpha line) above R², one point per step."""
    frame = pd.DataFrame([{
        "step": s.step, "action": s.action, "p": s.pvalue, "r2": s.r_squared, "edits": s.edits_in_effect,
    } for s in steps])
    if frame.empty:
        frame = pd.DataFrame({"step": [], "action": [], "p": [], "r2": [], "edits": []})
    tip = [alt.Tooltip("step:Q"), alt.Tooltip("action:N", title="what was done"),
           alt.Tooltip("edits:Q", title="edits in effect"), alt.Tooltip("p:Q", title="p-value", format=".4g"),
           alt.Tooltip("r2:Q", title="R²", format=".4f")]
    x = alt.X("step:O", title="step", axis=alt.Axis(labelAngle=0))
    base = alt.Chart(frame).encode(x=x, tooltip=tip)
    pv = base.mark_line(point=True, color=CURRENT).encode(
        y=alt.Y("p:Q", title="p-value (log)", scale=alt.Scale(type="log")))
    cut = alt.Chart().mark_rule(color=GUIDE, strokeDash=[4, 3]).encode(y=alt.datum(alpha))
    top = alt.layer(pv, cut).properties(width=width, height=height)
    r2 = base.mark_line(point=True, color="#5b9a48").encode(
        y=alt.Y("r2:Q", title="R²", scale=alt.Scale(domain=[0, 1]))).properties(width=width, height=height * 0.7)
    sub = f"Dashed line: alpha = {alpha:g}. Every step counts, undone ones too."
    return finish(alt.vconcat(top, r2, spacing=8), "p-value and R² after each step", sub)
