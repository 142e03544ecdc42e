"""Study files are checked against the shipped JSON Schema before use; every break is a ReplayError naming the field.

The in-package validator (``explorer.study.schema_check``) is checked against
``jsonschema`` (a test-only oracle, Draft 2020-12) on hypothesis-generated valid and
broken files, and the shipped schemas are checked to be valid Draft 2020-12 schemas.
"""

from __future__ import annotations

import copy
import json
import os
import subprocess
import sys
from importlib import resources
from pathlib import Path

import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import explorer as ex
from explorer.cli import EXIT_BAD_EDITS, main
from explorer.engine.errors import ReplayError
from explorer.study import persistence
from explorer.study.schema_check import SCHEMA_FILES, first_violation, load_schema

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "data" / "coating_thickness.csv"
FORMAT = "variance-explorer/study"
VERSION = persistence.SCHEMA  # the version this kit writes


def _schema_docs() -> list[dict]:
    folder = resources.files("explorer").joinpath("schemas")
    return [json.loads(f.read_text(encoding="utf-8")) for f in folder.iterdir() if f.name.endswith(".schema.json")]


def _oracle(format_marker: str = FORMAT):
    jsonschema = pytest.importorskip("jsonschema")
    from referencing import Registry, Resource

    registry = Registry().with_resources((d["$id"], Resource.from_contents(d)) for d in _schema_docs())
    return jsonschema.Draft202012Validator(load_schema(format_marker, VERSION), registry=registry)


def test_shipped_schemas_are_valid_draft_2020_12_and_packaged():
    jsonschema = pytest.importorskip("jsonschema")
    docs = _schema_docs()
    assert {d["$id"] for d in docs} >= {load_schema(f, v)["$id"] for f, v in SCHEMA_FILES}
    for doc in docs:
        assert doc["$schema"] == "https://json-schema.org/draft/2020-12/schema"
        jsonschema.Draft202012Validator.check_schema(doc)
    assert '"schemas/*.json"' in (ROOT / "pyproject.toml").read_text()  # shipped as package data


@pytest.fixture(scope="module")
def saved_doc(tmp_path_factory) -> dict:
    study = ex.Study(DEMO, response="thickness_um", factors="nozzle")
    study.drop([6, 70], reason="gauge slip")
    study.reassign(12, "nozzle", "N3", reason="wrong nozzle")
    study.merge_levels("nozzle", ["N2", "N3"], into="N2+N3", reason="one supplier")
    study.rename_level("nozzle", "N4", "N4 new", reason="renamed")
    study.restore([70], reason="back")
    study.undo()
    study.record_search("leave-one-out", 112)
    return json.loads(json.dumps(study.to_dict()))


def test_a_saved_study_is_valid_for_both_validators(saved_doc):
    assert first_violation(saved_doc, load_schema(FORMAT, VERSION), load_schema(FORMAT, VERSION)["$id"]) is None
    assert _oracle().is_valid(saved_doc)


def _set(path):
    def mutate(doc):
        *head, last = path[0]
        node = doc
        for k in head:
            node = node[k]
        node[last] = path[1]
    return mutate


def _drop(*keys):
    def mutate(doc):
        node = doc
        for k in keys[:-1]:
            node = node[k]
        del node[keys[-1]]
    return mutate


