"""Invented tables (made up for the tests, no real measurements) behind the study files in
``tests/fixtures/*-pandas-row-hash.study.json``, which were saved before study files named
their fingerprint's definition (so they hold the first one, ``pandas-row-hash``)."""

from __future__ import annotations

import hashlib

import numpy as np
import pandas as pd

__all__ = ["small_table", "large_table", "SMALL_FILE", "LARGE_FILE", "first_fingerprint_by_frame"]

SMALL_FILE = "small-pandas-row-hash.study.json"
LARGE_FILE = "large-pandas-row-hash.study.json"


def small_table() -> pd.DataFrame:
    """300 rows with text ids ``p0``..``p299``, a text factor, one missing response."""
    i = np.arange(300)
    frame = pd.DataFrame({"y": (i * 37 % 101) / 7.0 + 10.0, "line": np.array(["north", "south", "east"])[i % 3]},
                         index=pd.Index([f"p{k}" for k in i], dtype=object))
    frame.loc["p11", "y"] = np.nan
    return frame


def large_table() -> pd.DataFrame:
    """3,000 rows with increasing whole-number ids (0, 3, 6, ...), a text and a whole-number factor, a covariate,
    a row with a missing factor value."""
    i = np.arange(3_000)
    frame = pd.DataFrame({"y": (i * 53 % 211) / 9.0 - 3.0, "batch": np.array(["a", "b c", "é"], dtype=object)[i % 3],
                          "shift": i % 4, "temp": 20.0 + (i * 7 % 13) / 4.0}, index=i * 3)
    frame["batch"] = frame["batch"].astype(object)
    frame.loc[30, "batch"] = None
    return frame


def first_fingerprint_by_frame(dataset, frame: pd.DataFrame, factors) -> tuple[str, np.ndarray]:
    """The fingerprint as first defined, made with pandas alone: ``hash_pandas_object`` of a DataFrame of
    the ids as text, the response and the factors as text; with the low 32 bits of each row's hash."""
    ids = dataset.all_row_ids
    yv = pd.to_numeric(frame["y"], errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
    hashed = pd.util.hash_pandas_object(pd.DataFrame(
        {"id": [str(i) for i in ids.tolist()], "y": yv, **{f: frame[f].astype(str).to_numpy() for f in factors}}),
        index=False).to_numpy()
    head = f"y|{'|'.join(factors)}|{len(frame)}".encode()
    return hashlib.sha256(head + hashed.tobytes()).hexdigest()[:32], (hashed & 0xFFFFFFFF).astype(np.uint32)
