"""``study.to_code()``: the code, run in a fresh interpreter, rebuilds the same results exactly."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd

import explorer as ex

ROOT = Path(__file__).resolve().parents[1]
DEMO = "data/coating_thickness.csv"

# Printed by the replayed code: every number of the results, as exact JSON floats.
PROBE = """
import json as _json
_r = study.results
print(_json.dumps({
    "partition": [list(r.as_tuple()) for r in _r.partition.rows],
    "levels": {f: {"labels": list(t.labels), "mean": t.mean.tolist(), "sd": t.sd.tolist()} for f, t in _r.levels.items()},
    "residuals": _r.fit.residuals.tolist(),
    "rows": [str(r) for r in _r.fit.row_ids],
    "fingerprint": study.dataset.column_fingerprint,
    "reasons": [e.reason for e in study.edits],
    "specifications": study.disclosure.specifications,
}))
"""


def _snapshot(study: ex.Study) -> dict:
    return json.loads(json.dumps({
        "partition": [list(r.as_tuple()) for r in study.results.partition.rows],
        "levels": {f: {"labels": list(t.labels), "mean": t.mean.tolist(), "sd": t.sd.tolist()}
                   for f, t in study.results.levels.items()},
        "residuals": study.results.fit.residuals.tolist(),
        "rows": [str(r) for r in study.results.fit.row_ids],
        "fingerprint": study.dataset.column_fingerprint,
        "reasons": [e.reason for e in study.edits],
        "specifications": study.disclosure.specifications,
    }))


def _run_fresh(code: str, cwd: Path) -> dict:
    proc = subprocess.run([sys.executable, "-c", code + PROBE], cwd=cwd, capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout.strip().splitlines()[-1])


def test_replay_in_fresh_interpreter_is_exact():
    """Every kind of edit, an undone edit and a recorded search; compared bit for bit."""
    study = ex.Study(DEMO, response="thickness_um", factors="nozzle")
    study.drop([6, 70], reason="gauge slip on P1007; P1071 recoated")
    study.restore([70], reason="recoat log shows P1071 was fine after all")
    study.reassign(12, "nozzle", "N3", reason="logged under the wrong nozzle, it's in the line log")
    study.merge_levels("nozzle", ["N2", "N3"], into="N2+N3", reason='one supplier ("Acme" lot sheet)')
    study.rename_level("nozzle", "N4", "N4 new", reason="new nozzle\nfitted in March")
    study.drop([40], reason="to be undone")
    study.undo()
    study.record_search("leave-one-out scan", 112)
    code = study.to_code()
    # the undone edit is listed, not replayed
    assert "to be undone" in code and sum(ln.startswith("study.drop(") for ln in code.splitlines()) == 1
    got = _run_fresh(code, ROOT)
    assert got == _snapshot(study)


def test_replay_with_path_given_and_multi_factor_spec(tmp_path):
    """Spec options (alpha) are carried; the data path can be given explicitly."""
    study = ex.Study(ROOT / DEMO, response="thickness_um", factors="nozzle", alpha=0.01)
    study.drop([6], reason="gauge slip")
    code = study.to_code(data=str(ROOT / DEMO))
    assert "alpha=0.01" in code
    got = _run_fresh(code, tmp_path)
    assert got == _snapshot(study)


def test_dataframe_study_replays_with_given_frame():
    frame = pd.DataFrame({"g": ["a", "a", "b", "b", "c", "c"], "y": [1.0, 2.0, 3.5, 4.0, 6.0, 6.5]},
                         index=["u1", "u2", "u3", "u4", "u5", "u6"])
    study = ex.Study(frame, response="y", factors="g")
    study.reassign("u2", "g", "b", reason="label typo")
    code = study.to_code()
    assert "define `data`" in code
    scope: dict = {"data": frame}
    exec(code, scope)  # noqa: S102 - the point of the test
    replayed = scope["study"]
    assert replayed.results.partition == study.results.partition
    np.testing.assert_array_equal(replayed.results.fit.residuals, study.results.fit.residuals)


def test_no_edits_gives_the_baseline():
    study = ex.Study(ROOT / DEMO, response="thickness_um", factors="nozzle")
    scope: dict = {}
    exec(study.to_code(), scope)  # noqa: S102
    assert scope["study"].results.partition == study.baseline.partition


def test_other_edit_kinds_replay_from_their_saved_form():
    """An edit kind without a Study method is rebuilt with edit_from_dict, reason and time kept."""
    from dataclasses import dataclass
    from typing import ClassVar

    from explorer.engine.edits import EDIT_KINDS, DropRows, register_edit

    @register_edit
    @dataclass(frozen=True, kw_only=True)
    class DropFirstOf(DropRows):  # a stand-in for a kind added later
        kind: ClassVar[str] = "test-drop-first-of"

    try:
        study = ex.Study(ROOT / DEMO, response="thickness_um", factors="nozzle")
        study.apply(DropFirstOf(rows=(3,), reason="stand-in kind"))
        code = study.to_code()
        assert "study.apply(ex.edit_from_dict(" in code
        scope: dict = {}
        exec(code, scope)  # noqa: S102
        replayed = scope["study"]
        assert replayed.results.partition == study.results.partition
        assert replayed.edits[0].reason == "stand-in kind" and replayed.edits[0].at == study.edits[0].at
    finally:
        EDIT_KINDS.pop("test-drop-first-of", None)


def test_replay_code_written_before_the_column_fingerprint_still_passes(monkeypatch):
    """Replay code from a kit whose files had one fingerprint definition (fixture made by that kit on the
    bundled invented data) asserts ``study.dataset.fingerprint == <saved value>``: it must still pass on the
    same data and still stop on changed data, so an archived script never calls unchanged data 'different'."""
    code = (ROOT / "tests" / "fixtures" / "replay-code-pandas-row-hash.py.txt").read_text(encoding="utf-8")
    monkeypatch.chdir(ROOT)
    scope: dict = {}
    exec(compile(code, "replay-code-pandas-row-hash.py", "exec"), scope)
    study = scope["study"]
    assert [e.reason for e in study.edits] == ["invented example: panel scratched before measuring"]
    assert study.disclosure.sentence() == scope["original_disclosure"]
    assert study.dataset.fingerprint == scope["fingerprint"] != study.dataset.column_fingerprint
    changed = pd.read_csv(ROOT / "data" / "coating_thickness.csv")
    changed.loc[3, "thickness_um"] += 0.1
    other = ex.Study(changed, response="thickness_um", factors="nozzle", id_column="panel")
    assert other.dataset.fingerprint != scope["fingerprint"]
