"""Per-row hashes of the columns a study reads, for its fingerprint and its saved row digests.

The hash of a row is pandas' ``hash_pandas_object`` of the row's id (as text), response,
factors (as text) and covariates, combined across columns as pandas combines them; the
values are the same as hashing a DataFrame of those columns (files saved before keep
their fingerprints), but each column is hashed once per distinct value where it has few
(factors), and no per-row Python objects are made for integer ids beyond their text.

References
----------
pandas.util.hash_array and hash_pandas_object (SipHash-2-4 of each value's UTF-8 text,
64-bit; columns combined by the multiply-xor rule of ``pandas.core.util.hashing``).
"""

from __future__ import annotations

import hashlib
from collections.abc import Mapping, Sequence

import numpy as np
import pandas as pd

__all__ = ["row_hashes", "block_digests", "BLOCKS", "block_bounds"]

#: How many blocks of consecutive rows a study file keeps a digest of (its size does not grow with the rows).
BLOCKS = 1024


_MISSING = np.uint64(np.iinfo(np.uint64).max)  # what pandas gives a missing value


def _text_hash(values: np.ndarray) -> np.ndarray:
    """Hash of each value's text (an object array of str; missing values as pandas hashes them)."""
    out = np.asarray(pd.util.hash_array(values, categorize=False), dtype=np.uint64)
    missing = pd.isna(values)
    if missing.any():
        out[missing] = _MISSING
    return out


def _column_text_hash(col: pd.Series) -> np.ndarray:
    """Hash of ``col.astype(str)`` row by row, computed once per distinct value."""
    codes, uniques = pd.factorize(col, sort=False)
    if len(uniques) > max(1, len(col) // 4):  # mostly distinct: hash the rows directly
        return _text_hash(np.asarray(col.astype(str).to_numpy(), dtype=object))
    per_value = _text_hash(np.asarray(pd.Series(uniques).astype(str).to_numpy(), dtype=object))
    out = per_value[np.maximum(codes, 0)] if len(uniques) else np.zeros(len(col), dtype=np.uint64)
    missing = codes < 0
    if missing.any():
        out[missing] = _text_hash(np.asarray(col[missing].astype(str).to_numpy(), dtype=object))
    return out


def _int_text(ids: np.ndarray) -> np.ndarray:
    """Decimal text of integer ids (an object array of str), through Arrow's cast when pyarrow is there."""
    try:
        import pyarrow as pa
    except ImportError:  # pragma: no cover - pyarrow is optional
        return np.array(list(map(str, ids.tolist())), dtype=object)
    return np.asarray(pa.array(ids).cast(pa.string()).to_numpy(zero_copy_only=False), dtype=object)


def _combine(hashes: Sequence[np.ndarray]) -> np.ndarray:
    """pandas' combination of column hashes (``combine_hash_arrays``)."""
    num_items = len(hashes)
    mult = np.uint64(1000003)
    out: np.ndarray = np.zeros_like(hashes[0]) + np.uint64(0x345678)
    for i, a in enumerate(hashes):
        inverse_i = num_items - i
        out ^= a
        out *= mult
        mult += np.uint64(82520 + inverse_i + inverse_i)
    out += np.uint64(97531)
    return out


def row_hashes(ids: np.ndarray, y: np.ndarray, frame: pd.DataFrame, factors: Sequence[str],
               covariates: Mapping[str, np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """The 64-bit hash of every row of ``frame`` (all rows, set-aside ones included), and of its id alone."""
    if ids.dtype.kind in "iu":
        id_text = _int_text(ids)
    else:
        id_text = np.array([str(i) for i in ids.tolist()], dtype=object)
    with np.errstate(over="ignore"):
        id_hash = _text_hash(id_text)
        del id_text
        cols = [id_hash, np.asarray(pd.util.hash_array(np.asarray(y, dtype=np.float64)), dtype=np.uint64)]
        cols += [_column_text_hash(frame[f]) for f in factors]
        cols += [np.asarray(pd.util.hash_array(np.asarray(v, dtype=np.float64)), dtype=np.uint64)
                 for v in covariates.values()]
        return _combine(cols), id_hash


def block_bounds(rows: int, blocks: int = BLOCKS) -> np.ndarray:
    """Start positions of ``min(rows, blocks)`` blocks of consecutive rows, and ``rows`` at the end."""
    count = max(min(rows, blocks), 1)
    bounds: np.ndarray = np.linspace(0, rows, count + 1).round().astype(np.int64)
    return bounds


def block_digests(row_hash: np.ndarray, id_hash: np.ndarray, blocks: int = BLOCKS) -> np.ndarray:
    """Per block of consecutive rows: an 8-byte digest (SHA-256) of the rows' ids and one of the whole rows,
    as a (blocks, 2) uint64 array; a changed block names where the data changed without a digest per row."""
    bounds = block_bounds(row_hash.size, blocks)
    out = np.zeros((bounds.size - 1, 2), dtype=np.uint64)
    ids_le, rows_le = id_hash.astype("<u8"), row_hash.astype("<u8")
    for b in range(bounds.size - 1):
        lo, hi = int(bounds[b]), int(bounds[b + 1])
        out[b, 0] = int.from_bytes(hashlib.sha256(ids_le[lo:hi].tobytes()).digest()[:8], "little")
        out[b, 1] = int.from_bytes(hashlib.sha256(rows_le[lo:hi].tobytes()).digest()[:8], "little")
    return out
