"""Study behaviour: edit log, undo/redo, events, save/load replay, and bad input.

These are behavioural tests of the kit itself; the statistics they touch are checked
against outside references in test_oneway.py and test_nist_strd.py.
"""

from __future__ import annotations

import importlib.util
import json

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import explorer as ex


@pytest.fixture
def df():
    rng = np.random.default_rng(7)
    return pd.DataFrame(
        {
            "machine": np.repeat(["M1", "M2", "M3", "M4"], 6),
            "width": np.round(rng.normal(10, 1, 24) + np.repeat([0, 0.5, 0.6, 1.5], 6), 2),
            "shift": np.tile(["a", "b"], 12),
        }
    )


def _numbers(r):
    return [(row.df, row.sum_sq, row.statistic, row.pvalue) for row in r.partition.rows]


def test_edit_undo_redo_and_baseline(df):
    s = ex.Study(df, "width", "machine")
    base = _numbers(s.results)
    s.drop([0, 5], reason="contaminated")
    assert s.dropped == (0, 5) and s.results.n_used == 22
    s.merge_levels("machine", ["M2", "M3"], into="M2+M3", reason="same supplier")
    assert s.levels("machine") == ("M1", "M2+M3", "M4")
    assert _numbers(s.baseline) == base
    s.undo()
    assert s.levels("machine") == ("M1", "M2", "M3", "M4")
    s.redo()
    assert s.levels("machine") == ("M1", "M2+M3", "M4")
    s.undo()
    s.rename_level("machine", "M4", "M4-new")
    assert s.redo_edits == ()  # a new edit clears the redo list
    s.reset()
    assert _numbers(s.results) == base
    assert s.disclosure.edits_made == 3


def test_drop_then_restore_is_identical(df):
    s = ex.Study(df, "width", "machine")
    base = _numbers(s.results)
    s.drop([3, 4, 17], reason="x")
    s.restore([3, 4, 17], reason="lab confirmed readings")
    assert _numbers(s.results) == base
    assert np.array_equal(s.results.fit.residuals, s.baseline.fit.residuals)


def test_reassign_and_merge_into_existing(df):
    s = ex.Study(df, "width", "machine")
    s.reassign(0, "machine", "M2", reason="logged under wrong machine")
    assert s.view.level_of(0, "machine") == "M2"
    assert s.results.levels["machine"].n.tolist() == [5, 7, 6, 6]
    s.merge_levels("machine", ["M3"], into="M4", reason="one line")
    assert s.levels("machine") == ("M1", "M2", "M4")
    assert s.results.levels["machine"].n.tolist() == [5, 7, 12]


def test_events_reach_subscribers(df):
    s = ex.Study(df, "width", "machine")
    seen = []
    stop = s.on_change(lambda study, ev: seen.append((ev.kind, ev.position)))
    s.drop(1, reason="x")
    s.undo()
    s.redo()
    stop()
    s.reset()
    assert seen == [("edit", 1), ("undo", 0), ("redo", 1)]


def test_save_load_replays_exactly(df, tmp_path):
    s = ex.Study(df, "width", "machine")
    s.drop([2], reason="bubble in coating")
    s.reassign(7, "machine", "M3", reason="label swap")
    s.merge_levels("machine", ["M1", "M4"], into="outer", reason="same fixture")
    s.undo()
    path = s.save(tmp_path / "x.study.json")
    t = ex.Study.load(path, df)
    assert [e.to_dict() for e in t.edits] == [e.to_dict() for e in s.edits]
    assert _numbers(t.results) == _numbers(s.results)
    t.redo()
    s.redo()
    assert _numbers(t.results) == _numbers(s.results)
    doc = json.loads(path.read_text())
    assert doc["edits"][0]["reason"] == "bubble in coating"


def test_load_refuses_changed_data_and_says_what_differs(df, tmp_path):
    s = ex.Study(df, "width", "machine")
    s.drop([2], reason="x")
    path = s.save(tmp_path / "x.json")
    changed = df.copy()
    changed.loc[5, "width"] = 99.0
    changed = changed.drop(index=[9])
    with pytest.raises(ex.ReplayError) as err:
        ex.Study.load(path, changed)
    msg = str(err.value)
    assert "rows missing now: 9" in msg and "values changed: 5" in msg
    t = ex.Study.load(path, changed, allow_mismatch=True)
    assert t.dropped == (2,)


