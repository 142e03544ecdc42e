"""Interaction chart: cell means of two factors with intervals, one line per level of the second.

Parallel lines mean the effect of the first factor is the same at every level of the
second (no interaction); lines that converge, diverge or cross mean it depends on the
level (a crossing is a reversal). The means are the model's least-squares cell means of
:func:`explorer.inference.simple_effects.simple_effects` (averaged over any other factors and
blocks), the intervals their confidence intervals from the full model's residual mean
square, and the subtitle gives the interaction test and the simple-effect verdicts.

References
----------
Montgomery, D. C. Design and Analysis of Experiments, 9th ed., sec. 5.3 (interaction
graphs).
"""

from __future__ import annotations

import altair as alt
import pandas as pd

from explorer.inference.simple_effects import SimpleEffects

from ..formatting import p_equals
from .style import HEIGHT, WIDTH, finish

__all__ = ["interaction_chart", "interaction_frame"]


def interaction_frame(effects: SimpleEffects) -> pd.DataFrame:
    """The chart's data: one line per cell with its level names, mean, interval and count."""
    cells = effects.cells
    pct = f"{effects.confidence:.0%}"
    return pd.DataFrame({
        "x": cells[effects.factor].astype(str), "line": cells[effects.within].astype(str),
        "mean": cells["mean (least squares)"].astype(float), "low": cells[f"{pct} CI low"].astype(float),
        "high": cells[f"{pct} CI high"].astype(float), "n": cells["n"].astype(int),
    })


def interaction_chart(effects: SimpleEffects, *, width: int = WIDTH, height: int = HEIGHT) -> alt.TopLevelMixin:
    """Cell means of ``effects.factor`` (x) with one coloured line per level of ``effects.within``."""
    frame = interaction_frame(effects)
    pct = f"{effects.confidence:.0%}"
    x_order = list(dict.fromkeys(frame["x"]))
    lines = list(dict.fromkeys(frame["line"]))
    # Each line is shifted a little sideways so that intervals at one level do not hide each other.
    step = min(0.12, 0.6 / max(len(lines), 1))
    shift = {lv: (j - (len(lines) - 1) / 2) * step for j, lv in enumerate(lines)}
    frame["position"] = [x_order.index(a) + shift[b] for a, b in zip(frame["x"], frame["line"])]
    names = "[" + ", ".join(_js_string(v) for v in x_order) + "]"
    x = alt.X("position:Q", title=effects.factor, scale=alt.Scale(domain=[-0.5, len(x_order) - 0.5], nice=False),
              axis=alt.Axis(values=list(range(len(x_order))), labelExpr=f"{names}[datum.value]", grid=False))
    colour = alt.Color("line:N", title=effects.within, sort=lines)
    tip = [alt.Tooltip("x:N", title=effects.factor), alt.Tooltip("line:N", title=effects.within),
           alt.Tooltip("mean:Q", title="mean (least squares)", format=".4g"),
           alt.Tooltip("low:Q", title=f"{pct} interval low", format=".4g"),
           alt.Tooltip("high:Q", title=f"{pct} interval high", format=".4g"), alt.Tooltip("n:Q", title="rows")]
    base = alt.Chart(frame).encode(x=x, color=colour, tooltip=tip)
    y = alt.Y("mean:Q", title="cell mean", scale=alt.Scale(zero=False))
    connect = base.mark_line(strokeWidth=2).encode(y=y, detail="line:N", order="position:Q")
    bars = base.mark_rule(strokeWidth=2).encode(y="low:Q", y2="high:Q")
    points = base.mark_point(filled=True, size=70, opacity=1).encode(y=y)
    chart = alt.layer(connect, bars, points).properties(width=width, height=height)
    sub = [f"Least-squares cell means with {pct} intervals (full model's residual mean square); parallel lines mean "
           "no interaction, crossing lines a reversal."]
    if effects.interaction is not None:
        sub.append(f"{effects.interaction}: {p_equals(effects.interaction_pvalue)}.")
    sub.append(f"Simple effects of {effects.factor} ({effects.adjustment} adjustment over {effects.family_size} tests):")
    sub.extend(effects.verdicts())
    return finish(chart, f"{effects.factor} by {effects.within}: cell means", sub)


def _js_string(text: str) -> str:
    """A level name as a quoted literal for a Vega expression (JSON string rules)."""
    import json

    return json.dumps(str(text))
