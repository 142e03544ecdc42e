"""The disclosure ledger: complete, saved whole, read live everywhere, and restored exactly.

Counting rules (no outside reference applies: these are the kit's own bookkeeping): an
edit made counts once, however often it is undone and redone; an undo counts one, a reset
the edits it undid; each specification choice (overall test, comparison method, alpha,
response, factors, transform, model terms) is one alternative analysis examined, and a
search adds the alternatives it computed.
"""

from __future__ import annotations

import copy
import json
import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import explorer as ex
from explorer.engine.errors import ReplayError
from explorer.report import summary_text
from explorer.study.ledger import OLDER_FILE_NOTE, Ledger
from explorer.widget.explorer import level_steps

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "data" / "coating_thickness.csv"
UTC = re.compile(r"\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}Z")


def _study() -> ex.Study:
    return ex.Study(DEMO, response="thickness_um", factors="nozzle")


def _counts(study) -> tuple[int, int, int, int]:
    d = study.disclosure
    return d.edits_in_effect, d.edits_made, d.undos, d.specifications


# ------------------------------------------------------------------ the saved history
def test_drop_undo_drop_survives_save_and_load(tmp_path):
    """The reported case: drop, undo, drop, save, load read '1 made in all (0 undone)'; it is '2 made (1 undone)'."""
    study = _study()
    study.drop([6], reason="gauge slip")
    study.undo()
    study.drop([7], reason="wrong panel")
    assert _counts(study) == (1, 2, 1, 0)
    path = study.save(tmp_path / "s.study.json")
    back = ex.Study.load(path, DEMO)
    assert _counts(back) == (1, 2, 1, 0)
    assert back.disclosure.sentence() == study.disclosure.sentence()
    assert "2 made in all (1 undone)" in back.disclosure.sentence()
    # the edit undone and replaced is still on the record, with its reason and time
    made = back.ledger.of_kind("edit")
    assert [e.reason for e in made] == ["gauge slip", "wrong panel"]
    assert made[0].edit["rows"] == [6] and all(UTC.fullmatch(e.at) for e in back.ledger.entries)


def test_the_whole_ledger_round_trips_through_the_file(tmp_path):
    study = _study()
    study.drop([6, 70], reason="gauge slip")
    study.reassign(12, "nozzle", "N3", reason="wrong nozzle")
    study.undo()
    study.redo()
    study.reset()
    study.redo()
    study.apply(ex.DropRows(rows=(3,), reason="their call"), origin="adopted from a colleague's study file")
    study.set_test("welch")
    study.set_comparisons("games-howell")
    study.set_alpha(0.01)
    study.set_transform("log")
    study.record_search("leave-one-out", 112)
    before = study.ledger.to_dict()
    path = study.save(tmp_path / "s.study.json")
    back = ex.Study.load(path, DEMO)
    assert back.ledger.to_dict() == before and back.ledger.complete
    assert _counts(back) == _counts(study) == (2, 3, 3, 4 + 112)
    assert back.comparisons == "games-howell" and back.spec.test == "welch"
    assert back.ledger.of_kind("edit")[-1].origin == "adopted from a colleague's study file"
    # and again: a second save of the loaded study writes the same ledger
    again = ex.Study.load(back.save(tmp_path / "t.study.json"), DEMO)
    assert again.ledger.to_dict() == before


def _older_file(doc: dict, dataset) -> dict:
    """The same study as schema 1 wrote it: no ledger, no comparisons, searches as {what, count}, the
    fingerprint by its first definition."""
    old = copy.deepcopy(doc)
    del old["data"]["fingerprint_method"]
    old["data"].pop("level_order", None)  # schema 2 only
    old["data"]["fingerprint"] = dataset.fingerprint_by("pandas-row-hash")
    ledger = old.pop("ledger")
    old.pop("comparisons", None)
    old["schema"] = 1
    old["searches"] = [{"what": (f"specification: {e['what']} {e['old']} -> {e['new']}" if e["kind"] == "specification"
                                 else e["what"]), "count": e["count"]}
                       for e in ledger["entries"] if e["kind"] in ("search", "specification")]
    return old


