"""Edits cost memory in proportion to what they change, and keep the numbers of a fit from scratch.

The study keeps each edit's change (the changed rows only), one current view and a
bounded set of results; one-way results after an edit recompute only the groups the
edit touches. Memory is measured with tracemalloc (allocations, numpy's included), never
timed. The statistics after long edit paths are checked against scipy.stats.f_oneway on
the kept rows (outside reference) and against a fit of the same view from scratch (same
bits: the path to a view must not change its numbers).
"""

from __future__ import annotations

import gc
import json
import tracemalloc

import numpy as np
import pandas as pd
import pytest
from fingerprint_support import first_fingerprint_by_frame
from scipy import stats

import explorer as ex
from explorer.engine.analysis import analyze
from explorer.engine.edits import DropRows, DropUnit, MergeLevels, Reassign, RenameLevel, RestoreRows
from explorer.engine.view import initial_view


def _frame(n: int, k: int = 8, seed: int = 0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    return pd.DataFrame({"g": rng.choice([f"L{i}" for i in range(k)], n), "y": rng.normal(50, 3, n)})


def _held() -> int:
    gc.collect()
    return tracemalloc.get_traced_memory()[0]


def test_memory_held_after_100_edits_is_under_twice_that_of_the_first():
    n = 100_000
    study = ex.Study(_frame(n), "y", "g")
    study.drop([n - 1], reason="warm-up")  # first-use lookups are not the edits' memory
    study.undo()
    tracemalloc.start()
    try:
        before = _held()
        study.drop([0], reason="first")
        assert study.results.n_used == n - 1
        first = _held() - before
        for i in range(1, 100):
            study.drop([i], reason=f"edit {i}")
            study.results.pvalue()
        hundred = _held() - before
        study.reset()
        after_reset = _held() - before
    finally:
        tracemalloc.stop()
    assert first > 0
    assert hundred < 2 * first, (first, hundred)
    assert after_reset < 2 * first, (first, after_reset)  # reset keeps the log, not 100 views


def test_undo_and_redo_keep_no_view_per_edit():
    study = ex.Study(_frame(20_000), "y", "g")
    for i in range(40):
        study.drop([i], reason="x")
    assert not hasattr(study, "_views")
    assert sum(d.nbytes for d in study._deltas) < 40 * 64  # changed rows only, not 40 masks of 20,000 rows
    assert len(study._results) <= 2


def _check_against_scipy(study: ex.Study) -> None:
    """scipy.stats.f_oneway on the kept rows, grouped by their current level (the outside reference)."""
    res = study.results
    view = study.view
    kept = view.kept
    labels = view.labels("g")[kept]
    y = study.dataset.y_original[kept]
    groups = [y[labels == lv] for lv in dict.fromkeys(labels.tolist())]
    ref = stats.f_oneway(*groups)
    assert res.statistic() == pytest.approx(ref.statistic, rel=1e-9)
    assert res.pvalue() == pytest.approx(ref.pvalue, rel=1e-7, abs=1e-300)
    fresh = analyze(study.dataset, view, study.spec)  # the same view fitted from scratch: same bits
    assert res.partition.rows[0].sum_sq == fresh.partition.rows[0].sum_sq
    assert res.partition.rows[1].sum_sq == fresh.partition.rows[1].sum_sq
    assert np.array_equal(res.groups.mean, fresh.groups.mean) and res.groups.labels == fresh.groups.labels
    assert np.array_equal(res.fit.residuals, fresh.fit.residuals)
    assert np.array_equal(res.fit.positions, fresh.fit.positions) and res.dropped == fresh.dropped


def test_long_edit_paths_match_scipy_and_a_fit_from_scratch():
    rng = np.random.default_rng(3)
    study = ex.Study(_frame(3_000, k=6, seed=3), "y", "g")
    for _ in range(25):
        study.drop([int(i) for i in rng.integers(0, 3_000, 3)], reason="x")
        _check_against_scipy(study)
    study.reassign(5, "g", "new level", reason="x")
    _check_against_scipy(study)
    study.merge_levels("g", ["L1", "L2"], "L1+2", reason="x")
    _check_against_scipy(study)
    study.drop_unit("g", "L3", reason="x")
    _check_against_scipy(study)
    study.rename_level("g", "L0", "first", reason="x")
    study.restore([int(r) for r in study.dropped[:7]], reason="x")
    _check_against_scipy(study)
    study.merge_levels("g", ["new level", "L4"], "L4", reason="x")
    _check_against_scipy(study)
    for _ in range(15):
        study.undo()
        _check_against_scipy(study)
    for _ in range(6):
        study.redo()
        _check_against_scipy(study)
    study.reset()
    _check_against_scipy(study)
    study.redo()
    _check_against_scipy(study)


@pytest.mark.parametrize("edit", [
    DropRows(rows=(1, 2, 2, 9)), RestoreRows(rows=(0,)), Reassign(row=3, factor="g", level="L0"),
    Reassign(row=3, factor="g", level="brand new"), MergeLevels(factor="g", levels=("L1", "L4"), into="L1"),
    MergeLevels(factor="g", levels=("L2", "L5"), into="pooled"), RenameLevel(factor="g", old="L2", new="two"),
    DropUnit(column="g", level="L3"),
])
def test_an_edits_change_goes_both_ways(edit):
    """The change an edit records leads to the view its apply gives, and back to the view before."""
    study = ex.Study(_frame(400, k=6, seed=1), "y", "g")
    study.drop([0, 5], reason="start")
    view = study.view
    after = edit.apply(view, study.dataset)
    delta = edit.change(view, study.dataset)
    forward = delta.forward(view)
    for v, w in ((forward, after), (delta.backward(forward), view)):
        assert np.array_equal(v.kept, w.kept)
        assert v.levels == w.levels
        assert all(np.array_equal(v.codes[f], w.codes[f]) for f in w.codes)
    assert delta.nbytes < 400 * 4  # the changed rows, not a copy of the table


def test_row_ids_are_found_without_a_table_per_row():
    df = _frame(50).set_index(pd.Index([f"p{i}" for i in range(50)]))
    study = ex.Study(df, "y", "g")
    study.drop(["p3", "p7"], reason="x")
    assert study.dropped == ("p3", "p7")
    shuffled = _frame(50).set_index(pd.Index(np.random.default_rng(0).permutation(50) * 3))
    study = ex.Study(shuffled, "y", "g")
    study.drop([int(shuffled.index[10]), str(shuffled.index[20])], reason="x")
    assert set(study.dropped) == {int(shuffled.index[10]), int(shuffled.index[20])}
    with pytest.raises(ex.EditError, match="no rows with ids"):
        study.drop([1], reason="x")
    assert initial_view(study.dataset).n_kept == 50




@pytest.mark.parametrize("index", ["range", "text", "shuffled"])
def test_fingerprints_and_row_digests_are_unchanged_by_the_faster_build(index):
    """Each distinct factor value is hashed once now; the digests must equal pandas' row hashes of the
    DataFrame (the definition saved study files were written with)."""
    from explorer.engine.dataset import build_dataset

    rng = np.random.default_rng(5)
    n = 2_000
    frame = pd.DataFrame({
        "y": rng.normal(0, 1, n), "g": rng.choice(["a", "b c", "é"], n), "h": rng.choice([1.0, 2.5, np.nan], n),
        "k": pd.Categorical(rng.choice(["x", "y"], n)), "m": rng.integers(0, 4, n),
    })
    frame.loc[7, "y"] = np.nan
    if index == "text":
        frame.index = [f"r{i}" for i in range(n)]
    elif index == "shuffled":
        frame.index = rng.permutation(n) * 3
    for factors in (("g",), ("h", "k", "m")):
        ds = build_dataset(frame, "y", factors)
        fingerprint, digests = first_fingerprint_by_frame(ds, frame, factors)
        assert ds.fingerprint_by("pandas-row-hash") == fingerprint
        assert np.array_equal(ds.row_digests, digests)


def test_study_file_size_does_not_grow_with_the_rows(tmp_path):
    sizes = {}
    for n in (5_000, 50_000):
        frame = _frame(n)
        study = ex.Study(frame, "y", "g")
        study.drop([3, 4], reason="smudged")
        path = study.save(tmp_path / f"s{n}.study.json")
        sizes[n] = path.stat().st_size
        doc = json.loads(path.read_text())
        assert "row_check" not in doc["data"] and doc["data"]["block_check"]["rows"] == n
        again = ex.Study.load(path, frame)
        assert again.results.pvalue() == study.results.pvalue() and again.dropped == (3, 4)
    assert sizes[50_000] < sizes[5_000] + 200  # the same 1024 blocks, only longer numbers


def test_changed_data_are_located_by_block(tmp_path):
    n = 8_000
    frame = _frame(n)
    study = ex.Study(frame, "y", "g")
    path = study.save(tmp_path / "s.study.json")
    changed = frame.copy()
    changed.loc[5000, "y"] += 1.0
    with pytest.raises(ex.ReplayError, match=r"values changed within the rows \d+\.\.\d+") as err:
        ex.Study.load(path, changed)
    import re

    lo, hi = (int(x) for x in re.search(r"values changed within the rows (\d+)\.\.(\d+)", str(err.value)).groups())
    assert lo <= 5000 <= hi and hi - lo < n / 1024 + 1
    fewer = frame.drop(index=[7_990])
    with pytest.raises(ex.ReplayError, match=f"{n} rows then, {n - 1} now"):
        ex.Study.load(path, fewer)
    relabelled = frame.rename(index={100: 10**9})
    with pytest.raises(ex.ReplayError, match="row ids differ within the rows now named"):
        ex.Study.load(path, relabelled)


def test_block_digests_of_the_wrong_length_are_refused(tmp_path):
    frame = _frame(3_000)
    path = ex.Study(frame, "y", "g").save(tmp_path / "s.study.json")
    doc = json.loads(path.read_text())
    doc["data"]["block_check"]["digests"] = "AAAA"
    bad = tmp_path / "bad.study.json"
    bad.write_text(json.dumps(doc))
    with pytest.raises(ex.ReplayError, match="data.block_check.digests: holds 3 bytes"):
        ex.Study.load(bad, frame)
