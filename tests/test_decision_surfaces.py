"""Every surface states the study's one decision: header, comparison, report, command-line text and each scan.

The cases (invented data, p-values checked against statsmodels in test_decision): a
crossover, a quantitative interaction and an additive two-factor design, and a one-factor
study whose classic F and Kruskal-Wallis disagree.
"""

from __future__ import annotations

import html

import pytest
from decision_support import RANKS_DISAGREE, TWO_WAY_CASES

import explorer as ex
from explorer.report import report_html
from explorer.report.sensitivity_summary import sensitivity_summary
from explorer.report.text_summary import summary_text

CASES = {**{name: (df, ["A", "B"], "classic") for name, df in TWO_WAY_CASES.items()},
         "one factor, ranks": (RANKS_DISAGREE, ["g"], "kruskal")}
EXPECTED = {"crossover": ("A × B", True), "quantitative": ("A × B", True), "additive": ("A", True),
            "one factor, ranks": ("g", True)}


@pytest.fixture(params=list(CASES))
def case(request):  # type: ignore[no-untyped-def]
    df, factors, test = CASES[request.param]
    study = ex.Study(df, "y", factors, test=test)
    study.drop([0], reason="a documented slip")  # a current view that differs from the baseline
    return request.param, study


def test_the_decision_is_as_expected(case):
    name, study = case
    assert (study.decision.term, study.decision.significant) == EXPECTED[name]


def test_every_scan_scores_the_decision_term_and_verdict(case):
    """Case deletion, flip finder, regroup scan and sweep: term scored and base verdict are the decision's."""
    _, study = case
    d = study.decision
    scans = [study.case_deletion(record=False), study.flip_finder(record=False, max_steps=3),
             study.regroup_scan(record=False)]
    for scan in scans:
        assert scan.term == d.term and scan.test == d.test, type(scan).__name__
        assert scan.base_significant == d.significant and scan.base_pvalue == d.pvalue, type(scan).__name__
    sweep = study.robustness_sweep(record=False, transforms=["none"])
    assert sweep.term == d.term and sweep.test == d.test and sweep.current_significant == d.significant
    assert sweep.default_pvalue == pytest.approx(d.pvalue, rel=1e-12)
    assert sensitivity_summary(study).decision == d.sentence()


def test_report_and_command_line_text_state_the_decision(case):
    _, study = case
    d, b = study.decision, study.baseline_decision
    text = summary_text(study, cautions=False)
    assert f"Decision ({d.method}): {d.sentence()}" in text
    assert f"Decision ({b.method}): {b.sentence()}" in text
    page = report_html(study, charts=False)
    assert html.escape(d.sentence()) in page and html.escape(b.sentence()) in page
    if d.caveat:
        assert html.escape(d.caveat) in page and d.caveat in text


def test_widget_header_and_comparison_state_one_decision(case):
    """The header holds the current and unedited decisions of the chosen test and no second verdict."""
    _, study = case
    e = ex.Explorer(study)
    head = e.header.value
    assert html.escape(study.decision.sentence()) in head
    assert html.escape(study.baseline_decision.sentence()) in head
    assert "Chosen test" not in head and head.count("p = ") == 2
    compare = e.cards["compare"].html.value
    assert html.escape(study.decision.verdict) in compare and study.decision.term in compare
    assert e.history[-1].term == study.decision.term and e.history[-1].pvalue == study.decision.pvalue


def test_choosing_kruskal_in_the_widget_gives_one_verdict():
    """The issue's report: with Kruskal-Wallis chosen, the header said 'differences detected' (classic F) and
    'Chosen test: no differences detected'. Now the picker sets the study's test and the header reads it."""
    e = ex.Explorer(ex.Study(RANKS_DISAGREE, "y", "g"))
    assert "no differences detected" in e.header.value
    e.omnibus_picker.value = "kruskal"
    d = e.study.decision
    assert e.study.spec.test == "kruskal" and d.significant
    assert e.header.value.count("differences detected") == 2 and "no differences" not in e.header.value
    assert "Kruskal-Wallis H" in e.header.value and e.study.disclosure.specifications == 1
    assert e.history[-1].action == "overall test: Kruskal-Wallis H" and e.history[-1].pvalue == d.pvalue


def test_a_one_factor_test_on_two_factors_is_refused_in_the_widget():
    e = ex.Explorer(ex.Study(TWO_WAY_CASES["crossover"], "y", ["A", "B"]))
    e.omnibus_picker.value = "welch"
    assert e.study.spec.test == "classic" and e.omnibus_picker.value == "classic"
    assert "compares the levels of one fixed factor" in e.status.value


def _cli_check(capsys, tmp_path, df, factors, test):  # type: ignore[no-untyped-def]
    from explorer.cli import main

    path = tmp_path / "data.csv"
    df.to_csv(path, index=False)
    argv = ["check", str(path), "--response", "y", *[a for f in factors for a in ("--factor", f)], "--test", test]
    code = main(argv)
    out = capsys.readouterr().out
    assert code == 0
    return out


def test_command_line_states_the_decision(case, capsys, tmp_path):
    """The command line's check (no edits: the unedited data) prints the baseline decision's sentence and method."""
    name, _ = case
    df, factors, test = CASES[name]
    out = _cli_check(capsys, tmp_path, df, factors, test)
    d = ex.Study(df, "y", factors, test=test).decision
    assert d.sentence() in out and d.method in out


@pytest.mark.parametrize("test", ["classic", "welch", "brown-forsythe", "kruskal", "permutation"])
def test_one_factor_surfaces_under_each_test(test, capsys, tmp_path):
    """Each overall test of a one-factor study: every scan scores the decision's test with its p as the base and
    says how it computed the test; the sweep's default analysis, the report text and the command line state the
    same decision."""
    from explorer.sensitivity.chosen_test import HOW

    study = ex.Study(RANKS_DISAGREE, "y", "g", test=test)
    d = study.decision
    assert d.test == test
    for scan in (study.case_deletion(record=False), study.flip_finder(record=False, max_steps=2),
                 study.regroup_scan(record=False)):
        assert scan.test == test and scan.base_pvalue == d.pvalue and scan.base_significant == d.significant
        assert any(n.startswith("Test: " + HOW[test]) for n in scan.notes), type(scan).__name__
    sweep = study.robustness_sweep(record=False, transforms=["none"])
    assert sweep.test == test and sweep.default_pvalue == pytest.approx(d.pvalue, rel=1e-12)
    assert any("seeded orderings" in n for n in sweep.notes) == (test == "permutation")
    assert f"Decision ({d.method}): {d.sentence()}" in summary_text(study, cautions=False)
    out = _cli_check(capsys, tmp_path, RANKS_DISAGREE, ["g"], test)
    assert d.sentence() in out and d.method in out
