"""The data fingerprint over the columns' bytes (``column-sha256``) and study files of the first definition.

Outside reference: the fingerprint is recomputed here from the definition written in
``explorer/engine/column_digest.py``, with ``hashlib`` and ``struct`` alone (FIPS 180-4
SHA-256), so the bytes are the documented ones. The first definition's answers come
from pandas' ``hash_pandas_object`` (``fingerprint_support.first_fingerprint_by_frame``).
Study files saved before the field existed (``tests/fixtures``, written by the kit at
commit 5263fca on the invented tables of ``fingerprint_support.py``) still load and are
still checked, by the first definition.
"""

from __future__ import annotations

import hashlib
import json
import re
import shutil
import struct
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from fingerprint_support import LARGE_FILE, SMALL_FILE, first_fingerprint_by_frame, large_table, small_table

import explorer as ex
from explorer.engine.column_digest import COLUMN_SHA256, PANDAS_ROW_HASH
from explorer.engine.dataset import build_dataset

FIXTURES = Path(__file__).parent / "fixtures"


# ----------------------------------------------------------------- the definition, written out again
def _texts(items):
    raw = [t.encode("utf-8") for t in items]
    offsets = [0]
    for b in raw:
        offsets.append(offsets[-1] + len(b))
    return struct.pack("<Q", len(raw)) + struct.pack(f"<{len(offsets)}q", *offsets) + b"".join(raw)


def _reference(ids, y, factors, covariates=None, response="y"):
    """The column-sha256 fingerprint from the docstring's definition: plain lists in, hex out."""
    covariates = covariates or {}
    h = hashlib.sha256(b"variance-explorer fingerprint column-sha256\n")
    h.update(_texts([response]) + _texts(list(factors)) + _texts(list(covariates)))
    h.update(struct.pack("<Q", len(ids)))
    if all(isinstance(i, int) for i in ids):
        h.update(b"i" + struct.pack(f"<{len(ids)}q", *ids))
    else:
        h.update(b"t" + _texts(ids)[8:])  # the text list without its count
    h.update(struct.pack(f"<{len(y)}d", *[float("nan") if v is None else v + 0.0 for v in y]))  # -0.0 as 0.0
    for values in factors.values():
        texts = sorted({str(v) for v in values if v is not None})
        h.update(_texts(texts))
        h.update(struct.pack(f"<{len(values)}i", *[-1 if v is None else texts.index(str(v)) for v in values]))
    for values in covariates.values():
        h.update(struct.pack(f"<{len(values)}d", *values))
    return h.hexdigest()[:32]


def test_fingerprint_is_the_documented_bytes():
    y = [1.5, -0.0, 2.25, None, 7.0]
    g = ["b", "a", "é", "a", "b"]
    frame = pd.DataFrame({"y": y, "g": g})
    assert build_dataset(frame, "y", "g").column_fingerprint == _reference([0, 1, 2, 3, 4], y, {"g": g})
    texts = frame.set_index(pd.Index(["r1", "r10", "x", "ü", "r2"], dtype=object))
    assert build_dataset(texts, "y", "g").column_fingerprint == _reference(["r1", "r10", "x", "ü", "r2"], y, {"g": g})
    two = frame.assign(h=[3, 1, 3, None, 2], c=[0.5, 1.0, 1.5, 2.0, 2.5])
    got = build_dataset(two, "y", ["g", "h"], covariates=["c"]).column_fingerprint
    assert got == _reference([0, 1, 2, 3, 4], y, {"g": g, "h": [3.0, 1.0, 3.0, None, 2.0]}, {"c": list(two["c"])})


