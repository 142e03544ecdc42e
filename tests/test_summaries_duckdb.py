"""Summary-backed studies through DuckDB: exact agreement with row studies, NIST accuracy, edits at scale.

References: the row-backed study of the same data (itself checked against the NIST
StRD sets and statsmodels in test_oneway/test_factorial); statsmodels ``anova_lm``
(typ=1/2/3, sum-to-zero coding) for the two-way partition; the NIST StRD
analysis-of-variance sets read from the installed scipy wheel (certified values in
each header) and exact rational arithmetic (``fractions``) on the float64 inputs.
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
from nist_strd import SETS, available, exact_oneway, lre, read_set
from summaries_support import assert_same_results, close, unbalanced_frame

import explorer as ex
from explorer.engine.errors import ColumnError, DataError, EditError, ExplorerError, ReplayError
from explorer.inference import comparisons
from explorer.inference.omnibus import brown_forsythe_f, welch_f
from explorer.summaries import (
    DuckDBSource,
    SummaryStudy,
    parse_predicate,
    set_aside_scan,
    summary_battery,
)

pytest.importorskip("duckdb")


@pytest.fixture(scope="module")
def frame() -> pd.DataFrame:
    return unbalanced_frame()


@pytest.fixture(scope="module")
def parquet(frame, tmp_path_factory):
    path = tmp_path_factory.mktemp("sum") / "readings.parquet"
    frame.to_parquet(path, index=False)
    return path


# ---------------------------------------------------------------- agreement with row studies
@pytest.mark.parametrize("source", ["frame", "parquet", "csv"])
def test_oneway_agrees_with_row_study(frame, parquet, tmp_path, source):
    """One-way, unbalanced: partition, levels, Welch, Brown-Forsythe, Tukey-Kramer, Games-Howell and Dunnett
    from DuckDB summaries equal the row study's to 1e-10 (reference: the row-backed study)."""
    if source == "csv":
        data = tmp_path / "readings.csv"
        frame.to_csv(data, index=False)
    else:
        data = frame if source == "frame" else parquet
    s = SummaryStudy(data, "thickness", "line", sample_size=0)
    r = ex.Study(frame, "thickness", "line")
    assert_same_results(s.results, r.results)
    for f in (welch_f, brown_forsythe_f):
        a, b = f(s.results), f(r.results)
        assert close(a.statistic, b.statistic) and close(a.pvalue, b.pvalue) and close(a.df_den, b.df_den)
    for table in ("tukey", "games_howell"):
        a, b = getattr(comparisons, table)(s.results), getattr(comparisons, table)(r.results)
        assert close(a.difference, b.difference) and close(a.pvalue, b.pvalue) and close(a.ci_low, b.ci_low)
    a, b = comparisons.dunnett(s.results, "L1"), comparisons.dunnett(r.results, "L1")
    assert close(a.statistic, b.statistic) and close(a.pvalue, b.pvalue, 1e-8)


@pytest.mark.parametrize("ss_type", ["I", "II", "III"])
def test_twoway_agrees_with_row_study_and_statsmodels(parquet, frame, ss_type):
    """Two-way unbalanced with interaction: every SS type, marginal means and levels equal the row study's
    to 1e-10; the partition matches statsmodels anova_lm (typ=1/2/3, sum-to-zero coding) to 1e-8."""
    sm = pytest.importorskip("statsmodels.formula.api")
    from statsmodels.stats.anova import anova_lm

    s = SummaryStudy(parquet, "thickness", ["line", "shift"], ss_type=ss_type, sample_size=0)
    r = ex.Study(frame, "thickness", ["line", "shift"], ss_type=ss_type)
    assert_same_results(s.results, r.results)
    model = sm.ols("thickness ~ C(line, Sum) * C(shift, Sum)", data=frame).fit()
    aov = anova_lm(model, typ={"I": 1, "II": 2, "III": 3}[ss_type])
    names = {"line": "C(line, Sum)", "shift": "C(shift, Sum)", "line × shift": "C(line, Sum):C(shift, Sum)"}
    for src, ref in names.items():
        assert close(s.results.partition.row(src).sum_sq, aov.loc[ref, "sum_sq"], 1e-8)
        assert close(s.results.partition.row(src).pvalue, aov.loc[ref, "PR(>F)"], 1e-8)