BROKEN = [
    # (what, mutation, field named in the message)
    ("reason a number", _set((("edits", 0, "reason"), 5)), "edits[0].reason"),
    ("reason a list", _set((("edits", 1, "reason"), ["a"])), "edits[1].reason"),
    ("reason missing", _drop("edits", 0, "reason"), "edits[0].reason"),
    ("spec missing", _drop("spec"), "spec"),
    ("edits missing", _drop("edits"), "edits"),
    ("data missing", _drop("data"), "data"),
    ("factors a string", _set((("spec", "factors"), "nozzle")), "spec.factors"),
    ("response empty", _set((("spec", "response"), "")), "spec.response"),
    ("alpha text", _set((("spec", "alpha"), "0.05")), "spec.alpha"),
    ("alpha 1.5", _set((("spec", "alpha"), 1.5)), "spec.alpha"),
    ("ss type 4", _set((("spec", "ss_type"), "IV")), "spec.ss_type"),
    ("unknown spec field", _set((("spec", "run"), "os.system")), "spec.run"),
    ("unknown top field", _set((("payload",), 1)), "payload"),
    ("edits an object", _set((("edits",), {"0": {}})), "edits"),
    ("edit a string", _set((("edits", 0), "drop 6")), "edits[0]"),
    ("rows a number", _set((("edits", 0, "rows"), 6)), "edits[0].rows"),
    ("rows empty", _set((("edits", 0, "rows"), [])), "edits[0].rows"),
    ("row id a float", _set((("edits", 0, "rows"), [6.5])), "edits[0].rows[0]"),
    ("row id null", _set((("edits", 0, "rows"), [None])), "edits[0].rows[0]"),
    ("deep rows", _set((("edits", 0, "rows"), [[[[[6]]]]])), "edits[0].rows[0]"),
    ("extra edit field", _set((("edits", 0, "exec"), "x")), "edits[0].exec"),
    ("time with newline", _set((("edits", 0, "at"), "2026-03-01T09:30:00Z\nimport os")), "edits[0].at"),
    ("time words", _set((("edits", 0, "at"), "yesterday")), "edits[0].at"),
    ("time Feb 30", _set((("edits", 0, "at"), "2026-02-30T09:30:00Z")), "edits[0].at"),
    ("time offset", _set((("edits", 0, "at"), "2026-03-01T09:30:00+02:00")), "edits[0].at"),
    ("level null", _set((("edits", 1, "level"), None)), "edits[1].level"),
    ("merge levels a string", _set((("edits", 2, "levels"), "N2")), "edits[2].levels"),
    ("negative position", _set((("position",), -1)), "position"),
    ("position past the log", _set((("position",), 99)), "position"),
    ("position text", _set((("position",), "3")), "position"),
    ("position true", _set((("position",), True)), "position"),
    ("bad base64", _set((("data", "row_check", "digests"), "!!not base64!!")), "data.row_check.digests"),
    ("base64 of 3 bytes", _set((("data", "row_check", "digests"), "AAAA")), "data.row_check.digests"),
    ("ids an object", _set((("data", "row_check", "ids"), {"a": 1})), "data.row_check.ids"),
    ("rows negative", _set((("data", "rows"), -5)), "data.rows"),
    ("fingerprint short", _set((("data", "fingerprint"), "abc")), "data.fingerprint"),
    ("fingerprint a number", _set((("data", "fingerprint"), 12)), "data.fingerprint"),
    ("search count negative", _set((("ledger", "entries", -1, "count"), -1)), "ledger.entries[6].count"),
    ("search what a number", _set((("ledger", "entries", -1, "what"), 1)), "ledger.entries[6].what"),
    ("ledger kind unknown", _set((("ledger", "entries", 0, "kind"), "exec")), "ledger.entries[0].kind"),
    ("ledger time with newline", _set((("ledger", "entries", 1, "at"), "2026-03-01T09:30:00Z\nimport os")),
     "ledger.entries[1].at"),
    ("ledger time Feb 30", _set((("ledger", "entries", 1, "at"), "2026-02-30T09:30:00Z")), "ledger.entries[1].at"),
    ("ledger edit missing", _drop("ledger", "entries", 0, "edit"), "ledger.entries[0]"),
    ("ledger edit time words", _set((("ledger", "entries", 0, "edit", "at"), "soon")), "ledger.entries[0].edit.at"),
    ("ledger origin a number", _set((("ledger", "entries", 0, "origin"), 3)), "ledger.entries[0].origin"),
    ("ledger missing", _drop("ledger"), "ledger"),
    ("ledger understates edits", _set((("ledger", "entries"), [])), "ledger: records 0 edit(s) made"),
    ("comparisons unknown", _set((("comparisons",), "eyeball")), "comparisons"),
    ("schema text", _set((("schema",), "1")), "schema"),
    ("schema newer", _set((("schema",), 7)), "schema 7"),
]


@pytest.mark.parametrize("what,mutate,field", BROKEN, ids=[b[0] for b in BROKEN])
def test_broken_file_is_a_replay_error_naming_the_field(saved_doc, tmp_path, what, mutate, field):
    doc = copy.deepcopy(saved_doc)
    mutate(doc)
    path = tmp_path / "broken.study.json"
    path.write_text(json.dumps(doc), encoding="utf-8")
    with pytest.raises(ReplayError) as info:
        ex.Study.load(path, DEMO)
    assert "broken.study.json" in str(info.value) and field in str(info.value), str(info.value)
    with pytest.raises(ReplayError):
        ex.Study.from_dict(doc, DEMO)


RAW = [
    ("binary", b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "not UTF-8"),
    ("latin-1", '{"format": "variance-explorer/study", "note": "caf\xe9"}'.encode("latin-1"), "not UTF-8"),
    ("utf-16", json.dumps({"format": FORMAT}).encode("utf-16"), "not UTF-8"),
    ("nul bytes", b'{"format": "variance-explorer/study"\x00}', "not valid JSON"),
    ("NaN", b'{"format": "variance-explorer/study", "schema": NaN}', "NaN is not a JSON number"),
    ("deep arrays", b'{"format": "variance-explorer/study", "x": ' + b"[" * 100_000 + b"]" * 100_000 + b"}",
     "nested too deeply"),
    ("moderately deep", b'{"format": "variance-explorer/study", "x": ' + b"[" * 40 + b"]" * 40 + b"}", "nested more than"),
    ("empty", b"", "not valid JSON"),
    ("a list", b"[1, 2]", "no format marker"),
    ("truncated", b'{"format": "variance-explorer/study", "spec": {', "not valid JSON"),
]