def test_block_digests_are_the_documented_bytes():
    n = 2_100  # 1024 blocks of 2 or 3 rows
    i = np.arange(n)
    ids = [f"id{k * 7 % 1000}-{k}" for k in range(n)]
    y = [float(v) for v in (i * 13 % 17) / 3.0]
    g = [None if k % 97 == 5 else ["x", "w", "v"][k % 3] for k in range(n)]
    h = [f"lot {k * 11 % 1500}" for k in range(n)]  # many levels: blocks renumbered by sorting, not counting
    frame = pd.DataFrame({"y": y, "g": g, "h": h}, index=pd.Index(ids, dtype=object))
    got = build_dataset(frame, "y", ["g", "h"]).block_digests
    bounds = [round(b * n / 1024) for b in range(1025)]
    for b in (0, 1, 2, 511, 1023):  # block 2 holds row 5, whose factor value is missing
        lo, hi = bounds[b], bounds[b + 1]
        raw = [t.encode() for t in ids[lo:hi]]
        id_part = b"t" + struct.pack(f"<{hi - lo}q", *map(len, raw)) + b"".join(raw)
        row_part = id_part + struct.pack(f"<{hi - lo}d", *y[lo:hi])
        for values in (g, h):
            texts = sorted({v for v in values[lo:hi] if v is not None})
            codes = [-1 if v is None else texts.index(v) for v in values[lo:hi]]
            row_part += _texts(texts) + struct.pack(f"<{hi - lo}i", *codes)
        first8 = [int.from_bytes(hashlib.sha256(part).digest()[:8], "little") for part in (id_part, row_part)]
        assert got[b].tolist() == first8


def test_text_ids_without_arrow_give_the_same_bytes(monkeypatch):
    import builtins

    from explorer.engine.column_digest import id_text_bytes

    ids = np.array(["a", "bc", "", "ü€", "a\x00b"], dtype=object)
    with_arrow = id_text_bytes(ids)
    real_import = builtins.__import__

    def no_arrow(name, *args, **kwargs):
        if name == "pyarrow":
            raise ImportError(name)
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_arrow)
    without = id_text_bytes(ids)
    assert np.array_equal(with_arrow[0], without[0]) and with_arrow[1] == without[1]
    assert with_arrow[0].tolist() == [0, 1, 3, 3, 8, 11]


# ----------------------------------------------------------------- same data, different data


def _same(a, b, factors=("g",), **kw):
    """(same by the first definition, same by column-sha256) for two tables."""
    da, db = build_dataset(a, "y", factors, **kw), build_dataset(b, "y", factors, **kw)
    old = da.fingerprint_by(PANDAS_ROW_HASH) == db.fingerprint_by(PANDAS_ROW_HASH)
    if not kw:  # the pandas reference of the first definition agrees with the kit's
        assert da.fingerprint_by(PANDAS_ROW_HASH) == first_fingerprint_by_frame(da, a, factors)[0]
        assert db.fingerprint_by(PANDAS_ROW_HASH) == first_fingerprint_by_frame(db, b, factors)[0]
    return old, da.column_fingerprint == db.column_fingerprint


def _base(n=12):
    i = np.arange(n)
    return pd.DataFrame({"y": 1.0 + (i * 7 % 5) / 4.0, "g": np.array(["a", "b", "c"], dtype=object)[i % 3]})


def _renamed(frame):
    out = frame.copy()
    out["g"] = out["g"].replace({"c": "z"})
    return out


def _one_id(frame):
    out = frame.copy()
    out.index = [*out.index[:-1], 99]
    return out


def _value(frame):
    out = frame.copy()
    out.loc[4, "y"] += 0.5
    return out


def _appended(frame):
    return pd.concat([frame, frame.iloc[[0]].set_axis([len(frame)])])


def _reordered(frame):
    return frame.iloc[::-1]


CHANGES = [  # (what, change, same by the first definition, same by column-sha256)
    ("a row appended", _appended, False, False),
    ("the same rows in another order", _reordered, False, False),
    ("a level renamed", _renamed, False, False),
    ("one row id changed", _one_id, False, False),
    ("one response value changed", _value, False, False),
    ("0.0 written as -0.0", None, True, True),
    ("the response as whole numbers vs the same floats", lambda f: f.assign(y=f.y.astype(np.int64)), True, True),
    ("a text factor '1','2' vs whole numbers 1, 2", lambda f: f.assign(g=f.g.astype(str)), True, True),
    ("a factor of floats 1.0 vs whole numbers 1", lambda f: f.assign(g=f.g.astype(np.float64)), False, False),
    ("a categorical factor with its categories in another order",
     lambda f: f.assign(g=pd.Categorical(f.g, categories=["c", "a", "b"])), True, True),
    ("text ids '0', '1', ... vs whole-number ids 0, 1, ...", lambda f: f.set_axis([str(i) for i in f.index]),
     True, False),
    ("float ids (an id column) 0.0, 1.0 vs whole numbers", None, False, False),
    ("text ids joined differently ('ab', 'c' vs 'a', 'bc')", None, False, False),
]


