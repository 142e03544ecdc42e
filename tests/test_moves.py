"""Rows moved to another level (``study.moved_rows()``): merges and renames move no row; a
reassignment moves one until it is moved back. Checked on small hand-made tables whose
answer is read off the edits (no outside reference needed: this is bookkeeping)."""

from __future__ import annotations

import pandas as pd

import explorer as ex


def _study() -> ex.Study:
    df = pd.DataFrame({"id": [f"u{i}" for i in range(9)], "m": list("aaabbbccc"),
                       "y": [1.0, 2.0, 1.5, 3.0, 3.5, 2.5, 5.0, 4.0, 4.5]})
    return ex.Study(df, "y", "m", id_column="id")


def test_merges_and_renames_move_no_row():
    s = _study()
    s.merge_levels("m", ["a", "b"], into="ab", reason="one supplier")
    s.rename_level("m", "c", "C", reason="spelling")
    assert s.moved_rows() == ()


def test_a_reassigned_row_is_moved_from_its_recorded_level_and_stays_moved_after_a_merge():
    s = _study()
    s.reassign("u1", "m", "c", reason="logged under the wrong machine")
    (m,) = s.moved_rows()
    assert (m.row, m.factor, m.recorded, m.home, m.now, m.reason) == ("u1", "m", "a", "a", "c", "logged under the wrong machine")
    assert m.describe() == "row u1: m a → c"
    s.merge_levels("m", ["a", "b"], into="ab", reason="one supplier")
    (m,) = s.moved_rows()
    assert (m.home, m.now) == ("ab", "c") and m.describe() == "row u1: m a (now ab) → c"
    s.rename_level("m", "c", "ab-or-c", reason="rename the level it moved to")
    (m,) = s.moved_rows()
    assert m.now == "ab-or-c"


def test_moving_back_home_or_undoing_ends_the_move_and_a_new_level_counts():
    s = _study()
    s.reassign("u4", "m", "d", reason="a fourth machine")
    assert [(m.row, m.now) for m in s.moved_rows()] == [("u4", "d")]
    s.reassign("u4", "m", "b", reason="no, it was b")
    assert s.moved_rows() == ()
    s.undo()
    assert len(s.moved_rows()) == 1
    s.undo()
    assert s.moved_rows() == ()
