"""One self-contained HTML file that hands a study to a colleague who has no Jupyter.

The page needs no network: styles are in the page (its layout, then the one result
stylesheet of :mod:`explorer.rendering`), charts are inline SVG, there is no
script, and a content-security policy in the page forbids loading anything else. It
shows, in order: the scenario, the decision card (unedited and current decisions, what
changed, the disclosure count, one line per caution), the data's provenance, the
cautions in full, baseline and current results side by side, every edit with its reason
and time (and, when asked, a colleague's study of the same data beside it), the test
battery, the sensitivity summary and the replay code. The saved study (the same JSON as
``study.save``) is embedded, so the edit log can be taken out again.
"""

from __future__ import annotations

import json
from collections.abc import Iterable
from datetime import datetime, timezone
from pathlib import Path
from typing import TYPE_CHECKING

from ..engine.errors import ExplorerError
from ..engine.tables import esc
from ..formatting import format_value, heading, scale
from ..rendering import STYLESHEET as RESULTS_STYLESHEET
from ..rendering import styled
from ..study.output_files import check_output_path, write_text_atomic
from .cautions import cautions_html
from .extras import Part, battery_part, planned_part, sensitivity_part
from .replay_code import study_to_code
from .strata_part import strata_part
from .svg_charts import Figure, interaction_figure, model_check_figures, observation_figures

if TYPE_CHECKING:
    from ..study.compare import StudyComparison
    from ..study.study import Study

__all__ = ["report_html", "write_report"]

CSP = "default-src 'none'; style-src 'unsafe-inline'; img-src data:; font-src data:"

#: The page's own rules (layout, headings, figures), then the one result stylesheet of the renderer.
STYLE = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;margin:2em auto;max-width:1180px;
 padding:0 1em;color:#1d1d1d;line-height:1.4}