def test_an_older_file_loads_with_an_honest_note(tmp_path):
    study = _study()
    study.drop([6], reason="gauge slip")
    study.undo()
    study.drop([7], reason="wrong panel")
    study.drop([8], reason="smudge")
    study.undo()
    study.set_test("kruskal")
    study.record_search("flip finder", 40)
    path = tmp_path / "old.study.json"
    path.write_text(json.dumps(_older_file(study.to_dict(), study.dataset)))
    back = ex.Study.load(path, DEMO)
    assert back.spec.test == "kruskal" and [e.rows for e in back.edits] == [(7,)]
    d = back.disclosure
    # the older file kept the log [drop 7, drop 8] with 8 undone: at least 2 made, 1 undone; the searches whole
    assert (d.edits_in_effect, d.edits_made, d.undos, d.specifications) == (1, 2, 1, 41)
    assert not back.ledger.complete and d.note == OLDER_FILE_NOTE and OLDER_FILE_NOTE in d.sentence()
    choice = back.ledger.of_kind("specification")[0]
    assert (choice.what, choice.old, choice.new, choice.at) == ("overall test", "classic", "kruskal", None)
    # saved again, the file is schema 2 and still says the counts are lower bounds
    again = ex.Study.load(back.save(tmp_path / "new.study.json"), DEMO)
    assert json.loads((tmp_path / "new.study.json").read_text())["schema"] == 2
    assert again.disclosure == back.disclosure and not again.ledger.complete


def test_a_ledger_that_understates_the_log_is_refused(tmp_path):
    study = _study()
    study.drop([6], reason="a")
    study.drop([7], reason="b")
    study.undo()
    doc = study.to_dict()
    doc["ledger"]["entries"] = [e for e in doc["ledger"]["entries"] if e["kind"] != "undo"]
    path = tmp_path / "s.study.json"
    path.write_text(json.dumps(doc))
    with pytest.raises(ReplayError, match="too few for the 1 undone edit"):
        ex.Study.load(path, DEMO)
    with pytest.raises(ReplayError, match="records 0 edit"):
        study.restore_ledger({"entries": []})
    assert _counts(study) == (1, 2, 1, 0)  # refused: the study's own ledger is untouched


def test_ledger_entries_are_checked_field_by_field():
    with pytest.raises(ReplayError, match=r"entries\[0\]\.at"):
        Ledger.from_dict({"entries": [{"kind": "search", "what": "x", "at": "2026-03-01 09:30", "count": 1}]})
    with pytest.raises(ReplayError, match=r"entries\[0\]\.count"):
        Ledger.from_dict({"entries": [{"kind": "search", "what": "x", "at": None, "count": -3}]})
    with pytest.raises(ReplayError, match=r"entries\[0\]\.kind"):
        Ledger.from_dict({"entries": [{"kind": "exec", "what": "x", "at": None, "count": 1}]})
    with pytest.raises(ReplayError, match=r"entries\[0\]\.origin"):
        Ledger.from_dict({"entries": [{"kind": "search", "what": "x", "at": None, "count": 1, "origin": 5}]})


# ------------------------------------------------------------------ every specification choice, from the API
API_CHOICES = [
    ("overall test", lambda s: s.set_test("welch"), ("classic", "welch")),
    ("comparison method", lambda s: s.set_comparisons("dunnett"), ("tukey-kramer", "dunnett")),
    ("alpha", lambda s: s.set_alpha(0.1), ("0.05", "0.1")),
    ("transform", lambda s: s.set_transform("sqrt"), ("none", "sqrt")),
    ("model terms", lambda s: s.set_terms(max_order=1), ("all interactions", "interactions of up to 1 factors")),
]


@pytest.mark.parametrize("what,choose,change", API_CHOICES, ids=[c[0] for c in API_CHOICES])
def test_each_specification_choice_is_recorded_from_the_api(what, choose, change):
    study = _study()
    choose(study)
    (entry,) = study.ledger.of_kind("specification")
    assert (entry.what, entry.old, entry.new) == (what, *change) and UTC.fullmatch(entry.at)
    assert study.disclosure.specifications == 1
    choose(study)  # the same choice again changes nothing and is not counted again
    assert study.disclosure.specifications == 1


