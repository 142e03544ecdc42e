"""The static HTML report: complete, well formed, and it opens with no network at all."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest
from handoff_support import CHROME_ARGS, chromium_path, outline

import explorer as ex
from explorer.engine.tables import fmt
from explorer.report import CAUTIONS, report_html

ROOT = Path(__file__).resolve().parents[1]

REASONS = (
    "gauge slip on panel P1007, see line log 2026-03-14",
    "recoated by mistake <P1071> & measured twice",  # markup characters must be escaped
    "N2 and N3 come from one supplier",
)


@pytest.fixture(scope="module")
def edited(tmp_path_factory) -> ex.Study:
    study = ex.Study(ROOT / "data" / "coating_thickness.csv", response="thickness_um", factors="nozzle")
    study.drop([6], reason=REASONS[0])
    study.drop([70], reason=REASONS[1])
    study.merge_levels("nozzle", ["N2", "N3"], into="N2+N3", reason=REASONS[2])
    study.rename_level("nozzle", "N4", "N4 (new)", reason="undone on purpose")
    study.undo()
    return study


@pytest.fixture(scope="module")
def page(edited, tmp_path_factory) -> tuple[Path, str]:
    path = tmp_path_factory.mktemp("report") / "coating-report.html"
    out = edited.report(path, scenario="Coating line: do the four nozzles lay down the same film?")
    assert out == path
    return path, path.read_text(encoding="utf-8")


def _plain(s: str) -> str:
    return " ".join(s.split())


def test_page_is_well_formed_and_has_every_section(page):
    doc = outline(page[1])
    assert doc.errors == []
    assert {"provenance", "cautions", "comparison", "edits", "battery", "sensitivity", "replay"} <= set(doc.sections)
    assert page[1].startswith("<!DOCTYPE html>")


def test_every_edit_reason_and_time_is_shown(edited, page):
    doc = outline(page[1])
    edits = doc.section_text("edits")
    for e in list(edited.edits) + list(edited.redo_edits):
        assert _plain(e.reason) in edits
        assert e.at in edits
    assert "undone (kept for redo)" in edits
    assert "<P1071>" not in page[1]  # escaped, not markup


def test_baseline_and_current_tables_side_by_side(edited, page):
    """Both partitions appear with their F values (displayed via the kit's own formatter)."""
    doc = outline(page[1])
    comparison = doc.section_text("comparison")
    assert comparison.count("Partition of the sum of squares") == 2
    for res in (edited.baseline, edited.results):
        assert fmt(res.statistic()) in comparison
        assert fmt(res.partition.row("residual").sum_sq) in comparison
    assert doc.svg_in.get("comparison", 0) >= 2  # one inline SVG chart per side


def test_provenance_and_disclosure(edited, page):
    doc = outline(page[1])
    prov = doc.section_text("provenance")
    assert "coating_thickness.csv" in prov and edited.dataset.column_fingerprint in prov
    assert "No rows were set aside" in prov
    assert _plain(edited.disclosure.sentence()) in doc.all_text()


def test_cautions_are_the_readme_cautions(page):
    """The report's cautions are word for word the README's (outside reference: README.md)."""
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    section = readme.split("## Cautions", 1)[1].split("\n## ", 1)[0].split("\nSee DEVELOPERS.md", 1)[0]
    bullets = [_plain(b) for b in re.split(r"\n- ", "\n" + section.strip()) if b.strip()]
    assert bullets == [_plain(c) for c in CAUTIONS]
    text = outline(page[1]).section_text("cautions")
    for c in CAUTIONS:
        assert _plain(c.replace("**", "")) in text


def test_embedded_study_replays(edited, page):
    """The embedded JSON is the saved study; loading it on the data gives the same results."""
    m = re.search(r"<script type='application/json' id='vx-study'>(.*?)</script>", page[1], re.DOTALL)
    assert m
    doc = json.loads(m.group(1))
    again = ex.Study.from_dict(doc, ROOT / "data" / "coating_thickness.csv")
    assert again.results.partition == edited.results.partition


def test_set_aside_rows_are_listed(tmp_path):
    csv = tmp_path / "small.csv"
    csv.write_text("g,y\na,1.0\na,2.0\na,\nb,3.5\nb,4.0\n,5.0\nc,6.0\nc,6.5\n")
    study = ex.Study(csv, response="y", factors="g")
    prov = outline(report_html(study, charts=False)).section_text("provenance")
    assert "2 row(s) set aside" in prov and "row 2: missing y" in prov and "row 5: missing g" in prov


def test_report_opens_offline_in_chromium(page):
    """Headless Chromium loads the file and makes no request other than the file itself."""
    exe = chromium_path()
    if exe is None:
        pytest.skip("chromium is not installed (apt-get install chromium)")
    from playwright.sync_api import sync_playwright

    path = page[0]
    requests: list[str] = []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=exe, args=CHROME_ARGS, headless=True)
        ctx = browser.new_context()
        ctx.on("request", lambda r: requests.append(r.url))
        ctx.route("**/*", lambda r: r.continue_() if r.request.url.startswith("file:") else r.abort())
        tab = ctx.new_page()
        tab.goto(path.as_uri())
        tab.wait_for_load_state("load")
        assert tab.locator("#comparison svg").count() >= 2
        assert tab.locator("#edits td", has_text=REASONS[1]).count() == 1
        browser.close()
    assert requests == [path.as_uri()]


