"""The explorer widget without a browser: synced values are set the way the front end sets them.

A chart click arrives as ``JupyterChart._vl_selections`` (the payload the JavaScript side
sends); dropdowns and text boxes get new ``value``s; buttons are pressed with ``.click()``.
The checks are on the study's edits and on the tables the widget displays. The statistics
shown are the core's (checked against references in test_oneway); here we check that the
widget passes them through unchanged.
"""

from __future__ import annotations

import html

import numpy as np
import pandas as pd
import pytest

import explorer as ex
from explorer.engine.tables import fmt
from explorer.widget import Explorer, Panel, register_panel, unregister_panel


def _pick_payload(*rows: object) -> dict:
    return {"pick": {"value": {"vlPoint": {"or": [{"row": str(r)} for r in rows]}}, "store": []}}


@pytest.fixture
def demo(demo_csv) -> Explorer:
    return ex.explore(str(demo_csv), response="thickness_um", factors="nozzle")


def click_point(e: Explorer, *rows: object, chart: str = "observations") -> None:
    e.cards[chart].chart._vl_selections = _pick_payload(*rows)


def test_click_then_leave_out_records_the_edit_and_redraws_tables(demo):
    e = demo
    f0 = e.study.results.statistic()
    click_point(e, 6)
    assert e.picked == (6,)
    assert "row 6 (nozzle N1, 48.9, in analysis)" in e.picked_label.value
    e.reason_box.value = "gauge slip, line log 2026-03-14"
    e.drop_button.click()
    (edit,) = e.study.edits
    assert edit.kind == "drop" and edit.rows == (6,) and edit.reason == "gauge slip, line log 2026-03-14"
    f1 = e.study.results.statistic()
    assert f1 != f0
    assert f">{fmt(f1)}</td>" in e.cards["partition"].html.value
    cmp_html = e.cards["compare"].html.value
    assert "class='vx-diff'" in cmp_html and "Left out now: 1 row(s) (6)" in cmp_html
    assert "1 edit(s) in effect" in e.header.value
    assert e.left_out_list.options == (("row 6: gauge slip, line log 2026-03-14", 6),)
    assert e.picked == ()  # the pick is used up
    # the left-out point is still drawn, as "left out"
    obs = e.cards["observations"].chart.spec
    rows = next(v for v in obs["datasets"].values() if v and "state" in v[0])
    assert {r["row"]: r["state"] for r in rows}["6"] == "left out"


def test_leave_out_needs_a_reason(demo):
    click_point(demo, 6)
    demo.drop_button.click()
    assert demo.study.edits == ()
    assert "reason" in demo.status.value and "vx-status-error" in demo.status.value


def test_a_refused_edit_shows_in_the_status_line_and_never_raises(demo):
    e = demo
    click_point(e, 6)
    e.restore_button.click()  # row 6 is not left out
    assert e.study.edits == ()
    assert "Not done (restore)" in e.status.value and "nothing to restore" in e.status.value
    e.undo_button.click()  # nothing to undo
    assert "nothing to undo" in e.status.value


def test_undo_redo_and_back_to_unedited(demo):
    e = demo
    base_html = e.cards["partition"].html.value
    click_point(e, 6)
    e.reason_box.value = "gauge slip"
    e.drop_button.click()
    click_point(e, 70)
    e.reason_box.value = "recoated by mistake"
    e.drop_button.click()
    assert e.study.dropped == (6, 70)
    e.undo_button.click()
    assert e.study.dropped == (6,)
    e.redo_button.click()
    assert e.study.dropped == (6, 70)
    e.reset_button.click()
    assert e.study.dropped == () and e.cards["partition"].html.value == base_html
    assert "class='vx-diff'" not in e.cards["compare"].html.value
    assert "0 edit(s) in effect; 2 made in all (3 undone)" in e.header.value
    assert [s.action.split(":")[0] for s in e.history] == [
        "unedited data", "leave out row(s) 6", "leave out row(s) 70", "undo", "redo", "reset"]


def test_restore_from_the_left_out_list(demo):
    e = demo
    click_point(e, 6, 70)
    e.reason_box.value = "both suspect"
    e.drop_button.click()
    e.left_out_list.value = (70,)
    e.restore_chosen_button.click()
    assert e.study.dropped == (6,) and e.study.edits[-1].kind == "restore"