def test_two_scan_mode_agrees(parquet, frame):
    """The corrected two-pass mode (passes=2) gives the row study's results too, also after a predicate edit."""
    s = SummaryStudy(DuckDBSource(parquet, passes=2), "thickness", ["line", "shift"], sample_size=0)
    r = ex.Study(frame, "thickness", ["line", "shift"])
    assert_same_results(s.results, r.results)
    s.move_where("lot = 4", "shift", "day", reason="lot 4 logged on the wrong shift")
    for row in frame.index[frame.lot == 4]:
        if frame.loc[row, "shift"] != "day":
            r.reassign(int(row), "shift", "day")
    assert_same_results(s.results, r.results)
    with pytest.raises(DataError, match="passes"):
        DuckDBSource(parquet, passes=3)


def test_blocks_agree_with_row_study(parquet, frame):
    """Additive block (lot) beside a factor: the randomized-block partition equals the row study's (1e-10)."""
    s = SummaryStudy(parquet, "thickness", "line", blocks="lot", sample_size=0)
    r = ex.Study(frame, "thickness", "line", blocks="lot")
    assert_same_results(s.results, r.results)


# ---------------------------------------------------------------- NIST StRD through DuckDB
@pytest.mark.skipif(not available(), reason="NIST StRD files not found in the installed scipy")
@pytest.mark.parametrize("passes", [1, 2])
def test_nist_float_input_through_duckdb(passes):
    """LRE >= 13 on every NIST StRD set against exact rational arithmetic on the same float64 inputs,
    one-scan (Welford, pairwise merges) and two-scan modes (reference: NIST StRD data, Python fractions)."""
    for name in SETS:
        s = read_set(name)
        df = pd.DataFrame({"level": s.levels, "y": [float(t) for t in s.texts]})
        exact = exact_oneway(df["y"].tolist(), s.levels)
        ours = _nist_quantities(SummaryStudy(DuckDBSource(df, passes=passes), "y", "level", sample_size=0))
        assert min(lre(ours[q], exact[q]) for q in exact) >= 13, name


@pytest.mark.skipif(not available(), reason="NIST StRD files not found in the installed scipy")
@pytest.mark.parametrize("passes", [1, 2])
def test_nist_decimal_text_through_duckdb(tmp_path, passes):
    """Read from their decimal text as DECIMAL by DuckDB, every set reaches LRE >= 13 against the NIST
    certified values (reference: the certified values in each file's header)."""
    for name in SETS:
        s = read_set(name)
        path = tmp_path / f"{name}.csv"
        path.write_text("level,y\n" + "\n".join(f"{g},{t}" for g, t in zip(s.levels, s.texts)) + "\n")
        ours = _nist_quantities(SummaryStudy(DuckDBSource(path, passes=passes), "y", "level", sample_size=0))
        scores = {q: lre(v, getattr(s, q)) for q, v in ours.items()}
        assert min(scores.values()) >= 13, (name, scores)


def _nist_quantities(study) -> dict[str, float]:
    r = study.results
    b, w = r.partition.rows[0], r.partition.rows[1]
    return {"ss_between": b.sum_sq, "ss_within": w.sum_sq, "ms_between": b.mean_sq, "ms_within": w.mean_sq,
            "f": b.statistic, "r_squared": r.r_squared, "resid_sd": r.residual_sd}