def test_sensitivity_summary_matches_the_scans(edited, page):
    """The summary repeats what the scans find (the scans are checked in their own tests)."""
    from explorer.sensitivity.case_deletion import case_deletion_scan
    from explorer.sensitivity.sweep import robustness_sweep

    doc = outline(page[1])
    text = doc.section_text("sensitivity")
    flips = case_deletion_scan(edited, record=False).flip_rows
    assert "single rows whose removal flips it " + (", ".join(map(str, flips)) or "none") in text
    sweep = robustness_sweep(edited, record=False)
    assert f"{sweep.share_agreeing:.0%} of {sweep.n_specifications}" in text
    assert doc.svg_in.get("sensitivity", 0) == 2  # p with each row left out, and the specification curve


def test_writing_a_report_does_not_add_to_the_disclosure(tmp_path):
    study = ex.Study(ROOT / "data" / "coating_thickness.csv", response="thickness_um", factors="nozzle")
    before = study.disclosure
    report_html(study, charts=False)  # the same scans as study.report, without drawing
    assert study.disclosure == before


def test_factorial_study_report(tmp_path):
    study = ex.Study(ROOT / "data" / "coating_thickness.csv", response="thickness_um", factors=["nozzle", "shift"])
    study.drop([6], reason="gauge slip")
    doc = outline(report_html(study, charts=False))
    assert doc.errors == []
    assert "single rows whose removal flips it" in doc.section_text("sensitivity")
    assert "gauge slip" in doc.section_text("edits")


def test_a_scan_that_does_not_apply_becomes_a_note(monkeypatch):
    """A scan refusing the design (DesignError) leaves its line out and says why; the rest still show."""
    import explorer.sensitivity.flip as flip

    def refuse(*args, **kwargs):
        raise ex.DesignError("the flip finder works on one-factor studies; this study has factors ['a', 'b']. "
                             "Make a one-factor study of the factor of interest to scan it.")

    monkeypatch.setattr(flip, "flip_finder", refuse)
    study = ex.Study(ROOT / "data" / "coating_thickness.csv", response="thickness_um", factors="nozzle")
    text = outline(report_html(study, charts=False)).section_text("sensitivity")
    assert "The flip finder works on one-factor studies" in text
    assert "fewest rows whose removal flips it" not in text
    assert "single rows whose removal flips it" in text
