"""Shared look of the charts: sizes, fonts and the few colours the kit uses.

One place for presentation constants keeps every builder consistent and lets a report
or app reuse them. Colours are chosen to stay apart for common colour-vision deficiencies
(blue against orange), and the state of a row is carried by shape as well as colour.
"""

from __future__ import annotations

from typing import Any

import altair as alt

__all__ = ["BASELINE", "CURRENT", "HEIGHT", "KEPT", "LEFT_OUT", "MEAN", "PICKED", "STATE_SCALE", "WIDTH", "finish"]

WIDTH = 380
HEIGHT = 240
KEPT = "#2c6e91"       # steel blue: rows in the analysis
LEFT_OUT = "#a0a0a0"   # light grey: rows left out (still drawn)
PICKED = "#e07b1a"     # orange ring: rows picked for the next action
MEAN = "#1d1d1d"       # level mean and its interval
BASELINE = "#8c8c8c"
CURRENT = "#2c6e91"
GUIDE = "#c0392b"      # reference lines (zero, yardsticks)

STATE_DOMAIN = ["in analysis", "left out"]
STATE_SCALE: dict[str, Any] = {
    "color": alt.Scale(domain=STATE_DOMAIN, range=[KEPT, LEFT_OUT]),
    "shape": alt.Scale(domain=STATE_DOMAIN, range=["circle", "diamond"]),
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
