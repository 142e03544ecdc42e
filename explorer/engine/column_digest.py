"""The data's fingerprint and block digests from the columns' bytes (study files from schema 2 with
``data.fingerprint_method`` = ``"column-sha256"``).

A study file records which definition its fingerprint follows; files without the field
were written with the per-row hashes of :mod:`.row_hash` (``"pandas-row-hash"``) and are
still checked that way. This definition reads each column once as fixed little-endian
bytes, without a per-row hash or per-row text, so checking 5 million rows takes a
fraction of a second.

Definition (every integer little-endian; ``u64(x)``: 8 bytes unsigned; a *text list* is
``u64(count)``, then ``count + 1`` int64 offsets (0, end of the first text, ...), then the
texts' UTF-8 bytes joined, so no two different lists have the same bytes). The fingerprint
is the first 32 hexadecimal digits of SHA-256 over, in order:

1. ``b"variance-explorer fingerprint column-sha256\\n"``;
2. the text lists of the response's name, the factors' names and the covariates' names;
3. ``u64(rows)``, every row of the table (rows set aside at load included);
4. the row ids: ``b"i"`` and one int64 per row for whole-number ids, else ``b"t"`` and the
   text list of the ids (whole-number ids ``1`` and text ids ``"1"`` are different ids: an
   edit naming one does not name the other);
5. the response as read (``pd.to_numeric`` of the column), one float64 per row (the measured values, not the shifted or
   transformed response the engine computes with; a missing value as the NaN
   ``0x7ff8000000000000`` whatever its bits were; ``-0.0`` as ``0.0``, as the first
   definition had them);
6. per factor, the text list of its distinct values' texts (``str`` of the value, as
   pandas' ``astype(str)`` writes it, the first definition's text: ``1`` and ``"1"`` read
   the same, ``1.0`` does not; values pandas takes as one value in a column of mixed
   objects, ``1`` and ``1.0``, are one value with the text of its first analysed row),
   sorted by code point, then one int32 per row: the position of the row's text in that
   list, -1 when missing;
7. per covariate, one float64 per row as for the response.

Block digests (``data.block_check``): the rows in ``min(rows, 1024)`` blocks of consecutive
rows (:func:`.row_hash.block_bounds`); per block two 8-byte digests (the first 8 bytes of a
SHA-256 read little-endian): one of the block's ids (``b"i"`` and int64 ids, or ``b"t"``,
the ids' UTF-8 byte lengths as int64 and their bytes joined), one of its whole rows (the
same ids part, the response's float64, per factor the text list of the block's distinct
texts (sorted) and one int32 per row of the block: its text's position in that list, -1
when missing, per covariate its float64).

References
----------
FIPS 180-4, Secure Hash Standard (SHA-256); Apache Arrow columnar format (offsets and data
buffers of ``large_string``), which gives the text lists' bytes without per-row objects.
"""

from __future__ import annotations

import hashlib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .row_hash import BLOCKS, block_bounds

__all__ = ["COLUMN_SHA256", "PANDAS_ROW_HASH", "FINGERPRINT_METHODS", "ColumnBytes", "column_bytes",
           "text_list", "id_text_bytes"]

#: The definition study files are written with now.
COLUMN_SHA256 = "column-sha256"
#: The first definition (:mod:`.row_hash`): what a study file without ``fingerprint_method`` was written with.
PANDAS_ROW_HASH = "pandas-row-hash"
FINGERPRINT_METHODS = (PANDAS_ROW_HASH, COLUMN_SHA256)

_TAG = b"variance-explorer fingerprint column-sha256\n"
_NAN = np.float64(np.nan)


def _mem(a: np.ndarray) -> memoryview:
    """The bytes of a one-dimensional array, without a copy when it is contiguous."""
    return np.ascontiguousarray(a).data


def _u64(x: int) -> bytes:
    return int(x).to_bytes(8, "little")


def _utf8(texts: Sequence[str]) -> list[bytes]:
    # surrogatepass: a lone surrogate (possible in a Python str) still has one byte form
    return [t.encode("utf-8", "surrogatepass") for t in texts]