def test_response_and_factors_are_recorded_and_the_ledger_carries_over():
    study = _study()
    study.drop([6], reason="gauge slip")
    study.undo()
    study.drop([7], reason="smudge")
    new = study.respecify(factors=["nozzle", "shift"])
    assert new.edits == study.edits and new.edits_not_carried == ()
    assert _counts(new) == (1, 2, 1, 1)  # the carried edit is not a new one
    entry = new.ledger.entries[-1]
    assert (entry.kind, entry.what, entry.old, entry.new) == ("specification", "factors", "nozzle", "nozzle, shift")
    frame = pd.read_csv(DEMO).assign(double=lambda d: 2 * d.thickness_um)
    other = ex.Study(frame, response="thickness_um", factors="nozzle").respecify(response="double")
    assert other.spec.response == "double" and other.ledger.entries[-1].what == "response"
    assert other.disclosure.specifications == 1
    np.testing.assert_allclose(other.results.statistic(), ex.Study(frame, "double", "nozzle").results.statistic())


def test_refused_choices_record_nothing():
    study = _study()
    with pytest.raises(ex.ExplorerError):
        study.set_comparisons("by eye")
    with pytest.raises(ex.ExplorerError):
        study.set_terms(["shift"])
    with pytest.raises(ex.ExplorerError):
        study.set_alpha(2)
    assert len(study.ledger) == 0 and study.comparisons == "tukey-kramer"


# ------------------------------------------------------------------ every specification choice, from the widget
def _explorer(**kw) -> ex.Explorer:
    return ex.explore(str(DEMO), response="thickness_um", factors="nozzle", panels=["partition", "compare"], **kw)


WIDGET_CHOICES = [
    ("overall test", lambda e: setattr(e.omnibus_picker, "value", "welch"), ("classic", "welch")),
    ("comparison method", lambda e: setattr(e.comparison_picker, "value", "holm"), ("tukey-kramer", "holm")),
    ("alpha", lambda e: setattr(e.alpha_picker, "value", 0.01), ("0.05", "0.01")),
    ("factors", lambda e: setattr(e.factor_picker, "value", ("nozzle", "shift")), ("nozzle", "nozzle, shift")),
    ("response", lambda e: setattr(e.response_picker, "value", "thickness_x2"), ("thickness_um", "thickness_x2")),
]


@pytest.mark.parametrize("what,choose,change", WIDGET_CHOICES, ids=[c[0] for c in WIDGET_CHOICES])
def test_each_specification_choice_is_recorded_from_the_widget(what, choose, change, tmp_path):
    frame = pd.read_csv(DEMO).assign(thickness_x2=lambda d: 2 * d.thickness_um)
    frame.to_csv(tmp_path / "d.csv", index=False)
    e = ex.explore(str(tmp_path / "d.csv"), response="thickness_um", factors="nozzle", panels=["partition", "compare"])
    e.study.drop([6], reason="gauge slip")
    choose(e)
    entry = e.study.ledger.entries[-1]
    assert (entry.kind, entry.what, entry.old, entry.new) == ("specification", what, *change), e.status.value
    assert e.study.disclosure.specifications == 1 and e.study.disclosure.edits_made == 1
    assert "1 alternative analyses examined" in e.header.value


def test_the_comparison_picker_drives_the_panels_through_the_study():
    e = _explorer()
    e.comparison_picker.value = "games-howell"
    assert e.study.comparisons == "games-howell" and e.settings.comparisons == "games-howell"
    assert "recorded as a specification choice" in e.status.value


# ------------------------------------------------------------------ one number everywhere
def test_results_and_study_html_show_the_live_count():
    study = _study()
    res = study.results
    study.record_search("a scan elsewhere", 7)
    assert "7 alternative analyses examined" in res._repr_html_()
    assert "7 alternative analyses examined" in study._repr_html_()
    study.drop([6], reason="x")
    assert "1 made in all" in res._repr_html_()  # the earlier results read the ledger when shown


def _count_in(html_text: str) -> int:
    found = re.findall(r"(\d+) alternative analyses examined", html_text)
    assert found, html_text
    return int(found[-1])


