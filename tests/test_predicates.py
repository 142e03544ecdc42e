"""Conditions at scale: literals reach the engine byte for byte; ill-typed conditions are refused.

Reference: DuckDB itself (the rows a condition catches are counted by a plain pandas
mask on the same invented table, and by DuckDB's own ``count(*) ... WHERE`` on the
rendered text).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from explorer.engine.errors import EditError, PredicateError
from explorer.summaries import SummaryStudy, parse_predicate

duckdb = pytest.importorskip("duckdb")

KINDS = {"note": "text", "nozzle": "text", "y": "number", "day": "date", "at": "timestamp", "ok": "boolean",
         "g": "text", "blob": "other"}


@pytest.fixture(scope="module")
def frame() -> pd.DataFrame:
    """Invented coating readings: 3 nozzles' groups, a free-text note, a day, a pass flag."""
    rng = np.random.default_rng(3)
    n = 60
    df = pd.DataFrame({
        "g": np.repeat(["a", "b", "c"], n // 3),
        "y": rng.normal(size=n) + np.repeat([0.0, 1.0, 2.0], n // 3),
        "note": ["ok"] * n,
        "nozzle": rng.choice(["N1", "N2"], n),
        "day": pd.to_datetime("2026-03-01") + pd.to_timedelta(rng.integers(0, 10, n), unit="D"),
        "ok": rng.random(n) > 0.3,
    })
    df.loc[[1, 5, 9, 22, 30, 41, 44, 50, 58], "note"] = "rework ( line 2 )"
    df.loc[[2, 3], "note"] = "it's  two spaces,  and (brackets)"
    return df


@pytest.mark.parametrize("literal", [
    "rework ( line 2 )", "a ,b", "  lead and trail  ", "x ( y", ") z", "tab\there", "naïve – ünïcode ☃",
    "percent % and _", "line\nbreak",
])
def test_rendering_keeps_every_literal_byte_for_byte(literal):
    """Rendering from tokens: the text between the quotes reaches the engine unchanged (was: '( ' -> '(')."""
    p = parse_predicate(f"note = '{literal}' AND y > 1", {"note": "text", "y": "number"})
    for dialect in ("duckdb", "spark"):
        assert f"'{literal}'" in p.render(dialect)
    con = duckdb.connect()
    got = con.execute(f"SELECT count(*) FROM (SELECT '{literal}' AS note, 2.0 AS y) WHERE {p.render('duckdb')}").fetchone()
    assert got == (1,)


def test_drop_where_with_spaced_brackets_drops_the_nine_rows(frame):
    """The reported defect: the log said nine rows were left out while the engine matched none."""
    s = SummaryStudy(frame, "y", "g", sample_size=0)
    before = s.results.n_used
    r = s.drop_where("note = 'rework ( line 2 )'", reason="rework")
    assert before - r.n_used == 9 == int((frame.note == "rework ( line 2 )").sum())


def test_condition_that_catches_no_kept_row_is_refused(frame):
    """A condition that would leave out nothing is refused (the log never records a no-op as a drop)."""
    s = SummaryStudy(frame, "y", "g", sample_size=0)
    with pytest.raises(EditError, match="holds for no kept row"):
        s.drop_where("note = 'rework (line 2)'", reason="typo")
    assert s.edits == ()
    s.drop_where("nozzle = 'N1'", reason="x")
    with pytest.raises(EditError, match="holds for no kept row"):
        s.drop_where("nozzle = 'N1' AND y > -100", reason="again")
    assert len(s.edits) == 1


@pytest.mark.parametrize("text,fragments", [
    ("nozzle > 5", ["'nozzle'", "text", "number"]),
    ("nozzle", ["'nozzle'", "text", "true/false"]),
    ("y", ["'y'", "number", "true/false"]),
    ("day = DATE '2026-13-45'", ["'2026-13-45'", "date"]),
    ("day > '2026-02-30'", ["'day'", "'2026-02-30'", "date"]),
    ("day > 5", ["'day'", "date", "number"]),
    ("at < TIMESTAMP '2026-03-01 25:00'", ["'2026-03-01 25:00'", "timestamp"]),
    ("y > '5'", ["'y'", "number", "text"]),
    ("y = NULL", ["IS NULL"]),
    ("note LIKE 5", ["LIKE"]),
    ("y LIKE 'a%'", ["'y'", "number", "LIKE"]),
    ("y IN (1, 'a')", ["'y'", "number", "text"]),
    ("y BETWEEN 1 AND DATE '2026-01-01'", ["'y'", "number", "date"]),
    ("lower(y) = 'a'", ["lower", "'y'", "number"]),
    ("year(note) = 2026", ["year", "'note'", "text"]),
    ("abs(y, 2) > 1", ["abs", "1 argument"]),
    ("nozzle + 1 > 2", ["'nozzle'", "text", "arithmetic"]),
    ("y > 5 AND nozzle", ["'nozzle'", "text", "true/false"]),
    ("NOT y", ["'y'", "number", "true/false"]),
    ("blob = 'x'", ["'blob'", "type"]),
    ("coalesce(y, 'a') > 1", ["coalesce", "number", "text"]),
    ("y > 1e999", ["1e999", "finite"]),
    ("y > \u0663", ["'\u0663'", "0-9"]),
    ("y > 1\u0660", ["0-9"]),
    ("y = 'O''Brien'", ["quote"]),
    ("note = 'a\x00b'", ["control character"]),
    ("(" * 3000 + "y > 0" + ")" * 3000, ["nested", "deep"]),
    ("NOT " * 3000 + "ok", ["nested", "deep"]),
    ("- " * 3000 + "y > 0", ["nested", "deep"]),
    ("températur > 1", ["températur", "double quotes"]),
])
def test_ill_typed_and_malformed_conditions_name_column_and_types(text, fragments):
    """Each is a PredicateError (an EditError) naming the column and the types, never an engine error."""
    with pytest.raises(PredicateError) as info:
        parse_predicate(text, KINDS)
    msg = str(info.value)
    for frag in fragments:
        assert frag in msg, (frag, msg)


@pytest.mark.parametrize("text", [
    "nozzle > 5", "nozzle", "day = DATE '2026-13-45'", "(" * 3000 + "y > 0" + ")" * 3000, "y > \u0663",
    "day > 5", "y = NULL", "ok + 1 > 0",
])
def test_through_duckdb_no_engine_error_and_study_unchanged(frame, text):
    """Through a DuckDB study: a PredicateError, the log and the results unchanged, the caller's table unchanged."""
    copy = frame.copy(deep=True)
    s = SummaryStudy(frame, "y", "g", sample_size=0)
    before = s.results
    with pytest.raises(PredicateError):
        s.drop_where(text, reason="hostile")
    assert s.edits == () and s.results is before
    pd.testing.assert_frame_equal(frame, copy)


@pytest.mark.parametrize("text,mask", [
    ("day = '2026-03-04'", lambda d: d.day == pd.Timestamp("2026-03-04")),
    ("day BETWEEN DATE '2026-03-02' AND DATE '2026-03-05'",
     lambda d: (d.day >= pd.Timestamp("2026-03-02")) & (d.day <= pd.Timestamp("2026-03-05"))),
    ("ok", lambda d: d.ok),
    ("NOT ok AND y > 0.5", lambda d: ~d.ok & (d.y > 0.5)),
    ("year(day) = 2026 AND day(day) < 3", lambda d: d.day.dt.day < 3),
    ("note LIKE '%(brackets)'", lambda d: d.note.str.endswith("(brackets)")),
    ("lower(nozzle) IN ('n1') AND abs(y) > 1", lambda d: (d.nozzle == "N1") & (d.y.abs() > 1)),
])
def test_well_typed_conditions_catch_the_same_rows_as_pandas(frame, text, mask):
    """Reference: a pandas boolean mask on the same table."""
    s = SummaryStudy(frame, "y", "g", sample_size=0)
    r = s.drop_where(text, reason="check")
    assert s.results.n_used == r.n_used == len(frame) - int(mask(frame).sum())


def test_csv_response_compared_as_a_number(tmp_path, frame):
    """The response read as decimal text from CSV is compared as a number (was a raw binder error)."""
    path = tmp_path / "readings.csv"
    frame.to_csv(path, index=False)
    s = SummaryStudy(path, "y", "g", sample_size=0)
    r = s.drop_where("y > 0.5", reason="x")
    assert r.n_used == int((frame.y <= 0.5).sum())


def test_plain_column_list_still_parses():
    """Without known kinds (a plain list of names) the grammar is checked, types are not."""
    p = parse_predicate("a > 5 AND b = 'x'", ["a", "b"])
    assert p.columns == ("a", "b")
