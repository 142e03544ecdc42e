"""Row and level identity, and the text files the kit reads: refused clearly or read right.

References: the same invented table written as plain UTF-8 CSV and read by the kit
(the partition must be identical), and pandas itself for what a DataFrame holds.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import explorer as ex
from explorer.engine.errors import ColumnError, DataError, EditError

ROWS = [("a", 1.0), ("a", 2.0), ("a", 2.5), ("b", 3.0), ("b", 4.5), ("b", 4.0), ("c", 5.0), ("c", 6.5), ("c", 6.0)]


def _frame() -> pd.DataFrame:
    """Invented readings of three lines."""
    return pd.DataFrame({"line": [g for g, _ in ROWS], "y": [v for _, v in ROWS]})


def _csv_text() -> str:
    return "line,y\n" + "".join(f"{g},{v}\n" for g, v in ROWS)


def _reference():
    return ex.Study(_frame(), "y", "line").results


# ---------------------------------------------------------------- identity
def test_ids_that_collide_as_text_are_refused_with_the_rows_named():
    df = _frame().assign(tag=[1, "1", 2, 3, 4, 5, 6, 7, 8])
    with pytest.raises(DataError, match=r"id column 'tag'.*read the same as text.*positions 0, 1"):
        ex.Study(df, "y", "line", id_column="tag")


@pytest.mark.parametrize("values,shown", [
    ([1, "1"], "1"),
    ([True, "True"], "True"),
    ([1.5, "1.5"], "1.5"),
    ([pd.Timestamp("2026-01-02"), "2026-01-02 00:00:00"], "2026-01-02 00:00:00"),
])
def test_factor_values_that_collide_as_text_are_refused_with_the_rows_named(values, shown):
    """Today these were pooled into one level without a note."""
    df = _frame()
    line = df.line.astype(object).to_numpy(copy=True)
    line[0], line[3] = values
    df["line"] = line
    copy = df.copy(deep=True)
    with pytest.raises(DataError) as info:
        ex.Study(df, "y", "line")
    msg = str(info.value)
    assert "factor 'line'" in msg and "read the same as text" in msg and repr(shown) in msg
    assert "row 0" in msg and "row 3" in msg
    pd.testing.assert_frame_equal(df, copy)


def test_equal_numbers_of_two_types_are_one_level():
    """1 and 1.0 are the same number: one level, no refusal (pandas and Python agree they are equal)."""
    df = _frame().assign(line=[1, 1.0, 1, 2, 2, 2, 3, 3, 3])
    assert ex.Study(df, "y", "line").results.levels["line"].labels == ("1", "2", "3")


@pytest.mark.parametrize("blank", ["", "   ", "\t"])
def test_blank_ids_are_refused(blank):
    df = _frame().assign(tag=[f"r{i}" for i in range(9)])
    df.loc[4, "tag"] = blank
    with pytest.raises(DataError, match=r"id column 'tag' is blank in rows \(positions\) 4"):
        ex.Study(df, "y", "line", id_column="tag")


def test_blank_index_labels_fall_back_to_positions_with_a_note():
    df = _frame()
    df.index = [f"r{i}" for i in range(8)] + [" "]
    s = ex.Study(df, "y", "line")
    assert s.dataset.id_source == "position" and any("blank" in n for n in s.dataset.notes)


@pytest.mark.parametrize("asked", ["\u0661", "01", "+1", " 1"])
def test_row_ids_are_matched_exactly_not_through_unicode_or_leading_zeros(asked):
    """'١' (Arabic-Indic one) or '01' used to reach row 1."""
    s = ex.Study(_frame(), "y", "line")
    with pytest.raises(EditError, match="no rows with ids"):
        s.drop([asked], reason="x")
    assert s.edits == ()


def test_an_id_given_as_text_digits_still_finds_an_integer_id():
    s = ex.Study(_frame(), "y", "line")
    s.drop(["1"], reason="typed as text")
    assert s.dropped == (1,)


# ---------------------------------------------------------------- column names
def test_integer_column_names_are_read_as_text():
    df = _frame()
    df.columns = [0, 1]
    s = ex.Study(df, "1", "0")
    assert s.results.statistic() == pytest.approx(_reference().statistic(), rel=1e-14)
    with pytest.raises(ColumnError, match="column names are text"):
        ex.Study(df, 1, 0)


def test_column_names_that_collide_as_text_are_refused():
    df = pd.DataFrame({1: [1.0, 2.0, 3.0, 4.0], "1": [1.0, 2.0, 3.0, 4.0], "g": list("aabb")})
    with pytest.raises(ColumnError, match="read the same as text"):
        ex.Study(df, "1", "g")


def test_multiindex_columns_are_refused_with_how_to_flatten():
    df = _frame()
    df.columns = pd.MultiIndex.from_tuples([("site", "line"), ("site", "y")])
    with pytest.raises(ColumnError, match="header rows.*flatten"):
        ex.Study(df, "y", "line")


# ---------------------------------------------------------------- files
def _same_as_reference(path):
    r = ex.Study(path, "y", "line").results
    ref = _reference()
    assert r.statistic() == pytest.approx(ref.statistic(), rel=1e-14)
    assert r.levels["line"].labels == ref.levels["line"].labels


def test_utf8_bom_is_stripped(tmp_path):
    path = tmp_path / "bom.csv"
    path.write_bytes(b"\xef\xbb\xbf" + _csv_text().encode())
    _same_as_reference(path)


@pytest.mark.parametrize("encoding", ["utf-16", "utf-16-le", "utf-16-be", "utf-32"])
def test_utf16_and_utf32_with_a_byte_order_mark_are_read(tmp_path, encoding):
    path = tmp_path / "wide.csv"
    bom = {"utf-16-le": b"\xff\xfe", "utf-16-be": b"\xfe\xff"}.get(encoding, b"")
    path.write_bytes(bom + _csv_text().encode(encoding))
    _same_as_reference(path)


def test_latin1_text_is_refused_with_line_and_byte(tmp_path):
    path = tmp_path / "latin.csv"
    path.write_bytes(_csv_text().replace("c,5.0", "caf\u00e9,5.0").encode("latin-1"))
    with pytest.raises(DataError, match=r"not UTF-8 text: byte 0xe9 on line 8.*encoding="):
        ex.Study(path, "y", "line")


@pytest.mark.parametrize("content,fragment,kind", [
    (b"", "is empty", DataError),
    (b"   \n\n", "no header", DataError),
    (b"line,y\n", "no data rows", DataError),
    (b"line,y,y\na,1,2\nb,3,4\n", "repeated column names ['y']", ColumnError),
    (b"line;y\na;1,5\na;2,5\nb;3,5\nb;4,25\n", "decimal comma", DataError),
    (b"\x00\x01\x02\x03binary\x00", "NUL", DataError),
])
def test_unusable_text_files_get_a_specific_message(tmp_path, content, fragment, kind):
    path = tmp_path / "bad.csv"
    path.write_bytes(content)
    with pytest.raises(kind) as info:
        ex.Study(path, "y", "line")
    assert fragment in str(info.value)
    assert path.read_bytes() == content


def test_decimal_comma_in_a_dataframe_is_named():
    df = _frame().assign(y=["1,5", "2,0", "2,5", "3,0", "4,5", "4,0", "5,0", "6,5", "6,0"])
    with pytest.raises(DataError, match="decimal comma"):
        ex.Study(df, "y", "line")


@pytest.mark.parametrize("values,fragment", [
    (pd.to_datetime(["2026-01-0%d" % d for d in range(1, 10)]), "dates or times"),
    (pd.to_timedelta(range(9), unit="h"), "dates or times"),
    (np.arange(9) + 1j, "complex"),
    (pd.Categorical(["1", "2", "3"] * 3), "categor"),
])
def test_responses_that_are_not_plain_numbers_are_refused(values, fragment):
    """A datetime response used to be analysed silently as nanoseconds."""
    df = _frame().assign(y=values)
    with pytest.raises(DataError, match=fragment):
        ex.Study(df, "y", "line")
