"""The one HTML renderer of results, with its one stylesheet.

Every result of the kit (a partition, a battery, a scan, a decision, a frame from
``to_frame()``) writes its HTML through the builders here, and the look of that markup is
set by :data:`STYLESHEET` alone: results carry class names, never ``style`` attributes.

============== ============================================================================
class          what it marks
============== ============================================================================
vx-table       a table of numbers; ``vx-cols-N`` gives its column count (a narrow page may
               stack each row into "heading: value" lines); ``vx-num`` a number's cell
vx-note        a caution about the result (what it assumes, what was set aside)
vx-footnote    a table's footnote (rules, references, how many rows are shown)
vx-small       a side remark in small print
vx-result      one result's block; ``vx-result-KIND`` names the kind (``vx-result-battery``)
vx-dcard       the decision card and its parts (``vx-dcard-pair``, ``vx-dcard-side``, ...)
vx-disclosure  the searching done so far (the card's line, the explorer's header)
============== ============================================================================

The stylesheet goes out once per output: the outermost ``_repr_html_`` of a notebook
display puts one ``<style>`` block first (:func:`output`, :func:`html_repr`), the results
nested inside it add none, and a page that carries the stylesheet itself (the explorer
widget, the report) renders inside :func:`styled` so that its results add none either.

:func:`esc` is the one escaping helper: every user string (names, levels, row ids,
reasons, paths) goes through it. ``explorer.formatting.esc`` and
``explorer.engine.tables.esc`` are this function.

This module imports nothing but the standard library, below every other module of the
kit (the number formatter included), so that every layer may use it.
"""

from __future__ import annotations

import functools
import html
import re
from collections.abc import Callable, Iterable, Iterator, Sequence
from contextlib import contextmanager
from contextvars import ContextVar
from typing import TypeVar

__all__ = [
    "CLASSES",
    "CLASS_PATTERNS",
    "DECISION_CARD_RULES",
    "NOTE_COLOUR",
    "STYLESHEET",
    "block",
    "esc",
    "footnote",
    "html_repr",
    "note",
    "output",
    "small",
    "style_block",
    "styled",
    "table",
]

#: Colour of a caution (also the explorer's warning status).
NOTE_COLOUR = "#8a4b00"

#: The rules for tables, notes, footnotes and small print.
_BASE_RULES = f"""\
.vx-table {{ border-collapse: collapse; font-size: 13px; margin: 2px 0 6px 0; max-width: 100%;
  min-width: min(100%, 30em); }}
.vx-table caption {{ font-size: 13px; padding-bottom: 3px; text-align: left; font-weight: 600; }}
.vx-table th {{ text-align: left; padding: 3px 8px; border-bottom: 2px solid #999; background: #f4f4f4;
  vertical-align: bottom; }}
.vx-table td {{ padding: 3px 8px; border-bottom: 1px solid #e3e3e3; text-align: left; vertical-align: top; }}
.vx-table td.vx-num {{ text-align: right; white-space: nowrap; font-variant-numeric: tabular-nums; }}
.vx-note {{ color: {NOTE_COLOUR}; }}
.vx-footnote {{ font-size: 90%; color: #555; }}
.vx-small {{ font-size: 12px; color: #444; }}
.vx-result {{ margin: 2px 0 6px 0; }}
"""

#: The decision card's rules (:mod:`explorer.study.decision_card`), scoped to ``.vx-dcard``.
DECISION_CARD_RULES = """
.vx-dcard{border:1px solid #c9c9c9;border-left:5px solid #2f5d8a;border-radius:4px;padding:6px 10px;margin:0 0 6px 0;
 background:#fafbfc;font-size:13px;line-height:1.4;max-width:100%;box-sizing:border-box;overflow-wrap:anywhere}
.vx-dcard.vx-dcard-flip{border-left-color:#9b1c1c}
.vx-dcard-head{font-size:13px}
.vx-dcard-pair{display:grid;grid-template-columns:repeat(auto-fit,minmax(min(100%,260px),1fr));gap:4px 12px;margin:4px 0}
.vx-dcard-side{padding:3px 8px;background:#fff;border:1px solid #e3e3e3;border-radius:3px;min-width:0}
.vx-dcard-side.vx-dcard-differs{background:#fff1df;border-color:#d08c00}
.vx-dcard-label{font-size:11px;color:#555;font-weight:700;letter-spacing:.02em}
.vx-dcard-sentence{font-weight:600}
.vx-dcard-change{background:#fff1df;padding:0 4px;border-radius:2px;display:inline-block;margin:1px 6px 1px 0}
.vx-dcard-change.vx-dcard-decisive{background:#fde2e2;color:#7a1111;font-weight:600}
.vx-dcard-flipnote{color:#9b1c1c;font-weight:700}
.vx-dcard-disclosure{margin-top:2px}
.vx-dcard-cautions{margin:4px 0 0 0;padding:0;list-style:none;font-size:12px;display:grid;
 grid-template-columns:repeat(auto-fit,minmax(min(100%,340px),1fr));gap:0 14px}
.vx-dcard-cautions summary{cursor:pointer;color:#7a3f00}
.vx-dcard-cautions details>div{padding:2px 0 4px 14px;color:#333}
"""