@pytest.mark.parametrize("what,change,old_same,new_same", CHANGES, ids=[c[0] for c in CHANGES])
def test_what_counts_as_the_same_data(what, change, old_same, new_same):
    frame = _base()
    if what.startswith("0.0"):
        a = frame.assign(y=frame.y.mask(frame.index == 0, 0.0))
        b = frame.assign(y=frame.y.mask(frame.index == 0, -0.0))
        assert _same(a, b) == (old_same, new_same)
    elif what.startswith("float ids"):
        a = frame.assign(id=np.arange(len(frame), dtype=np.int64))
        b = frame.assign(id=np.arange(len(frame), dtype=np.float64))
        assert _same(a, b, id_column="id") == (old_same, new_same)
    elif what.startswith("text ids joined"):
        a = frame.iloc[:2].set_axis(pd.Index(["ab", "c"], dtype=object))
        b = frame.iloc[:2].set_axis(pd.Index(["a", "bc"], dtype=object))
        assert _same(a, b) == (old_same, new_same)
    else:
        if what.startswith("the response as whole numbers"):
            frame = frame.assign(y=frame.y * 4)
        elif "whole numbers 1" in what:
            frame = frame.assign(g=frame.g.map({"a": 1, "b": 2, "c": 3}).astype(np.int64))
        assert _same(frame, change(frame)) == (old_same, new_same)


def test_missing_values_are_missing_however_written():
    frame = _base()
    frame["g"] = frame["g"].astype(object)
    frame.loc[2, "g"] = None
    frame.loc[5, "y"] = np.nan
    other = frame.copy()
    other.loc[2, "g"] = np.nan
    other["y"] = other["y"].astype("Float64")
    other.loc[5, "y"] = pd.NA
    assert _same(frame, other) == (True, True)
    payload = frame.copy()  # a NaN with other bits is still the one missing value
    raw = payload["y"].to_numpy().copy()
    raw.view(np.uint64)[5] = 0x7FF8000000000001
    payload["y"] = raw
    assert build_dataset(payload, "y", "g").column_fingerprint == build_dataset(frame, "y", "g").column_fingerprint
    text = frame.copy()  # the text 'nan' is a value, not a missing one
    text.loc[2, "g"] = "nan"
    assert _same(frame, text) == (False, False)


def test_set_aside_rows_and_names_count():
    frame = _base()
    frame.loc[3, "y"] = np.nan  # set aside; its factor value is still data
    other = frame.copy()
    other.loc[3, "g"] = "only here"
    assert _same(frame, other) == (False, False)
    both = frame.rename(columns={"y": "y2"})
    a, b = build_dataset(frame, "y", "g"), build_dataset(both, "y2", "g")
    assert a.column_fingerprint != b.column_fingerprint
    swapped = _base().assign(h=lambda d: d.g)  # the same two columns named the other way round
    twice = build_dataset(swapped, "y", ["g", "h"]), build_dataset(swapped, "y", ["g", "h"])
    assert twice[0].column_fingerprint == twice[1].column_fingerprint
    assert build_dataset(swapped.assign(h=lambda d: d.g.replace({"a": "q"})), "y", ["g", "h"]).column_fingerprint != \
        build_dataset(swapped.assign(g=lambda d: d.g.replace({"a": "q"})), "y", ["g", "h"]).column_fingerprint


