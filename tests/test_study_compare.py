"""Two studies of the same data side by side: logs matched, analyses side by side, the edits that make
the decisions differ found by replay, and a colleague's edits adopted one by one with their origin.

Every state the comparison states is checked against a study rebuilt by hand from the logs (the
union of both logs, or the shared edits plus theirs), and the union's p-value against
scipy.stats.f_oneway on the table edited with pandas (outside reference).
"""

from __future__ import annotations

import html
from pathlib import Path

import pandas as pd
import pytest
from scipy import stats

import explorer as ex
from explorer.engine.errors import EditError, ExplorerError, ReplayError

ROOT = Path(__file__).resolve().parents[1]
DATA = ROOT / "data" / "coating_thickness.csv"
KW = {"response": "thickness_um", "factors": "nozzle", "id_column": "panel"}


def _fresh() -> ex.Study:
    return ex.Study(DATA, **KW)


@pytest.fixture
def pair(tmp_path) -> tuple[ex.Study, ex.Study, Path]:
    """Mine: P1007 left out (a gauge slip) and P1040 left out. Theirs, saved to a file: P1007 left out
    with another reason, N2 and N3 merged, N4 renamed. The two decisions differ."""
    mine = _fresh()
    mine.drop(["P1007"], reason="gauge slip, line log 14 March")
    mine.drop(["P1040"], reason="scratched <before> & measured again")
    theirs = _fresh()
    theirs.drop(["P1007"], reason="reading below the gauge's range")
    theirs.merge_levels("nozzle", ["N2", "N3"], into="N2+N3", reason="one supplier, one nozzle design")
    theirs.rename_level("nozzle", "N4", "N4-new", reason="the new nozzle's catalogue name")
    path = theirs.save(tmp_path / "colleague.study.json")
    return mine, theirs, path


def _by_hand_union() -> ex.Study:
    s = _fresh()
    s.drop(["P1007"], reason="")
    s.drop(["P1040"], reason="")
    s.merge_levels("nozzle", ["N2", "N3"], into="N2+N3", reason="")
    s.rename_level("nozzle", "N4", "N4-new", reason="")
    return s


def _scipy_union_p() -> float:
    """The union of both logs done on the table with pandas, tested by scipy.stats.f_oneway."""
    t = pd.read_csv(DATA)
    t = t[~t["panel"].isin(["P1007", "P1040"])].copy()
    t["nozzle"] = t["nozzle"].replace({"N2": "N2+N3", "N3": "N2+N3", "N4": "N4-new"})
    return float(stats.f_oneway(*[g["thickness_um"].to_numpy() for _, g in t.groupby("nozzle")]).pvalue)


def test_logs_are_matched_by_what_the_edits_do_with_both_reasons(pair):
    mine, _, path = pair
    c = mine.compare(path)
    assert c.theirs_label == "colleague.study.json"
    assert [(s.mine.reason, s.theirs.reason) for s in c.shared] == [
        ("gauge slip, line log 14 March", "reading below the gauge's range")]
    assert [e.describe() for e in c.only_mine] == [mine.edits[1].describe()]
    assert [e.kind for e in c.only_theirs] == ["merge", "rename"]
    frame = c.edits_frame()
    assert list(frame["in"]) == ["both", "only mine", "only theirs", "only theirs"]
    assert frame.loc[2, "their reason"] == "one supplier, one nozzle design" and frame.loc[2, "my reason"] == ""


def test_analyses_side_by_side_are_those_of_each_study(pair):
    mine, theirs, path = pair
    c = mine.compare(path)
    frame = c.analyses_frame().set_index("")
    assert frame.loc["decision", "mine"] == mine.decision.sentence()
    assert frame.loc["decision", "colleague.study.json"] == theirs.decision.sentence()
    assert frame.loc["rows in analysis"].tolist() == ["114", "112", "113"]
    assert c.decisions_differ == (mine.decision.significant != theirs.decision.significant)