def test_move_picked_rows_to_another_level(demo):
    e = demo
    click_point(e, 3, chart="residuals")  # any row chart can pick
    e.reason_box.value = "logged under the wrong nozzle"
    e.move_target.value = "N2"
    e.move_button.click()
    (edit,) = e.study.edits
    assert (edit.kind, edit.row, edit.factor, edit.level) == ("reassign", 3, "nozzle", "N2")


def test_level_editor_merges_and_renames(demo):
    e = demo
    boxes = e._level_boxes["nozzle"]
    boxes["N2"].value = "N2+N3"
    boxes["N3"].value = "N2+N3"
    boxes["N4"].value = "N4 (new tip)"
    e.reason_box.value = "N2 and N3 are from one supplier"
    e.regroup_button.click()
    kinds = [(x.kind, getattr(x, "into", getattr(x, "new", None))) for x in e.study.edits]
    assert kinds == [("merge", "N2+N3"), ("rename", "N4 (new tip)")]
    assert e.study.levels("nozzle") == ("N1", "N2+N3", "N4 (new tip)")
    assert len(e.history) == 3  # one step per edit; one redraw for the action


def test_level_editor_refuses_a_split(demo):
    e = demo
    e.reason_box.value = "same supplier"
    e._level_boxes["nozzle"]["N2"].value = "S"
    e._level_boxes["nozzle"]["N3"].value = "S"
    e.regroup_button.click()
    e._level_boxes["nozzle"]["N2"].value = "A"
    e.reason_box.value = "try to split"
    e.regroup_button.click()
    assert "cannot be split" in e.status.value and len(e.study.edits) == 1


def test_alpha_choice_keeps_the_edits_and_counts_the_alternative(demo):
    e = demo
    click_point(e, 6)
    e.reason_box.value = "gauge slip"
    e.drop_button.click()
    e.alpha_picker.value = 0.01
    assert e.study.spec.alpha == 0.01 and e.study.dropped == (6,)
    assert e.study.disclosure.specifications == 1
    assert "at alpha 0.01" in e.header.value


def test_response_and_factor_pickers_rebuild_the_study():
    rng = np.random.default_rng(0)
    df = pd.DataFrame({"g": np.repeat(list("abc"), 10), "h": np.tile(list("xy"), 15),
                       "y": rng.normal(size=30), "z": rng.normal(size=30)})
    e = ex.explore(df, response="y", factors="g")
    e.response_picker.value = "z"
    assert e.study.spec.response == "z"
    np.testing.assert_allclose(e.study.results.statistic(), ex.Study(df, "z", "g").results.statistic())
    e.factor_picker.value = ("h",)
    assert e.study.spec.factors == ("h",)
    assert e.study.disclosure.specifications == 2  # two alternatives to the first choice
    e.factor_picker.value = ()
    assert "at least one factor" in e.status.value and e.study.spec.factors == ("h",)


def test_large_data_draws_a_sample_but_the_tables_use_every_row():
    rng = np.random.default_rng(1)
    df = pd.DataFrame({"g": np.repeat(list("abcd"), 250), "y": rng.normal(size=1000)})
    e = ex.explore(df, response="y", factors="g", max_points=300)
    spec = e.cards["observations"].chart.spec
    rows = next(v for v in spec["datasets"].values() if v and "state" in v[0])
    assert len(rows) == 300 and "Drawing 300 of 1,000 rows" in e.cards["observations"].note.value
    assert "n = 1000" in e.cards["partition"].html.value


def test_registered_panels_plug_in_and_a_broken_one_cannot_break_the_explorer(demo_csv):
    register_panel(Panel(key="t_extra", title="Extra view", group="Tests",
                         build=lambda ctx: f"<b class='x'>n={ctx.results.n_used}</b>"))
    register_panel(Panel(key="t_broken", title="Broken view", group="Tests",
                         build=lambda ctx: 1 / 0))
    try:
        e = ex.explore(str(demo_csv), response="thickness_um", factors="nozzle")
        e.tabs.selected_index = e._tab_groups.index("Tests")
        assert e.cards["t_extra"].html.value == "<b class='x'>n=114</b>"
        assert "could not be drawn" in e.cards["t_broken"].html.value
        assert "Broken view: ZeroDivisionError" in e.status.value
    finally:
        unregister_panel("t_extra")
        unregister_panel("t_broken")