@settings(max_examples=25, deadline=None)
@given(st.lists(st.sampled_from(["drop", "restore", "reassign", "merge", "rename", "undo", "redo"]), max_size=12),
       st.integers(0, 10**6))
def test_callers_frame_never_changes(ops, seed):
    """Any sequence of edits (valid or refused) leaves the caller's DataFrame unchanged."""
    rng = np.random.default_rng(seed)
    df = pd.DataFrame({"g": rng.choice(["a", "b", "c"], 30), "y": rng.normal(size=30)})
    df.loc[0:2, "g"] = ["a", "b", "c"]
    df.loc[3:5, "g"] = ["a", "b", "c"]
    before = df.copy(deep=True)
    s = ex.Study(df, "y", "g")
    for op in ops:
        try:
            if op == "drop":
                s.drop([int(rng.integers(30))], reason="t")
            elif op == "restore":
                s.restore([int(rng.integers(30))], reason="t")
            elif op == "reassign":
                s.reassign(int(rng.integers(30)), "g", str(rng.choice(["a", "b", "c"])), reason="t")
            elif op == "merge":
                s.merge_levels("g", list(s.levels("g"))[:2], into="m", reason="t")
            elif op == "rename":
                s.rename_level("g", s.levels("g")[0], f"r{rng.integers(100)}", reason="t")
            elif op == "undo":
                s.undo()
            else:
                s.redo()
        except ex.ExplorerError:
            pass
    pd.testing.assert_frame_equal(df, before)


# ----------------------------------------------------------------- bad input
def test_unknown_column_suggests_names(df):
    with pytest.raises(ex.ColumnError, match=r"'machin'.*Did you mean 'machine'"):
        ex.Study(df, "width", "machin")
    with pytest.raises(ex.ColumnError, match="Did you mean 'width'"):
        ex.Study(df, "Width", "machine")


def test_non_numeric_response_names_rows(df):
    bad = df.astype({"width": object})
    bad.loc[[3, 11], "width"] = ["n/a", "12,5"]
    with pytest.raises(ex.DataError, match=r"non-numeric values in rows 3, 11"):
        ex.Study(bad, "width", "machine")


def test_infinite_response_names_rows(df):
    bad = df.copy()
    bad.loc[4, "width"] = np.inf
    with pytest.raises(ex.DataError, match=r"infinite values in rows 4"):
        ex.Study(bad, "width", "machine")


def test_missing_values_are_set_aside_with_reasons(df):
    d = df.copy()
    d.loc[2, "width"] = np.nan
    d.loc[8, "machine"] = None
    s = ex.Study(d, "width", "machine")
    assert [(a.row, a.reason) for a in s.set_aside] == [(2, "missing width"), (8, "missing machine")]
    assert s.results.n_used == 22
    with pytest.raises(ex.EditError, match="set aside"):
        s.drop(2, reason="x")


def test_fewer_than_two_levels_is_refused(df):
    s = ex.Study(df, "width", "machine")
    with pytest.raises(ex.EditError, match="fewer than two levels"):
        s.merge_levels("machine", ["M1", "M2", "M3", "M4"], into="all", reason="x")
    assert s.edits == ()
    with pytest.raises(ex.EditError, match="fewer than two levels"):
        s.drop(list(range(24)), reason="x")


def test_single_observation_level_and_empty_level_notes():
    d = pd.DataFrame({"g": ["a", "a", "a", "b", "b", "c"], "y": [1.0, 2.0, 3.0, 2.0, 4.0, 9.0]})
    s = ex.Study(d, "y", "g")
    r = s.results
    assert any("one observation" in n for n in r.notes)
    assert r.levels["g"].n.tolist() == [3, 2, 1]
    s.drop(5, reason="x")
    assert any("no observations" in n for n in s.results.notes)
    assert s.results.levels["g"].labels == ("a", "b")


def test_zero_residual_variance_gives_reason_not_nan():
    d = pd.DataFrame({"g": ["a", "a", "b", "b"], "y": [1.0, 1.0, 2.0, 2.0]})
    r = ex.Study(d, "y", "g").results
    assert r.statistic() is None and r.pvalue() is None
    assert any("residual sum of squares is zero" in n for n in r.notes)


def test_no_residual_df_is_a_clear_error():
    d = pd.DataFrame({"g": ["a", "b", "c"], "y": [1.0, 2.0, 4.0]})
    with pytest.raises(ex.DesignError, match="no residual degrees of freedom"):
        ex.Study(d, "y", "g")