@pytest.mark.parametrize("what,content,message", RAW, ids=[r[0] for r in RAW])
def test_unreadable_content_is_a_replay_error(tmp_path, what, content, message):
    path = tmp_path / "x.study.json"
    path.write_bytes(content)
    with pytest.raises(ReplayError, match=message):
        ex.Study.load(path, DEMO)


def test_folder_device_and_oversize_file_are_refused_before_reading(tmp_path, monkeypatch):
    with pytest.raises(ReplayError, match="is a folder"):
        ex.Study.load(tmp_path, DEMO)
    with pytest.raises(ReplayError, match="not a regular file"):
        ex.Study.load("/dev/zero", DEMO)  # would never end if read
    big = tmp_path / "big.study.json"
    with open(big, "wb") as fh:  # sparse: no disk used
        fh.truncate(persistence.MAX_STUDY_FILE_BYTES + 1)
    with pytest.raises(ReplayError, match="MiB a study file may have"):
        ex.Study.load(big, DEMO)


def test_cli_gives_exit_3_naming_the_field(saved_doc, tmp_path, capsys):
    doc = copy.deepcopy(saved_doc)
    doc["edits"][0]["reason"] = {"text": "nested"}
    path = tmp_path / "s.study.json"
    path.write_text(json.dumps(doc))
    assert main(["check", str(DEMO), "--edits", str(path)]) == EXIT_BAD_EDITS
    assert "edits[0].reason: must be text" in capsys.readouterr().err


# ------------------------------------------------------------------ hypothesis: the two validators agree
json_value = st.recursive(
    st.none() | st.booleans() | st.integers(-10, 10**6) | st.floats(-1e3, 1e3, allow_nan=False) | st.text(max_size=8),
    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=6), inner, max_size=3),
    max_leaves=6,
)


def _paths(value, prefix=()):
    yield prefix
    if isinstance(value, dict):
        for k, v in value.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(value, list):
        for i, v in enumerate(value[:4]):
            yield from _paths(v, prefix + (i,))


@st.composite
def mutated(draw, base):
    doc = copy.deepcopy(base)
    for _ in range(draw(st.integers(1, 3))):
        paths = [p for p in _paths(doc) if p]
        path = draw(st.sampled_from(paths))
        parent = doc
        for k in path[:-1]:
            parent = parent[k]
        action = draw(st.sampled_from(["replace", "delete", "add", "tweak"]))
        if action == "delete" and isinstance(parent, dict):
            del parent[path[-1]]
        elif action == "add" and isinstance(parent, dict):
            parent[draw(st.sampled_from(["extra", "rows", "level", "reason", "at", "kind", "count"]))] = draw(json_value)
        elif action == "tweak":
            old = parent[path[-1]]
            parent[path[-1]] = draw(st.sampled_from([
                str(old), -1, 0, 1.0, 2.5, True, None, "", [old], {"v": old}, "2026-03-01T09:30:00Z", "N1", "II",
                "drop", "reassign", "merge", "rename", "drop_where", "drop_level", "AAAA", "0" * 32,
            ]))
        else:
            parent[path[-1]] = draw(json_value)
    return doc


_text = st.text(st.characters(blacklist_categories=("Cs",)), max_size=8)


@st.composite
def valid_doc(draw):
    """A real study with random edits, reasons and names, saved to a dict."""
    levels = draw(st.lists(_text.filter(str.strip), min_size=3, max_size=4, unique=True))
    frame = pd.DataFrame({"y": [float(i % 7) + 0.5 * i for i in range(4 * len(levels))],
                          "g": [levels[i % len(levels)] for i in range(4 * len(levels))]})
    study = ex.Study(frame, response="y", factors="g")
    for _ in range(draw(st.integers(0, 4))):
        kind = draw(st.sampled_from(["drop", "rename", "reassign"]))
        reason = draw(_text)
        try:
            if kind == "drop":
                study.drop([draw(st.integers(0, len(frame) - 1))], reason=reason)
            elif kind == "rename":
                study.rename_level("g", draw(st.sampled_from(list(study.levels("g")))), draw(_text.filter(str.strip)),
                                   reason=reason)
            else:
                study.reassign(draw(st.integers(0, len(frame) - 1)), "g", draw(st.sampled_from(levels)), reason=reason)
        except ex.ExplorerError:
            pass
    if draw(st.booleans()) and study.edits:
        study.undo()
    return json.loads(json.dumps(study.to_dict()))


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.data())
def test_in_package_validator_agrees_with_jsonschema(data):
    oracle = _oracle()
    schema = load_schema(FORMAT, VERSION)
    doc = data.draw(valid_doc())
    assert first_violation(doc, schema, schema["$id"]) is None and oracle.is_valid(doc)
    broken = data.draw(mutated(doc))
    ours = first_violation(broken, schema, schema["$id"])
    assert (ours is None) == oracle.is_valid(broken), (ours, next(iter(oracle.iter_errors(broken)), None))