def test_hidden_tabs_redraw_only_when_opened(demo):
    e = demo
    card = e.cards["partition_chart"]
    assert card.chart is None  # its tab has not been opened
    e.tabs.selected_index = e._tab_groups.index(card.panel.group)
    assert card.chart is not None
    spec0 = card.chart.spec
    e.tabs.selected_index = 0
    click_point(e, 6)
    e.reason_box.value = "gauge slip"
    e.drop_button.click()
    assert card.chart.spec == spec0  # not redrawn while hidden
    e.tabs.selected_index = e._tab_groups.index(card.panel.group)
    assert card.chart.spec != spec0


def test_battery_panels_follow_the_pickers(demo):
    """The featured test is the core's (``explorer.inference.omnibus.welch_f``, checked against scipy in test_omnibus)."""
    from explorer.inference.omnibus import welch_f

    e = demo
    e.omnibus_picker.value = "welch"
    e.comparison_picker.value = "games-howell"
    e.tabs.selected_index = e._tab_groups.index("Tests")
    welch = welch_f(e.study.results)
    assert e.study.spec.test == "welch" and e.study.decision.pvalue == welch.pvalue
    sentence = html.escape(e.study.decision.sentence())
    assert "The decision (Welch F)" in e.cards["overall_tests"].html.value
    assert sentence in e.cards["overall_tests"].html.value
    assert "Games-Howell" in e.cards["comparisons"].html.value
    assert sentence in e.header.value


def test_fragility_scans_run_when_opened_and_are_counted_once_per_view(demo):
    e = demo
    assert e.study.disclosure.specifications == 0  # hidden tab: nothing scanned yet
    e.tabs.selected_index = e._tab_groups.index("Fragility")
    counted = e.study.disclosure.specifications
    assert counted > 0
    assert f"{counted} alternative analyses examined" in e.header.value
    assert f"{counted} alternative analyses examined" in e.cards["compare"].html.value
    assert "1 row(s) flip the decision" in e.cards["leave_one_out"].note.value
    e.refresh()  # a redraw of the same view does not scan (or count) again
    assert e.study.disclosure.specifications == counted
    click_point(e, 6, chart="leave_one_out")  # the flip row can be picked from the scan's chart
    e.reason_box.value = "gauge slip"
    e.drop_button.click()
    assert e.study.dropped == (6,) and e.study.disclosure.specifications > counted


def test_a_picker_change_redraws_only_the_panels_that_read_it(demo):
    e = demo
    obs_spec, table = e.cards["observations"].chart.spec, e.cards["partition"].html.value
    e.tabs.selected_index = e._tab_groups.index("Tests")
    before = e.cards["comparisons"].html.value
    e.comparison_picker.value = "holm"
    assert e.cards["comparisons"].html.value != before  # reads the picker
    assert e.cards["observations"].chart.spec is obs_spec  # does not: not rebuilt
    assert e.cards["partition"].html.value == table


def test_fragility_tab_covers_two_factor_designs(demo_csv):
    """The sensitivity engine handles factorial designs, so the tab shows its scans, not a refusal."""
    e = ex.explore(str(demo_csv), response="thickness_um", factors=["nozzle", "shift"], id_column="panel")
    e.tabs.selected_index = e._tab_groups.index("Fragility")
    assert "Fewest rows" in e.cards["flip_rows"].html.value or "F test of nozzle" in e.cards["flip_rows"].html.value
    assert "several factors" not in e.cards["regroupings"].html.value
    assert e.study.disclosure.specifications > 0


def test_model_change_rereads_the_file_and_keeps_ids(demo_csv):
    """Changing the factors rebuilds from the original file: id column and replay code carry over."""
    e = ex.explore(str(demo_csv), response="thickness_um", factors="nozzle", id_column="panel")
    e.reason_box.value = "gauge slip"
    e.study.drop("P1007", reason="gauge slip")
    e.factor_picker.value = ("nozzle", "shift")
    assert e.study.spec.factors == ("nozzle", "shift")
    assert e.study.dropped == ("P1007",)
    assert e.study.data_source == str(demo_csv)
    assert "id_column='panel'" in e.study.to_code()


def test_summary_backed_study_draws_every_panel(demo_csv):
    """Row charts and scans of a summary-backed study read its seeded sample, so no panel fails."""
    pytest.importorskip("duckdb")
    s = ex.SummaryStudy(pd.read_csv(demo_csv), "thickness_um", "nozzle", sample_size=60)
    e = Explorer(s)
    for tab in ("Tests", "Fragility"):
        e.tabs.selected_index = e._tab_groups.index(tab)
    failed = [k for k, c in e.cards.items() if "could not be drawn" in (getattr(getattr(c, "html", None), "value", "") or "")]
    assert failed == []
    assert "could not" not in e.status.value


