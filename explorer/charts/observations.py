"""Observations by level, with each level's mean and confidence interval.

Every usable row is a point (left-out rows stay drawn, grey diamonds, so nothing
silently disappears). Points carry a click selection on the ``row`` field, so a
notebook widget can turn a click into an edit; hovering shows the row id and every
column of the row.
"""

from __future__ import annotations

from typing import Any

import altair as alt
import pandas as pd

from explorer.study import Study

from .frames import MAX_POINTS, column_fields, observation_frame
from .style import HEIGHT, MEAN, PICKED, STATE_SCALE, WIDTH, finish, response_title, shown

__all__ = ["PICK", "observations_chart", "pick_param", "row_marks"]

_OFFSET = alt.Scale(domain=[-1.25, 2.0])  # points spread over [-1, 1]; the mean bar at the right

#: Name of the click selection every row-level chart carries.
PICK = "pick"


def pick_param(name: str = PICK) -> alt.Parameter:
    """Click picks one row; shift-click adds rows; double-click clears."""
    return alt.selection_point(name=name, fields=["row"], on="click", clear="dblclick", toggle="event.shiftKey")


def _picked(pick: alt.Parameter, value: Any) -> dict[str, Any]:
    return {"param": pick.name, "empty": False, "value": value}


def row_marks(base: alt.Chart, pick: alt.Parameter, tooltip: list, size: int = 70, legend: bool = True) -> alt.Chart:
    """Points coloured and shaped by state; the picked rows get a thick orange ring."""
    leg: dict[str, Any] = {} if legend else {"legend": None}
    return base.mark_point(filled=True, opacity=0.85).encode(
        color=alt.Color("state:N", scale=STATE_SCALE["color"], title="row", **leg),
        shape=alt.Shape("state:N", scale=STATE_SCALE["shape"], title="row", **leg),
        # Conditions written as channel values (not alt.when) skip a schema validation per redraw.
        size=alt.SizeValue(value=size, condition=[_picked(pick, size * 2.6),
                                                  {"test": "datum.state !== 'in analysis'", "value": size * 1.6}]),
        stroke=alt.StrokeValue(value="white", condition=_picked(pick, PICKED)),
        strokeWidth=alt.StrokeWidthValue(value=0.6, condition=_picked(pick, 3)),
        tooltip=tooltip,
        description=alt.Description("aria:N"),
    ).add_params(pick)


def _point_size(n: int) -> int:
    """Smaller points when many are drawn, so that the levels' spread stays readable."""
    return 70 if n <= 400 else 40 if n <= 1500 else 20


def observations_chart(study: Study, *, max_points: int = MAX_POINTS, factor: str | None = None,
                       width: int = WIDTH + 80, height: int = HEIGHT + 80,
                       y_domain: tuple[float, float] | None = None, interactive: bool = True) -> alt.TopLevelMixin:
    """Points by level, level means with confidence intervals (pooled SD), click selection ``pick``.

    ``y_domain`` fixes the response axis (e.g. the same for the unedited data and the current
    view, so that two charts side by side can be compared by eye); ``interactive=False`` leaves
    the sentence on picking out of the subtitle (a static report).
    """
    f = factor or study.spec.factors[0]
    res = study.results
    data, note = observation_frame(study, max_points, f)
    y_title = response_title(study.spec)
    levels = list(study.view.levels[f])
    x = alt.X("level:N", title=f, sort=levels, axis=alt.Axis(labelAngle=0))
    tooltip = [alt.Tooltip("row:N", title="row id"), alt.Tooltip("level:N", title=f"{f} (now)"),
               alt.Tooltip("recorded:N", title=f"{f} (recorded)"), alt.Tooltip("state:N", title="state")]
    tooltip += [alt.Tooltip(field, title=title) for field, title in column_fields(study.dataset.table)]
    base = alt.Chart(data).encode(x=x)
    pick = pick_param()
    points = row_marks(
        base.encode(
            y=alt.Y("value:Q", title=y_title, scale=alt.Scale(zero=False, padding=10) if y_domain is None
                    else alt.Scale(domain=list(y_domain), zero=False, nice=True)),
            xOffset=alt.XOffset("jitter:Q", scale=_OFFSET),
            order=alt.Order("z:Q"),  # moved and left-out rows are drawn over the others
        ),
        pick, tooltip, size=_point_size(len(data)),
    )
    layers = [points]
    table = res.levels.get(f)
    subtitle = []
    if table is not None:
        pct = f"{table.confidence:.0%}"
        lv = pd.DataFrame({"level": list(table.labels), "mean": table.mean, "low": table.pooled_low,
                           "high": table.pooled_high, "n": table.n})
        lv = lv.astype({"mean": float, "low": float, "high": float})
        lv["jitter"] = 1.55  # the interval sits to the right of the level's points
        mbase = alt.Chart(lv).encode(x=x, xOffset=alt.XOffset("jitter:Q", scale=_OFFSET))
        mtip = [alt.Tooltip("level:N", title=f), alt.Tooltip("n:Q", title="n in analysis"),
                alt.Tooltip(f"{shown(lv, 'mean', 'measure')}:N", title="mean"),
                alt.Tooltip(f"{shown(lv, 'low', 'measure')}:N", title=f"{pct} interval low"),
                alt.Tooltip(f"{shown(lv, 'high', 'measure')}:N", title=f"{pct} interval high")]
        ci = mbase.mark_rule(color=MEAN, strokeWidth=2, opacity=0.8).encode(
            y=alt.Y("low:Q", title=y_title), y2="high:Q", tooltip=mtip)
        mean = mbase.mark_tick(color=MEAN, thickness=3, size=18).encode(y="mean:Q", tooltip=mtip)
        layers = [ci, mean, points]
        subtitle.append(f"Black bar and cross right of each level's points: its mean with the {pct} interval "
                        "(pooled SD). Points are spread sideways only to be seen.")
        if interactive:
            subtitle.append("Click a point to pick it; shift-click adds; double-click clears.")
    if note:
        subtitle.append(note)
    chart = alt.layer(*layers).properties(width=width, height=height)
    return finish(chart, f"{y_title} by {f}", subtitle)
