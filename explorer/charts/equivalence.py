"""Equivalence: each difference's 1 - 2 alpha interval drawn against the user's margin."""

from __future__ import annotations

from typing import Any

import altair as alt
import pandas as pd

from .style import GUIDE, MEAN, WIDTH, finish

__all__ = ["equivalence_chart", "equivalence_frame"]


def equivalence_frame(table: Any) -> pd.DataFrame:
    """One row per pair: difference, interval ends, whether equivalence is shown."""
    return pd.DataFrame({
        "pair": [f"{a} − {b}" for a, b in zip(table.first, table.second)],
        "difference": [float(x) for x in table.difference],
        "low": [float(x) for x in table.ci_low], "high": [float(x) for x in table.ci_high],
        "p": [float(x) for x in table.pvalue],
        "shown": ["equivalent" if e else "not shown equivalent" for e in table.equivalent],
    })


def equivalence_chart(table: Any, *, width: int = WIDTH) -> alt.TopLevelMixin:
    """Intervals of the differences (rows) with the margin as two dashed lines and zero as a thin one."""
    frame = equivalence_frame(table)
    lo, hi = float(table.low), float(table.high)
    span = [min(lo, float(frame["low"].min())), max(hi, float(frame["high"].max()))]
    pad = 0.08 * (span[1] - span[0] or 1.0)
    x = alt.X("difference:Q", title="difference of means (response units)",
              scale=alt.Scale(domain=[span[0] - pad, span[1] + pad], nice=False))
    y = alt.Y("pair:N", title=None, sort=list(frame["pair"]))
    colour = alt.Color("shown:N", title=None, scale=alt.Scale(domain=["equivalent", "not shown equivalent"],
                                                             range=["#2c6e91", "#c0392b"]))
    tip = [alt.Tooltip("pair:N"), alt.Tooltip("difference:Q", format=".6g"), alt.Tooltip("low:Q", format=".6g"),
           alt.Tooltip("high:Q", format=".6g"), alt.Tooltip("p:Q", title="p-value (TOST)", format=".4g")]
    base = alt.Chart(frame)
    rules = base.mark_rule(strokeWidth=3).encode(x=alt.X("low:Q"), x2="high:Q", y=y, color=colour, tooltip=tip)
    dots = base.mark_point(filled=True, size=60, color=MEAN).encode(x=x, y=y, tooltip=tip)
    margins = alt.Chart(pd.DataFrame({"at": [lo, hi]})).mark_rule(strokeDash=[6, 4], color=GUIDE).encode(x="at:Q")
    zero = alt.Chart(pd.DataFrame({"at": [0.0]})).mark_rule(color="#888", strokeWidth=0.8).encode(x="at:Q")
    chart = (margins + zero + rules + dots).properties(width=width, height=max(60, 28 * len(frame)))
    pct = f"{1 - 2 * table.alpha:.0%}"
    sub = [f"Bars: {pct} intervals of each difference; dashed lines: the margin you gave "
           f"({lo:g}, {hi:g}).", "Equivalence is shown when a bar lies wholly between the dashed lines."]
    return finish(chart, "Equivalence against your margin", sub)