def test_tests_tab_for_two_factor_designs_shows_multi_factor_counterparts(demo_csv):
    """Several factors: the Tests tab shows all three SS types, least-squares-mean comparisons,
    partial effect sizes and the influence screen instead of a refusal."""
    e = ex.explore(str(demo_csv), response="thickness_um", factors=["nozzle", "shift"], blocks="paint_lot",
                   id_column="panel")
    e.tabs.selected_index = e._tab_groups.index("Tests")
    html_of = {k: e.cards[k].html.value for k in ("overall_tests", "assumption_checks", "comparisons",
                                                   "effect_power", "screens")}
    assert all("Not available" not in v and "could not" not in v for v in html_of.values())
    assert "type III" in html_of["overall_tests"] and "type I " in html_of["overall_tests"]
    assert "Tukey-Kramer" in html_of["comparisons"] and "Shapiro-Wilk" in html_of["assumption_checks"]
    assert "Levene" in html_of["assumption_checks"] and "Bartlett" in html_of["assumption_checks"]


def test_a_successful_edit_empties_the_reason_box_and_the_next_one_needs_its_own(demo):
    """The status line and the reason box are cleared after a successful action, so a second
    edit cannot silently inherit the first one's reason."""
    e = demo
    click_point(e, 6)
    e.reason_box.value = "gauge slip"
    e.drop_button.click()
    assert e.reason_box.value == "" and "Left out row(s) 6: gauge slip" in e.status.value
    click_point(e, 70)
    assert "Picked 1 row(s)" in e.status.value  # the previous message does not linger
    e.drop_button.click()
    assert e.study.dropped == (6,) and "Write a reason" in e.status.value
    e.undo_button.click()  # undo takes no reason and leaves the box alone
    e.reason_box.value = "typed before a redo"
    e.redo_button.click()
    assert e.reason_box.value == "typed before a redo"


def test_moved_rows_get_their_own_mark_legend_entry_and_line_and_the_level_editor_stays_usable(demo):
    """A row moved to another level is drawn as its own kind of point (with a legend entry), is
    listed from -> to beside the unedited data, and its recorded level stays editable."""
    e = demo
    click_point(e, 6)
    e.reason_box.value = "line log: sprayed through N2"
    e.move_target.value = "N2"
    e.move_button.click()
    assert [(m.row, m.recorded, m.now) for m in e.study.moved_rows()] == [(6, "N1", "N2")]
    spec = e.cards["observations"].chart.spec
    rows = next(v for v in spec["datasets"].values() if v and "state" in v[0])
    state = {r["row"]: r["state"] for r in rows}
    assert state["6"] == "moved to another level" and set(state.values()) == {"in analysis", "moved to another level"}
    colour = next(layer["encoding"]["color"] for layer in spec["layer"] if "color" in layer.get("encoding", {}))
    assert "moved to another level" in colour["scale"]["domain"]  # its own legend entry
    shape = next(layer["encoding"]["shape"] for layer in spec["layer"] if "shape" in layer.get("encoding", {}))
    marks = dict(zip(shape["scale"]["domain"], shape["scale"]["range"]))
    assert marks["moved to another level"] not in (marks["in analysis"], marks["left out"])
    assert "row 6: nozzle N1 → N2" in e.cards["compare"].html.value
    # the level editor: N1 still editable (not locked as "moved to several levels")
    assert not e._level_boxes["nozzle"]["N1"].disabled and e._level_boxes["nozzle"]["N1"].value == "N1"
    e.reason_box.value = "N2 and N3 from one supplier"
    e._level_boxes["nozzle"]["N2"].value = "N2+N3"
    e._level_boxes["nozzle"]["N3"].value = "N2+N3"
    e.regroup_button.click()
    assert e.study.edits[-1].kind == "merge"
    (moved,) = e.study.moved_rows()
    assert moved.now == "N2+N3" and moved.home == "N1"  # still moved, after the merge
    e.reason_box.value = "back where it was recorded"
    e.pick([6])
    e.move_target.value = "N1"
    e.move_button.click()
    assert e.study.moved_rows() == ()
