"""The cautions every hand-off carries: one source of their text for the decision card, the
explorer, the report, the command line and the README (a test checks that README.md says
the same words, so the two cannot drift apart).

Each caution has a one-line headline (shown on the decision card, opening to the full
text) and the full text (Markdown-style ``**bold**`` lead-in).
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from ..formatting import esc

__all__ = ["CAUTIONS", "CAUTION_ITEMS", "Caution", "cautions_html", "cautions_text"]


@dataclass(frozen=True)
class Caution:
    """One caution: ``headline`` (one line) and ``text`` (the full text, ``**bold**`` lead-in)."""

    key: str
    headline: str
    text: str

    def text_html(self) -> str:
        """The full text as HTML (the bold lead-in as ``<strong>``), escaped."""
        return _BOLD.sub(r"<strong>\1</strong>", esc(self.text))

    def plain(self) -> str:
        return _BOLD.sub(r"\1", self.text)


_BOLD = re.compile(r"\*\*(.+?)\*\*")

CAUTION_ITEMS: tuple[Caution, ...] = (
    Caution(
        key="exclusions",
        headline="Leaving data out needs a documented reason.",
        text="**Leaving data out needs a documented reason.** Every exclusion, reassignment or merge "
             "is logged with its reason and time, and the baseline stays in view. An observation is "
             "not an outlier because it is inconvenient.",
    ),
    Caution(
        key="searching",
        headline="A sensitivity scan is not a licence to pick the answer you want.",
        text="**A sensitivity scan is not a licence to pick the answer you want.** The kit shows which "
             "observations or regroupings would flip the decision so that you can report how fragile "
             "it is, not so that you can choose the analysis that gives the wanted p-value. It counts "
             "the alternatives you examined and shows that count beside every result.",
    ),
    Caution(
        key="procedures",
        headline="Decisions on safety, health, regulation or product release follow your organisation's "
                 "procedures and qualified review.",
        text="**Decisions on safety, health, regulation or product release** follow your "
             "organisation's procedures and qualified statistical review; this kit is an aid to that "
             "review, not a substitute for it.",
    ),
    Caution(
        key="assumptions",
        headline="Read the assumption checks before the p-value.",
        text="The classic F test assumes independent observations, normal residuals and equal "
             "variances; read the assumption checks before the p-value.",
    ),
)

#: The full texts (``**bold**`` lead-ins), in order: the README's "Cautions" section word for word.
CAUTIONS: tuple[str, ...] = tuple(c.text for c in CAUTION_ITEMS)


def cautions_text() -> str:
    """Plain text, one caution per paragraph (for the command line)."""
    return "\n".join("- " + c.plain() for c in CAUTION_ITEMS)


def cautions_html() -> str:
    """An HTML list of the cautions (full text), each with the id ``caution-<key>``."""
    items = "".join(f"<li id='caution-{c.key}'>{c.text_html()}</li>" for c in CAUTION_ITEMS)
    return f"<ul class='vx-cautions'>{items}</ul>"
