"""Charts for the static report, drawn to inline SVG offline with vl-convert.

An SVG written into the page needs no script and no network, so the report opens
anywhere. The chart is the per-level view of one result (observations, level means and
their pooled-SD intervals). Altair and vl-convert belong to the ``widget`` extra; without
them the report is written without charts and says so.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

if TYPE_CHECKING:
    from ..engine.results import Results

__all__ = ["level_chart", "curve_chart", "chart_to_svg", "results_svg", "curve_svg", "charts_available", "model_check_svgs"]


#: Most observations a report chart draws (the statistics always use every row).
MAX_POINTS = 5000


def level_chart(results: "Results", title: str, row_levels: Sequence[str], max_points: int = MAX_POINTS) -> Any:
    """Altair chart: observations by level of the first factor, with mean and interval.

    ``row_levels`` gives the first factor's level of each row of ``results.fit`` (from the
    view the results were computed on). Above ``max_points`` rows an even spread of them
    is drawn, the most extreme residuals always included, and the subtitle says so.
    """
    import altair as alt

    factor = results.main_term
    table = results.levels[factor]
    labels = list(table.labels)
    fit = results.fit
    points = pd.DataFrame({"level": list(row_levels), "value": fit.y, "row": [str(r) for r in fit.row_ids]})
    subtitle = ""
    if len(points) > max_points:
        extreme = np.argsort(-np.abs(np.asarray(fit.residuals)), kind="stable")[: max_points // 10]
        spread = np.linspace(0, len(points) - 1, max_points - extreme.size).astype(np.int64)
        keep = np.union1d(extreme, spread)
        subtitle = f"Drawing {keep.size:,} of {len(points):,} rows (the most extreme and an even spread)."
        points = points.iloc[keep]
    summary = pd.DataFrame(
        {"level": labels, "mean": table.mean, "low": table.pooled_low, "high": table.pooled_high}
    )
    x = alt.X("level:N", sort=labels, title=factor)
    y_title = results.spec.response
    dots = alt.Chart(points).mark_circle(size=28, opacity=0.45, color="#4c72b0").encode(
        x=x, y=alt.Y("value:Q", title=y_title, scale=alt.Scale(zero=False)), tooltip=["row", "value"]
    )
    bars = alt.Chart(summary).mark_rule(strokeWidth=2.5, color="#222").encode(x=x, y="low:Q", y2="high:Q")
    means = alt.Chart(summary).mark_tick(thickness=3, size=22, color="#c44e52").encode(x=x, y="mean:Q")
    heading = alt.TitleParams(title, subtitle=subtitle) if subtitle else title
    return (dots + bars + means).properties(width=280, height=220, title=heading)


def curve_chart(curve: pd.DataFrame, alpha: float) -> Any:
    """Specification curve: each specification's p-value by rank (log scale), a rule at alpha."""
    import altair as alt

    frame = curve.dropna(subset=["p-value"]).copy()
    frame["p-value"] = frame["p-value"].astype(float)
    frame["rank"] = frame["rank"].astype(int)
    frame["decision"] = ["significant" if s else "not significant" for s in frame["significant"]]
    frame = frame.drop(columns=["significant"])
    points = alt.Chart(frame).mark_circle(size=55).encode(
        x=alt.X("rank:O", title="specification (ranked by p-value)", axis=alt.Axis(labels=False, ticks=False)),
        y=alt.Y("p-value:Q", scale=alt.Scale(type="log"), title="p-value (log scale)"),
        color=alt.Color("decision:N", scale=alt.Scale(domain=["significant", "not significant"],
                                                      range=["#c44e52", "#4c72b0"])),
        tooltip=["outlier rule", "test", "transform", "merges", "p-value"],
    )
    rule = alt.Chart(pd.DataFrame({"alpha": [alpha]})).mark_rule(strokeDash=[4, 3], color="#555").encode(y="alpha:Q")
    return (points + rule).properties(width=420, height=180, title="Specification curve")


def charts_available() -> str | None:
    """``None`` when altair and vl-convert import, else why not."""
    import importlib.util

    if importlib.util.find_spec("altair") is None or importlib.util.find_spec("vl_convert") is None:
        return "charts need the widget extra (altair, vl-convert-python): pip install 'variance-explorer[widget]'"
    return None


def chart_to_svg(chart: Any) -> str:
    """SVG text of an Altair chart (vl-convert, no network), without the XML prologue."""
    import vl_convert as vlc

    svg = vlc.vegalite_to_svg(chart.to_dict())
    return re.sub(r"^<\?xml[^>]*>\s*", "", svg)


def results_svg(results: "Results", title: str, row_levels: Sequence[str]) -> tuple[str | None, str | None]:
    """``(svg, None)`` of :func:`level_chart`, or ``(None, why)`` when the chart libraries are not installed."""
    why = charts_available()
    return (None, why) if why else (chart_to_svg(level_chart(results, title, row_levels)), None)


def curve_svg(curve: pd.DataFrame, alpha: float) -> tuple[str | None, str | None]:
    """``(svg, None)`` of :func:`curve_chart`, or ``(None, why)``."""
    why = charts_available()
    return (None, why) if why else (chart_to_svg(curve_chart(curve, alpha)), None)


def model_check_svgs(baseline: "Results", current: "Results") -> tuple[list[str], str | None]:
    """SVGs of the kit's chart builders (:mod:`explorer.charts`): the partition of the unedited
    data beside the current one, and the residual checks of the current view.

    ``([], why)`` when the chart libraries or builders are not available.
    """
    why = charts_available()
    if why:
        return [], why
    try:
        from ..charts import (
            normal_probability_chart,
            partition_chart,
            residuals_fitted_chart,
        )
    except ImportError as exc:
        return [], f"the chart builders are not available ({exc})"
    charts = [partition_chart(baseline, current), residuals_fitted_chart(current), normal_probability_chart(current)]
    return [chart_to_svg(c) for c in charts], None
