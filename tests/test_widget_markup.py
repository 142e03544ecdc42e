"""The explorer whose every user string is markup shows it as text: its HTML holds exactly the elements
and attributes of the same explorer built on neutral strings of the same lengths.

The study and the payload corpus are the report's (``test_report_markup``): names, levels, row ids
and reasons carry ``<script>``, event-handler attributes, ``<meta refresh>``, ``<base>``, style
imports and the like. Every HTML value the explorer sends to the browser (header, status line,
panels on every tab, chart notes, level editor, picked rows) is parsed without a browser.
"""

from __future__ import annotations

from collections import Counter
from pathlib import Path

import ipywidgets as W
from test_report_markup import NEUTRAL, PAYLOADS, _Elements, _study

import explorer as ex


def _html_values(widget: W.Widget) -> list[str]:
    out = []
    stack = [widget]
    while stack:
        w = stack.pop()
        if isinstance(w, W.HTML):
            out.append(w.value)
        stack.extend(getattr(w, "children", ()))
    return out


def _explorer_elements(tmp_path: Path, strings: list[str]) -> tuple[Counter, str]:
    folder = tmp_path / ("payload" if strings == PAYLOADS else "twin")
    folder.mkdir()
    e = ex.Explorer(_study(folder, strings))
    for i in range(len(e._tab_groups)):  # every tab draws its panels when opened
        e.tabs.selected_index = i
    e.pick([e.study.dataset.row_id(1)])
    parser = _Elements()
    for value in _html_values(e) + [c.note.value for c in e.cards.values()]:
        parser.feed(value)
    parser.close()
    return Counter(parser.found), "".join(parser.text)


def test_payloads_stay_text_in_the_explorer(tmp_path):
    payload, text = _explorer_elements(tmp_path, PAYLOADS)
    twin, _ = _explorer_elements(tmp_path, NEUTRAL)
    assert payload == twin, (payload - twin, twin - payload)
    assert not [a for _, attrs in payload for a in attrs if a.startswith("on")]
    for s in (PAYLOADS[1], PAYLOADS[8], PAYLOADS[10]):  # factor name, a reason, a renamed level: shown as written
        assert s in text, s
