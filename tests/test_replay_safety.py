"""Replay code from hostile strings: names, levels, ids, reasons, times and paths stay literals.

A newline in an edit's time or in the data file's name used to turn the rest of a
comment into statements that ran. These tests fuzz every user-supplied string with
quotes, newlines, backslashes and unicode:

* in process (many examples): the code is executed with builtins that can do nothing
  but import a recording stand-in for the kit, so any statement beyond the expected
  calls fails, and the recorded calls must carry each string exactly;
* in a fresh interpreter (fewer examples, each a few seconds): the code loads the
  Parquet file from its fuzzed path with a temporary empty working folder and must
  rebuild the same results bit for bit, creating no file.
"""

from __future__ import annotations

import ast
import json
import os
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import explorer as ex
from explorer.engine.edits import DropRows, MergeLevels, Reassign, RenameLevel, edit_from_dict
from explorer.engine.errors import ReplayError

ROOT = Path(__file__).resolve().parents[1]

PAYLOADS = [
    "\n__import__('os').system('touch pwned')", "\r\nopen('pwned', 'w')", "'''", '"""', "\\", "\\n", "'; x = 1 #",
    "\u2028open('pwned','w')", "\x0c", "\x00", "é日本🙂", "#", "{0}", "%s", "\t", "\\'", "\ufeff", "\U0010fffd",
]
_text = st.text(st.characters(blacklist_categories=("Cs",)), min_size=1, max_size=10)
text = st.one_of(st.sampled_from(PAYLOADS), _text, st.tuples(st.sampled_from(PAYLOADS), _text).map("".join))
name = text.filter(lambda s: s.strip() != "")