def test_panels_show_the_live_count_after_another_search():
    """The header, the flip panel and the regroup panel each showed the count when drawn (600, 228, 576)."""
    e = ex.explore(str(DEMO), response="thickness_um", factors="nozzle",
                   panels=["partition", "compare", "flip_rows", "regroupings"])
    e.tabs.selected_index = e._tab_groups.index("Fragility")
    flip, regroup = e.cards["flip_rows"], e.cards["regroupings"]
    total = e.study.disclosure.specifications
    assert total > 0
    for text in (e.header.value, flip.live.value, regroup.live.value, e.cards["compare"].html.value):
        assert _count_in(text) == total, text
    assert "by this scan" in flip.live.value and "by this scan" in regroup.live.value
    assert "alternative analyses examined" not in flip.html.value  # no frozen count inside the panel
    e.study.record_search("a search from the notebook", 5)  # another search, outside the panels
    for text in (e.header.value, flip.live.value, regroup.live.value, e.cards["compare"].html.value):
        assert _count_in(text) == total + 5, text


# ------------------------------------------------------------------ compound widget actions
def test_move_picked_is_all_or_nothing():
    e = _explorer()
    e.study.record_search("before", 1)
    before = e.study.ledger.to_dict()
    e.pick([1, 2, "no such row"])
    e.reason_box.value = "wrong nozzle"
    assert not e.move_picked("N3")
    assert e.study.edits == () and e.study.ledger.to_dict() == before  # the first two moves rolled back
    assert "Nothing was changed" in e.status.value
    e.pick([1, 2])
    e.reason_box.value = "wrong nozzle"
    assert e.move_picked("N3") and len(e.study.edits) == 2


def test_a_level_swap_is_applied_whole():
    e = _explorer()
    means = dict(zip(*[e.study.results.levels["nozzle"].to_frame()[c] for c in ("level", "mean")]))
    boxes = e._level_boxes["nozzle"]
    boxes["N1"].value, boxes["N2"].value = "N2", "N1"
    e.reason_box.value = "labels swapped on the rack"
    assert e.apply_regrouping(), e.status.value
    now = dict(zip(*[e.study.results.levels["nozzle"].to_frame()[c] for c in ("level", "mean")]))
    assert now["N1"] == means["N2"] and now["N2"] == means["N1"] and now["N3"] == means["N3"]


def test_a_failing_compound_action_leaves_the_study_unchanged():
    study = _study()
    study.drop([6], reason="kept")
    events = []
    study.on_change(lambda s, ev: events.append(ev.kind))
    with pytest.raises(ex.ExplorerError):
        with study.all_or_nothing():
            study.rename_level("nozzle", "N1", "A", reason="r")
            study.reassign("no such row", "nozzle", "N2", reason="r")  # refused
    assert [e.rows for e in study.edits] == [(6,)] and study.levels("nozzle") == ("N1", "N2", "N3", "N4")
    assert _counts(study) == (1, 1, 0, 0) and events == []


def test_level_steps_orders_renames_merges_and_cycles():
    assert level_steps(["a", "b"], {"a": "b", "b": "a"}) == [(["b"], "b (renaming)"), (["a"], "b"),
                                                            (["b (renaming)"], "a")]
    assert level_steps(["a", "b", "c"], {"a": "x", "b": "x", "c": "c"}) == [(["a", "b"], "x")]
    assert level_steps(["a", "b", "c"], {"a": "b", "b": "b", "c": "a"}) == [(["a", "b"], "b"), (["c"], "a")]


# ------------------------------------------------------------------ hand-off: report, text, replay
def test_report_text_and_replay_read_the_ledger(tmp_path):
    study = _study()
    study.drop([6], reason="gauge slip")
    study.undo()
    study.drop([7], reason="wrong panel")
    study.set_comparisons("holm")
    path = study.save(tmp_path / "s.study.json")
    back = ex.Study.load(path, DEMO)
    text = summary_text(back, cautions=False)
    assert "2 made in all (1 undone)" in text and "gauge slip" in text and "undo of: leave out row(s) 6" in text
    html_text = (back.report(tmp_path / "r.html")).read_text()
    assert "2 made in all (1 undone)" in html_text and "id='record'" in html_text
    scope: dict = {}
    exec(compile(back.to_code(DEMO), "<replay>", "exec"), scope)  # noqa: S102 - the kit's own replay code
    replayed = scope["study"]
    assert replayed.disclosure == back.disclosure and replayed.ledger.to_dict() == back.ledger.to_dict()
    assert replayed.comparisons == "holm"


