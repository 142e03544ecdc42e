"""HTML for the tables the explorer shows: current partition and unedited-vs-current comparison.

Presentation only: every number comes from a :class:`~explorer.engine.Results`; the
comparison marks the lines whose value differs between the unedited data and the
current view.
"""

from __future__ import annotations

import html
from typing import Any

from explorer.engine import Results
from explorer.engine.tables import fmt
from explorer.study import Study

__all__ = ["CAUTIONS_HTML", "comparison_html", "disclosure_html", "partition_html"]

CAUTIONS_HTML = (
    "<div class='vx-small' style='border-left:3px solid #b35c00;padding:2px 8px;max-width:1100px'>"
    "<b>Before you rely on an edit:</b> leaving data out needs a documented reason, and the unedited "
    "result stays in view. Checking which rows or regroupings change the decision shows how fragile it is; "
    "it is not a licence to pick the analysis that gives the wanted answer (the count of alternatives tried "
    "is shown with every result). Decisions on safety, health, regulation or product release follow your "
    "organisation's procedures and qualified statistical review. The F test assumes independent "
    "observations, normal residuals and equal variances: read the model checks before the p-value.</div>"
)


def disclosure_html(study: Study) -> str:
    d = study.disclosure
    return (f"<span class='vx-disclosure'><b>Searching so far:</b> {d.edits_in_effect} edit(s) in effect, "
            f"{d.edits_made} made in all ({d.undos} undone), {d.specifications} alternative analyses examined"
            "</span>")


def partition_html(results: Results) -> str:
    """The current partition with its decision line, in a block the tests and the browser can find."""
    notes = "".join(f"<div class='vx-small'>{html.escape(n)}</div>" for n in results.notes)
    return (
        f"<div class='vx-partition'>{results.partition._repr_html_()}"
        f"<div class='vx-small'>n = {results.n_used}, R² = {fmt(results.r_squared, 4)}, "
        f"residual SD = {fmt(results.residual_sd, 4)}</div>"
        f"<div class='vx-decision'>{html.escape(results.decision())}</div>{notes}</div>"
    )


def _line(label: str, base: Any, cur: Any, digits: int = 5, numeric: bool = True) -> str:
    same = base == cur if not numeric else (base is None and cur is None) or (
        base is not None and cur is not None and float(base) == float(cur))
    cls = "" if same else " class='vx-diff'"
    if same:
        change = ""
    elif numeric and base is not None and cur is not None:
        change = f"changed ({'+' if float(cur) >= float(base) else ''}{fmt(float(cur) - float(base), 3)})"
    else:
        change = "changed"
    b = fmt(base, digits) if numeric else html.escape(str(base))
    c = fmt(cur, digits) if numeric else html.escape(str(cur))
    num = " class='vx-num'" if numeric else ""
    return (f"<tr{cls}><td data-label=''>{html.escape(label)}</td><td{num} data-label='unedited data'>{b}</td>"
            f"<td{num} data-label='current view'>{c}</td><td class='vx-mark' data-label='difference'>{change}</td></tr>")


def comparison_html(study: Study) -> str:
    """Unedited data beside the current view: partition figures, decision, rows left out, disclosure."""
    b, c = study.baseline, study.results
    term = c.main_term
    tb, tc = b.partition.row(term), c.partition.row(term)
    rb, rc = b.partition.row("residual"), c.partition.row("residual")
    alpha = c.spec.alpha
    verdict_b = "differences" if b.significant(alpha=alpha) else "no differences"
    verdict_c = "differences" if c.significant(alpha=alpha) else "no differences"
    rows = [
        _line("rows in analysis", b.n_used, c.n_used),
        _line(f"levels of {term}", b.groups.k, c.groups.k),
        _line("df, residual", rb.df, rc.df),
        _line(f"sum of squares, {term}", tb.sum_sq, tc.sum_sq),
        _line("sum of squares, residual", rb.sum_sq, rc.sum_sq),
        _line(f"F, {term}", tb.statistic, tc.statistic, 5),
        _line("p-value", tb.pvalue, tc.pvalue, 4),
        _line("R²", b.r_squared, c.r_squared, 4),
        _line("residual SD", b.residual_sd, c.residual_sd, 4),
        _line(f"decision at alpha {alpha:g}", verdict_b, verdict_c, numeric=False),
    ]
    flip = ""
    if verdict_b != verdict_c:
        flip = (f"<div class='vx-decision-flip'>The edits change the decision: unedited data: {verdict_b}; "
                f"current view: {verdict_c}.</div>")
    head = "<tr><th></th><th>unedited data</th><th>current view</th><th>difference</th></tr>"
    dropped = study.dropped
    left = (f"<div class='vx-small'>Left out now: {len(dropped)} row(s)"
            + (f" ({html.escape(', '.join(str(r) for r in dropped[:12]))}{'…' if len(dropped) > 12 else ''})"
               if dropped else "") + "</div>")
    moved = study.moved_rows()
    if moved:
        items = "; ".join(html.escape(m.describe()) for m in moved[:12]) + ("…" if len(moved) > 12 else "")
        left += f"<div class='vx-small vx-moved'>Moved to another level now: {len(moved)} row(s): {items}</div>"
    return (
        f"<div class='vx-compare'><table class='vx-table vx-cols-4'><thead>{head}</thead>"
        f"<tbody>{''.join(rows)}</tbody></table>{flip}{left}"
        f"<div class='vx-small'>{disclosure_html(study)}</div></div>"
    )