def test_a_transform_keeps_the_fingerprint_of_the_measured_values():
    frame = _base()
    study = ex.Study(frame, "y", "g")
    before = study.dataset.column_fingerprint
    study.set_transform("log")
    assert study.dataset.column_fingerprint == before


# ----------------------------------------------------------------- files of both definitions
def test_new_files_name_their_definition_and_locate_changes(tmp_path):
    frame = large_table()
    study = ex.Study(frame, "y", ["batch", "shift"], covariates=["temp"])
    path = study.save(tmp_path / "s.study.json")
    data = json.loads(path.read_text())["data"]
    assert data["fingerprint_method"] == COLUMN_SHA256 and "block_check" in data
    assert data["fingerprint"] == study.dataset.column_fingerprint
    assert ex.Study.load(path, frame).results.pvalue("batch") == study.results.pvalue("batch")
    renamed = frame.copy()
    renamed.loc[2400, "batch"] = "new level"
    with pytest.raises(ex.ReplayError, match=r"values changed within the rows (\d+)\.\.(\d+)") as err:
        ex.Study.load(path, renamed)
    lo, hi = (int(x) for x in re.search(r"within the rows (\d+)\.\.(\d+)", str(err.value)).groups())
    assert lo <= 2400 <= hi and hi - lo < 3 * 3
    moved = frame.copy()
    moved.loc[1500, "temp"] += 0.25
    with pytest.raises(ex.ReplayError, match="values changed within the rows 14"):
        ex.Study.load(path, moved)


@pytest.mark.parametrize("name,table,spec", [
    (SMALL_FILE, small_table, {"factors": "line"}),
    (LARGE_FILE, large_table, {"factors": ["batch", "shift"], "covariates": ["temp"]}),
])
def test_files_of_the_first_definition_still_load_and_are_still_checked(tmp_path, name, table, spec):
    path = tmp_path / name
    shutil.copy(FIXTURES / name, path)
    doc = json.loads(path.read_text())
    assert "fingerprint_method" not in doc["data"]
    frame = table()
    study = ex.Study.load(path, frame)
    fresh = ex.Study(frame, "y", **spec)
    assert doc["data"]["fingerprint"] == fresh.dataset.fingerprint_by(PANDAS_ROW_HASH) != fresh.dataset.column_fingerprint
    for e in study.edits:
        fresh.apply(e)
    term = study.spec.factors[0]
    assert study.results.pvalue(term) == fresh.results.pvalue(term) and study.dropped == fresh.dropped
    changed = frame.copy()
    row = changed.index[200]
    changed.loc[row, "y"] += 1.0
    where = f"rows whose values changed: '{row}'" if name == SMALL_FILE else r"values changed within the rows \d+\.\.\d+"
    with pytest.raises(ex.ReplayError, match=where):
        ex.Study.load(path, changed)
    saved_again = study.save(tmp_path / "again.study.json")  # a study loaded from an older file saves the new way
    data = json.loads(saved_again.read_text())["data"]
    assert data["fingerprint_method"] == COLUMN_SHA256 and data["fingerprint"] == fresh.dataset.column_fingerprint
    assert ex.Study.load(saved_again, frame).results.pvalue(term) == study.results.pvalue(term)


def test_an_unknown_definition_is_refused_by_name(tmp_path):
    frame = _base(40)
    doc = ex.Study(frame, "y", "g").to_dict()
    doc["data"]["fingerprint_method"] = "md5"
    with pytest.raises(ex.ReplayError, match="data.fingerprint_method"):
        ex.Study.from_dict(doc, frame)
    from test_study_schema import _oracle

    validator = _oracle()
    assert any("fingerprint_method" in list(map(str, e.absolute_path)) for e in validator.iter_errors(doc))
    doc["data"]["fingerprint_method"] = PANDAS_ROW_HASH  # named explicitly: checked the first way
    doc["data"]["fingerprint"] = build_dataset(frame, "y", "g").fingerprint_by(PANDAS_ROW_HASH)
    assert not list(validator.iter_errors(doc))
    assert ex.Study.from_dict(doc, frame).results.pvalue() == ex.Study(frame, "y", "g").results.pvalue()