# ------------------------------------------------------------------ summary-backed study files
@pytest.fixture(scope="module")
def summary_doc():
    pytest.importorskip("duckdb")
    frame = pd.DataFrame({"y": [float(i % 5) + 0.1 * i for i in range(60)], "g": list("abc") * 20,
                          "t": [i * 0.5 for i in range(60)]})
    study = ex.SummaryStudy(frame, response="y", factors="g", sample_size=20)
    study.drop_where("t > 25", reason="late readings")
    study.merge_levels("g", ["a", "b"], into="ab", reason="same supplier")
    study.undo()
    return frame, json.loads(json.dumps(study.to_dict()))


def test_summary_study_files_are_checked(summary_doc, tmp_path):
    frame, doc = summary_doc
    marker = "variance-explorer/summary-study"
    schema = load_schema(marker, VERSION)
    assert first_violation(doc, schema, schema["$id"]) is None and _oracle(marker).is_valid(doc)
    for mutate, field in [(_set((("edits", 0, "predicate"), 5)), "edits[0].predicate"),
                          (_set((("sample", "size"), -3)), "sample.size"),
                          (_set((("edits", 1, "reason"), None)), "edits[1].reason"),
                          (_set((("position",), 9)), "position")]:
        broken = copy.deepcopy(doc)
        mutate(broken)
        path = tmp_path / "s.json"
        path.write_text(json.dumps(broken))
        with pytest.raises(ReplayError, match=field.replace("[", r"\[").replace("]", r"\]")):
            ex.SummaryStudy.load(path, frame)
    path.write_text(json.dumps(doc))
    assert len(ex.SummaryStudy.load(path, frame).edits) == 1


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                   HealthCheck.function_scoped_fixture])
@given(st.data())
def test_summary_validators_agree(summary_doc, data):
    marker = "variance-explorer/summary-study"
    schema = load_schema(marker, VERSION)
    broken = data.draw(mutated(summary_doc[1]))
    ours = first_violation(broken, schema, schema["$id"])
    assert (ours is None) == _oracle(marker).is_valid(broken)


def test_no_raw_errors_from_any_broken_file_through_the_command_line(saved_doc, tmp_path):
    """A batch of the broken files above through `check --edits` in one process: exit 3 each, no traceback."""
    paths = []
    for i, (_, mutate, _) in enumerate(BROKEN):
        doc = copy.deepcopy(saved_doc)
        mutate(doc)
        paths.append(tmp_path / f"b{i}.json")
        paths[-1].write_text(json.dumps(doc))
    for i, (_, content, _) in enumerate(RAW):
        paths.append(tmp_path / f"r{i}.json")
        paths[-1].write_bytes(content)
    script = ("import sys\nfrom explorer.cli import main\n"
              "codes = [main(['check', sys.argv[1], '--edits', p]) for p in sys.argv[2:]]\nprint(codes)")
    proc = subprocess.run([sys.executable, "-c", script, str(DEMO), *map(str, paths)], capture_output=True,
                          text=True, timeout=300, env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert proc.returncode == 0 and "Traceback" not in proc.stderr, proc.stderr[-2000:]
    assert json.loads(proc.stdout.strip().splitlines()[-1]) == [EXIT_BAD_EDITS] * len(paths)


@pytest.mark.parametrize("planned,field", [([{"kind": 5}], r"planned\[0\]\.kind"),
                                           ([{"kind": "contrast", "code": "x"}], r"planned\[0\]\.code"),
                                           ([{"kind": "contrast", "at": "soon"}], r"planned\[0\]\.at"),
                                           ({"kind": "contrast"}, "planned")])
def test_planned_analyses_are_checked(saved_doc, tmp_path, planned, field):
    doc = copy.deepcopy(saved_doc)
    doc["planned"] = planned
    path = tmp_path / "p.study.json"
    path.write_text(json.dumps(doc))
    with pytest.raises(ReplayError, match=field):
        ex.Study.load(path, DEMO)
    schema = load_schema(FORMAT, VERSION)
    assert first_violation(doc, schema, schema["$id"]) is not None and not _oracle().is_valid(doc)