def text_list(texts: Sequence[str]) -> bytes:
    """The text list of ``texts``: count, ``count + 1`` int64 offsets, the UTF-8 bytes joined."""
    raw = _utf8(texts)
    offsets = np.zeros(len(raw) + 1, dtype="<i8")
    np.cumsum([len(b) for b in raw], out=offsets[1:])
    return _u64(len(raw)) + offsets.tobytes() + b"".join(raw)


def id_text_bytes(ids: np.ndarray) -> tuple[np.ndarray, bytes]:
    """Text ids as ``n + 1`` int64 offsets and their UTF-8 bytes joined (through Arrow when it is there:
    one pass, no per-row bytes objects)."""
    try:
        import pyarrow as pa

        arr = pa.array(ids, type=pa.large_string())
        _, off_buf, data_buf = arr.buffers()
        offsets = np.frombuffer(off_buf, dtype="<i8", count=len(arr) + 1, offset=arr.offset * 8)
        start, end = int(offsets[0]), int(offsets[-1])
        if arr.null_count == 0 and data_buf is not None:
            return offsets - start, data_buf.to_pybytes()[start:end]
    except (ImportError, ValueError, TypeError, UnicodeError):  # no Arrow, or text it refuses (lone surrogates)
        pass
    raw = _utf8([str(i) for i in ids.tolist()])
    offsets = np.zeros(len(raw) + 1, dtype="<i8")
    np.cumsum([len(b) for b in raw], out=offsets[1:])
    return offsets, b"".join(raw)


def _floats(values: np.ndarray) -> np.ndarray:
    """float64 little-endian, every NaN as the one NaN and -0.0 as 0.0."""
    out = np.ascontiguousarray(values, dtype="<f8")
    odd = np.isnan(out)
    odd |= (out == 0) & np.signbit(out)
    if odd.any():
        out = np.where(np.isnan(out), _NAN, out + 0.0)  # -0.0 + 0.0 is 0.0
    return out


@dataclass(frozen=True)
class _Factor:
    texts: tuple[str, ...]  # distinct value texts, sorted by code point
    codes: np.ndarray  # '<i4' per row, -1 missing


@dataclass(frozen=True)
class ColumnBytes:
    """The columns a study reads, as the exact bytes the fingerprint and the block digests are taken over."""

    names: bytes
    rows: int
    id_kind: bytes  # b"i" or b"t"
    ids: np.ndarray  # '<i8' ids (b"i") or '<i8' offsets (b"t")
    id_data: bytes  # text ids' UTF-8 bytes joined (b"" for whole-number ids)
    response: np.ndarray
    factors: tuple[_Factor, ...]
    covariates: tuple[np.ndarray, ...]

    def fingerprint(self) -> str:
        """32 hexadecimal digits of SHA-256 over the definition's bytes (module docstring)."""
        h = hashlib.sha256(_TAG)
        h.update(self.names)
        h.update(_u64(self.rows))
        h.update(self.id_kind)
        h.update(_mem(self.ids))
        h.update(self.id_data)
        h.update(_mem(self.response))
        for f in self.factors:
            h.update(text_list(f.texts))
            h.update(_mem(f.codes))
        for c in self.covariates:
            h.update(_mem(c))
        return h.hexdigest()[:32]

    def _id_part(self, lo: int, hi: int) -> list[bytes | memoryview]:
        if self.id_kind == b"i":
            return [b"i", _mem(self.ids[lo:hi])]
        off = self.ids
        lengths = np.diff(off[lo:hi + 1]).astype("<i8")
        return [b"t", _mem(lengths), self.id_data[int(off[lo]):int(off[hi])]]

    def block_digests(self, blocks: int = BLOCKS) -> np.ndarray:
        """Per block of consecutive rows: 8-byte digests of its ids and of its whole rows, as a (blocks, 2)
        uint64 array (module docstring)."""
        bounds = block_bounds(self.rows, blocks)
        out = np.zeros((bounds.size - 1, 2), dtype=np.uint64)
        for b in range(bounds.size - 1):
            lo, hi = int(bounds[b]), int(bounds[b + 1])
            ids = hashlib.sha256()
            for part in self._id_part(lo, hi):
                ids.update(part)
            rows = ids.copy()
            rows.update(_mem(self.response[lo:hi]))
            for f in self.factors:  # in the block's own numbering: a level added elsewhere changes no other block
                used, local = _renumber(f.codes[lo:hi], len(f.texts))
                rows.update(text_list([f.texts[int(c)] for c in used]))
                rows.update(_mem(local))
            for c in self.covariates:
                rows.update(_mem(c[lo:hi]))
            out[b, 0] = int.from_bytes(ids.digest()[:8], "little")
            out[b, 1] = int.from_bytes(rows.digest()[:8], "little")
        return out


