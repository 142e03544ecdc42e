"""A report whose every user string is markup stays text: no element the kit did not write, no request.

Names (response, factor, id column, data file), levels, row ids, reasons, the title and
the scenario carry a corpus of markup payloads. The same report is rendered with
neutral strings of the same lengths (the "twin"); the payload report must hold exactly
the twin's elements and attributes, show every payload as text, never navigate, open
no dialog and request nothing but its own file. A parser check runs without a browser;
the same comparison on the live DOM of headless Chromium is marked ``browser``.
"""

from __future__ import annotations

from collections import Counter
from html.parser import HTMLParser
from pathlib import Path

import pandas as pd
import pytest
from handoff_support import CHROME_ARGS, chromium_path

import explorer as ex
from explorer.report import write_report

EXTERNAL = "http://203.0.113.9"  # TEST-NET-3: never routable
PAYLOADS = [
    '<script>document.title="owned"</script>',
    f'<meta http-equiv="refresh" content="0;url={EXTERNAL}/">',  # the factor's name
    '"><img src=x onerror=alert(1)>',
    "'><svg onload=alert(1)>",
    "</style><b id=vxp>style</b>",
    "</title><i>title</i>",
    "</script><u>script</u>",
    "<svg><script>alert(1)</script></svg>",
    f'<iframe src="{EXTERNAL}/"></iframe>',
    '<a href="javascript:alert(1)">x</a>',
    "<!-- open comment",
    "]]><![CDATA[",
    f'<base href="{EXTERNAL}/">',
    f"<link rel=stylesheet href={EXTERNAL}/x.css>",
    f'<style>@import "{EXTERNAL}/x.css";</style>',
    "&lt;b&gt; &amp; entities",
    f"<math><mtext><table><mglyph><style><img src={EXTERNAL}/m.png>",
    f"<form action={EXTERNAL}><input name=x></form>",
    '<div style="background:url(http://203.0.113.9/bg.png)">bg</div>',
    "<object data=x></object><embed src=x>",
    "\u2028<p>line</p>\u0000",
]


def _neutral(i: int, s: str) -> str:
    """A plain string of the same length as ``s`` (same layout in tables and charts), unique by ``i``."""
    head = f"n{i}x"
    return (head + "x" * max(len(s) - len(head), 0))[: max(len(s), len(head))]


def _study(tmp_path: Path, strings: list[str]) -> ex.Study:
    """A one-factor study with 3 levels x 6 rows whose names, levels, ids and reasons come from ``strings``."""
    response, factor, id_col, file_stem = strings[0], strings[1], strings[2], strings[3]
    levels = strings[4:7]
    ids = [strings[(7 + i) % len(strings)] + f"#{i}" for i in range(18)]
    y = [10.1, 11.3, 9.8, 10.7, 10.2, 11.0, 12.9, 13.4, 12.2, 13.8, 12.7, 13.1, 10.9, 11.8, 11.1, 12.4, 10.6, 11.5]
    frame = pd.DataFrame({response: y, factor: [levels[i // 6] for i in range(18)], id_col: ids})
    data = tmp_path / (file_stem.replace("/", "_").replace("\x00", "_")[:80] + ".parquet")
    frame.to_parquet(data)
    study = ex.Study(data, response=response, factors=factor, id_column=id_col)
    study.drop([ids[0]], reason=strings[8])
    study.drop([ids[7]], reason=strings[9])
    study.rename_level(factor, levels[2], strings[10], reason=strings[11])
    study.reassign(ids[3], factor, levels[1], reason=strings[12])
    study.drop([ids[14]], reason=strings[13])
    study.undo()  # an undone edit is listed too
    return study


def _report(tmp_path: Path, strings: list[str], charts: bool) -> Path:
    folder = tmp_path / ("payload" if strings == PAYLOADS else "twin")
    folder.mkdir()
    study = _study(folder, strings)
    return write_report(study, folder / "report.html", title=strings[14], scenario=strings[15],
                                  charts=charts)


class _Elements(HTMLParser):
    """Every start tag with its attribute names, in the order the parser meets them."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.found: list[tuple[str, tuple[str, ...]]] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.found.append((tag, tuple(sorted(a for a, _ in attrs))))

    handle_startendtag = handle_starttag

    def handle_data(self, data):
        self.text.append(data)


def _parse(path: Path) -> _Elements:
    parser = _Elements()
    parser.feed(path.read_text(encoding="utf-8"))
    parser.close()
    return parser


NEUTRAL = [_neutral(i, s) for i, s in enumerate(PAYLOADS)]


def test_payloads_stay_text_in_the_markup(tmp_path):
    """Parsed without a browser: the payload report has exactly the twin's elements and attributes."""
    payload, twin = _parse(_report(tmp_path, PAYLOADS, False)), _parse(_report(tmp_path, NEUTRAL, False))
    assert Counter(payload.found) == Counter(twin.found)
    text = "".join(payload.text)
    for s in PAYLOADS[4:16]:  # levels, ids, reasons, title, scenario show as written
        assert s.replace("\x00", "\ufffd") in text or s in text, s


DOM_JS = """() => Array.from(document.querySelectorAll('*')).map(
    e => [e.tagName.toLowerCase(), Array.from(e.attributes).map(a => a.name).sort().join(' ')])"""


@pytest.mark.browser
def test_payload_report_in_chromium_has_only_the_kits_elements_and_no_requests(tmp_path):
    exe = chromium_path()
    if exe is None:
        pytest.skip("chromium is not installed (apt-get install chromium)")
    from playwright.sync_api import sync_playwright

    payload, twin = _report(tmp_path, PAYLOADS, True), _report(tmp_path, NEUTRAL, True)
    requests: list[str] = []
    dialogs: list[str] = []
    doms = {}
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=exe, args=CHROME_ARGS, headless=True)
        for path in (payload, twin):
            ctx = browser.new_context()
            ctx.on("request", lambda r: requests.append(r.url))
            ctx.route("**/*", lambda r: r.continue_() if r.request.url.startswith("file:") else r.abort())
            tab = ctx.new_page()
            tab.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
            tab.goto(path.as_uri())
            tab.wait_for_load_state("load")
            tab.wait_for_timeout(1500)  # time for a refresh or a late script to act
            assert tab.url == path.as_uri()
            assert tab.title() != "owned"
            doms[path] = tab.evaluate(DOM_JS)
            if path == payload:
                shown = tab.locator("#edits").inner_text()
                assert PAYLOADS[8] in shown and PAYLOADS[9] in shown  # reasons shown as text
            ctx.close()
        browser.close()
    assert requests == [payload.as_uri(), twin.as_uri()]
    assert dialogs == []
    extra = Counter(map(tuple, doms[payload])) - Counter(map(tuple, doms[twin]))
    missing = Counter(map(tuple, doms[twin])) - Counter(map(tuple, doms[payload]))
    assert not extra and not missing, (extra, missing)
    assert not [a for _, attrs in doms[payload] for a in attrs.split() if a.startswith("on")]