# ------------------------------------------------------------------ transform and terms from the widget
def test_transform_and_terms_pickers_are_recorded_and_follow_the_study():
    e = ex.explore(str(DEMO), response="thickness_um", factors=["nozzle", "shift"], panels=["partition"])
    e.transform_picker.value = "log"
    assert e.study.spec.transform == "log"
    e.terms_picker.value = 1
    assert e.study.spec.max_order == 1 and len(e.study.results.partition.rows) == 4  # nozzle, shift, residual, total
    whats = [(x.what, x.old, x.new) for x in e.study.ledger.of_kind("specification")]
    assert whats == [("transform", "none", "log"), ("model terms", "all interactions", "interactions of up to 1 factors")]
    # a choice made in code shows in the pickers, and showing it records nothing more
    e.study.set_transform("sqrt")
    e.study.set_terms()
    assert e.transform_picker.value == "sqrt" and e.terms_picker.value == 0
    assert e.study.disclosure.specifications == 4
    # a study whose choices differ from the pickers' first options is shown without recording anything
    other = ex.Study(DEMO, response="thickness_um", factors=["nozzle", "shift"], transform="log", max_order=1)
    e.set_study(other)
    assert (e.transform_picker.value, e.terms_picker.value) == ("log", 1) and len(other.ledger) == 0


def test_summary_study_choices_and_file_keep_the_ledger(tmp_path):
    pytest.importorskip("duckdb")
    rng = np.random.default_rng(0)
    frame = pd.DataFrame({"y": rng.normal(size=60), "g": list("abc") * 20, "h": list("xy") * 30})
    s = ex.SummaryStudy(frame, response="y", factors=["g", "h"], sample_size=20)
    s.merge_levels("g", ["a", "b"], into="ab", reason="same supplier")
    s.undo()
    s.drop_level("g", "c", reason="line down")
    s.set_terms(max_order=1)
    s.set_alpha(0.1)
    assert len(s.results.partition.rows) == 4 and _counts(s) == (1, 2, 1, 2)
    back = ex.SummaryStudy.load(s.save(tmp_path / "s.json"), frame)
    assert _counts(back) == (1, 2, 1, 2) and back.ledger.to_dict() == s.ledger.to_dict()


def test_running_tallies_equal_the_entries_summed():
    """The counts are kept as entries come (a read costs the same at any length); they equal the sums."""
    study = _study()
    study.drop([6], reason="a")
    study.undo()
    study.redo()
    study.reset()
    study.record_search("scan", 9)
    with pytest.raises(ex.ExplorerError), study.all_or_nothing():
        study.drop([7], reason="b")
        study.drop(["no such row"], reason="c")
    for ledger in (study.ledger, study.ledger.copy(), Ledger.from_dict(study.ledger.to_dict())):
        entries = ledger.entries
        assert ledger.edits_made == sum(e.kind == "edit" for e in entries) == 1
        assert ledger.undos == sum(e.count for e in entries if e.kind in ("undo", "reset")) == 2
        assert ledger.redos == 1
        assert ledger.specifications == sum(e.count for e in entries if e.kind in ("search", "specification")) == 9


def test_listeners_hear_a_compound_action_once_it_stands_each_edit_at_its_position():
    study = _study()
    events = []
    study.on_change(lambda s, ev: events.append((ev.kind, ev.position, len(s.edits))))
    with study.all_or_nothing():
        study.drop([6], reason="a")
        study.drop([7], reason="b")
        assert events == []
    assert events == [("edit", 1, 2), ("edit", 2, 2)]


def test_the_command_line_reads_the_counts_and_record_from_the_study_file(tmp_path, capsys):
    from explorer.cli import main

    study = _study()
    study.drop([6], reason="gauge slip")
    study.undo()
    study.drop([7], reason="wrong panel")
    path = study.save(tmp_path / "s.study.json")
    assert main(["check", str(DEMO), "--edits", str(path), "--no-cautions"]) == 0
    out = capsys.readouterr().out
    assert "1 edit(s) in effect; 2 made in all (1 undone)" in out and "undo of: leave out row(s) 6" in out
