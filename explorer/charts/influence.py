"""Cook's distance by row, drawn from the core's influence measures (:mod:`explorer.sensitivity.influence`).

References
----------
Cook, R. D. (1977). Detection of influential observation in linear regression.
Technometrics 19(1), 15-18.
"""

from __future__ import annotations

import altair as alt
import numpy as np

from explorer.engine import Results
from explorer.engine.numerics import response_scale
from explorer.sensitivity.influence import Influence, influence_measures

from ..formatting import show_stat
from .frames import MAX_POINTS, RowColumns, fit_frame, thin
from .observations import pick_param, row_marks
from .style import GUIDE, HEIGHT, KEPT, WIDTH, finish, id_labels, shown

__all__ = ["cooks_distance_chart", "influence_of"]


def influence_of(results: Results) -> Influence:
    """The influence measures of a fit (any design the engine fits), for drawing."""
    fit = results.fit
    scale = response_scale(results.groups.offset, fit.y)
    return influence_measures(fit.residuals, fit.leverage, results.df_resid, row_ids=fit.row_ids,
                              alpha=results.spec.alpha, scale=scale)


def cooks_distance_chart(results: Results, *, max_points: int = MAX_POINTS, width: int = WIDTH,
                         height: int = HEIGHT, columns: RowColumns | None = None) -> alt.TopLevelMixin:
    """Cook's distance against table order, with the 4/n rule-of-thumb line; tall spikes pull the fit.

    Rows whose distance is undefined (alone in their level) are left out of the drawing and named
    in the subtitle.
    """
    infl = influence_of(results)
    d = infl.cooks_distance
    frame = fit_frame(results)
    frame["distance"] = [None if np.isnan(v) else float(v) for v in d]
    picked = thin(len(frame), max_points, priority=np.nan_to_num(d, nan=0.0))
    frame = frame.iloc[picked.positions].copy()
    frame["state"] = "in analysis"
    frame["aria"] = [f"row {r}: Cook's distance" for r in frame["row"]]
    tip = [alt.Tooltip("row:N", title="row id"), alt.Tooltip("level:N", title="level"),
           alt.Tooltip(f"{shown(frame, 'distance', 'stat')}:N", title="Cook's distance"),
           alt.Tooltip(f"{shown(frame, 'residual', 'measure')}:N", title="residual"),
           alt.Tooltip(f"{shown(frame, 'leverage', 'stat')}:N", title="leverage")]
    if columns is not None:
        frame, tip = columns.attach(frame), tip + columns.tooltips()
    yard = infl.cutoffs["cooks_4_over_n"]
    base = alt.Chart(frame).encode(x=alt.X("order:Q", title="row (table order)"),
                                   y=alt.Y("distance:Q", title="Cook's distance"))
    stems = base.mark_rule(color=KEPT, opacity=0.5).encode(y2=alt.datum(0))
    guide = alt.Chart().mark_rule(color=GUIDE, strokeDash=[4, 3]).encode(y=alt.datum(yard))
    dist = frame["distance"].astype("float64").to_numpy(na_value=np.nan)
    labels, named = id_labels(frame, np.nan_to_num(dist, nan=0.0) > yard, dist, "order", "distance",
                              what="the 4/n line")
    layers = [stems, guide, row_marks(base, pick_param(), tip, size=35, legend=False)]
    chart = alt.layer(*layers, *([labels] if labels is not None else []))
    sub = [f"Dashed line: 4/n = {show_stat(yard)}, a common rule of thumb for a closer look. {named}"]
    sub += [s for s in (*infl.notes, picked.note) if s]
    return finish(chart.properties(width=width, height=height), "Cook's distance by row", sub)