# ---------------------------------------------------------------- edits at scale
def test_predicate_edit_matches_dropping_those_rows(parquet, frame):
    """drop_where pushes the condition to DuckDB; the result equals a row study with the same rows dropped
    (reference: the row-backed study); undo/redo return the earlier results exactly."""
    s = SummaryStudy(parquet, "thickness", ["line", "shift"], sample_size=0)
    r = ex.Study(frame, "thickness", ["line", "shift"])
    base = s.results
    s.drop_where("temperature > 80 OR (lot = 3 AND shift = 'night')", reason="outside the oven's range; lot 3 recall")
    mask = (frame.temperature > 80) | ((frame.lot == 3) & (frame["shift"] == "night"))
    r.drop(list(frame.index[mask]), reason="same rows")
    assert_same_results(s.results, r.results)
    assert s.edits[0].reason.startswith("outside") and "temperature > 80" in s.edits[0].describe()
    assert any(f"{int(mask.sum())} row(s) left out by condition" in n for n in s.results.notes)
    s.undo()
    assert s.results is base
    s.redo()
    assert_same_results(s.results, r.results)


def test_condition_deltas_downdate_merge_and_fall_back(parquet, frame):
    """A new condition summarises only the rows it catches and downdates; taking a condition back merges the
    rows it returns; a downdate that would lose digits (most rows caught) summarises afresh. Each state equals
    the row study with the same rows dropped (reference: the row-backed study)."""
    from explorer.summaries import atoms as atoms_mod

    calls = []
    real = atoms_mod.downdate

    def spy(parent, removed):
        out = real(parent, removed)
        calls.append(out is not None)
        return out

    s = SummaryStudy(parquet, "thickness", ["line", "shift"], sample_size=0)
    from explorer.summaries import study as study_mod

    study_mod.downdate, saved = spy, study_mod.downdate
    try:
        s.drop_where("temperature > 80", reason="oven range")
        s.drop_where("lot = 5", reason="recall")
        s.restore_where("temperature > 80", reason="oven log found")
        s.drop_where("temperature < 85", reason="keep the hot rows only")  # catches most rows: full scan
    finally:
        study_mod.downdate = saved
    assert calls == [True, True, False]
    r = ex.Study(frame, "thickness", ["line", "shift"])
    r.drop(list(frame.index[(frame.lot == 5) | (frame.temperature < 85)]))
    assert_same_results(s.results, r.results)
    s.undo()
    r2 = ex.Study(frame, "thickness", ["line", "shift"])
    r2.drop(list(frame.index[frame.lot == 5]))
    assert_same_results(s.results, r2.results)


def test_level_edits_match_row_study(parquet, frame):
    """merge, rename, set aside a level and a cell, and move rows by a condition equal the same edits made
    row by row (reference: the row-backed study)."""
    s = SummaryStudy(parquet, "thickness", ["line", "shift"], sample_size=0)
    r = ex.Study(frame, "thickness", ["line", "shift"])
    s.merge_levels("line", ["L2", "L3"], into="L23", reason="same supplier")
    r.merge_levels("line", ["L2", "L3"], into="L23", reason="same supplier")
    s.rename_level("shift", "night", "late", reason="plant naming")
    r.rename_level("shift", "night", "late", reason="plant naming")
    assert_same_results(s.results, r.results)
    moved = frame.index[(frame.lot == 2) & (frame.line == "L1")]
    s.move_where("lot = 2 AND line = 'L1'", "line", "L23", reason="lot 2 was run on the L2 rig")
    for row in moved:
        r.reassign(int(row), "line", "L23", reason="lot 2 was run on the L2 rig")
    assert_same_results(s.results, r.results)
    with pytest.raises(EditError, match="empty cells"):  # the interaction needs every cell
        s.drop_cell({"line": "L1", "shift": "late"}, reason="night crew trial")


