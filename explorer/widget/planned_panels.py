"""Panels of the planned analyses (tab "Planned"): every request of the study on the current view.

The requests are made in code (``study.contrast(...)``, ``study.trend(...)``,
``study.equivalence(...)``, ``study.welch_t()`` ...) or saved with the study; the panels
show their values for the data as edited now, and redraw after every edit.
"""

from __future__ import annotations

from collections.abc import Hashable
from typing import Any

from ..engine.tables import esc
from .panels import PanelContext, explains_refusals, panel

__all__: list[str] = []

GROUP = "Planned"

HOW_TO = (
    "<div class='vx-small'>No planned analyses yet. Ask for them in code; they are kept with the study, saved in "
    "its file and recomputed after every edit:<ul>"
    "<li><code>study.contrast('dose', {'0.5': -1, '2': 1})</code>, or the sets <code>'control'</code> "
    "(with <code>control=</code>) and <code>'later'</code></li>"
    "<li><code>study.trend('dose')</code>: orthogonal polynomials over numeric levels</li>"
    "<li><code>study.equivalence('supplier', margin=0.5, control='current')</code>: your margin, in response units"
    "</li><li><code>study.welch_t()</code>, <code>study.mann_whitney()</code>, <code>study.trimmed_means()</code>, "
    "<code>study.dunn()</code>, <code>study.friedman()</code>, <code>study.hc3_tests()</code>, "
    "<code>study.box_cox()</code></li></ul>"
    "Trying several versions of one question adds to the disclosed count of alternatives.</div>"
)


def planned_token(ctx: PanelContext) -> Hashable:
    study = ctx.study
    return (study, study.results, getattr(study, "planned_requests", ()))


@panel("planned_analyses", "Planned analyses", group=GROUP, order=10, token=planned_token)
@explains_refusals
def planned_analyses(ctx: PanelContext) -> str:
    outcomes = ctx.study.planned() if hasattr(ctx.study, "planned") else ()
    if not outcomes:
        return HOW_TO
    parts = [f"<div class='vx-planned'>{o._repr_html_()}</div>" for o in outcomes]
    return "".join(parts) + ("<div class='vx-small'>Recomputed on the current view "
                             f"({esc(str(len(ctx.study.edits)))} edit(s) in effect).</div>")


@panel("equivalence_intervals", "Equivalence intervals", group=GROUP, order=20, token=planned_token)
@explains_refusals
def equivalence_intervals(ctx: PanelContext) -> Any:
    from explorer.charts import equivalence_chart
    from explorer.inference.equivalence import EquivalenceTable

    tables = [o.value for o in getattr(ctx.study, "planned", lambda: ())() if isinstance(o.value, EquivalenceTable)]
    if not tables:
        return None
    if len(tables) == 1:
        return equivalence_chart(tables[0])
    import altair as alt

    charts = [equivalence_chart(t) for t in tables]  # one chart per request, in the order asked
    config = charts[0].config
    for c in charts:
        c.config = alt.Undefined  # a concatenation carries the shared configuration once
    out = alt.vconcat(*charts)
    out.config = config
    return out