#: The one stylesheet of every result's markup: tables, notes and footnotes, then the decision card.
STYLESHEET = _BASE_RULES + DECISION_CARD_RULES

#: Every class name the renderer writes (``vx-cols-N`` and ``vx-result-KIND`` by pattern).
CLASSES = frozenset({"vx-table", "vx-num", "vx-note", "vx-footnote", "vx-small", "vx-result", "vx-disclosure"})
#: The class names written by pattern: a table's column count and a block's kind.
CLASS_PATTERNS = (re.compile(r"vx-cols-\d+"), re.compile(r"vx-result-[a-z][a-z-]*"),
                  re.compile(r"vx-dcard(-[a-z]+)?"))

_STYLED: ContextVar[bool] = ContextVar("explorer_html_styled", default=False)
_T = TypeVar("_T")


def esc(value: object) -> str:
    """The one escaping helper: any value as HTML text (``& < > " '`` escaped), safe in content and
    quoted attributes."""
    return html.escape(str(value), quote=True)


def style_block() -> str:
    """The stylesheet as one ``<style>`` element."""
    return f"<style>\n{STYLESHEET}</style>"


@contextmanager
def styled() -> Iterator[None]:
    """Render inside a page that already carries :data:`STYLESHEET`: results add no ``<style>``."""
    token = _STYLED.set(True)
    try:
        yield
    finally:
        _STYLED.reset(token)


def output(build: Callable[[], str]) -> str:
    """The markup ``build`` returns, preceded by :func:`style_block` unless an enclosing output
    (or :func:`styled`) already carries the stylesheet."""
    if _STYLED.get():
        return build()
    with styled():
        return style_block() + build()


def html_repr(method: Callable[[_T], str]) -> Callable[[_T], str]:
    """Decorator of a result's ``_repr_html_``: its markup goes out through :func:`output`."""

    @functools.wraps(method)
    def wrapper(self: _T) -> str:
        return output(lambda: method(self))

    return wrapper


def note(text: object) -> str:
    """A caution about a result, as escaped text."""
    return f"<div class='vx-note'>{esc(text)}</div>"


def footnote(text: object) -> str:
    """A footnote (a rule, a reference, a count of rows shown), as escaped text."""
    return f"<div class='vx-footnote'>{esc(text)}</div>"


def small(text: object) -> str:
    """A side remark in small print, as escaped text."""
    return f"<div class='vx-small'>{esc(text)}</div>"


def block(kind: str, parts: Iterable[str]) -> str:
    """One result's block of markup (``kind`` names it: ``battery`` gives ``vx-result-battery``)."""
    if not re.fullmatch(r"[a-z][a-z-]*", kind):
        raise ValueError(f"a block's kind is lower-case letters and hyphens, not {kind!r}")
    return f"<div class='vx-result vx-result-{kind}'>" + "".join(parts) + "</div>"


def table(
    heads: Sequence[str],
    rows: Iterable[Sequence[tuple[str, bool]]],
    *,
    caption: str = "",
    notes: Iterable[str] = (),
    spanning: Iterable[tuple[str, str]] = (),
) -> str:
    """A table of already escaped cells (:func:`explorer.formatting.html_cells` gives them).

    ``heads`` are escaped headings; each row holds (escaped text, is a number) per cell.
    Each cell carries its heading (``data-label``) and the table its column count
    (``vx-cols-N``). ``caption`` and ``notes`` are plain text (escaped here); ``spanning``
    rows, plain text too, put a label in the first column and one sentence across the rest
    (the partition names aliased terms this way).
    """
    width = len(heads)
    head = "".join(f"<th>{h}</th>" for h in heads)
    body = []
    for row in rows:
        cells = "".join(
            f"<td class='vx-num' data-label='{lab}'>{text}</td>" if num else f"<td data-label='{lab}'>{text}</td>"
            for lab, (text, num) in zip(heads, row)
        )
        body.append(f"<tr>{cells}</tr>")
    body += [f"<tr><td>{esc(label)}</td><td colspan='{width - 1}'>{esc(text)}</td></tr>" for label, text in spanning]
    cap = f"<caption>{esc(caption)}</caption>" if caption else ""
    foot = "".join(footnote(n) for n in notes)
    return (f"<table class='vx-table vx-cols-{width}'>{cap}<thead><tr>{head}</tr></thead>"
            f"<tbody>{''.join(body)}</tbody></table>{foot}")