def test_drop_cell_additive_model(parquet, frame):
    """Setting aside a cell under the additive model equals dropping its rows (reference: the row study)."""
    s = SummaryStudy(parquet, "thickness", ["line", "shift"], interactions=False, sample_size=0)
    r = ex.Study(frame, "thickness", ["line", "shift"], interactions=False)
    s.drop_cell({"line": "L3", "shift": "night"}, reason="night crew trial")
    r.drop(list(frame.index[(frame.line == "L3") & (frame["shift"] == "night")]))
    assert_same_results(s.results, r.results)
    s.restore_cell({"line": "L3", "shift": "night"})
    assert_same_results(s.results, s.baseline, 0.0)


def test_drop_level_oneway_and_restore(frame):
    """Setting aside a level equals dropping its rows; restoring it gives back the baseline exactly."""
    s = SummaryStudy(frame, "thickness", "lot", sample_size=0)
    r = ex.Study(frame, "thickness", "lot")
    s.drop_level("lot", "3", reason="recalled lot")
    r.drop(list(frame.index[frame.lot == 3]))
    assert_same_results(s.results, r.results)
    s.restore_level("lot", "3")
    assert_same_results(s.results, s.baseline, 0.0)
    with pytest.raises(EditError, match="not set aside"):
        s.restore_level("lot", "3")


def test_row_id_drop_is_refused(frame):
    """Leaving out rows by id is refused with what to do instead; the study is unchanged."""
    s = SummaryStudy(frame, "thickness", "line", sample_size=0)
    for call in (lambda: s.drop([3], reason="x"), lambda: s.restore([3]), lambda: s.reassign(3, "line", "L2")):
        with pytest.raises(EditError, match="drop_where"):
            call()
    assert s.edits == ()


@pytest.mark.parametrize("text,why", [
    ("temperature > 80; DROP TABLE readings", "';'"),
    ("temperature > 80 -- comment", "comments"),
    ("temperature > (SELECT 1)", "not a column"),
    ("temprature > 80", "did you mean 'temperature'"),
    ("read_csv('x') IS NULL", "not a column"),
    ("temperature >", "expected a column"),
    ("80 > 70", "names no column"),
])
def test_bad_predicates_are_refused(frame, text, why):
    """Predicates outside the grammar (statements, comments, sub-queries, unknown names) are refused clearly."""
    s = SummaryStudy(frame, "thickness", "line", sample_size=0)
    with pytest.raises(EditError, match="refused") as info:
        s.drop_where(text, reason="test")
    assert why in str(info.value)
    assert s.edits == ()


def test_predicate_rendering_and_null_rows():
    """Columns are quoted per engine; rows where the condition is unknown (missing value) stay in."""
    p = parse_predicate("Temp BETWEEN 1 AND 2 AND \"line name\" IN ('a', 'b') AND lower(x) LIKE 'q%'",
                        ["temp", "line name", "x"])
    assert p.render("duckdb") == "\"temp\" BETWEEN 1 AND 2 AND \"line name\" IN ('a', 'b') AND lower(\"x\") LIKE 'q%'"
    assert p.render("spark").startswith("`temp` BETWEEN")
    df = pd.DataFrame({"g": ["a", "a", "b", "b", "b"], "y": [1.0, 2.0, 3.0, 5.0, 4.0], "t": [1.0, None, 3.0, 9.0, 2.0]})
    s = SummaryStudy(df, "y", "g", sample_size=0)
    s.drop_where("t > 5")
    assert s.results.n_used == 4  # the row with t missing stays


