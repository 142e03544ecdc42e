"""Shared look of the charts: sizes, fonts and the few colours the kit uses.

One place for presentation constants keeps every builder consistent and lets a report
or app reuse them. Colours are chosen to stay apart for common colour-vision deficiencies
(blue against orange), and the state of a row is carried by shape as well as colour.
"""

from __future__ import annotations

from typing import Any

import altair as alt

__all__ = ["BASELINE", "CURRENT", "HEIGHT", "IN_ANALYSIS", "KEPT", "LEFT_OUT", "LEFT_OUT_STATE", "MEAN", "MOVED",
           "MOVED_STATE", "PICKED", "STATE_DOMAIN", "STATE_SCALE", "WIDTH", "finish", "id_labels",
           "response_title", "shown", "split_subtitle", "GUIDE"]

WIDTH = 380
HEIGHT = 240
KEPT = "#2c6e91"       # steel blue: rows in the analysis
LEFT_OUT = "#a0a0a0"   # light grey: rows left out (still drawn)
MOVED = "#8e3fa0"      # purple triangle: rows moved to another level
PICKED = "#e07b1a"     # orange ring: rows picked for the next action
MEAN = "#1d1d1d"       # level mean and its interval
BASELINE = "#8c8c8c"
CURRENT = "#2c6e91"
GUIDE = "#c0392b"      # reference lines (zero, yardsticks)

IN_ANALYSIS, MOVED_STATE, LEFT_OUT_STATE = "in analysis", "moved to another level", "left out"
STATE_DOMAIN = [IN_ANALYSIS, MOVED_STATE, LEFT_OUT_STATE]
STATE_SCALE: dict[str, Any] = {
    "color": alt.Scale(domain=STATE_DOMAIN, range=[KEPT, MOVED, LEFT_OUT]),
    "shape": alt.Scale(domain=STATE_DOMAIN, range=["circle", "triangle-up", "diamond"]),
}


def finish(chart: alt.TopLevelMixin, title: str, subtitle: str | list[str] | None = None) -> alt.TopLevelMixin:
    """Attach a title (and an optional subtitle line) and the common font sizes."""
    t = alt.TitleParams(text=title, subtitle=subtitle or "", anchor="start", fontSize=14, subtitleFontSize=11,
                        subtitleColor="#555")
    return chart.properties(title=t, config=CONFIG)  # one copy of the chart, not one per setting


#: Axis, legend and frame settings shared by every chart.
CONFIG = alt.Config(
    axis=alt.AxisConfig(labelFontSize=11, titleFontSize=12, grid=True, gridColor="#eeeeee"),
    legend=alt.LegendConfig(labelFontSize=11, titleFontSize=11, orient="bottom"),
    view=alt.ViewConfig(stroke="#dddddd"),
)


#: Most rows a chart names with a text label (the largest past the stated cut-off).
MAX_LABELS = 8


def id_labels(frame: Any, past: Any, score: Any, x: str, y: str, *, what: str, limit: int = MAX_LABELS
              ) -> tuple[alt.Chart | None, str]:
    """Text marks naming the rows past a stated cut-off (row ids), and a sentence saying which are named.

    ``past`` is a boolean mask over ``frame``'s rows, ``score`` orders them (largest first) when
    more than ``limit`` are past the cut-off.
    """
    import numpy as np

    idx = np.flatnonzero(np.asarray(past, dtype=bool))
    if idx.size == 0:
        return None, f"No row is past {what}."
    order = idx[np.argsort(-np.asarray(score, dtype=float)[idx], kind="stable")][:limit]
    shown = frame.iloc[np.sort(order)][["row", x, y]]
    text = alt.Chart(shown).mark_text(dy=-9, fontSize=10, color="#1d1d1d").encode(x=f"{x}:Q", y=f"{y}:Q", text="row:N")
    if idx.size > limit:
        return text, f"Labelled: the {limit} rows furthest past {what} (of {idx.size})."
    return text, f"Labelled: the {idx.size} row(s) past {what}."


def response_title(spec: Any, what: str = "") -> str:
    """Axis title of the response with its units: ``thickness_um (µm)``, ``residual (µm)``."""
    from explorer.engine.transforms import transform_label

    units = getattr(spec, "units", "") or ""
    name = what or transform_label(getattr(spec, "transform", "none"), spec.response)
    return f"{name} ({units})" if units else name


def split_subtitle(chart: alt.TopLevelMixin) -> tuple[alt.TopLevelMixin, list[str]]:
    """The chart without its subtitle, and the subtitle's lines.

    Vega does not wrap text, and a chart sized to its container shrinks its plot to make room
    for a long subtitle; shown as HTML under the chart (widget card, report figure caption),
    the same sentences wrap instead.
    """
    title = getattr(chart, "title", alt.Undefined)
    sub = getattr(title, "subtitle", alt.Undefined) if isinstance(title, alt.TitleParams) else alt.Undefined
    if sub is alt.Undefined or not sub:
        return chart, []
    lines = [sub] if isinstance(sub, str) else [str(s) for s in sub if s]
    bare = title.copy(deep=True)
    bare.subtitle = alt.Undefined
    return chart.properties(title=bare), lines


def shown(frame: Any, column: str, role: str) -> str:
    """Add ``<column> shown``: the column's values as the kit writes them (:mod:`explorer.formatting`),
    for hover text; returns the new field's name. The number drawn stays the full-precision one."""
    from ..formatting import format_value

    name = f"{column} shown"
    frame[name] = [format_value(v, role) for v in frame[column].tolist()]
    return name
