"""The explorer's built-in panels, registered at import (see :mod:`.panels`)."""

from __future__ import annotations

from typing import Any

from explorer import charts
from explorer.engine.tables import esc, html_table

from .compare import comparison_html, partition_html
from .panels import Panel, PanelContext, panel, register_panel, view_token

__all__: list[str] = []

CHECKS = "Model checks"
TRACK = "Baseline and history"
TABLES = "Levels and edits"


def _history_token(ctx: PanelContext) -> Any:
    return (view_token(ctx), len(ctx.history))


@panel("observations", "Observations", group="main", order=10, token=view_token)
def observations(ctx: PanelContext) -> Any:
    return charts.observations_chart(ctx.study, max_points=ctx.settings.max_points)


@panel("partition", "Current view", group="main", order=20, token=view_token)
def partition(ctx: PanelContext) -> Any:
    return partition_html(ctx.results, ctx.study.decision)


def _disclosure_token(ctx: PanelContext) -> Any:
    return (view_token(ctx), ctx.study.disclosure)


@panel("compare", "Unedited data beside current view", group="main", order=30, token=_disclosure_token)
def compare(ctx: PanelContext) -> Any:
    return comparison_html(ctx.study)


def _fit_chart(builder: Any) -> Any:
    """A panel builder for a chart of the fit's rows, with every table column in the hover text."""

    def build(ctx: PanelContext) -> Any:
        return builder(ctx.row_results, max_points=ctx.settings.max_points, columns=charts.row_columns(ctx.study))

    return build


for _order, (_key, _title, _builder) in enumerate([
    ("residuals", "Residuals against fitted values", charts.residuals_fitted_chart),
    ("normal", "Normal probability plot", charts.normal_probability_chart),
    ("cooks", "Cook's distance", charts.cooks_distance_chart),
]):
    register_panel(Panel(key=_key, title=_title, build=_fit_chart(_builder), group=CHECKS, order=10 * (_order + 1),
                         token=view_token))


@panel("partition_chart", "Partition, unedited and current", group=TRACK, order=10, token=view_token)
def partition_chart(ctx: PanelContext) -> Any:
    return charts.partition_chart(ctx.baseline, ctx.results)


@panel("history", "p-value and R² by step", group=TRACK, order=20, token=_history_token)
def history(ctx: PanelContext) -> Any:
    return charts.history_chart(ctx.history, ctx.results.spec.alpha)


@panel("levels", "Levels", group=TABLES, order=10, token=view_token)
def levels(ctx: PanelContext) -> Any:
    return "".join(t._repr_html_() for t in ctx.results.levels.values())


@panel("edit_log", "Edit log", group=TABLES, order=20, token=view_token)
def edit_log(ctx: PanelContext) -> Any:
    import pandas as pd

    edits = ctx.study.edits
    if not edits:
        return "<div class='vx-small'>No edits: the current view is the unedited data.</div>"
    frame = pd.DataFrame({"step": range(1, len(edits) + 1), "edit": [e.describe() for e in edits],
                          "reason": [e.reason or "(none given)" for e in edits], "time (UTC)": [e.at for e in edits]})
    return html_table(frame, "Edits in effect, oldest first") + (
        f"<div class='vx-small'>{esc(str(len(ctx.study.redo_edits)))} undone edit(s) can be redone.</div>")