def test_save_and_replay(parquet, tmp_path):
    """A saved summary study replays on the same files to identical results; other data are refused."""
    s = SummaryStudy(parquet, "thickness", ["line", "shift"], sample_size=50, seed=3)
    s.drop_where("temperature > 85", reason="gauge range")
    s.drop_level("line", "L3", reason="line stop")
    s.rename_level("shift", "night", "late", reason="plant naming")
    s.undo()
    path = s.save(tmp_path / "study.json")
    doc = json.loads(path.read_text())
    assert doc["edits"][0] == {"kind": "drop_where", "reason": "gauge range", "at": doc["edits"][0]["at"],
                               "predicate": "temperature > 85"}
    back = SummaryStudy.load(path, parquet)
    assert [e.describe() for e in back.edits] == [e.describe() for e in s.edits]
    assert len(back.redo_edits) == 1
    assert_same_results(back.results, s.results, 0.0)
    assert np.array_equal(back.results.fit.residuals, s.results.fit.residuals)
    other = unbalanced_frame(seed=8)
    with pytest.raises(ReplayError, match="differ"):
        SummaryStudy.load(path, other)
    scope: dict = {}
    exec(s.to_code(parquet), scope)  # the replay code rebuilds the same state
    assert_same_results(scope["study"].results, s.results, 0.0)


# ---------------------------------------------------------------- sample, scans, battery
def test_sample_is_seeded_and_stated(parquet):
    """The sample is the same on every run, honours the conditions, and the results say it is a sample."""
    a = SummaryStudy(parquet, "thickness", ["line", "shift"], sample_size=60, seed=5)
    b = SummaryStudy(parquet, "thickness", ["line", "shift"], sample_size=60, seed=5)
    assert np.array_equal(a.results.fit.y, b.results.fit.y) and len(a.results.fit.y) == 60
    assert any("seeded sample of 60" in n for n in a.results.notes)
    a.drop_where("temperature > 70", reason="test")
    assert a.sample_frame()["temperature"].max() <= 70
    fit = a.results.fit
    assert close(fit.residuals, fit.y - fit.fitted, 1e-12)
    assert a.view.n_kept == len(fit.y) and len(a.dataset.table) == 60


def test_battery_exact_parts_and_sample_parts(frame):
    """summary_battery: Welch/Tukey/effect sizes equal the row battery's (1e-10); rank tests come from the
    sample and equal the row battery on those sampled rows (reference: explorer.inference.battery.run_battery)."""
    from explorer.inference.battery import run_battery

    s = SummaryStudy(frame, "thickness", "line", sample_size=120, seed=1)
    r = ex.Study(frame, "thickness", "line")
    sb, rb = summary_battery(s, control="L1"), run_battery(r.results, control="L1")
    assert close(sb.welch.pvalue, rb.welch.pvalue) and close(sb.tukey.pvalue, rb.tukey.pvalue)
    assert close(sb.effect_sizes.eta_squared, rb.effect_sizes.eta_squared)
    sample_rows = ex.Study(s.sample_frame(), "thickness", "line")
    assert close(sb.kruskal_wallis.pvalue, run_battery(sample_rows.results).kruskal_wallis.pvalue)
    assert any("seeded sample of 120" in n for n in sb.notes)


def test_set_aside_scan_matches_edits(parquet):
    """Each line of the scan equals the result of actually setting that level aside (and undoing)."""
    s = SummaryStudy(parquet, "thickness", ["line", "shift"], sample_size=0)
    scan = set_aside_scan(s)
    assert scan.examined == len(scan.table) and s.disclosure.specifications == scan.examined
    row = scan.table[scan.table["change"] == "set aside shift = night"].iloc[0]
    with pytest.raises(EditError):  # shift has one level left: the model cannot be fitted
        s.drop_level("shift", "night")
    assert row["p-value"] is pd.NA and "one level" in row["note"]
    row = scan.table[scan.table["change"] == "set aside line = L2"].iloc[0]
    s.drop_level("line", "L2")
    assert close(row["p-value"], s.results.pvalue(scan.term))


