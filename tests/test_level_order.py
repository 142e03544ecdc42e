"""A factor's level order is saved with the study and checked on load and in replay code.

Neither fingerprint sees the order of a categorical's categories, yet 'later' contrasts and
two-level differences (first - second) follow it. A study saved with a factor in one order
and loaded (or replayed) on the same values in another order is refused, naming the factor,
both orders and the fix; in the same order it loads with identical numbers. The numbers of
'later' contrasts themselves are checked against an outside reference in test_contrasts.py;
here only refusal and identity are asserted. Data are invented (coating thickness by dose).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

import explorer as ex
from explorer.engine.errors import ReplayError
from explorer.study import persistence

ROOT = Path(__file__).resolve().parents[1]
FIXTURES = Path(__file__).parent / "fixtures"

TWO = [("thin", 10.2), ("thin", 10.9), ("thin", 10.4), ("thick", 11.8), ("thick", 12.4), ("thick", 12.9)]
THREE = [("low", 10.2), ("low", 10.9), ("low", 10.4), ("mid", 11.8), ("mid", 11.4), ("mid", 12.0),
         ("high", 12.6), ("high", 13.1), ("high", 12.2)]


def frame(rows: list[tuple[str, float]], order: list[str]) -> pd.DataFrame:
    return pd.DataFrame({"dose": pd.Categorical([g for g, _ in rows], categories=order),
                         "y": [v for _, v in rows]})


def two_level(order: list[str]) -> ex.Study:
    study = ex.Study(frame(TWO, order), "y", "dose")
    study.welch_t()
    return study


def three_level(order: list[str]) -> ex.Study:
    study = ex.Study(frame(THREE, order), "y", "dose")
    study.contrast("dose", "later")
    study.drop([4], reason="invented: gauge slipped")
    return study


def numbers(study: ex.Study) -> str:
    r = study.results
    planned = [{k: getattr(o.value, k).tolist() if hasattr(getattr(o.value, k), "tolist") else getattr(o.value, k)
                for k in ("estimate", "pvalue", "difference", "statistic", "first", "second", "names")
                if hasattr(o.value, k)} for o in study.planned()]
    two = r.two_groups
    return json.dumps({"two": None if two is None else [two.first, two.second, two.difference, two.statistic],
                       "levels": {f: list(t.labels) for f, t in r.levels.items()},
                       "partition": [list(x.as_tuple()) for x in r.partition.rows], "planned": planned},
                      default=str)


CASES = [(two_level, ["thin", "thick"], ["thick", "thin"]),
         (three_level, ["low", "mid", "high"], ["high", "mid", "low"])]


@pytest.mark.parametrize(("build", "saved", "other"), CASES)
def test_the_order_is_saved_and_another_order_is_refused(tmp_path, build, saved, other):
    study = build(saved)
    path = study.save(tmp_path / "s.study.json")
    assert json.loads(path.read_text())["data"]["level_order"] == {"dose": saved}
    reordered = frame(TWO if build is two_level else THREE, other)
    assert build(other).dataset.column_fingerprint == study.dataset.column_fingerprint  # the fingerprint is blind
    assert numbers(build(other)) != numbers(study)  # ... to an order that changes the numbers
    for allow in (False, True):  # allow_mismatch is for changed rows, never for another order
        with pytest.raises(ReplayError) as caught:
            ex.Study.load(path, reordered, allow_mismatch=allow)
        msg = str(caught.value)
        assert "data.level_order" in msg and "'dose'" in msg
        assert str(saved) in msg and str(other) in msg
        assert f"df['dose'] = df['dose'].cat.reorder_categories({saved!r})" in msg
    assert list(reordered["dose"].cat.categories) == other  # nothing changed


@pytest.mark.parametrize(("build", "saved", "other"), CASES)
def test_the_same_order_loads_with_identical_numbers(tmp_path, build, saved, other):
    study = build(saved)
    path = study.save(tmp_path / "s.study.json")
    again = ex.Study.load(path, frame(TWO if build is two_level else THREE, saved))
    assert numbers(again) == numbers(study)
    fixed = frame(TWO if build is two_level else THREE, other)
    fixed["dose"] = fixed["dose"].cat.reorder_categories(saved)  # the fix the message gives
    assert numbers(ex.Study.load(path, fixed)) == numbers(study)


def test_a_text_column_is_told_to_become_a_categorical(tmp_path):
    study = two_level(["thin", "thick"])  # natural order of the text would be thick, thin
    path = study.save(tmp_path / "s.study.json")
    text = frame(TWO, ["thin", "thick"]).astype({"dose": str})
    with pytest.raises(ReplayError, match=r"astype\(pd.CategoricalDtype\(\['thin', 'thick'\]\)\)"):
        ex.Study.load(path, text)


def test_shared_levels_only_are_compared_under_allow_mismatch(tmp_path):
    study = three_level(["low", "mid", "high"])
    path = study.save(tmp_path / "s.study.json")
    rows = [r for r in THREE if r[0] != "mid"] + [("extra", 11.0), ("extra", 11.5)]
    fewer = frame(rows, ["low", "extra", "high"])  # a level gone, one added: the shared ones keep their order
    doc = json.loads(path.read_text())
    doc["edits"], doc["position"], doc["planned"] = [], 0, []
    doc["ledger"] = {"complete": True, "entries": []}
    loaded = ex.Study.from_dict(doc, fewer, allow_mismatch=True)
    assert loaded.dataset.levels["dose"] == ("low", "extra", "high")
    with pytest.raises(ReplayError, match=r"\['low', 'high'\].*\['high', 'low'\]"):
        ex.Study.from_dict(doc, frame(rows, ["high", "extra", "low"]), allow_mismatch=True)


def test_many_levels_are_shortened_in_the_message(tmp_path):
    labels = [f"L{i:02d}" for i in range(20)]
    rows = [(g, float(i % 7) + j) for i, g in enumerate(labels) for j in (0.0, 0.5)]
    study = ex.Study(frame(rows, labels), "y", "dose")
    path = study.save(tmp_path / "s.study.json")
    with pytest.raises(ReplayError) as caught:
        ex.Study.load(path, frame(rows, labels[::-1]))
    msg = str(caught.value)
    assert "(and 12 more)" in msg and "L09" not in msg
    assert "reorder_categories(order), with order the list data.level_order['dose'] of" in msg


def test_factors_of_too_many_levels_are_not_recorded(monkeypatch, tmp_path):
    monkeypatch.setattr(persistence, "MAX_LEVEL_ORDER", 2)
    doc = three_level(["low", "mid", "high"]).to_dict()
    assert "level_order" not in doc["data"]


@pytest.mark.parametrize("fixture", sorted(p.name for p in FIXTURES.glob("*.study.json")))
def test_files_without_the_field_load_as_before(fixture):
    doc = json.loads((FIXTURES / fixture).read_text())
    assert "level_order" not in doc["data"]
    persistence.check_study_doc(doc)  # the whole load of these files is in test_column_digest.py


def test_files_without_the_field_load_in_any_order(tmp_path):
    study = three_level(["low", "mid", "high"])
    doc = study.to_dict()
    del doc["data"]["level_order"]
    loaded = ex.Study.from_dict(doc, frame(THREE, ["high", "mid", "low"]))
    assert loaded.dataset.levels["dose"] == ("high", "mid", "low")


HOSTILE = [
    ("not-an-object", ["low"], "data.level_order: must be an object"),
    ("list-not-text", {"dose": "low"}, "data.level_order.dose: must be a list"),
    ("label-number", {"dose": ["low", 1, "high"]}, "data.level_order.dose[1]: must be text"),
    ("empty", {"dose": []}, "data.level_order.dose: must have at least 1"),
    ("unknown-factor", {"nozzle": ["a", "b"]}, "data.level_order: 'nozzle' is not a factor of the model"),
    ("duplicate", {"dose": ["low", "mid", "low"]}, "data.level_order.dose: level 'low' appears twice"),
    ("huge", {"dose": [f"x{i}" for i in range(1001)]}, "data.level_order.dose: must have at most 1000"),
]


@pytest.mark.parametrize(("what", "value", "fragment"), HOSTILE, ids=[h[0] for h in HOSTILE])
def test_hostile_values_of_the_field_are_refused(tmp_path, what, value, fragment):
    study = three_level(["low", "mid", "high"])
    doc = study.to_dict()
    doc["data"]["level_order"] = value
    path = tmp_path / f"{what}.study.json"
    path.write_text(json.dumps(doc))
    data = frame(THREE, ["low", "mid", "high"])
    with pytest.raises(ReplayError, match="data.level_order") as caught:
        ex.Study.load(path, data)
    assert fragment in str(caught.value)


def test_both_validators_agree_on_the_field():
    jsonschema = pytest.importorskip("jsonschema")
    from explorer.study.schema_check import first_violation, load_schema

    schema = load_schema(persistence.FORMAT, persistence.SCHEMA)
    registry = _registry(jsonschema)
    doc = three_level(["low", "mid", "high"]).to_dict()
    for _, value, _ in [("valid", {"dose": ["low", "mid", "high"]}, ""), *HOSTILE]:
        doc["data"]["level_order"] = value
        ours = first_violation(json.loads(json.dumps(doc)), schema, schema["$id"]) is None
        theirs = jsonschema.Draft202012Validator(schema, registry=registry).is_valid(json.loads(json.dumps(doc)))
        assert ours == theirs, value


def _registry(jsonschema):
    from referencing import Registry, Resource

    from explorer.study.schema_check import SCHEMA_FILES

    names = ["defs-1.schema.json", "defs-2.schema.json", *SCHEMA_FILES.values()]
    docs = [json.loads((ROOT / "explorer" / "schemas" / n).read_text()) for n in names]
    return Registry().with_resources((d["$id"], Resource.from_contents(d)) for d in docs)


@pytest.mark.parametrize(("build", "saved", "other"), CASES)
def test_replay_code_checks_the_order(tmp_path, build, saved, other):
    study = build(saved)
    code = study.to_code()
    assert f"assert study.dataset.levels['dose'] == {tuple(saved)!r}, " in code
    rows = TWO if build is two_level else THREE
    probe = "\nimport json\nprint(json.dumps([float(x) for x in study.results.partition.rows[0].as_tuple()[1:3]]))\n"
    for order, ok in ((saved, True), (other, False)):
        setup = (f"import pandas as pd\ndata = pd.DataFrame({{'dose': pd.Categorical({[g for g, _ in rows]!r}, "
                 f"categories={order!r}), 'y': {[v for _, v in rows]!r}}})\n")
        proc = subprocess.run([sys.executable, "-c", setup + code + probe], cwd=tmp_path, capture_output=True,
                              text=True, timeout=120, env={**os.environ, "PYTHONPATH": str(ROOT)})
        if ok:
            assert proc.returncode == 0, proc.stderr
        else:
            assert proc.returncode != 0
            assert "AssertionError: the levels of 'dose' are in another order" in proc.stderr
            assert f"reorder_categories({saved!r})" in proc.stderr


def test_every_grouping_column_is_recorded_and_checked(tmp_path):
    df = pd.DataFrame({"dose": pd.Categorical(["low", "high"] * 6, categories=["low", "high"]),
                       "line": pd.Categorical(["B", "B", "A", "A", "C", "C"] * 2, categories=["B", "A", "C"]),
                       "y": [10.2, 12.6, 10.9, 13.1, 10.4, 12.2, 10.0, 12.9, 11.1, 13.0, 10.6, 12.4]})
    study = ex.Study(df, "y", "dose", blocks="line")
    path = study.save(tmp_path / "s.study.json")
    assert json.loads(path.read_text())["data"]["level_order"] == {"dose": ["low", "high"], "line": ["B", "A", "C"]}
    other = df.assign(line=df["line"].cat.reorder_categories(["A", "B", "C"]))
    with pytest.raises(ReplayError, match="factor 'line'"):
        ex.Study.load(path, other)
    assert "assert study.dataset.levels['line'] == ('B', 'A', 'C'), " in study.to_code()
