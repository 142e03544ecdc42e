"""A plain-text hand-off for a terminal: the same contents as the report, without charts."""

from __future__ import annotations

from typing import TYPE_CHECKING

from ..engine.errors import ExplorerError
from ..formatting import scale
from .cautions import cautions_text
from .extras import battery_part, frame_text, planned_part, sensitivity_part
from .strata_part import strata_part

if TYPE_CHECKING:
    from ..engine.results import Results
    from ..study.decision import Decision
    from ..study.study import Study

__all__ = ["results_text", "summary_text"]


def _heading(title: str) -> str:
    return f"{title}\n{'=' * len(title)}"


def results_text(res: "Results", decision: "Decision") -> str:
    """The partition, a one-line summary, the level tables and the study's decision (with its caveat)."""
    parts = [frame_text(res.partition.to_frame()), res.summary_line()]
    parts.extend(res.partition.notes)
    for factor, table in res.levels.items():
        parts.append("")
        parts.append(f"Levels of {factor}:")
        parts.append(frame_text(table.to_frame()))
        parts.extend(table.notes)
    parts.extend(n for n in res.notes if n not in res.partition.notes)
    parts.append(f"Decision ({decision.method}): {decision.sentence()}")
    if decision.caveat:
        parts.append(decision.caveat)
    return "\n".join(parts)


def _simple_effects_text(study: "Study") -> list[str]:
    """The simple effects behind the decision's pair of factors (none with one factor)."""
    pair = study.decision.simple_effects_pair
    if pair is None:
        return []
    try:
        effects = study.simple_effects(pair[0], within=pair[1])
    except ExplorerError as exc:
        return ["", _heading("Simple effects"), f"not available: {exc}"]
    out = ["", _heading(f"Simple effects of {pair[0]} at each level of {pair[1]}"),
           frame_text(effects.to_frame()), *effects.verdicts(), "Cell means:", frame_text(effects.cells), *effects.notes]
    shown = effects.shown_pairs()
    if shown is not None:
        out += [f"{shown.title}:", frame_text(shown.to_frame()), *shown.notes]
    return out


def summary_text(study: "Study", *, cautions: bool = True) -> str:
    """Provenance, baseline, edits, current results, battery, sensitivity, disclosure and cautions
    (numbers as in the explorer and the report: the study's display scale)."""
    with scale(of=study.display_scale()):
        return _summary_text(study, cautions=cautions)


def _summary_text(study: "Study", *, cautions: bool) -> str:
    ds = study.dataset
    out = [
        _heading(f"{study.spec.response} by {', '.join(study.spec.factors)}"),
        f"data: {ds.source} ({len(ds.table)} rows, {ds.n} usable), fingerprint {ds.column_fingerprint} (column-sha256)",
        f"{ds.describe_ids()[:1].upper()}{ds.describe_ids()[1:]}.",
    ]
    out.extend(f"set aside at load: row {s.row}: {s.reason}" for s in ds.set_aside)
    out.extend(ds.notes)
    out += ["", _heading("Baseline (unedited data)"), results_text(study.baseline, study.baseline_decision)]
    if study.edits or study.redo_edits:
        out += ["", _heading("Edits, with reasons")]
        for i, e in enumerate(study.edits, 1):
            out.append(f"{i}. {e.describe()} -- {e.reason or '(no reason given)'} [{e.at}]")
        for e in study.redo_edits:
            out.append(f"   (undone) {e.describe()} -- {e.reason or '(no reason given)'} [{e.at}]")
        out += ["", _heading(f"Current (after {len(study.edits)} edit(s))"), results_text(study.results, study.decision)]
    out += _simple_effects_text(study)
    strata = strata_part(study)
    planned = planned_part(study, charts=False)
    optional = tuple(p for p in (strata, planned) if p.present)
    for part in (battery_part(study), *optional, sensitivity_part(study, charts=False)):
        out += ["", _heading(part.title), part.text if part.present else f"not included: {part.note}"]
    out += ["", f"Disclosure: {study.disclosure.sentence()}."]
    if len(study.ledger):
        out += ["", _heading("Record (every edit made, undo, redo, reset, specification choice and search)"),
                study.ledger.to_text()]
    if cautions:
        out += ["", _heading("Cautions"), cautions_text()]
    return "\n".join(out) + "\n"
