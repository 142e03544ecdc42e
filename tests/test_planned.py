"""Planned analyses as part of the study: kept, recomputed after edits, counted, saved, replayed, shown.

Statistics here are the inference functions' (checked against outside references in
tests/test_contrasts.py and tests/test_followups.py); these tests check that the study
carries them: each request recomputes on the edited view exactly as the function on that
view, variants of one question add to the disclosed alternatives, a saved study and its
replay code come back with the same requests and the same counts, the report and the
widget show them, and a hostile study file is refused naming the field.
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

import explorer as ex
from explorer.engine.errors import ExplorerError, ReplayError
from explorer.inference.contrasts import contrasts
from explorer.inference.equivalence import equivalence
from explorer.inference.trends import trend


def coating(seed: int = 2) -> pd.DataFrame:
    """Invented scenario: coating thickness at four curing doses, two suppliers of primer."""
    rng = np.random.default_rng(seed)
    rows = []
    for d, n in zip([0.5, 1, 2, 4], [6, 7, 6, 8]):
        for _ in range(n):
            rows.append({"dose": d, "supplier": str(rng.choice(["current", "new"])),
                         "thickness": round(float(20 + 3 * np.log(d) + rng.normal(0, 1)), 3)})
    return pd.DataFrame(rows)


def _searched(study) -> int:
    d = study.disclosure
    return int(getattr(d, "alternatives", d.specifications))


def test_requests_recompute_after_every_edit():
    study = ex.Study(coating(), "thickness", "dose")
    first = study.contrast("dose", {"0.5": -1, "2": 1})
    assert first.estimate[0] == pytest.approx(contrasts(study.results, "dose", {"0.5": -1, "2": 1}).estimate[0])
    study.trend("dose")
    study.equivalence("dose", margin=1.0, pairs=[("1", "2")])
    study.drop([0, 1], reason="invented: smeared panels")
    outs = study.planned()
    assert len(outs) == 3 and all(o.problem is None for o in outs)
    now = contrasts(study.results, "dose", {"0.5": -1, "2": 1})
    assert outs[0].value.estimate[0] == now.estimate[0] != first.estimate[0]
    np.testing.assert_array_equal(outs[1].value.pvalue, trend(study.results, "dose").pvalue)
    np.testing.assert_array_equal(outs[2].value.pvalue,
                                  equivalence(study.results, "dose", margin=1.0, pairs=[("1", "2")]).pvalue)
    assert study.planned() is study.planned()  # memoised per view
    study.undo()
    assert study.planned()[0].value.estimate[0] == first.estimate[0]


def test_a_request_that_no_longer_applies_says_why():
    study = ex.Study(coating(), "thickness", "dose")
    study.contrast("dose", {"0.5": -1, "4": 1})
    study.merge_levels("dose", ["2", "4"], into="high", reason="invented")
    out = study.planned()[0]
    assert out.value is None and "not a level" in out.problem
    assert "Not available on this view" in out._repr_html_()


def test_bad_requests_are_refused_and_not_kept():
    study = ex.Study(coating(), "thickness", "dose")
    with pytest.raises(ExplorerError):
        study.contrast("dose", {"0.5": -1, "2": 3})
    with pytest.raises(ExplorerError, match="does not propose"):
        study.equivalence("dose", margin=None, pairs=[("1", "2")])
    assert study.planned_requests == ()


def test_variants_of_one_question_are_counted():
    study = ex.Study(coating(), "thickness", "dose")
    base = _searched(study)
    study.equivalence("dose", margin=1.0, pairs=[("1", "2")])
    assert _searched(study) == base  # the first request of a question is free
    study.equivalence("dose", margin=1.0, pairs=[("1", "2")])
    assert _searched(study) == base  # the same request again is not a new version
    study.equivalence("dose", margin=1.5, pairs=[("1", "2")])
    assert _searched(study) == base + 1  # another margin: one more alternative
    study.contrast("dose", {"0.5": -1, "2": 1})
    study.trend("dose")
    assert _searched(study) == base + 2  # a trend is another set of contrasts of the same means
    assert len(study.planned_requests) == 4


def test_saved_study_keeps_requests_and_counts(tmp_path):
    df = coating()
    study = ex.Study(df, "thickness", "dose")
    study.contrast("dose", "control", control="0.5")
    study.contrast("dose", {"up": {"0.5": -1, "4": 1}, "mid": {"1": -1, "2": 1}}, adjust="bonferroni")
    study.drop(3, reason="invented: scratched")
    path = study.save(tmp_path / "s.study.json")
    doc = json.loads(path.read_text())
    assert [p["kind"] for p in doc["planned"]] == ["contrast", "contrast"]
    again = ex.Study.load(path, df)
    assert again.planned_requests == study.planned_requests
    assert _searched(again) == _searched(study)
    a, b = again.planned(), study.planned()
    np.testing.assert_array_equal(a[1].value.adjusted, b[1].value.adjusted)


@pytest.mark.parametrize("bad, where", [
    ({"kind": "rm -rf", "options": {}}, "planned[0].kind"),
    ({"kind": "contrast", "options": {"weights": {"0.5": -1, "2": 1}, "shell": "x"}}, "unknown option"),
    ({"kind": "contrast", "options": []}, "planned[0].options"),
    ({"kind": "trend", "factor": 3, "options": {}}, "factor"),
    ({"kind": "trend", "options": {}, "at": "yesterday"}, "planned[0].at"),
    ("contrast", "planned[0]"),
])
def test_hostile_planned_entries_are_refused(tmp_path, bad, where):
    df = coating()
    doc = ex.Study(df, "thickness", "dose").to_dict()
    doc["planned"] = [bad]
    with pytest.raises(ReplayError, match=where.replace("[", r"\[").replace("]", r"\]")):
        ex.Study.from_dict(doc, df)


def test_replay_code_rebuilds_requests_and_counts(tmp_path):
    df = coating()
    csv = tmp_path / "coating.csv"
    df.to_csv(csv, index=False)
    study = ex.Study(csv, "thickness", "dose")
    study.trend("dose", degree=2)
    study.contrast("dose", "later")
    study.equivalence("dose", margin=(-0.8, 1.2), control="0.5", adjust="holm")
    study.drop(2, reason="invented")
    code = study.to_code()
    assert "study.trend('dose', degree=2, record=False)" in code
    script = code + (
        "\nimport json\nprint(json.dumps({'n': len(study.planned_requests), "
        "'p': [float(x) for x in study.planned()[2].value.pvalue], "
        "'s': getattr(study.disclosure, 'alternatives', study.disclosure.specifications)}))\n")
    out = subprocess.run([sys.executable, "-c", script], cwd=tmp_path, capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    got = json.loads(out.stdout.strip().splitlines()[-1])
    assert got["n"] == 3
    assert got["p"] == [float(x) for x in study.planned()[2].value.pvalue]
    assert got["s"] == _searched(study)


def test_report_and_text_show_planned_analyses(tmp_path):
    study = ex.Study(coating(), "thickness", "dose")
    study.trend("dose")
    study.equivalence("dose", margin=1.0, control="0.5")
    page = study.report(tmp_path / "r.html").read_text()
    assert "<section id='planned'>" in page and "Polynomial trend of dose" in page
    assert page.count("<svg") >= 1 and "Equivalence against your margin" in page
    from explorer.report.text_summary import summary_text

    text = summary_text(study)
    assert "Planned analyses" in text and "linear" in text


def test_widget_shows_planned_analyses():
    pytest.importorskip("ipywidgets")
    from explorer.widget.panels import PANELS, PanelContext, Settings

    study = ex.Study(coating(), "thickness", "dose")
    ctx = PanelContext(study=study, settings=Settings())
    assert "No planned analyses yet" in PANELS["planned_analyses"].build(ctx)
    assert PANELS["equivalence_intervals"].build(ctx) is None
    study.contrast("dose", {"0.5": -1, "4": 1})
    study.equivalence("dose", margin=1.0, pairs=[("1", "2")])
    html = PANELS["planned_analyses"].build(ctx)
    assert "Contrasts of the level means of dose" in html and "Equivalence of the level means" in html
    chart = PANELS["equivalence_intervals"].build(ctx)
    spec = chart.to_dict()
    assert "Equivalence against your margin" in json.dumps(spec)


def test_a_trend_whose_degree_outgrows_the_levels_says_why_after_an_edit():
    """Degree 3 on four doses; a merge leaves three, so the request reports why it has no value there, and
    undoing the merge brings the value back (recomputed, never a stale or truncated table)."""
    study = ex.Study(coating(), "thickness", "dose")
    study.trend("dose", degree=3)
    study.merge_levels("dose", ["2", "4"], into="4", reason="invented")
    out = study.planned()[0]
    assert out.value is None and "between 1 and 2" in out.problem
    study.undo()
    assert study.planned()[0].value.names == ("linear", "quadratic", "cubic")


def test_versions_tried_are_named_in_the_ledger_and_kept_in_the_file(tmp_path):
    """Each further version of a question is one search entry of the disclosure ledger naming that version
    (the first is free); the saved study brings the same entries back and the same count."""
    df = coating()
    study = ex.Study(df, "thickness", "dose")
    study.equivalence("dose", margin=1.0, pairs=[("1", "2")])
    study.equivalence("dose", margin=1.5, pairs=[("1", "2")])
    study.contrast("dose", {"0.5": -1, "4": 1})
    study.trend("dose", degree=2)
    searches = [e for e in study.ledger.entries if e.kind == "search"]
    assert [e.count for e in searches] == [1, 1]
    assert "another version of equivalence of dose: Equivalence of dose" in searches[0].what
    assert 'margin=1.5' in searches[0].what
    assert "Polynomial trend of dose (degree=2)" in searches[1].what
    again = ex.Study.load(study.save(tmp_path / "s.study.json"), df)
    assert [(e.what, e.count) for e in again.ledger.entries if e.kind == "search"] == \
        [(e.what, e.count) for e in searches]
    assert _searched(again) == _searched(study)


def test_widget_draws_every_equivalence_request():
    """Two margins tried: the widget draws both interval charts (as the report does), not only the last."""
    pytest.importorskip("ipywidgets")
    from explorer.widget.panels import PANELS, PanelContext, Settings

    study = ex.Study(coating(), "thickness", "dose")
    study.equivalence("dose", margin=1.0, pairs=[("1", "2")])
    study.equivalence("dose", margin=1.5, control="0.5")
    spec = PANELS["equivalence_intervals"].build(PanelContext(study=study, settings=Settings())).to_dict()
    assert len(spec["vconcat"]) == 2
    assert json.dumps(spec).count("Equivalence against your margin") == 2
