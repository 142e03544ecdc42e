"""Fragility panels (tab "Fragility"): which rows or regroupings would change the decision.

Each scan counts the alternatives it examined in the study's disclosure, so these
panels run only while their tab is open, and once per view of the data.
"""

from __future__ import annotations

import html
from typing import Any

from explorer import charts
from explorer.core.case_deletion import case_deletion_scan
from explorer.core.flip import flip_finder
from explorer.core.regroup import regroup_scan
from explorer.core.sweep import robustness_sweep

from .panels import PanelContext, one_factor_only, panel, view_token

__all__: list[str] = []

GROUP = "Fragility"


@panel("leave_one_out", "p-value with one row left out", group=GROUP, order=10, token=view_token)
@one_factor_only("The fragility scans")
def leave_one_out(ctx: PanelContext) -> Any:
    return charts.case_deletion_chart(case_deletion_scan(ctx.study), max_points=ctx.settings.max_points)


@panel("flip_rows", "Fewest rows that change the decision", group=GROUP, order=20, token=view_token)
@one_factor_only("The fragility scans")
def flip_rows(ctx: PanelContext) -> Any:
    return flip_finder(ctx.study)._repr_html_()


@panel("regroupings", "Merges and moves that change the decision", group=GROUP, order=30, token=view_token)
@one_factor_only("The fragility scans")
def regroupings(ctx: PanelContext) -> Any:
    scan = regroup_scan(ctx.study)
    merges = ", ".join(f"{a} + {b}" for a, b in scan.merge_flips) or "none"
    moves = "; ".join(f"row {r}: {a} → {b}" for r, a, b in scan.move_flips[:10]) or "none"
    more = f" (and {len(scan.move_flips) - 10} more)" if len(scan.move_flips) > 10 else ""
    return (f"<div class='vx-small'><b>Merges of two levels that change the decision:</b> {html.escape(merges)}</div>"
            f"<div class='vx-small'><b>Moves of one row that change it:</b> {html.escape(moves + more)}</div>"
            + scan._repr_html_())


@panel("spec_curve", "Specification curve", group=GROUP, order=40, token=view_token)
@one_factor_only("The fragility scans")
def spec_curve(ctx: PanelContext) -> Any:
    return charts.specification_curve_chart(robustness_sweep(ctx.study))



