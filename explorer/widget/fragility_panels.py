"""Fragility panels (tab "Fragility"): which rows or regroupings would change the decision.

Each scan counts the alternatives it examined in the study's disclosure, so these
panels run only while their tab is open, and once per view of the data. They call the
study's own methods, so a summary-backed study runs them on its seeded sample, and they
cover factorial and blocked designs as the sensitivity engine does.
"""

from __future__ import annotations

from typing import Any

from explorer import charts

from ..engine.tables import esc
from .panels import PanelContext, explains_refusals, panel, view_token

__all__: list[str] = []

GROUP = "Fragility"


@panel("leave_one_out", "p-value with one row left out", group=GROUP, order=10, token=view_token)
@explains_refusals
def leave_one_out(ctx: PanelContext) -> Any:
    return charts.case_deletion_chart(ctx.study.case_deletion(), max_points=ctx.settings.max_points)


@panel("flip_rows", "Fewest rows that change the decision", group=GROUP, order=20, token=view_token)
@explains_refusals
def flip_rows(ctx: PanelContext) -> Any:
    return ctx.study.flip_finder()._repr_html_()


@panel("regroupings", "Merges and moves that change the decision", group=GROUP, order=30, token=view_token)
@explains_refusals
def regroupings(ctx: PanelContext) -> Any:
    scan = ctx.study.regroup_scan()
    merges = ", ".join(f"{a} + {b}" for a, b in scan.merge_flips) or "none"
    moves = "; ".join(f"row {r}: {a} → {b}" for r, a, b in scan.move_flips[:10]) or "none"
    more = f" (and {len(scan.move_flips) - 10} more)" if len(scan.move_flips) > 10 else ""
    return (f"<div class='vx-small'><b>Merges of two levels that change the decision:</b> {esc(merges)}</div>"
            f"<div class='vx-small'><b>Moves of one row that change it:</b> {esc(moves + more)}</div>"
            + scan._repr_html_())


@panel("spec_curve", "Specification curve", group=GROUP, order=40, token=view_token)
@explains_refusals
def spec_curve(ctx: PanelContext) -> Any:
    return charts.specification_curve_chart(ctx.study.robustness_sweep())



