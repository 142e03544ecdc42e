"""Fragility panels (tab "Fragility"): which rows or regroupings would change the decision.

Each scan counts the alternatives it examined in the study's disclosure, so these
panels run only while their tab is open, and once per view of the data. Under each, a
live line shows the count the study's ledger holds now (redrawn on every refresh, so a
later scan in another panel shows here too) and how many this panel's scan added. They call the
study's own methods, so a summary-backed study runs them on its seeded sample, and they
cover factorial and blocked designs as the sensitivity engine does.
"""

from __future__ import annotations

import dataclasses
import weakref
from collections.abc import Callable
from typing import Any

from explorer import charts

from ..engine.tables import esc
from .compare import disclosure_html
from .panels import PanelContext, explains_refusals, panel, view_token

__all__: list[str] = []

GROUP = "Fragility"

#: study -> panel key -> alternatives that panel's last scan added to the study's ledger.
_BY_SCAN: "weakref.WeakKeyDictionary[Any, dict[str, int]]" = weakref.WeakKeyDictionary()


def _counted(key: str, ctx: PanelContext, scan: Callable[[], Any]) -> Any:
    """Run ``scan`` and remember how many alternatives it added to the ledger (for the live line)."""
    ledger = ctx.study.ledger
    mark = len(ledger)
    out = scan()
    _BY_SCAN.setdefault(ctx.study, {})[key] = sum(e.count for e in ledger.since(mark) if e.kind == "search")
    return out


def _live(key: str) -> Callable[[PanelContext], str]:
    """The study's disclosure as the ledger holds it now, with what this panel's scan added."""

    def line(ctx: PanelContext) -> str:
        mine = _BY_SCAN.get(ctx.study, {}).get(key)
        extra = f" (of which {mine} by this scan)" if mine else ""
        return f"<div class='vx-small'>{disclosure_html(ctx.study)}{esc(extra)}</div>"

    return line


def _without_frozen_count(result: Any) -> Any:
    """The scan's result without the disclosure it was computed under (the live line shows the current one)."""
    if dataclasses.is_dataclass(result) and hasattr(result, "disclosure"):
        return dataclasses.replace(result, disclosure=None)
    return result


@panel("leave_one_out", "p-value with one row left out", group=GROUP, order=10, token=view_token,
       live=_live("leave_one_out"))
@explains_refusals
def leave_one_out(ctx: PanelContext) -> Any:
    scan = _counted("leave_one_out", ctx, ctx.study.case_deletion)
    return charts.case_deletion_chart(scan, max_points=ctx.settings.max_points)


@panel("flip_rows", "Fewest rows that change the decision", group=GROUP, order=20, token=view_token,
       live=_live("flip_rows"))
@explains_refusals
def flip_rows(ctx: PanelContext) -> Any:
    return _without_frozen_count(_counted("flip_rows", ctx, ctx.study.flip_finder))._repr_html_()


@panel("regroupings", "Merges and moves that change the decision", group=GROUP, order=30, token=view_token,
       live=_live("regroupings"))
@explains_refusals
def regroupings(ctx: PanelContext) -> Any:
    scan = _counted("regroupings", ctx, ctx.study.regroup_scan)
    merges = ", ".join(f"{a} + {b}" for a, b in scan.merge_flips) or "none"
    moves = "; ".join(f"row {r}: {a} → {b}" for r, a, b in scan.move_flips[:10]) or "none"
    more = f" (and {len(scan.move_flips) - 10} more)" if len(scan.move_flips) > 10 else ""
    return (f"<div class='vx-small'><b>Merges of two levels that change the decision:</b> {esc(merges)}</div>"
            f"<div class='vx-small'><b>Moves of one row that change it:</b> {esc(moves + more)}</div>"
            + _without_frozen_count(scan)._repr_html_())


@panel("spec_curve", "Specification curve", group=GROUP, order=40, token=view_token, live=_live("spec_curve"))
@explains_refusals
def spec_curve(ctx: PanelContext) -> Any:
    return charts.specification_curve_chart(_counted("spec_curve", ctx, ctx.study.robustness_sweep))
