"""Residual checks drawn from a fit: residuals against fitted values, and a normal probability plot.

References
----------
Montgomery, D. C. Design and Analysis of Experiments, sec. 3.4 (model adequacy checking).
Filliben, J. J. (1975). The probability plot correlation coefficient test for normality.
Technometrics 17(1), 111-117 (the plotting positions ``scipy.stats.probplot`` uses).
"""

from __future__ import annotations

import altair as alt
import numpy as np
from scipy import stats

from explorer.engine import Results

from ..formatting import show_share
from .frames import MAX_POINTS, RowColumns, fit_frame, thin
from .observations import pick_param, row_marks
from .style import GUIDE, HEIGHT, WIDTH, finish, response_title, shown

__all__ = ["normal_probability_chart", "residuals_fitted_chart"]


def _row_tooltip(extra: list) -> list:
    return [alt.Tooltip("row:N", title="row id"), alt.Tooltip("level:N", title="level")] + extra


def _aria(frame, what: str) -> list[str]:
    return [f"row {r}: {what}" for r in frame["row"]]


def residuals_fitted_chart(results: Results, *, max_points: int = MAX_POINTS, width: int = WIDTH,
                           height: int = HEIGHT, columns: RowColumns | None = None) -> alt.TopLevelMixin:
    """Residual against fitted value for every row in the analysis; a fan or a curve questions the model.

    ``columns`` (:func:`~explorer.charts.frames.row_columns`) adds every table column to the hover text.
    """
    frame = fit_frame(results)
    picked = thin(len(frame), max_points, priority=frame["residual"].to_numpy())
    frame = frame.iloc[picked.positions].copy()
    frame["state"] = "in analysis"
    frame["aria"] = _aria(frame, "residual")
    tip = _row_tooltip([alt.Tooltip(f"{shown(frame, 'observed', 'reading')}:N", title="observed"),
                        alt.Tooltip(f"{shown(frame, 'fitted', 'measure')}:N", title="fitted"),
                        alt.Tooltip(f"{shown(frame, 'residual', 'measure')}:N", title="residual")])
    if columns is not None:
        frame, tip = columns.attach(frame), tip + columns.tooltips()
    base = alt.Chart(frame).encode(
        x=alt.X("fitted:Q", title=response_title(results.spec, "fitted value (level mean)"), scale=alt.Scale(zero=False)),
        y=alt.Y("residual:Q", title=response_title(results.spec, "residual")),
    )
    zero = alt.Chart().mark_rule(color=GUIDE, strokeDash=[4, 3]).encode(y=alt.datum(0))
    chart = alt.layer(zero, row_marks(base, pick_param(), tip, size=45, legend=False)).properties(width=width, height=height)
    sub = ["Look for a funnel (spread growing with the level) or points far from the rest."]
    if picked.note:
        sub.append(picked.note)
    return finish(chart, "Residuals against fitted values", sub)


def normal_probability_chart(results: Results, *, max_points: int = MAX_POINTS, width: int = WIDTH,
                             height: int = HEIGHT, columns: RowColumns | None = None) -> alt.TopLevelMixin:
    """Ordered residuals against normal quantiles (``scipy.stats.probplot``) with its least-squares line."""
    frame = fit_frame(results)
    order = np.argsort(frame["residual"].to_numpy(), kind="stable")
    (quantiles, _ordered), (slope, intercept, r) = stats.probplot(frame["residual"].to_numpy(), dist="norm")
    frame = frame.iloc[order].copy()
    frame["quantile"] = quantiles
    picked = thin(len(frame), max_points, priority=frame["quantile"].to_numpy())
    frame = frame.iloc[picked.positions]
    frame["state"] = "in analysis"
    frame["aria"] = _aria(frame, "normal probability")
    lo, hi = float(quantiles.min()), float(quantiles.max())
    line = alt.Chart(alt.Data(values=[{"q": lo, "r": intercept + slope * lo}, {"q": hi, "r": intercept + slope * hi}]))
    line = line.mark_line(color=GUIDE, strokeDash=[4, 3]).encode(x="q:Q", y="r:Q")
    tip = _row_tooltip([alt.Tooltip(f"{shown(frame, 'residual', 'measure')}:N", title="residual"),
                        alt.Tooltip(f"{shown(frame, 'quantile', 'stat')}:N", title="normal quantile")])
    if columns is not None:
        frame, tip = columns.attach(frame), tip + columns.tooltips()
    base = alt.Chart(frame).encode(x=alt.X("quantile:Q", title="normal quantile"),
                                   y=alt.Y("residual:Q", title=response_title(results.spec, "ordered residual")))
    chart = alt.layer(line, row_marks(base, pick_param(), tip, size=45, legend=False)).properties(width=width, height=height)
    sub = [f"Points near the dashed line suggest normal residuals (correlation {show_share(r)})."]
    if picked.note:
        sub.append(picked.note)
    return finish(chart, "Normal probability plot of residuals", sub)