h1{font-size:1.6em;margin-bottom:.2em} h2{font-size:1.2em;border-bottom:1px solid #ccc;padding-bottom:.2em;margin-top:1.6em}
.scenario{font-size:1.1em;color:#333}
.side{display:grid;grid-template-columns:1fr 1fr;gap:1.5em}
.side>div{overflow-x:auto}
.side table.vx-table{font-size:80%;width:100%}
figure.vx-chart{margin:.5em 0;max-width:100%;overflow:hidden}
figure.vx-chart svg{max-width:100%;height:auto}
figure.vx-chart figcaption{font-size:85%;color:#444;max-width:36em}
.disclosure{background:#fff6e0;border-left:4px solid #d08c00;padding:.4em .8em}
.vx-cautions li{margin:.3em 0}
.vx-figures{display:flex;flex-wrap:wrap;gap:1em}
table.vx-edits td{text-align:left}
pre{background:#f6f6f6;padding:.8em;overflow-x:auto;font-size:85%}
@media print{.side{grid-template-columns:1fr}}
""" + RESULTS_STYLESHEET


def _kv_table(rows: list[tuple[str, str]]) -> str:
    body = "".join(f"<tr><th>{esc(k)}</th><td>{v}</td></tr>" for k, v in rows)
    return f"<table class='vx-table'>{body}</table>"


def _provenance(study: "Study") -> str:
    ds = study.dataset
    rows = [
        ("data file", esc(ds.source)),
        ("fingerprint (column-sha256)", f"<code>{esc(ds.column_fingerprint)}</code>"),
        ("rows in the file", str(len(ds.table))),
        ("rows usable", str(ds.n)),
        ("row ids", esc(ds.describe_ids())),
        ("response", esc(study.spec.response)),
        ("factors", esc(", ".join(study.spec.factors))),
    ]
    if study.spec.blocks:
        rows.append(("blocks", esc(", ".join(study.spec.blocks))))
    rows.append(("sums of squares", esc(study.results.partition.ss_caption)))
    rows.append(("decisions read at alpha", f"{study.spec.alpha:g}"))
    out = _kv_table(rows)
    if ds.set_aside:
        items = "".join(f"<li>row {esc(str(s.row))}: {esc(s.reason)}</li>" for s in ds.set_aside)
        out += f"<p>{len(ds.set_aside)} row(s) set aside when the data were loaded:</p><ul>{items}</ul>"
    else:
        out += "<p>No rows were set aside when the data were loaded.</p>"
    out += "".join(f"<p class='vx-note'>{esc(n)}</p>" for n in ds.notes)
    return out


def _headline(study: "Study") -> str:
    base, cur = study.baseline, study.results
    db, dc = study.baseline_decision, study.decision
    term = dc.term
    try:
        vb = db.verdict_for(term)
    except KeyError:
        vb = None
    vc = dc.verdict_for(term)

    def line(label: str, a: object, b: object, role: str) -> tuple[str, str, str]:
        if role == "text":
            return (esc(label), esc(a), esc(b))
        return (esc(label), f"<span class='vx-num'>{esc(format_value(a, role))}</span>",
                f"<span class='vx-num'>{esc(format_value(b, role))}</span>")

    rows = [
        line("observations used", base.n_used, cur.n_used, "count"),
        line(f"{dc.test_label} for {term}", vb.statistic if vb else None, vc.statistic, "stat"),
        line(f"p-value for {term}", vb.pvalue if vb else None, vc.pvalue, "p"),
        line("R²", base.r_squared, cur.r_squared, "share"),
        line(heading("residual SD", "measure"), base.residual_sd, cur.residual_sd, "measure"),
        line("the decision is about", db.term, dc.term, "text"),
        line("decision", db.sentence(), dc.sentence(), "text"),
    ]
    body = "".join(f"<tr><th>{k}</th><td>{a}</td><td>{b}</td></tr>" for k, a, b in rows)
    caveats = "".join(f"<p class='vx-note'>{esc(c)}</p>" for c in dict.fromkeys((db.caveat, dc.caveat)) if c)
    return (
        "<table class='vx-table vx-headline'><thead><tr><th></th><th>baseline (unedited)</th>"
        f"<th>current (after {len(study.edits)} edit(s))</th></tr></thead><tbody>{body}</tbody></table>"
        f"<p class='vx-note'>Decisions read from the {esc(dc.method)} at alpha {dc.alpha:g}.</p>{caveats}"
    )


def _results_column(study: "Study", baseline: bool, heading: str, figure: "Figure | None") -> str:
    res = study.baseline if baseline else study.results
    parts = [f"<h3>{esc(heading)}</h3>"]
    if figure is not None:
        parts.append(figure.html())
    parts.append(res._repr_html_())
    return "<div>" + "".join(parts) + "</div>"


def _side_by_side(study: "Study", charts: bool) -> str:
    """Unedited and current results in two columns; their observation charts share one response axis."""
    base_fig, cur_fig = observation_figures(study) if charts else (None, None)
    return ("<div class='side'>"
            + _results_column(study, True, "Baseline (unedited data)", base_fig)
            + _results_column(study, False, f"Current (after {len(study.edits)} edit(s))", cur_fig)
            + "</div>")


def _model_checks(study: "Study") -> str:
    figures = "".join(f.html() for f in model_check_figures(study))
    return f"<h3>Partition and model checks</h3><div class='vx-figures'>{figures}</div>"


def _moved(study: "Study") -> str:
    moved = study.moved_rows()
    if not moved:
        return ""
    items = "".join(f"<li>{esc(m.describe())}: {esc(m.reason or '(no reason given)')}</li>"
                    for m in moved)
    return f"<p>{len(moved)} row(s) now at another level than the one recorded (from → to):</p><ul>{items}</ul>"


def _interaction(study: "Study", charts: bool) -> str:
    """Cell means of the decision's pair of factors (chart) and the simple effects, or '' with one factor."""
    pair = study.decision.simple_effects_pair
    if pair is None:
        return ""
    try:
        effects = study.simple_effects(pair[0], within=pair[1])
    except ExplorerError as exc:
        return f"<section id='interaction'><h2>Interaction</h2><p class='vx-note'>{esc(str(exc))}</p></section>"
    figure = interaction_figure(effects).html() if charts else ""
    return (f"<section id='interaction'><h2>Interaction: {esc(pair[0])} by {esc(pair[1])}</h2>"
            f"{figure}{effects._repr_html_()}</section>")


def _edits(study: "Study") -> str:
    rows = []
    for i, e in enumerate(study.edits, 1):
        rows.append((str(i), e.describe(), e.reason or "(no reason given)", e.at, "in effect"))
    for j, e in enumerate(study.redo_edits, len(study.edits) + 1):
        rows.append((str(j), e.describe(), e.reason or "(no reason given)", e.at, "undone (kept for redo)"))
    if not rows:
        return "<p>No edits: the current results are the baseline.</p>"
    head = "".join(f"<th>{h}</th>" for h in ("#", "edit", "reason", "made (UTC)", "status"))
    body = "".join(
        "<tr>" + "".join(f"<td>{esc(c)}</td>" for c in r) + "</tr>" for r in rows
    )
    return f"<table class='vx-table vx-edits'><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _ledger(study: "Study") -> str:
    """The study's whole record (its ledger), oldest first: edits undone and replaced show here too."""
    ledger = study.ledger
    if not len(ledger):
        return ""
    rows = [(e.at or "(not recorded)", e.kind, e.what,
             f"{e.old} -> {e.new}" if e.kind == "specification" else
             (str(e.count) if e.kind in ("search", "reset") else ""),
             e.reason, e.origin or "this study") for e in ledger.entries]
    head = "".join(f"<th>{h}</th>" for h in ("time (UTC)", "kind", "what", "change or count", "reason", "origin"))
    body = "".join("<tr>" + "".join(f"<td>{esc(c)}</td>" for c in r) + "</tr>" for r in rows)
    note = f"<p class='note'>{esc(ledger.note)}.</p>" if ledger.note else ""
    return (f"<details class='vx-ledger'><summary>The whole record ({len(rows)} entries): every edit made, "
            "undone ones included, every undo, redo and reset, specification choice and search</summary>"
            f"{note}<table class='vx-table vx-ledger-table'><thead><tr>{head}</tr></thead><tbody>{body}</tbody>"
            "</table></details>")


def _part(part: Part) -> str:
    if part.present:
        return part.html
    return f"<p class='vx-note'>Not included: {esc(part.note or '')}.</p>"


def report_html(study: "Study", *, title: str | None = None, scenario: str | None = None, charts: bool = True,
                compare: "Study | str | Path | None" = None) -> str:
    """The report page as a string (see the module docstring for its contents).

    Numbers follow the study's display scale (:mod:`explorer.formatting`), as in the explorer.
    With ``compare`` (a colleague's study of the same data, or the path of its study file),
    the page has a section setting the two side by side (``study.compare``).
    """
    comparison = None if compare is None else study.compare(compare)  # refused before anything is built
    with scale(of=study.display_scale()), styled():  # the page carries the stylesheet once, in its head
        return _report_html(study, title=title, scenario=scenario, charts=charts, comparison=comparison)


def _colleague(comparison: "StudyComparison | None") -> list[str]:
    if comparison is None:
        return []
    return [f"<section id='colleague'><h2>Beside {esc(comparison.theirs_label)}</h2>"
            "<p>A second study of the same data: the two edit logs, the two analyses, and the edits that "
            "make the decisions differ (replayed one edit at a time under this study's model).</p>"
            f"{comparison._repr_html_()}</section>"]


def _report_html(study: "Study", *, title: str | None, scenario: str | None, charts: bool,
                 comparison: "StudyComparison | None" = None) -> str:
    from .._version import __version__

    spec = study.spec
    title = title or f"{spec.response} by {' and '.join(spec.factors)}: analysis of variance"
    scenario = scenario or (
        f"Does the mean {spec.response} differ between the levels of {', '.join(spec.factors)}? "
        f"Data: {study.dataset.source}."
    )
    battery = battery_part(study)
    strata = strata_part(study)
    planned = planned_part(study, charts=charts)
    sensitivity = sensitivity_part(study, charts=charts)
    disclosure = study.disclosure  # read after the sensitivity scan, which may add to it
    card = study.decision_card()  # likewise: its searching count includes the scans above
    now = datetime.now(timezone.utc).isoformat(timespec="seconds").replace("+00:00", "Z")
    saved = json.dumps(study.to_dict(), indent=1).replace("<", "\\u003c")  # inert inside <script>
    code = study_to_code(study)
    sections = [
        f"<header><h1>{esc(title)}</h1><p class='scenario'>{esc(scenario)}</p>"
        f"<section id='decision'>{card.html(caution_links='#caution-')}</section></header>",
        f"<section id='provenance'><h2>Data and provenance</h2>{_provenance(study)}</section>",
        f"<section id='cautions'><h2>Cautions</h2>{cautions_html()}</section>",
        "<section id='comparison'><h2>Baseline and current results</h2>" + _headline(study)
        + _side_by_side(study, charts) + (_model_checks(study) if charts else "") + "</section>",
        _interaction(study, charts),
        f"<section id='edits'><h2>Edits, with reasons</h2>{_edits(study)}{_moved(study)}</section>",
        *([f"<section id='record'><h2>Record of the work</h2>{_ledger(study)}</section>"] if len(study.ledger) else []),
        *_colleague(comparison),
        f"<section id='battery'><h2>{esc(battery.title)}</h2>{_part(battery)}</section>",
        *([f"<section id='strata'><h2>{esc(strata.title)}</h2>{_part(strata)}</section>"]
          if strata.present else []),
        *([f"<section id='planned'><h2>{esc(planned.title)}</h2>{_part(planned)}</section>"]
          if planned.present else []),
        f"<section id='sensitivity'><h2>{esc(sensitivity.title)}</h2>{_part(sensitivity)}"
        f"<p><strong>Disclosure:</strong> {esc(disclosure.sentence())}.</p></section>",
        "<section id='replay'><h2>Rerun this analysis</h2><p>Run this Python (with the kit installed, "
        f"next to the data file) to rebuild the current state:</p><pre>{esc(code)}</pre></section>",
        f"<footer><p>Written {now} by variance-explorer {esc(__version__)}. The saved study (edit log "
        "with reasons) is embedded in this file as JSON (element id <code>vx-study</code>).</p></footer>",
        f"<script type='application/json' id='vx-study'>{saved}</script>",
    ]
    return (
        "<!DOCTYPE html>\n<html lang='en'><head><meta charset='utf-8'>"
        f"<meta http-equiv='Content-Security-Policy' content=\"{CSP}\">"
        "<meta name='viewport' content='width=device-width, initial-scale=1'>"
        f"<title>{esc(title)}</title><style>{STYLE}</style></head><body>"
        + "\n".join(sections)
        + "</body></html>\n"
    )


def write_report(
    study: "Study", path: str | Path, *, title: str | None = None, scenario: str | None = None, charts: bool = True,
    overwrite: bool = False, protect: Iterable[tuple[str, str | Path | None]] = (),
    compare: "Study | str | Path | None" = None,
) -> Path:
    """Write :func:`report_html` to ``path`` (UTF-8, atomically) and return the path.

    The path is checked before the report is built: an existing file needs
    ``overwrite=True``; the study's data and study files and ``protect`` (pairs of a
    description and a path) are never written over.
    """
    guard = [*study.files_read(), *protect]
    if isinstance(compare, (str, Path)):
        guard.append(("colleague's study file", compare))
    check_output_path(path, overwrite=overwrite, protect=guard)
    page = report_html(study, title=title, scenario=scenario, charts=charts, compare=compare)
    return write_text_atomic(path, page, overwrite=overwrite, protect=guard)
