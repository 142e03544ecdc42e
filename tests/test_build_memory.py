"""The build holds little beside the table and makes few row-sized temporaries; ids by position stay a range.

Memory is measured with tracemalloc (numpy's and Python's allocations; Arrow's own pool is
not traced), never timed. Row ids that are positions or a RangeIndex are kept as a range:
look-ups, the ids of dropped rows and the per-row fit compute them, and the array of ids
is made only when something reads ``row_ids`` whole.
"""

from __future__ import annotations

import gc
import tracemalloc

import numpy as np
import pandas as pd
import pytest

import explorer as ex
from explorer.engine.dataset import build_dataset, factorize
from explorer.formatting import _exact, measurement_decimals


def _frame(n: int, k: int = 8, seed: int = 0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    return pd.DataFrame({"g": rng.choice([f"L{i}" for i in range(k)], n), "y": rng.normal(50, 3, n)})


def test_the_build_peaks_under_twice_the_frame_and_holds_less_than_it():
    frame = _frame(200_000)
    size = int(frame.memory_usage(deep=True).sum())
    ex.Study(frame, "y", "g")  # imports and first-use tables are not the build's memory
    gc.collect()
    tracemalloc.start()
    try:
        study = ex.Study(frame, "y", "g")
        assert study.results.n_used == 200_000
        gc.collect()
        held, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < 2 * size, (peak / size)
    assert held < size, (held / size)  # shifted response 8 bytes a row, codes 4, kept flags 1; no ids
    assert isinstance(study.dataset.ids, range)


@pytest.mark.parametrize("index", [pd.RangeIndex(10, 70, 3), pd.RangeIndex(100, 80, -1), None])
def test_range_ids_are_found_and_named_without_an_array(index):
    frame = _frame(20) if index is None else _frame(20).set_axis(index)
    ids = list(range(20)) if index is None else list(index)
    study = ex.Study(frame, "y", "g")
    ds = study.dataset
    assert isinstance(ds.ids, range) and isinstance(ds.all_ids, range)
    assert ds.row_ids.tolist() == ids and ds.all_row_ids.tolist() == ids
    assert not ds.row_ids.flags.writeable
    assert ds.ids_at(np.array([3, 0, 19])).tolist() == [ids[3], ids[0], ids[19]]
    study.drop([ids[4], str(ids[7])], reason="x")  # an integer's text finds it too
    assert study.dropped == (ids[4], ids[7])
    assert study.results.n_used == 18
    assert sorted(study.results.fit.row_ids.tolist()) == sorted(set(ids) - {ids[4], ids[7]})
    absent = max(ids) + 1 if index is None or index.step > 0 else min(ids) - 1
    between = [ids[0] + 1] if index is not None and abs(index.step) > 1 else []
    for wrong in [absent, *between, "x", "07", 2**70]:
        with pytest.raises(ex.EditError, match=f"no rows with ids .*row ids look like {ids[0]}, {ids[1]}"):
            study.drop([wrong], reason="x")


def test_set_aside_rows_under_range_ids_keep_their_ids():
    frame = _frame(12)
    frame.loc[5, "y"] = np.nan
    study = ex.Study(frame, "y", "g")
    ds = study.dataset
    assert ds.row_ids.tolist() == [i for i in range(12) if i != 5]
    assert isinstance(ds.all_ids, range)
    assert [(s.row, s.reason) for s in ds.set_aside] == [(5, "missing y")]
    with pytest.raises(ex.EditError, match="set aside when the data were loaded"):
        study.drop([5], reason="x")
    study.drop([6], reason="x")
    assert study.dropped == (6,)


@pytest.mark.parametrize("values", [["b", "a", "b", "c"], ["b", None, "a", "b"], [1.5, 2.0, 1.5], ["x"]])
def test_factorize_gives_codes_of_the_values(values):
    col = pd.Series(values)
    codes, uniques = factorize(col)
    expected_codes, expected_uniques = pd.factorize(col, sort=False)
    assert np.asarray(codes).tolist() == expected_codes.tolist()
    assert list(uniques) == list(expected_uniques)


def test_build_codes_of_an_arrow_text_factor_equal_those_of_an_object_one():
    frame = _frame(5_000)
    obj = frame.assign(g=frame["g"].astype(object))
    a, b = build_dataset(frame, "y", ("g",)), build_dataset(obj, "y", ("g",))
    assert a.levels == b.levels
    assert np.array_equal(a.codes["g"], b.codes["g"])
    assert np.array_equal(a.y, b.y) and a.offset == b.offset


@pytest.mark.parametrize("n", [100, 5_000, 70_000, 300_000])
def test_decimals_of_long_columns_read_in_blocks_match_one_pass(n):
    rng = np.random.default_rng(n)
    base = rng.normal(50, 3, n)
    for values in (base, np.round(base, 1), np.round(base, 3), np.where(np.arange(n) < 6000, np.nan, np.round(base)),
                   np.concatenate([np.round(base[: n // 2], 2), base[n // 2:]])):
        finite = values[np.isfinite(values)]
        one_pass = next((d for d in range(7) if finite.size and _exact(finite, d)), None)
        assert measurement_decimals(values) == one_pass


def test_changes_to_the_callers_frame_after_the_build_do_not_reach_the_study():
    """The response is read where it lies (no copy): copy-on-write must keep the caller's later
    changes, in place or through pandas, out of the study's table, decimals and fingerprint (both
    computed when first read, here after the changes)."""
    rng = np.random.default_rng(0)
    frame = pd.DataFrame({"g": rng.choice(["a", "b", "c"], 300), "y": np.round(rng.normal(50, 3, 300), 1)})
    reference = ex.Study(frame.copy(deep=True), "y", "g")
    study = ex.Study(frame, "y", "g")
    first = float(frame["y"].iloc[0])
    frame.loc[0, "y"] = 1e9
    frame["y"] *= 2.123456789
    frame.iloc[5, 0] = "zzz"
    assert float(study.dataset.table["y"].iloc[0]) == first
    assert np.array_equal(study.dataset.y, reference.dataset.y)
    assert study.dataset.reading_decimals() == reference.dataset.reading_decimals() == 1
    assert study.dataset.column_fingerprint == reference.dataset.column_fingerprint
    study.drop([3], reason="x")
    study.undo()
    assert study.results.pvalue() == reference.results.pvalue()
