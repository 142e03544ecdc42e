"""Charts for the static report: the explorer's own chart builders, drawn to inline SVG offline.

An SVG written into the page needs no script and no network, so the report opens
anywhere. The report shows what the explorer shows, drawn by the same builders
(:mod:`explorer.charts`): the observations of the unedited data and of the current view
on one shared response axis (left-out rows grey, moved rows marked, points spread
sideways, each level's mean and interval), the partition, the residual checks, Cook's
distance, the p-value with each row left out and the specification curve. A chart's
explanatory lines become the figure's caption (HTML text that wraps to the page) instead
of a subtitle inside the picture.

Altair and vl-convert belong to the ``widget`` extra; without them the report is written
without charts and says so.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from types import SimpleNamespace
from typing import TYPE_CHECKING, Any

import numpy as np

from ..engine.tables import esc

if TYPE_CHECKING:
    from ..study.study import Study

__all__ = ["Figure", "chart_to_svg", "charts_available", "equivalence_figures", "figure", "interaction_figure",
           "model_check_figures",
           "observation_figures", "sensitivity_figures"]

#: Most observations a report chart draws (the statistics always use every row).
MAX_POINTS = 5000
#: Width of one chart in the report (px): two sit side by side in the page's 1,180 px.
REPORT_WIDTH = 440


@dataclass(frozen=True)
class Figure:
    """One chart of the report: its SVG and its caption lines (or ``why`` it is missing)."""

    svg: str = ""
    caption: tuple[str, ...] = ()
    why: str = ""

    def html(self) -> str:
        if not self.svg:
            return f"<p class='vx-note'>{esc(self.why)}</p>"
        cap = "".join(f"<div>{esc(line)}</div>" for line in self.caption)
        return f"<figure class='vx-chart'>{self.svg}<figcaption>{cap}</figcaption></figure>"


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


def figure(chart: Any) -> Figure:
    """The chart as a :class:`Figure`: its subtitle moves to the caption, the rest is drawn to SVG."""
    from ..charts.style import split_subtitle

    bare, lines = split_subtitle(chart)
    return Figure(svg=chart_to_svg(bare), caption=tuple(lines))


def _unedited(study: "Study") -> Any:
    """What the observations chart reads of a study, for the unedited data."""
    from ..engine.view import initial_view

    return SimpleNamespace(dataset=study.dataset, view=initial_view(study.dataset), results=study.baseline,
                           edits=(), spec=study.spec)


def observation_figures(study: "Study") -> tuple[Figure, Figure]:
    """Observations of the unedited data and of the current view, on one response axis."""
    why = charts_available()
    if why:
        return Figure(why=why), Figure(why=why)
    from ..charts import observations_chart

    y = np.asarray(study.dataset.y_original, dtype=float)
    y = y[np.isfinite(y)]
    domain = (float(y.min()), float(y.max())) if y.size else None
    out = []
    for source, title in ((_unedited(study), "Unedited data"), (study, f"Current view ({len(study.edits)} edit(s))")):
        chart = observations_chart(source, max_points=MAX_POINTS, width=REPORT_WIDTH, height=300, y_domain=domain,
                                   interactive=False)
        chart = chart.properties(title=_retitled(chart, title))
        out.append(figure(chart))
    return out[0], out[1]


def _retitled(chart: Any, text: str) -> Any:
    title = chart.title.copy(deep=True)
    title.text = f"{text}: {title.text}"
    return title


def model_check_figures(study: "Study") -> list[Figure]:
    """The partition of the unedited data beside the current one, the residual checks and Cook's distance."""
    why = charts_available()
    if why:
        return [Figure(why=why)]
    from ..charts import cooks_distance_chart, normal_probability_chart, partition_chart, residuals_fitted_chart

    cur = study.results
    charts = [partition_chart(study.baseline, cur, width=REPORT_WIDTH),
              residuals_fitted_chart(cur, width=REPORT_WIDTH), normal_probability_chart(cur, width=REPORT_WIDTH),
              cooks_distance_chart(cur, width=REPORT_WIDTH)]
    return [figure(c) for c in charts]


def sensitivity_figures(deletion: Any = None, sweep: Any = None) -> list[Figure]:
    """The p-value with each row left out and the specification curve, as in the explorer's Fragility tab."""
    why = charts_available()
    if why:
        return [Figure(why=why)]
    from ..charts import case_deletion_chart, specification_curve_chart

    out = []
    if deletion is not None:
        out.append(figure(case_deletion_chart(deletion, width=REPORT_WIDTH)))
    if sweep is not None:
        out.append(figure(specification_curve_chart(sweep, width=REPORT_WIDTH)))
    return out


def interaction_figure(effects: Any) -> Figure:
    """The interaction chart (:mod:`explorer.charts.interaction`) of a simple-effects result as a figure."""
    why = charts_available()
    if why:
        return Figure(why=why)
    from ..charts.interaction import interaction_chart

    return figure(interaction_chart(effects, width=REPORT_WIDTH))


def equivalence_figures(tables: list) -> list[Figure]:
    """Each equivalence table's intervals against its margin."""
    why = charts_available()
    if why:
        return [Figure(why=why)]
    from ..charts import equivalence_chart

    return [figure(equivalence_chart(t, width=REPORT_WIDTH)) for t in tables]
