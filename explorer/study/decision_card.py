"""The decision card: what a reader must see first about a study, on one screen.

The unedited and the current decision of the one chosen test side by side, what the
edits changed (the decision itself marked when it differs), the searching done so far
(read from the study when the card is made, so a scan run a moment ago counts) and one
line per caution that opens to its full text (:mod:`.cautions`). The explorer shows it
at its top and the report at the top of its page; ``study.decision_card()`` builds it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from ..engine.disclosure import Disclosure
from ..formatting import Scale, esc, format_value, scale
from ..rendering import DECISION_CARD_RULES, html_repr
from .cautions import CAUTION_ITEMS, Caution
from .decision import Decision

if TYPE_CHECKING:
    from .study import Study

__all__ = ["DECISION_CARD_CSS", "DecisionCard", "DecisionChange", "decision_card", "disclosure_line"]

#: Styles of the card (scoped to ``.vx-dcard``): part of the renderer's one stylesheet.
DECISION_CARD_CSS = DECISION_CARD_RULES


@dataclass(frozen=True)
class DecisionChange:
    """One thing that differs between the unedited and the current decision.

    ``role`` is the formatter's role of the values ('p', 'stat', 'count' or 'text');
    ``decisive`` marks a change of the decision itself (its verdict or its term).
    """

    what: str
    before: object
    after: object
    role: str
    decisive: bool = False

    def text(self) -> str:
        def show(v: object) -> str:
            return "none" if v is None else (str(v) if self.role == "text" else format_value(v, self.role))

        return f"{self.what}: {show(self.before)} → {show(self.after)}"


def disclosure_line(d: Disclosure) -> str:
    """The searching so far, as every surface states it."""
    return f"Searching so far: {d.sentence()}"


@dataclass(frozen=True)
class DecisionCard:
    """What the study concludes now and on the unedited data, what changed, the searching and the cautions.

    Made by :meth:`Study.decision_card`; ``disclosure`` is the study's count when the
    card was made. ``html()`` is the card (its rules are in the renderer's stylesheet,
    :data:`explorer.rendering.STYLESHEET`), ``_repr_html_()`` the card with the stylesheet,
    ``to_text()`` the same as text.
    """

    subject: str
    baseline: Decision
    current: Decision
    rows_baseline: int
    rows_current: int
    left_out: int
    edits_in_effect: int
    disclosure: Disclosure
    changes: tuple[DecisionChange, ...]
    cautions: tuple[Caution, ...]
    display: Scale

    @property
    def decision_changed(self) -> bool:
        """True when the edits change the decision (its term or its verdict)."""
        return not self.baseline.agrees_with(self.current)

    def summary(self) -> str:
        """One sentence on what the edits did to the decision."""
        if not self.edits_in_effect:
            return "No edits in effect: the current view is the unedited data."
        if self.decision_changed:
            return f"The {self.edits_in_effect} edit(s) in effect change the decision."
        return f"The {self.edits_in_effect} edit(s) in effect leave the decision as it was."

    def to_text(self) -> str:
        with scale(of=self.display):
            lines = [f"Decision: {self.subject}; {self.rows_current} rows in analysis, {self.left_out} left out",
                     f"  unedited data: {self.baseline.sentence()}",
                     f"  current view:  {self.current.sentence()}",
                     f"  {self.summary()}"]
            lines += [f"  changed: {c.text()}" for c in self.changes]
        lines.append(f"  {disclosure_line(self.disclosure)}")
        lines += [f"  caution: {c.headline}" for c in self.cautions]
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.to_text()

    def html(self, *, caution_links: str | None = None) -> str:
        """The card as HTML. Each caution opens to its full text; with ``caution_links`` (a
        prefix such as ``"#caution-"``) it also links to the full list on the same page."""
        with scale(of=self.display):
            return self._html(caution_links)

    def _html(self, caution_links: str | None) -> str:
        differs = " vx-dcard-differs" if self.decision_changed else ""
        sides = (
            "<div class='vx-dcard-pair'>"
            "<div class='vx-dcard-side vx-dcard-before'><div class='vx-dcard-label'>UNEDITED DATA</div>"
            f"<div class='vx-dcard-sentence'>{esc(self.baseline.sentence())}</div></div>"
            f"<div class='vx-dcard-side vx-dcard-now{differs}'><div class='vx-dcard-label'>CURRENT VIEW "
            f"({self.edits_in_effect} edit(s) in effect)</div>"
            f"<div class='vx-dcard-sentence'>{esc(self.current.sentence())}</div></div></div>"
        )
        summary = esc(self.summary())
        if self.decision_changed:
            summary = f"<span class='vx-dcard-flipnote'>{summary}</span>"
        changes = "".join(
            f"<span class='vx-dcard-change{' vx-dcard-decisive' if c.decisive else ''}'>{esc(c.text())}</span>"
            for c in self.changes)
        what = f"<div class='vx-dcard-changes'>{summary} {changes}</div>"
        items = []
        for c in self.cautions:
            link = (f" <a href='{esc(caution_links)}{esc(c.key)}'>full list</a>" if caution_links else "")
            items.append(f"<li><details><summary>{esc(c.headline)}</summary><div>{c.text_html()}{link}</div>"
                         "</details></li>")
        cls = "vx-dcard vx-dcard-flip" if self.decision_changed else "vx-dcard"
        return (
            f"<div class='{cls}' role='region' aria-label='decision'>"
            f"<div class='vx-dcard-head'><b>Decision</b>: {esc(self.subject)} "
            f"({self.rows_current} rows in analysis, {self.left_out} left out)</div>"
            f"{sides}{what}"
            f"<div class='vx-dcard-disclosure vx-disclosure'><b>Searching so far:</b> "
            f"{esc(self.disclosure.sentence())}</div>"
            f"<ul class='vx-dcard-cautions'>{''.join(items)}</ul></div>"
        )

    @html_repr
    def _repr_html_(self) -> str:
        return self.html()


def _changes(study: Study, base: Decision, cur: Decision) -> tuple[DecisionChange, ...]:
    out: list[DecisionChange] = []
    if base.term != cur.term:
        out.append(DecisionChange("the decision is about", base.term, cur.term, "text", decisive=True))
    if base.verdict != cur.verdict:
        out.append(DecisionChange("verdict", base.verdict, cur.verdict, "text", decisive=base.term == cur.term))
    try:
        same_term = base.verdict_for(cur.term)
    except KeyError:
        same_term = None
    if same_term is not None:
        if same_term.pvalue != cur.pvalue:
            out.append(DecisionChange(f"p-value of {cur.term}", same_term.pvalue, cur.pvalue, "p"))
        if same_term.statistic != cur.statistic:
            out.append(DecisionChange(f"{cur.test_label} of {cur.term}", same_term.statistic, cur.statistic, "stat"))
    if study.baseline.n_used != study.results.n_used:
        out.append(DecisionChange("rows in analysis", study.baseline.n_used, study.results.n_used, "count"))
    return tuple(out)


def decision_card(study: Study) -> DecisionCard:
    """The card of ``study`` as it is now (its disclosure read at this moment)."""
    s = study.spec
    units = f" ({s.units})" if s.units else ""
    base, cur = study.baseline_decision, study.decision
    return DecisionCard(
        subject=f"{s.response}{units} by {' × '.join(s.factors)}",
        baseline=base, current=cur, rows_baseline=study.baseline.n_used, rows_current=study.results.n_used,
        left_out=len(study.dropped), edits_in_effect=len(study.edits), disclosure=study.disclosure,
        changes=_changes(study, base, cur), cautions=CAUTION_ITEMS, display=study.display_scale())
