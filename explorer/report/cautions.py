"""The cautions every hand-off carries (the same words as the README's "Cautions" section).

A test checks that these match README.md, so the two cannot drift apart.
"""

from __future__ import annotations

import re

from ..engine.tables import esc

__all__ = ["CAUTIONS", "cautions_html", "cautions_text"]

#: Each caution as Markdown-style text (``**bold**`` lead-in).
CAUTIONS: tuple[str, ...] = (
    "**Leaving data out needs a documented reason.** Every exclusion, reassignment or merge "
    "is logged with its reason and time, and the baseline stays in view. An observation is "
    "not an outlier because it is inconvenient.",
    "**A sensitivity scan is not a licence to pick the answer you want.** The kit shows which "
    "observations or regroupings would flip the decision so that you can report how fragile "
    "it is, not so that you can choose the analysis that gives the wanted p-value. It counts "
    "the alternatives you examined and shows that count beside every result.",
    "**Decisions on safety, health, regulation or product release** follow your "
    "organisation's procedures and qualified statistical review; this kit is an aid to that "
    "review, not a substitute for it.",
    "The classic F test assumes independent observations, normal residuals and equal "
    "variances; read the assumption checks before the p-value.",
)

_BOLD = re.compile(r"\*\*(.+?)\*\*")


def cautions_text() -> str:
    """Plain text, one caution per paragraph (for the command line)."""
    return "\n".join("- " + _BOLD.sub(r"\1", c) for c in CAUTIONS)


def cautions_html() -> str:
    """An HTML list of the cautions."""
    bold = r"<strong>\1</strong>"
    items = "".join("<li>" + _BOLD.sub(bold, esc(c)) + "</li>" for c in CAUTIONS)
    return f"<ul class='vx-cautions'>{items}</ul>"