@st.composite
def hostile_study(draw):
    """A one-factor study whose every string is hostile, with one edit of each built-in kind."""
    names = draw(st.lists(name, min_size=3, max_size=3, unique=True))
    levels = draw(st.lists(name, min_size=3, max_size=3, unique=True))
    ids = draw(st.lists(name, min_size=9, max_size=9, unique=True))
    new_names = draw(st.lists(name.filter(lambda s: s not in levels), min_size=2, max_size=2, unique=True))
    reasons = draw(st.lists(text, min_size=5, max_size=5))
    times = draw(st.lists(text, min_size=5, max_size=5))
    response, factor, id_col = names
    frame = pd.DataFrame({
        response: [1.0, 2.5, 3.0, 5.5, 6.0, 7.25, 9.0, 9.5, 12.0],
        factor: [levels[i // 3] for i in range(9)],
        id_col: ids,
    })
    edits = [
        DropRows(rows=(ids[0],), reason=reasons[0], at=times[0]),
        Reassign(row=ids[4], factor=factor, level=levels[2], reason=reasons[1], at=times[1]),
        RenameLevel(factor=factor, old=levels[0], new=new_names[0], reason=reasons[2], at=times[2]),
        MergeLevels(factor=factor, levels=(levels[1], levels[2]), into=new_names[1], reason=reasons[3], at=times[3]),
        DropRows(rows=(ids[8],), reason=reasons[4], at=times[4]),
    ]
    return frame, names, edits, draw(text), draw(st.integers(0, 2))


def _build(frame, names, edits, undo, data):
    response, factor, id_col = names
    study = ex.Study(data, response=response, factors=factor, id_column=id_col)
    for e in edits:
        study.apply(e)
    for _ in range(undo):
        study.undo()
    return study


class _Recorder:
    """Stands in for the kit inside the replay code: records every call, returns itself."""

    def __init__(self, log, path=()):
        self._log, self._path = log, path

    def __getattr__(self, attr):
        return _Recorder(self._log, self._path + (attr,))

    def __call__(self, *args, **kwargs):
        self._log.append((".".join(self._path), args, kwargs))
        return _Recorder(self._log, ("result",))

    def __getitem__(self, key):  # study.dataset.levels[factor] in the level-order assertion
        return _Recorder(self._log, self._path + (f"[{key!r}]",))

    def __eq__(self, other):  # the fingerprint and level-order assertions
        return True

    __hash__ = object.__hash__


def _expected_calls(study, data_path):
    spec = study.spec
    calls = [("Study", (data_path,), {"response": spec.response, "factors": spec.factors[0],
                                       "id_column": study.dataset.id_column}),
             ("fingerprint_by", ("column-sha256",), {})]  # the data check names its definition
    for e in study.edits:
        if isinstance(e, DropRows):
            calls.append(("drop", (list(e.rows),), {"reason": e.reason}))
        elif isinstance(e, Reassign):
            calls.append(("reassign", (e.row, e.factor, e.level), {"reason": e.reason}))
        elif isinstance(e, RenameLevel):
            calls.append(("rename_level", (e.factor, e.old, e.new), {"reason": e.reason}))
        elif isinstance(e, MergeLevels):
            calls.append(("merge_levels", (e.factor, list(e.levels)), {"into": e.into, "reason": e.reason}))
    calls.append(("restore_ledger", (json.loads(json.dumps(study.ledger.to_dict())),), {}))
    return calls


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(hostile_study())
def test_replay_code_runs_only_the_expected_calls(case):
    frame, names, edits, data_path, undo = case
    study = _build(frame, names, edits, undo, frame)
    code = study.to_code(data=data_path)
    ast.parse(code)
    log: list = []
    recorder = _Recorder(log)

    def only_the_kit(module, *args, **kwargs):
        assert module == "explorer", module
        return recorder

    scope = {"__builtins__": {"__import__": only_the_kit}}
    exec(compile(code, "<replay>", "exec"), scope)  # noqa: S102 - builtins that can do nothing else
    got = [(path.removeprefix("Study.").removeprefix("result."), args, kwargs) for path, args, kwargs in log]
    # the recorder answers study.results through attribute access, the fingerprint through one call
    assert [(p.split(".")[-1], a, k) for p, a, k in got] == _expected_calls(study, data_path)
    assert scope["source"] == "DataFrame" and scope["fingerprint"] == study.dataset.column_fingerprint
    assert scope["made_at"] == [e.at for e in study.edits]
    assert scope.get("undone", []) == [e.to_dict() for e in study.redo_edits]
    assert scope["original_disclosure"] == study.disclosure.sentence()
    assert set(scope) <= {"__builtins__", "source", "fingerprint", "made_at", "ex", "study", "undone",
                          "original_disclosure", "ledger"}


PROBE = """
import json as _json
_r = study.results
print(_json.dumps({
    "partition": [list(r.as_tuple()) for r in _r.partition.rows],
    "levels": {f: {"labels": list(t.labels), "mean": t.mean.tolist()} for f, t in _r.levels.items()},
    "residuals": _r.fit.residuals.tolist(),
    "rows": [str(r) for r in _r.fit.row_ids],
    "reasons": [e.reason for e in study.edits],
}))
"""


def _snapshot(study):
    r = study.results
    return json.loads(json.dumps({
        "partition": [list(t.as_tuple()) for t in r.partition.rows],
        "levels": {f: {"labels": list(t.labels), "mean": t.mean.tolist()} for f, t in r.levels.items()},
        "residuals": r.fit.residuals.tolist(),
        "rows": [str(x) for x in r.fit.row_ids],
        "reasons": [e.reason for e in study.edits],
    }))


file_name = st.text(st.characters(blacklist_categories=("Cs",), blacklist_characters="/\x00"), min_size=1,
                    max_size=12).filter(lambda s: s not in (".", "..") and len(s.encode()) < 200)


@settings(max_examples=8, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(hostile_study(), st.one_of(file_name, st.sampled_from(["a\nimport os", "b'\"\\", "\u2028x", "#"])))
def test_replay_in_a_fresh_interpreter_is_exact_and_creates_nothing(tmp_path_factory, case, stem):
    pytest.importorskip("pyarrow")
    frame, names, edits, _, undo = case
    folder = tmp_path_factory.mktemp("data")
    data = folder / f"{stem}.parquet"
    frame.to_parquet(data)
    study = _build(frame, names, edits, undo, data)
    code = study.to_code()
    work = tmp_path_factory.mktemp("work")
    proc = subprocess.run([sys.executable, "-c", code + PROBE], cwd=work, capture_output=True, text=True,
                          timeout=120, env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout.strip().splitlines()[-1]) == _snapshot(study)
    assert list(work.iterdir()) == []
    assert [p.name for p in folder.iterdir()] == [data.name]


@pytest.mark.parametrize("at", ["2026-03-01T09:30:00Z\nimport os", "yesterday", "2026-02-30T09:30:00Z",
                                "2026-03-01T09:30:00+02:00", "2026-03-01 09:30:00Z", 20260301, None])
def test_times_are_checked_on_load(at):
    with pytest.raises(ReplayError, match="ISO 8601 UTC|not a real time"):
        edit_from_dict({"kind": "drop", "rows": [1], "reason": "", "at": at})


@pytest.mark.parametrize("at", ["2026-03-01T09:30:00Z", "2026-03-01T09:30:00.123456+00:00"])
def test_kit_times_load(at):
    assert edit_from_dict({"kind": "drop", "rows": [1], "reason": "", "at": at}).at == at


def test_reasons_must_be_text():
    with pytest.raises(ReplayError, match="reason: must be text"):
        edit_from_dict({"kind": "drop", "rows": [1], "reason": 5, "at": "2026-03-01T09:30:00Z"})
    study = ex.Study(pd.DataFrame({"y": [1.0, 2, 3, 4.5], "g": list("aabb")}), response="y", factors="g")
    with pytest.raises(ex.EditError, match="reason must be text"):
        study.drop([0], reason=["not", "text"])  # type: ignore[arg-type]
    assert study.edits == ()


def test_levels_with_superscript_digits_load():
    """'²' is a digit to str.isdigit but not to int(): level ordering used to fail on it (found by the fuzzing)."""
    study = ex.Study(pd.DataFrame({"y": [1.0, 2, 3, 4, 5, 6.5], "g": ["²", "²", "a1", "a1", "b٣", "b٣"]}),
                     response="y", factors="g")
    assert set(study.levels("g")) == {"²", "a1", "b٣"}