def _renumber(codes: np.ndarray, levels: int) -> tuple[np.ndarray, np.ndarray]:
    """The distinct codes (>= 0) of ``codes`` in order, and each code's position among them ('<i4', -1 stays -1)."""
    if levels > 4 * codes.size:  # many levels: sort the block's codes
        used, local = np.unique(codes, return_inverse=True)
        missing = int(bool(used.size) and used[0] < 0)
        return used[missing:], (local.reshape(-1) - missing).astype("<i4")
    present = np.bincount(codes + 1, minlength=levels + 1)[1:] > 0  # few levels: mark those present
    rank = np.cumsum(present, dtype=np.int32) - 1
    local = np.where(codes < 0, -1, rank[np.maximum(codes, 0)]).astype("<i4")
    return np.flatnonzero(present), local


def _factor(col: pd.Series, codes: np.ndarray, n_levels: int, usable: np.ndarray | None) -> _Factor:
    """A factor's sorted distinct texts and every row's position among them, from the build's codes
    (``codes``: 0..n_levels-1 over the usable rows; ``usable``: their positions, ``None`` when all rows)."""
    rows = len(col)
    first = np.full(n_levels, codes.size, dtype=np.int64)  # each level's first row, to read its value's text
    np.minimum.at(first, codes, np.arange(codes.size, dtype=np.int64))
    if usable is not None:
        first = usable[first]
    level_texts = [str(t) for t in col.iloc[first].astype(str).tolist()]
    aside_texts: list[str | None] = []
    aside = np.zeros(0, dtype=np.int64)
    if usable is not None:
        mask = np.ones(rows, dtype=bool)
        mask[usable] = False
        aside = np.flatnonzero(mask)
        values = col.iloc[aside]
        missing = values.isna().to_numpy()
        aside_texts = [None if m else str(t) for m, t in zip(missing.tolist(), values.astype(str).tolist())]
    texts = tuple(sorted(set(level_texts) | {t for t in aside_texts if t is not None}))
    rank = {t: i for i, t in enumerate(texts)}
    perm = np.array([rank[t] for t in level_texts], dtype="<i4")
    if usable is None:
        return _Factor(texts, perm[codes])
    out = np.full(rows, -1, dtype="<i4")
    out[usable] = perm[codes]
    out[aside] = np.array([-1 if t is None else rank[t] for t in aside_texts], dtype="<i4")
    return _Factor(texts, out)


def column_bytes(response_name: str, factor_names: Sequence[str], ids: np.ndarray, y: np.ndarray,
                 frame: pd.DataFrame, codes: Mapping[str, np.ndarray], levels: Mapping[str, Sequence[str]],
                 aside: np.ndarray, covariates: Mapping[str, np.ndarray]) -> ColumnBytes:
    """The definition's bytes of a table: ``ids`` and ``y`` (the response as read, NaN where missing) over all
    rows; ``codes``/``levels`` the build's codes of the usable rows; ``aside`` the positions of the rows set
    aside at load; ``covariates`` over all rows."""
    rows = int(ids.size)
    names = text_list([response_name]) + text_list(list(factor_names)) + text_list(list(covariates))
    if ids.dtype.kind in "iu":
        kind, id_arr, id_data = b"i", np.ascontiguousarray(ids, dtype="<i8"), b""
    else:
        kind = b"t"
        id_arr, id_data = id_text_bytes(ids)
    usable: np.ndarray | None = None
    if aside.size:
        mask = np.ones(rows, dtype=bool)
        mask[aside] = False
        usable = np.flatnonzero(mask)
    factors = tuple(_factor(frame[f], np.asarray(codes[f]), len(levels[f]), usable) for f in factor_names)
    return ColumnBytes(names=names, rows=rows, id_kind=kind, ids=id_arr, id_data=id_data, response=_floats(y),
                       factors=factors, covariates=tuple(_floats(v) for v in covariates.values()))
