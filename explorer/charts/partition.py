"""The sums-of-squares partition of the unedited data beside the current one, as stacked bars."""

from __future__ import annotations

import altair as alt
import pandas as pd

from explorer.engine import AnovaTable, Results

from .style import BASELINE, HEIGHT, WIDTH, finish, shown

__all__ = ["BASELINE_LABEL", "CURRENT_LABEL", "partition_chart", "partition_frame"]

BASELINE_LABEL = "unedited data"
CURRENT_LABEL = "current view"
_TERM_COLOURS = ["#2c6e91", "#e07b1a", "#5b9a48", "#8e5ba8", "#b8860b", "#3d8c8c"]


def partition_frame(table: AnovaTable, label: str) -> pd.DataFrame:
    """The partition's rows (without totals) as a tidy frame, undefined values as None."""
    rows = [r for r in table.rows if not r.source.startswith("total")]
    return pd.DataFrame({
        "view": label,
        "source": [r.source for r in rows],
        "order": range(len(rows)),
        "df": [r.df for r in rows],
        "sum_sq": [float(r.sum_sq) for r in rows],
        "mean_sq": [None if r.mean_sq is None else float(r.mean_sq) for r in rows],
        "F": [None if r.statistic is None else float(r.statistic) for r in rows],
        "p": [None if r.pvalue is None else float(r.pvalue) for r in rows],
    })


def _ss_title(results: Results) -> str:
    units = getattr(results.spec, "units", "") or ""
    return f"sum of squares ({units}²)" if units else "sum of squares"


def partition_chart(baseline: Results, current: Results, *, width: int = WIDTH, height: int = HEIGHT // 2
                    ) -> alt.TopLevelMixin:
    """Stacked bars of the sums of squares, unedited data above the current view; F and p in the tooltip."""
    frame = pd.concat([partition_frame(baseline.partition, BASELINE_LABEL),
                       partition_frame(current.partition, CURRENT_LABEL)], ignore_index=True)
    sources = list(dict.fromkeys(frame["source"]))
    terms = [s for s in sources if s != "residual"]
    colours = _TERM_COLOURS[: len(terms)] + [BASELINE]
    bars = alt.Chart(frame).mark_bar(stroke="white", strokeWidth=1).encode(
        y=alt.Y("view:N", title=None, sort=[BASELINE_LABEL, CURRENT_LABEL]),
        x=alt.X("sum_sq:Q", title=_ss_title(current), stack="zero"),
        color=alt.Color("source:N", title="source", scale=alt.Scale(domain=terms + ["residual"], range=colours)),
        order=alt.Order("order:Q"),
        tooltip=[alt.Tooltip("view:N", title="data"), alt.Tooltip("source:N"), alt.Tooltip("df:Q"),
                 alt.Tooltip(f"{shown(frame, 'sum_sq', 'ss')}:N", title="sum of squares"),
                 alt.Tooltip(f"{shown(frame, 'mean_sq', 'ss')}:N", title="mean square"),
                 alt.Tooltip(f"{shown(frame, 'F', 'stat')}:N", title="F"),
                 alt.Tooltip(f"{shown(frame, 'p', 'p')}:N", title="p-value")],
    ).properties(width=width, height=height)
    sub = "Each bar is the corrected total; the coloured share is what the factor explains."
    return finish(bars, "Partition: unedited data and current view", sub)