def test_replay_end_states_match_studies_rebuilt_by_hand(pair):
    """Each replay step's state is the study rebuilt by hand from the same edits."""
    mine, theirs, path = pair
    c = mine.compare(path)
    # after taking back my own edit: the shared edit alone
    shared_only = _fresh()
    shared_only.drop(["P1007"], reason="")
    assert c.steps[1].action == "take back mine" and c.steps[1].decision.pvalue == pytest.approx(
        shared_only.decision.pvalue, rel=1e-12)
    # the end of the path: shared plus theirs, i.e. their own state
    end = c.steps[-1]
    assert end.action == "add theirs" and end.decision.pvalue == pytest.approx(theirs.decision.pvalue, rel=1e-12)
    assert end.n_used == theirs.results.n_used
    # each step turns exactly when its decision differs from the step before
    for before, after in zip(c.steps, c.steps[1:]):
        assert after.turns == (before.decision.significant != after.decision.significant)


def test_the_edits_that_make_the_decisions_differ_are_named(pair):
    mine, theirs, path = pair
    c = mine.compare(path)
    assert c.decisions_differ
    assert c.turning_steps, "the replay must turn somewhere when the end decisions differ"
    for s in c.turning_steps:
        assert s.describe() in c.summary()
    for x in c.effects:  # each differing edit alone against my view, checked by a study rebuilt by hand
        trial = _fresh()
        for e in mine.edits:
            if not (x.side == "mine" and e is x.edit):
                trial.apply(e)
        if x.side == "theirs":
            trial.apply(x.edit)
        assert x.decision.pvalue == pytest.approx(trial.decision.pvalue, rel=1e-12)
        assert x.flips == (trial.decision.significant != mine.decision.significant)
    assert set(map(id, c.decisive_edits)) == {id(s.edit) for s in c.turning_steps} | {
        id(x.edit) for x in c.effects if x.flips}


def test_adopting_their_edits_one_by_one_gives_the_union_of_both_logs(pair):
    mine, _, path = pair
    c = mine.compare(path)
    made_before = mine.disclosure.edits_made
    c.adopt(0)
    c.adopt(c.only_theirs[1])
    union = _by_hand_union()
    assert mine.results.partition == union.results.partition
    assert mine.decision.pvalue == pytest.approx(union.decision.pvalue, rel=1e-12)
    assert mine.decision.pvalue == pytest.approx(_scipy_union_p(), rel=1e-9)  # scipy.stats.f_oneway
    assert [e.reason for e in mine.edits[-2:]] == ["one supplier, one nozzle design", "the new nozzle's catalogue name"]
    origins = [x.origin for x in mine.ledger.entries if x.kind == "edit"]
    assert origins[:2] == ["", ""] and all(o.startswith("adopted from colleague.study.json") for o in origins[2:])
    assert mine.disclosure.edits_made == made_before + 2
    again = mine.compare(path)  # nothing of theirs is missing now
    assert not again.only_theirs and len(again.only_mine) == 1


def test_adopt_refuses_what_is_not_theirs_or_does_not_apply(pair):
    mine, _, path = pair
    c = mine.compare(path)
    with pytest.raises(EditError, match="no edit 5"):
        c.adopt(5)
    with pytest.raises(EditError, match="not one of their edits"):
        c.adopt(mine.edits[0])
    mine.merge_levels("nozzle", ["N2", "N3"], into="N23", reason="my own merge first")
    n = len(mine.edits)
    with pytest.raises(EditError):
        c.adopt(0)  # N2 and N3 no longer exist in my view
    assert len(mine.edits) == n
    with pytest.raises(EditError, match="origin"):
        mine.adopt(c.only_theirs[1], origin="  ")


