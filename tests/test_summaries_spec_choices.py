"""Specification choices on a summary-backed study: exact where the cell summaries suffice, refused otherwise.

References: statsmodels ``anova_oneway`` (use_var='bf' for Brown-Forsythe's F* with
Mehrotra's df, 'unequal' for Welch's F), statsmodels ``anova_lm`` (typ=2) of ``ols`` fits
and scipy ``f_oneway``, each on the same rows read with pandas and filtered with a pandas
mask for the condition in effect. What needs every row (a transform of the response, the
rank and permutation tests, covariates, random, nested or repeated-measures roles) is
refused with a message naming why, and nothing changes: spec, results, ledger, saved form.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from summaries_support import close, unbalanced_frame

from explorer.engine.errors import EditError, ExplorerError, ReplayError
from explorer.summaries import SummaryStudy

pytest.importorskip("duckdb")

CONDITION = "temperature > 80"


@pytest.fixture(scope="module")
def frame() -> pd.DataFrame:
    return unbalanced_frame()


@pytest.fixture(scope="module")
def kept(frame) -> pd.DataFrame:
    """The rows left after ``CONDITION``, by a pandas mask."""
    return frame[~(frame["temperature"] > 80)]


@pytest.fixture(scope="module")
def parquet(frame, tmp_path_factory):
    path = tmp_path_factory.mktemp("spec") / "readings.parquet"
    frame.to_parquet(path, index=False)
    return path


def _state(study: SummaryStudy) -> tuple:
    return (study.spec, len(study.ledger), json.dumps(study.to_dict(), sort_keys=True), id(study.results),
            study.results.partition.rows[0].statistic)


def _groups(rows: pd.DataFrame) -> list[np.ndarray]:
    return [g.to_numpy() for _, g in rows.groupby("line")["thickness"]]


@pytest.mark.parametrize("factors", [["line"], ["line", "shift"]])
@pytest.mark.parametrize("sample_size", [0, 200])
def test_a_transform_is_refused_and_changes_nothing(frame, factors, sample_size):
    """Every transform (log, square root, a Box-Cox power) is refused naming why; 'none' is a no-op."""
    s = SummaryStudy(frame, "thickness", factors, sample_size=sample_size)
    s.drop_where(CONDITION, reason="sensor outside its range")
    before = _state(s)
    for transform in ("log", "sqrt", 0.5):
        with pytest.raises(EditError, match="a transform needs every row") as info:
            s.set_transform(transform, reason="skewed")
        assert "sample_study()" in str(info.value) and "'thickness'" in str(info.value)
        assert _state(s) == before
    assert s.set_transform("none") is s.results and _state(s) == before


@pytest.mark.parametrize("test", ["kruskal", "permutation"])
def test_tests_that_need_rows_are_refused_and_change_nothing(frame, test):
    s = SummaryStudy(frame, "thickness", "line", sample_size=0)
    s.drop_where(CONDITION, reason="sensor outside its range")
    before = _state(s)
    with pytest.raises(ExplorerError, match="needs every row"):
        s.set_test(test)
    assert _state(s) == before


def test_brown_forsythe_and_welch_after_a_condition_match_statsmodels(parquet, kept, frame):
    """The decision under Brown-Forsythe's F* and Welch's F, exact from the summaries after a condition:
    statsmodels anova_oneway(use_var='bf' / 'unequal') on the rows the pandas mask keeps; the baseline on
    all rows."""
    from statsmodels.stats.oneway import anova_oneway

    s = SummaryStudy(parquet, "thickness", "line", sample_size=0)
    s.drop_where(CONDITION, reason="sensor outside its range")
    for test, use_var in (("brown-forsythe", "bf"), ("welch", "unequal")):
        d = s.set_test(test)
        ref = anova_oneway(_groups(kept), use_var=use_var)
        assert d.test == test
        assert close(d.statistic, ref.statistic) and close(d.pvalue, ref.pvalue) and close(d.df_den, ref.df[1])
        base = anova_oneway(_groups(frame), use_var=use_var)
        assert close(s.baseline_decision.pvalue, base.pvalue)
    assert [e.what for e in s.ledger.of_kind("specification")] == ["overall test", "overall test"]


def test_model_terms_after_a_condition_match_statsmodels(parquet, kept, tmp_path):
    """set_terms on a study without a sample (no row view): the additive and the full two-way partitions
    after a condition equal statsmodels anova_lm(typ=2) on the kept rows; the terms survive save/load and
    the replay code."""
    smf = pytest.importorskip("statsmodels.formula.api")
    from statsmodels.stats.anova import anova_lm

    s = SummaryStudy(parquet, "thickness", ["line", "shift"], sample_size=0)
    s.drop_where(CONDITION, reason="sensor outside its range")
    for max_order, formula in ((1, "thickness ~ C(line) + C(shift)"), (None, "thickness ~ C(line) * C(shift)")):
        res = s.set_terms(max_order=max_order)
        ref = anova_lm(smf.ols(formula, data=kept).fit(), typ=2)
        names = {"line": "C(line)", "shift": "C(shift)", "line × shift": "C(line):C(shift)"}
        sources = [r.source for r in res.partition.rows if r.source in names]
        assert sources == ["line", "shift"] + (["line × shift"] if max_order is None else [])
        for row in res.partition.rows:
            if row.source in names:
                ref_row = ref.loc[names[row.source]]
                assert close(row.sum_sq, ref_row["sum_sq"], 1e-8) and close(row.statistic, ref_row["F"], 1e-8)
                assert close(row.pvalue, ref_row["PR(>F)"], 1e-8)
    s.set_terms(max_order=1)
    assert [e.what for e in s.ledger.of_kind("specification")] == ["model terms"] * 3
    path = s.save(tmp_path / "additive.json")
    again = SummaryStudy.load(path, parquet)
    assert again.spec.max_order == 1 and close(again.results.partition.rows[0].statistic,
                                               s.results.partition.rows[0].statistic)
    code = s.to_code(str(parquet))
    assert "max_order=1" in code
    scope: dict = {}
    exec(code, scope)
    assert close(scope["study"].results.partition.rows[0].statistic, s.results.partition.rows[0].statistic)


def test_alpha_on_a_study_without_a_sample(kept, parquet):
    """set_alpha needs no row view: the decision's p is scipy f_oneway's on the kept rows, read at the new alpha."""
    from scipy.stats import f_oneway

    s = SummaryStudy(parquet, "thickness", "line", sample_size=0)
    s.drop_where(CONDITION, reason="sensor outside its range")
    p = f_oneway(*_groups(kept)).pvalue
    alpha = float(p) * 0.5
    d = s.set_alpha(alpha)
    assert close(d.pvalue, p) and d.alpha == alpha and d.significant is False


@pytest.mark.parametrize("field,value,fragment", [
    ("transform", "log", "a transform needs every row"),
    ("covariates", ["temperature"], "cross-products"),
    ("random", ["line"], "crossed fixed factors and blocks only"),
    ("test", "kruskal", "needs every row"),
])
def test_a_saved_spec_the_summaries_cannot_compute_is_refused(frame, field, value, fragment):
    """A study file whose spec asks for something the cell summaries cannot give is refused at load
    (before, a transform or a covariate in the file was ignored and the raw response analysed)."""
    doc = SummaryStudy(frame, "thickness", "line", sample_size=0).to_dict()
    doc["spec"][field] = value
    with pytest.raises(ReplayError, match=fragment):
        SummaryStudy.from_dict(doc, frame)


def test_the_widget_holds_the_model_pickers_of_a_summary_backed_study(frame):
    """The transform, response and factor pickers are disabled (with a tooltip saying why); a value set anyway
    shows the refusal and the picker goes back to the model analysed."""
    pytest.importorskip("ipywidgets")
    from explorer.widget.explorer import Explorer

    s = SummaryStudy(frame, "thickness", "line", sample_size=60)
    e = Explorer(s)
    assert e.transform_picker.disabled and "needs every row" in e.transform_picker.tooltip
    before = _state(s)
    e.transform_picker.value = "log"
    assert "a transform needs every row" in e.status.value
    assert e.transform_picker.value == "none" and _state(s) == before
    assert e.factor_picker.disabled and e.response_picker.disabled and "keeps its response" in e.factor_picker.tooltip
    e.factor_picker.value = ("line", "shift")  # set anyway: refused, and the picker shows the model still analysed
    assert "keeps its model" in e.status.value and e.study is s and _state(s) == before
    assert e.factor_picker.value == ("line",)
    e.omnibus_picker.value = "kruskal"  # offered to every study; refused here, naming why
    assert "needs every row" in e.status.value and e.omnibus_picker.value == "classic" and _state(s) == before


@pytest.mark.parametrize("ss_type", ["I", "II", "III"])
@pytest.mark.parametrize("design", ["three factors, two-way terms", "blocks, a block-by-factor term"])
def test_chosen_terms_match_statsmodels(ss_type, design):
    """Terms chosen after a condition on a three-factor and a blocked study: every term's SS, F and p equal
    statsmodels anova_lm (typ=1/2/3, sum-to-zero coding) of the same terms on the kept rows, to 1e-8."""
    smf = pytest.importorskip("statsmodels.formula.api")
    from statsmodels.stats.anova import anova_lm

    rows = unbalanced_frame(n=600)
    rows["lot"] = rows["lot"].astype(str)
    rows["grade"] = np.where(rows["temperature"] > 70, "A", "B")
    kept = rows[~(rows["temperature"] > 85)]
    if design.startswith("three"):
        s = SummaryStudy(rows, "thickness", ["line", "shift", "grade"], ss_type=ss_type, sample_size=0)
        terms = {"max_order": 2}
        names = {"line": "C(line, Sum)", "shift": "C(shift, Sum)", "grade": "C(grade, Sum)",
                 "line × shift": "C(line, Sum):C(shift, Sum)", "line × grade": "C(line, Sum):C(grade, Sum)",
                 "shift × grade": "C(shift, Sum):C(grade, Sum)"}
    else:
        s = SummaryStudy(rows, "thickness", ["line", "shift"], blocks="lot", ss_type=ss_type, sample_size=0)
        terms = {"terms": ["line", "shift", "lot × line"]}
        names = {"lot": "C(lot, Sum)", "line": "C(line, Sum)", "shift": "C(shift, Sum)",
                 "lot × line": "C(lot, Sum):C(line, Sum)"}
    s.drop_where("temperature > 85", reason="sensor outside its range")
    res = s.set_terms(**terms)
    formula = "thickness ~ " + " + ".join(names.values())
    aov = anova_lm(smf.ols(formula, data=kept).fit(), typ={"I": 1, "II": 2, "III": 3}[ss_type])
    assert sorted(r.source for r in res.partition.rows if r.source in names) == sorted(names)
    for src, ref in names.items():
        row = res.partition.row(src)
        assert close(row.sum_sq, aov.loc[ref, "sum_sq"], 1e-8), (src, ss_type)
        assert close(row.statistic, aov.loc[ref, "F"], 1e-8) and close(row.pvalue, aov.loc[ref, "PR(>F)"], 1e-8)


@pytest.mark.parametrize("name,call", [
    ("trimmed-means", lambda s: s.trimmed_means()),
    ("Dunn's", lambda s: s.dunn()),
    ("HC3", lambda s: s.hc3_tests()),
    ("Box-Cox", lambda s: s.box_cox()),
    ("Mann-Whitney", lambda s: s.mann_whitney()),
    ("each row", lambda s: s.row_deletion()),
    ("set_aside_scan", lambda s: s.unit_deletion("line")),
])
def test_analyses_that_read_every_row_are_refused_and_change_nothing(frame, name, call):
    """Rank tests, trimmed means, HC3, Box-Cox and row deletion read every kept row; on a summary-backed study
    (whose fit holds a seeded sample) they are refused rather than computed on the sample as if on all rows."""
    rows = frame[frame["line"] != "L3"] if name == "Mann-Whitney" else frame
    s = SummaryStudy(rows, "thickness", "line", sample_size=120)
    s.drop_where(CONDITION, reason="sensor outside its range")
    before = _state(s), s.planned_requests
    with pytest.raises(ExplorerError, match=name) as info:
        call(s)
    assert "sample_study()" in str(info.value)
    assert (_state(s), s.planned_requests) == before


def test_a_direct_call_on_summary_results_is_refused_too(frame):
    """The guard sits in the computations themselves: ex.stats on a summary study's results refuses as well,
    while the same call on a row study of the same rows works (scipy kruskal-based Dunn is checked elsewhere)."""
    import explorer as ex

    s = SummaryStudy(frame, "thickness", "line", sample_size=120)
    with pytest.raises(ExplorerError, match="every kept row is needed for Dunn's test"):
        ex.stats.dunn(s.results)
    assert ex.stats.dunn(ex.Study(frame, "thickness", "line").results).adjusted.size == 3


def test_planned_contrasts_are_exact_and_kept_by_save_load_and_replay_code(parquet, kept, tmp_path):
    """A contrast asked on a summary-backed study after a condition: estimate, t and p equal statsmodels OLS
    t_test of the same weights on the kept rows; the request survives save/load (it was dropped before) and the
    replay code, as does the comparison method."""
    smf = pytest.importorskip("statsmodels.formula.api")

    s = SummaryStudy(parquet, "thickness", "line", sample_size=0)
    s.drop_where(CONDITION, reason="sensor outside its range")
    table = s.contrast("line", {"L1": 1, "L2": -1})
    s.set_comparisons("games-howell")
    ref = smf.ols("thickness ~ C(line) - 1", data=kept).fit().t_test([1, -1, 0])
    assert close(table.estimate[0], float(np.ravel(ref.effect)[0]))
    assert close(table.statistic[0], float(np.ravel(ref.tvalue)[0]), 1e-8)
    assert close(table.pvalue[0], float(np.ravel(ref.pvalue)[0]), 1e-8)
    again = SummaryStudy.load(s.save(tmp_path / "planned.json"), parquet)
    assert again.planned_requests == s.planned_requests and again.comparisons == "games-howell"
    assert close(again.planned()[0].value.pvalue[0], table.pvalue[0])
    scope: dict = {}
    exec(s.to_code(str(parquet)), scope)
    assert scope["study"].planned_requests == s.planned_requests and scope["study"].comparisons == "games-howell"
