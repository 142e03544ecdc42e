"""The decision card: unedited and current decisions of the chosen test, what changed, the searching
so far (read when the card is drawn) and one line per caution opening to the one text of each.

The p-values on the card are checked against scipy.stats.f_oneway (outside reference); the
caution texts against README.md's "Cautions" section.
"""

from __future__ import annotations

import html
import re
from pathlib import Path

import pytest
from scipy import stats

import explorer as ex
from explorer.formatting import show_p
from explorer.report import report_html
from explorer.study.cautions import CAUTION_ITEMS, CAUTIONS

ROOT = Path(__file__).resolve().parents[1]
DATA = ROOT / "data" / "coating_thickness.csv"


def _study() -> ex.Study:
    return ex.Study(DATA, response="thickness_um", factors="nozzle", id_column="panel", units="µm")


def _oneway_p(study: ex.Study) -> float:
    """scipy.stats.f_oneway on the rows the study keeps (outside reference)."""
    ds, view = study.dataset, study.view
    table = ds.table.iloc[view.kept.nonzero()[0]] if hasattr(view.kept, "nonzero") else ds.table[view.kept]
    groups = [g["thickness_um"].to_numpy() for _, g in table.groupby("nozzle")]
    return float(stats.f_oneway(*groups).pvalue)


def test_card_without_edits_says_so_and_shows_both_decisions():
    study = _study()
    card = study.decision_card()
    assert card.edits_in_effect == 0 and not card.changes and not card.decision_changed
    page = card.html()
    assert "No edits in effect" in page
    assert page.count(html.escape(study.decision.sentence())) == 2  # unedited and current: the same
    assert f"p = {show_p(_oneway_p(study))}" in html.unescape(page)


def test_an_edit_that_flips_the_decision_is_marked_with_what_changed():
    study = _study()
    base_p = _oneway_p(study)
    study.drop(["P1007"], reason="gauge slip, see the line log")
    cur_p = _oneway_p(study)
    assert base_p < 0.05 <= cur_p  # the edit flips the classic F decision (scipy)
    card = study.decision_card()
    assert card.decision_changed
    page = html.unescape(card.html())
    assert "vx-dcard-flip" in page and "vx-dcard-differs" in page
    assert "The 1 edit(s) in effect change the decision." in page
    assert f"p-value of nozzle: {show_p(base_p)} → {show_p(cur_p)}" in page
    assert "verdict: differences detected → no differences detected" in page
    assert "rows in analysis: 114 → 113" in page
    assert "thickness_um (µm) by nozzle (113 rows in analysis, 1 left out)" in page
    text = card.to_text()
    assert study.decision.sentence() in text and study.baseline_decision.sentence() in text


def test_an_edit_that_keeps_the_decision_lists_the_moved_numbers_without_alarm():
    study = _study()
    study.drop(["P1040"], reason="scratched before measuring")
    card = study.decision_card()
    assert study.decision.significant == study.baseline_decision.significant
    page = card.html()
    assert not card.decision_changed and "vx-dcard-flip" not in page
    assert "leave the decision as it was" in page and "p-value of nozzle" in page


def test_disclosure_is_read_when_the_card_is_drawn():
    study = _study()
    first = study.decision_card()
    study.record_search("leave-one-out scan", 114)
    assert first.disclosure.specifications == 0
    assert "114 alternative analyses examined" in study.decision_card().html()
    widget = ex.Explorer(study)
    assert "114 alternative analyses examined" in widget.header.value
    study.record_search("regroup scan", 6)  # a scan run after the widget was drawn
    widget.refresh()
    assert "120 alternative analyses examined" in widget.header.value


def test_cautions_have_one_text_on_every_surface():
    """Widget card, report card and report list, command line and README hold the same words."""
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    section = readme.split("## Cautions", 1)[1].split("\nSee DEVELOPERS.md", 1)[0]
    flat = " ".join(section.split())
    study = _study()
    widget = ex.Explorer(study).header.value
    page = report_html(study, charts=False)
    for c in CAUTION_ITEMS:
        assert " ".join(c.text.split()) in flat  # README (with its **bold**)
        for surface in (widget, page):
            assert f"<summary>{html.escape(c.headline)}</summary>" in surface
            assert c.text_html() in surface
        assert f"id='caution-{c.key}'" in page and f"href='#caution-{c.key}'" in page
    assert CAUTIONS == tuple(c.text for c in CAUTION_ITEMS)
    assert len({c.key for c in CAUTION_ITEMS}) == len(CAUTION_ITEMS)


def test_report_opens_with_the_card():
    study = _study()
    study.drop(["P1007"], reason="gauge slip <see log> & co")
    page = report_html(study, charts=False)
    body = page.split("<body>", 1)[1]
    assert body.index("class='vx-dcard") < body.index("id='provenance'")
    assert "gauge slip" not in re.search(r"<section id='decision'>.*?</section>", body, re.S).group(0)


@pytest.mark.parametrize("test", ["kruskal", "welch"])
def test_card_reads_the_chosen_test(test):
    study = _study()
    study.set_test(test)
    card = study.decision_card()
    assert card.current.test == card.baseline.test == test
    assert card.disclosure.specifications == 1