def test_other_data_or_another_question_is_refused(pair, tmp_path):
    mine, _, _ = pair
    other = pd.read_csv(DATA)
    other.loc[3, "thickness_um"] += 0.1
    with pytest.raises(ExplorerError, match="not on the same data"):
        mine.compare(ex.Study(other, **KW))
    with pytest.raises(ExplorerError, match="analyse different things"):
        mine.compare(ex.Study(DATA, response="thickness_um", factors="shift", id_column="panel"))
    with pytest.raises(ExplorerError, match="not int"):
        mine.compare(7)
    with pytest.raises(ExplorerError, match="label must be text"):
        mine.compare(mine, label=3)
    with pytest.raises(ExplorerError, match="name rows differently"):
        mine.compare(ex.Study(DATA, response="thickness_um", factors="nozzle"))
    elsewhere = ex.Study(other, **KW)
    elsewhere.drop(["P1001"], reason="x")
    saved = elsewhere.save(tmp_path / "other-data.study.json")
    with pytest.raises(ReplayError, match="differ"):
        mine.compare(saved)


def test_a_different_test_is_a_model_difference_step():
    mine, theirs = _fresh(), _fresh()
    theirs.set_test("kruskal")
    c = mine.compare(theirs)
    assert c.model_differences == ("test: mine 'classic', theirs 'kruskal'",)
    assert c.steps[-1].action == "their model" and c.steps[-1].decision.test == "kruskal"


def test_html_escapes_reasons_and_text_is_short(pair):
    mine, _, path = pair
    c = mine.compare(path)
    page = c._repr_html_()
    assert "scratched &lt;before&gt; &amp; measured again" in page and "<before>" not in page
    assert "The two edit logs" in page and "Replaying the difference one edit at a time" in page
    assert html.escape(c.summary()) in page
    assert len(str(c).splitlines()) < 12


def test_report_has_a_section_beside_the_colleague(pair, tmp_path):
    from explorer.report import report_html

    mine, _, path = pair
    page = report_html(mine, charts=False, compare=path)
    section = page.split("<section id='colleague'>", 1)[1].split("</section>", 1)[0]
    assert "Beside colleague.study.json" in section and "The two edit logs" in section
    assert "one supplier, one nozzle design" in section and "&lt;before&gt;" in section
    assert "<section id='colleague'>" not in report_html(mine, charts=False)
    with pytest.raises(ex.OutputError):
        mine.report(path, compare=path, overwrite=True)  # the colleague's file is never written over
    assert ex.Study.load(path, DATA).edits[-1].kind == "rename"


def test_widget_panel_loads_compares_and_adopts(pair, tmp_path):
    pytest.importorskip("ipywidgets")
    mine, _, path = pair
    e = ex.Explorer(mine)
    e.tabs.selected_index = e._tab_groups.index("Colleague's study")
    from explorer.widget.colleague_panel import _PANELS

    p = _PANELS[mine]
    assert not p.load_path(tmp_path / "missing.study.json") and "Not loaded" in p.status.value
    (tmp_path / "junk.study.json").write_text("{not json", encoding="utf-8")
    assert not p.load_bytes("junk.study.json", (tmp_path / "junk.study.json").read_bytes())
    assert "not valid JSON" in p.status.value and p.comparison is None
    assert p.load_bytes("colleague.study.json", path.read_bytes())  # as the upload button gives it
    assert "The two edit logs" in p.result.value and len(p.adopt_box.children) == 3  # title + 2 edits
    made = len(mine.edits)
    assert p.adopt(0)
    assert len(mine.edits) == made + 1 and mine.edits[-1].reason == "one supplier, one nozzle design"
    assert "Adopted from colleague.study.json" in p.status.value
    assert len(p.adopt_box.children) == 2  # compared again: one of theirs left
    assert html.escape(mine.decision.sentence()) in e.header.value  # the explorer redrew on the adopted edit


def test_summary_backed_studies_are_refused_plainly():
    pytest.importorskip("duckdb")
    from explorer.summaries import SummaryStudy

    big = SummaryStudy(pd.read_csv(DATA), response="thickness_um", factors=["nozzle"])
    with pytest.raises(ExplorerError, match="summary-backed"):
        _fresh().compare(big)
