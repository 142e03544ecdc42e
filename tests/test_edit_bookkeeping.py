"""The bookkeeping of an edit: rows left out, row ids found, times written, results kept.

These run on every edit, so they are written to cost what the edit changes; the tests
check them against the plain definitions (numpy set operations on the kept flags, the
ids as positions, ``datetime.now``), not against timings.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import explorer as ex
from explorer.study.result_cache import BoundedCache


def _frame(n: int, k: int, seed: int = 3) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    return pd.DataFrame({"g": rng.choice([f"L{i}" for i in range(k)], n), "y": rng.normal(50, 3, n)})


def test_rows_left_out_stay_listed_in_row_order_along_an_edit_path():
    """``results.dropped`` after drops and restores of one and several rows, in any order, is the
    rows not kept, in row order (the bookkeeping runs in O(changed rows))."""
    study = ex.Study(_frame(400, 4), "y", "g")
    rng = np.random.default_rng(5)
    for _ in range(40):
        kept = study.view.kept
        out = np.flatnonzero(~kept)
        if out.size and rng.random() < 0.5:
            study.restore(rng.choice(out, min(out.size, int(rng.integers(1, 4))), replace=False).tolist())
        else:
            study.drop(rng.choice(np.flatnonzero(kept), int(rng.integers(1, 4)), replace=False).tolist())
        assert study.results.dropped == tuple(np.flatnonzero(~study.view.kept).tolist())
        if rng.random() < 0.2:
            study.undo()
            assert study.results.dropped == tuple(np.flatnonzero(~study.view.kept).tolist())


def test_row_ids_that_are_positions_are_found_as_before():
    study = ex.Study(_frame(50, 3), "y", "g")
    assert study.dataset.positions([np.int64(7), 3, "12"]).tolist() == [7, 3, 12]
    for bad in ([50], [-1], [2**70], ["x"]):
        with pytest.raises(ex.EditError, match="no rows with ids"):
            study.drop(bad)
    study.drop([3, 3, 4], reason="the same row twice")
    assert study.results.dropped == (3, 4)


def test_edit_and_ledger_times_are_utc_seconds_now():
    from datetime import datetime, timedelta, timezone

    from explorer.engine.edits import check_utc_time, utc_now

    before = datetime.now(timezone.utc).replace(microsecond=0)
    text = utc_now()
    after = datetime.now(timezone.utc)
    assert check_utc_time(text) == text and text.endswith("Z")
    assert before <= datetime.fromisoformat(text.replace("Z", "+00:00")) <= after + timedelta(seconds=0)



def test_bounded_cache_keeps_the_baseline_and_the_last_positions():
    cache: BoundedCache[str] = BoundedCache(1)
    for key in (3, 0, 4, 5):
        cache[key] = str(key)
    assert dict(cache) == {0: "0", 5: "5"}
    cache[5] = "again"
    assert dict(cache) == {0: "0", 5: "again"}
    no_base: BoundedCache[str] = BoundedCache(2)
    for key in (1, 2, 3):
        no_base[key] = str(key)
    assert list(no_base) == [2, 3]


def test_an_edits_ledger_entry_reads_as_written_at_once():
    from explorer.engine.deferred import is_made

    study = ex.Study(_frame(60, 3), "y", "g")
    study.drop([4, 9], reason="smudge")
    edit = study.edits[-1]
    entry = study.ledger.entries[-1]
    assert not is_made(entry, "what") and not is_made(entry, "edit")
    assert (entry.kind, entry.what, entry.edit, entry.reason) == ("edit", edit.describe(), edit.to_dict(), "smudge")
    assert entry.to_dict()["edit"] == edit.to_dict() and entry.describe().endswith("(smudge)")