def test_unknown_rows_and_levels(df):
    s = ex.Study(df, "width", "machine")
    with pytest.raises(ex.EditError, match="no rows with ids 999"):
        s.drop(999, reason="x")
    with pytest.raises(ex.EditError, match="no level"):
        s.merge_levels("machine", ["M9", "M1"], into="x")
    with pytest.raises(ex.EditError, match="merge them instead"):
        s.rename_level("machine", "M1", "M2")
    with pytest.raises(ex.EditError, match="not a factor"):
        s.reassign(0, "machin", "M2")


def test_non_unique_index_uses_positions(df):
    d = df.set_index(pd.Index([1] * 24))
    s = ex.Study(d, "width", "machine")
    assert s.dataset.id_source == "position"
    assert any("identified by position" in n for n in s.dataset.notes)


def test_string_index_ids(df):
    d = df.set_index(pd.Index([f"P{i:03d}" for i in range(24)]))
    s = ex.Study(d, "width", "machine")
    s.drop("P003", reason="x")
    assert s.dropped == ("P003",)


def test_files_csv_parquet_and_errors(df, tmp_path):
    df.to_csv(tmp_path / "a.csv", index=False)
    df.to_parquet(tmp_path / "a.parquet")
    a = ex.Study(tmp_path / "a.csv", "width", "machine").results
    b = ex.Study(tmp_path / "a.parquet", "width", "machine").results
    assert a.statistic() == pytest.approx(b.statistic(), rel=1e-12)
    with pytest.raises(ex.DataError, match="no file at"):
        ex.Study(tmp_path / "missing.csv", "width", "machine")
    (tmp_path / "a.json").write_text("{}")
    with pytest.raises(ex.DataError, match="unknown file type"):
        ex.Study(tmp_path / "a.json", "width", "machine")
    if importlib.util.find_spec("openpyxl") is None:
        (tmp_path / "a.xlsx").write_bytes(b"")
        with pytest.raises(ex.DataError, match="openpyxl"):
            ex.Study(tmp_path / "a.xlsx", "width", "machine")


def test_csv_non_numeric_text_is_named(tmp_path):
    (tmp_path / "b.csv").write_text("g,y\na,1.0\na,2.0\nb,oops\nb,3.5\n")
    with pytest.raises(ex.DataError, match=r"rows 2 .*'oops'"):
        ex.Study(tmp_path / "b.csv", "y", "g")


def test_bad_saved_files(df, tmp_path):
    (tmp_path / "x.json").write_text("not json")
    with pytest.raises(ex.ReplayError, match="not valid JSON"):
        ex.Study.load(tmp_path / "x.json", df)
    (tmp_path / "y.json").write_text('{"format": "something else"}')
    with pytest.raises(ex.ReplayError, match="not a saved study"):
        ex.Study.load(tmp_path / "y.json", df)


def test_id_column_gives_row_ids_and_survives_save_load(tmp_path):
    d = pd.DataFrame({"panel": ["P1", "P2", "P3", "P4", "P5", "P6"], "g": list("aabbcc"), "y": [1.0, 2, 3, 5, 4, 6]})
    s = ex.Study(d, "y", "g", id_column="panel")
    s.drop("P3", reason="bubble")
    assert s.dropped == ("P3",)
    t = ex.Study.load(s.save(tmp_path / "s.json"), d)
    assert t.dropped == ("P3",) and t.dataset.id_column == "panel"
    assert "id_column='panel'" in s.to_code()
    with pytest.raises(ex.DataError, match="repeats ids 'P1'"):
        ex.Study(d.assign(panel=["P1", "P1", "P3", "P4", "P5", "P6"]), "y", "g", id_column="panel")
    with pytest.raises(ex.ColumnError, match="Did you mean 'panel'"):
        ex.Study(d, "y", "g", id_column="Panel")


def test_empty_level_names_are_refused_by_every_edit_that_names_a_level(df):
    s = ex.Study(df, "width", "machine")
    for make in (lambda: s.reassign(0, "machine", " ", reason="x"),
                 lambda: s.merge_levels("machine", ["M1", "M2"], into="", reason="x"),
                 lambda: s.rename_level("machine", "M1", "  ", reason="x")):
        with pytest.raises(ex.EditError, match="level name cannot be empty"):
            make()
    assert s.edits == ()
