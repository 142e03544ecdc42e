"""The explorer's stylesheet: one ``<style>`` block, scoped to ``.vx-explorer``.

The layout follows the width the explorer is given (a CSS container query on the
explorer itself, not the window, so JupyterLab's side panels count): two columns
(controls beside the results) when there is room, one column below
:data:`ONE_COLUMN_BELOW` pixels. Charts take the width of their card; tables wrap their
text and, when their card is too narrow for their columns, stack each row into
"heading: value" lines instead of being clipped.

The rules for results (tables, notes, footnotes, small print) are not written here: they
are the one result stylesheet of :mod:`explorer.rendering`, put inside this ``<style>``
block, so a result looks the same in the explorer, in the report and in a notebook. This
module adds the explorer's layout and its own parts (cards, tabs, controls, status line,
the comparison's marks). The explorer draws its panels inside
:func:`explorer.rendering.styled`, so the results in them add no second ``<style>``.
"""

from __future__ import annotations

from ..rendering import NOTE_COLOUR
from ..rendering import STYLESHEET as RESULTS_STYLESHEET

__all__ = ["CONTROLS_WIDTH", "ONE_COLUMN_BELOW", "STACK_WIDTH_PER_COLUMN", "STYLESHEET", "stylesheet"]

#: Width of the controls column in the two-column layout (px).
CONTROLS_WIDTH = 320
#: Below this explorer width the controls go under the results (one column).
ONE_COLUMN_BELOW = 860
#: A table with k columns stacks its rows when its card is narrower than k times this (px).
STACK_WIDTH_PER_COLUMN = 84


def _stacking_rules(max_columns: int = 16) -> str:
    """Per column count: below its width, each row becomes a block of "heading over value" tiles."""
    rules = []
    for k in range(2, max_columns + 1):
        t = f".vx-explorer table.vx-cols-{k}"
        rules.append(
            f"@container vxcard (max-width: {k * STACK_WIDTH_PER_COLUMN}px) {{"
            f" {t} thead {{ display: none; }}"
            f" {t}, {t} tbody {{ display: block; width: 100%; min-width: 0; }}"
            f" {t} caption {{ display: block; }}"
            f" {t} tr {{ display: grid; grid-template-columns: repeat(auto-fill, minmax(8.5em, 1fr)); gap: 0 10px;"
            f" border-bottom: 2px solid #bbb; padding: 3px 0; }}"
            f" {t} td {{ display: block; text-align: left !important; border: 0; padding: 1px 4px; white-space: normal; }}"
            f" {t} td:first-child {{ grid-column: 1 / -1; font-weight: 700; }}"
            f" {t} td::before {{ content: attr(data-label); display: block; font-size: 11px; color: #666;"
            f" font-weight: 600; white-space: normal; }}"
            f" {t} td:first-child::before {{ display: inline; margin-right: 6px; }}"
            "}"
        )
    return "\n".join(rules)


def stylesheet() -> str:
    """The ``<style>`` element the explorer puts at its top."""
    return f"""<style>
.vx-explorer {{ container: vx / inline-size; width: 100%; max-width: 100%; min-width: 0; }}
.vx-explorer .vx-body {{ display: grid; grid-template-columns: {CONTROLS_WIDTH}px minmax(0, 1fr); gap: 10px;
  align-items: start; width: 100%; }}
.vx-explorer .vx-content {{ display: flex; flex-direction: column; min-width: 0; gap: 6px; }}
.vx-explorer .vx-controls {{ display: grid; grid-template-columns: minmax(0, 1fr); gap: 4px 14px; align-content: start;
  min-width: 0; }}
@container vx (max-width: {ONE_COLUMN_BELOW - 1}px) {{
  .vx-explorer .vx-body {{ grid-template-columns: minmax(0, 1fr); }}
  .vx-explorer .vx-content {{ display: contents; }}
  .vx-explorer .vx-main {{ order: 1; }}
  .vx-explorer .vx-controls {{ order: 2; grid-template-columns: repeat(auto-fill, minmax(min(100%, 300px), 1fr)); }}
  .vx-explorer .vx-tabs {{ order: 3; }}
}}
.vx-explorer .vx-main, .vx-explorer .vx-tab-grid {{ display: grid; gap: 6px; align-items: start; min-width: 0;
  grid-template-columns: repeat(auto-fit, minmax(min(100%, 400px), 1fr)); }}
.vx-explorer .vx-main > .vx-card-observations {{ grid-column: 1 / -1; }}
.vx-explorer .vx-tab-grid > .vx-card-html {{ grid-column: 1 / -1; }}
.vx-explorer .vx-card {{ container: vxcard / inline-size; min-width: 0; max-width: 100%; margin: 0 !important;
  overflow-wrap: break-word; }}
.vx-explorer .vx-card .widget-html-content, .vx-explorer .vx-card .widget-html {{ min-width: 0; max-width: 100%; }}
.vx-explorer .vega-embed {{ width: 100%; display: block; min-width: 0; }}
.vx-explorer .vx-tabs {{ min-width: 0; max-width: 100%; }}
.vx-explorer .vx-tabs > .lm-TabBar, .vx-explorer .vx-tabs > .p-TabBar {{ min-height: fit-content; height: auto;
  overflow: visible; }}
.vx-explorer .vx-tabs.widget-tab > .lm-TabBar .lm-TabBar-content {{ flex-wrap: wrap; min-width: 0; }}
.vx-explorer .vx-tabs.widget-tab > .lm-TabBar .lm-TabBar-tab {{ flex: 0 0 auto !important; min-width: 0 !important;
  max-width: none !important; width: auto !important; }}
.vx-explorer .vx-tabs.widget-tab > .lm-TabBar .lm-TabBar-tabLabel {{ overflow: visible; text-overflow: clip;
  max-width: none !important; }}
.vx-explorer .vx-tabs > .widget-tab-contents {{ min-width: 0; overflow: visible; }}
.vx-explorer .widget-html-content {{ white-space: normal; line-height: 1.45; }}
.vx-explorer .vx-level-row {{ display: flex; flex-wrap: wrap; gap: 2px 6px; align-items: center; }}
.vx-explorer .vx-level-row .widget-html {{ flex: 1 1 150px; min-width: 0; }}
{RESULTS_STYLESHEET}.vx-table tr.vx-diff td {{ background: #fff1df; }}
.vx-table td.vx-mark {{ color: #b35c00; font-weight: 600; text-align: left; overflow-wrap: anywhere; }}
.vx-decision-flip {{ color: #9b1c1c; font-weight: 700; }}
.vx-explorer .vx-chart-note {{ font-size: 12px; color: #555; margin: 0 0 2px 4px; }}
.vx-status-error {{ color: #9b1c1c; font-weight: 600; }}
.vx-status-warn {{ color: {NOTE_COLOUR}; }}
.vx-status-ok {{ color: #285e2b; }}
.vx-card-title {{ font-weight: 700; font-size: 14px; margin: 4px 0 2px 0; }}
.vx-banner {{ font-size: 13px; line-height: 1.45; }}
.vx-app-title {{ margin: 4px 0; }}
{_stacking_rules()}
</style>
"""


STYLESHEET = stylesheet()
