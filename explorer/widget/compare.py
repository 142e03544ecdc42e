"""HTML for the tables the explorer shows: current partition and unedited-vs-current comparison.

Presentation only: every number comes from a :class:`~explorer.engine.Results`; the
comparison marks the lines whose value differs between the unedited data and the
current view.
"""

from __future__ import annotations

from typing import Any

from explorer.engine import Results
from explorer.study import Study
from explorer.study.decision import Decision

from ..engine.tables import esc
from ..formatting import format_value, heading, show_measure, show_share

__all__ = ["comparison_html", "disclosure_html", "partition_html"]

def disclosure_html(study: Study) -> str:
    """The searching so far, in the words of every surface (read from the study now)."""
    return (f"<span class='vx-disclosure'><b>Searching so far:</b> {esc(study.disclosure.sentence())}</span>")


def partition_html(results: Results, decision: Decision) -> str:
    """The current partition with the study's decision line, in a block the tests and the browser can find."""
    notes = "".join(f"<div class='vx-small'>{esc(n)}</div>" for n in results.notes)
    caveat = f"<div class='vx-small'>{esc(decision.caveat)}</div>" if decision.caveat else ""
    return (
        f"<div class='vx-partition'>{results.partition._repr_html_()}"
        f"<div class='vx-small'>n = {results.n_used}, R² = {show_share(results.r_squared)}, "
        f"residual SD = {show_measure(results.residual_sd)}</div>"
        f"<div class='vx-decision'>{esc(decision.sentence())}</div>{caveat}{notes}</div>"
    )


def _line(label: str, base: Any, cur: Any, role: str = "number") -> str:
    """One line of the comparison: both values by their role (one formatter), the change marked."""
    numeric = role != "text"
    same = base == cur if not numeric else (base is None and cur is None) or (
        base is not None and cur is not None and float(base) == float(cur))
    cls = "" if same else " class='vx-diff'"
    if same:
        change = ""
    elif numeric and base is not None and cur is not None:
        delta = float(cur) - float(base)
        shown = format_value(delta, "number" if role == "p" else role)
        change = f"changed ({'+' if delta >= 0 else ''}{shown})"
    else:
        change = "changed"
    b = format_value(base, role) if numeric else str(base)
    c = format_value(cur, role) if numeric else str(cur)
    num = " class='vx-num'" if numeric else ""
    return (f"<tr{cls}><td data-label=''>{esc(label)}</td><td{num} data-label='unedited data'>"
            f"{esc(b)}</td><td{num} data-label='current view'>{esc(c)}</td>"
            f"<td class='vx-mark' data-label='difference'>{esc(change)}</td></tr>")


def _verdict_on(decision: Decision, term: str) -> Any:
    try:
        return decision.verdict_for(term)
    except KeyError:
        return None


def comparison_html(study: Study) -> str:
    """Unedited data beside the current view: partition figures, the two decisions, rows left out, disclosure.

    Both columns read the study's decisions (one test, one alpha); the figures are those of
    the term the current decision is about.
    """
    b, c = study.baseline, study.results
    db, dc = study.baseline_decision, study.decision
    term = dc.term
    vb, vc = _verdict_on(db, term), dc.verdict_for(term)
    rb, rc = b.partition.row("residual"), c.partition.row("residual")
    tb = b.partition.row(term) if term in [r.source for r in b.partition.rows] else None
    tc = c.partition.row(term)
    rows = [
        _line("rows in analysis", b.n_used, c.n_used, "count"),
        _line("groups (levels or cells)", b.groups.k, c.groups.k, "count"),
        _line("df, residual", rb.df, rc.df, "df"),
        _line(heading(f"sum of squares, {term}", "ss"), tb.sum_sq if tb else None, tc.sum_sq, "ss"),
        _line(heading("sum of squares, residual", "ss"), rb.sum_sq, rc.sum_sq, "ss"),
        _line(f"{dc.test_label}, {term}", vb.statistic if vb else None, vc.statistic, "stat"),
        _line(f"p-value ({dc.test_label})", vb.pvalue if vb else None, vc.pvalue, "p"),
        _line("R²", b.r_squared, c.r_squared, "share"),
        _line(heading("residual SD", "measure"), b.residual_sd, c.residual_sd, "measure"),
        _line("decision is about", db.term, dc.term, "text"),
        _line(f"decision at alpha {dc.alpha:g}", db.verdict, dc.verdict, "text"),
    ]
    flip = ""
    if not db.agrees_with(dc):
        flip = (f"<div class='vx-decision-flip'>The edits change the decision: unedited data: "
                f"{esc(db.sentence())}; current view: {esc(dc.sentence())}.</div>")
    head = "<tr><th></th><th>unedited data</th><th>current view</th><th>difference</th></tr>"
    dropped = study.dropped
    left = (f"<div class='vx-small'>Left out now: {len(dropped)} row(s)"
            + (f" ({esc(', '.join(str(r) for r in dropped[:12]))}{'…' if len(dropped) > 12 else ''})"
               if dropped else "") + "</div>")
    moved = study.moved_rows()
    if moved:
        items = "; ".join(esc(m.describe()) for m in moved[:12]) + ("…" if len(moved) > 12 else "")
        left += f"<div class='vx-small vx-moved'>Moved to another level now: {len(moved)} row(s): {items}</div>"
    # Four columns, but its labels and marked changes are long: it turns to tiles at the width a
    # five-column table does (at 800 px with the file browser open it overflowed as a table).
    return (
        f"<div class='vx-compare'><table class='vx-table vx-cols-5'><thead>{head}</thead>"
        f"<tbody>{''.join(rows)}</tbody></table>{flip}{left}"
        f"<div class='vx-small'>{disclosure_html(study)}</div></div>"
    )