# ---------------------------------------------------------------- bad input and imports
def test_bad_columns_and_values(frame, tmp_path):
    """Unknown columns and non-numeric responses give the kit's errors, naming the column."""
    with pytest.raises(ColumnError, match="Did you mean 'thickness'"):
        SummaryStudy(frame, "thicknes", "line")
    bad = tmp_path / "bad.csv"
    bad.write_text("g,y\na,1.5\nb,oops\na,2\nb,3\n")
    with pytest.raises(DataError, match="non-numeric"):
        SummaryStudy(bad, "y", "g")
    with pytest.raises(DataError, match="no file"):
        SummaryStudy(tmp_path / "missing.parquet", "y", "g")
    with pytest.raises(DataError, match="1 infinite values"):
        SummaryStudy(pd.DataFrame({"g": ["a", "a", "b", "b"], "y": [1.0, np.inf, 2.0, 3.0]}), "y", "g")


def test_row_tools_run_on_the_sample_study(frame):
    """sample_study(): a row study of the sample at the current view, for influence, case deletion and flips;
    its results equal a fresh row study of the same sampled rows (reference: the row-backed study)."""
    from explorer.sensitivity.case_deletion import case_deletion_scan
    from explorer.sensitivity.influence import influence

    s = SummaryStudy(frame, "thickness", "line", sample_size=80, seed=4)
    s.merge_levels("line", ["L2", "L3"], into="L23", reason="same supplier")
    ss = s.sample_study()
    fresh = ex.Study(s.sample_frame(), "thickness", "line")
    fresh.merge_levels("line", ["L2", "L3"], into="L23")
    assert_same_results(ss.results, fresh.results)
    assert any("Sample: 80 rows" in n for n in ss.results.notes)
    assert influence(ss).n == 80 and len(case_deletion_scan(ss, record=False).to_frame()) == 80
    assert s.influence().n == 80 and len(s.case_deletion().to_frame()) == 80
    assert s.disclosure.specifications == 80 and "seeded sample" in s.ledger.of_kind("search")[0].what
    assert s.battery().kruskal_wallis.pvalue is not None


def test_missing_values_are_set_aside(tmp_path):
    """Rows with a missing response or factor value are set aside and counted, as in row studies."""
    df = pd.DataFrame({"g": ["a", "a", None, "b", "b", "b"], "y": [1.0, 2.0, 3.0, None, 4.0, 6.0]})
    s = SummaryStudy(df, "y", "g", sample_size=0)
    r = ex.Study(df, "y", "g")
    assert_same_results(s.results, r.results)
    assert s.set_aside == ("2 row(s) have a missing 'y' or factor value and are set aside.",)


def test_engines_are_not_imported_by_the_kit():
    """import explorer / its statistical packages / explorer.summaries load neither duckdb nor pyspark."""
    code = ("import sys, explorer, explorer.engine, explorer.study, explorer.summaries; "
            "print('duckdb' in sys.modules, 'pyspark' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()
    assert out == ["False", "False"]


def test_summary_study_reads_its_decision_from_welch(frame):
    """A one-factor summary study with test='welch': the decision and every set-aside/pool alternative are Welch's
    F of the level summaries (statsmodels anova_oneway(use_var='unequal') on the rows); rank and permutation tests
    are refused (they need every row)."""
    from statsmodels.stats.oneway import anova_oneway

    s = SummaryStudy(frame, "thickness", "line", test="welch", sample_size=0)
    groups = {k: v.to_numpy() for k, v in frame.groupby("line")["thickness"]}
    assert close(s.decision.pvalue, anova_oneway(list(groups.values()), use_var="unequal").pvalue)
    scan = set_aside_scan(s, record=False)
    assert scan.test == "welch" and scan.current_pvalue == s.decision.pvalue
    a, b = list(groups)[:2]
    row = scan.table[scan.table["change"] == f"pool line levels {a} and {b}"].iloc[0]
    pooled = [np.concatenate([groups[a], groups[b]])] + [v for k, v in groups.items() if k not in (a, b)]
    assert close(row["p-value"], anova_oneway(pooled, use_var="unequal").pvalue)
    with pytest.raises(ExplorerError, match="needs every row"):
        s.set_test("kruskal")
