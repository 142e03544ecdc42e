"""The user's table, copied once and never changed: stable row ids, clean codes, provenance.

A :class:`Dataset` is built once per study. It sets aside rows that cannot enter the
analysis (missing response or factor value) with the reason for each, turns every
factor into integer codes with string level names, and keeps the response shifted by
an exact offset (see :mod:`.decimal_shift`). Its fingerprint guards replays of a saved
edit log.
"""

from __future__ import annotations

import base64
import hashlib
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Union

import numpy as np
import pandas as pd

from ..formatting import measurement_decimals
from .column_digest import COLUMN_SHA256, FINGERPRINT_METHODS, PANDAS_ROW_HASH, ColumnBytes, column_bytes
from .decimal_shift import shift_float, shift_text
from .errors import ColumnError, DataError, EditError, closest_names, preview
from .loading import read_table
from .numerics import read_only
from .response_unit import rescale, safe_unit, unit_exponent, unit_note
from .row_hash import block_digests, row_hashes
from .table_checks import check_response_values, column_names, decimal_comma_hint, refuse_text_collisions, text_columns

__all__ = ["Dataset", "RowHashes", "SetAsideRow", "RowId",
           "build_dataset", "id_array", "level_label", "natural_key", "decode_digests", "encode_digests"]

RowId = Union[int, str]

_COPY_ON_WRITE = int(pd.__version__.split(".")[0]) >= 3

_INT_TEXT = re.compile(r"-?(?:0|[1-9][0-9]*)", re.ASCII)  # how an integer id prints; '01', '+1', ' 1' are not ids


@dataclass(frozen=True)
class SetAsideRow:
    """A row that could not enter the analysis, and why."""

    row: RowId
    reason: str


def natural_key(s: str) -> tuple[object, ...]:
    return tuple(int(t) if t.isdecimal() else t.lower() for t in re.split(r"(\d+)", s))


def _level_order(col: pd.Series, values: pd.Series, labels: list[str]) -> tuple[list[str], list[str]]:
    """Level names in display order, and any unused categorical levels (``values``: the column's distinct
    values, ``labels`` their level names)."""
    present = list(dict.fromkeys(labels))
    unused: list[str] = []
    if isinstance(col.dtype, pd.CategoricalDtype):
        cats = [str(c) for c in col.cat.categories]
        present_set = set(present)
        unused = [c for c in cats if c not in present_set]
        return [c for c in cats if c in present_set], unused
    if pd.api.types.is_numeric_dtype(col.dtype) and not pd.api.types.is_bool_dtype(col.dtype):
        nums = sorted({(float(v), s) for v, s in zip(values, labels)})
        seen: list[str] = []
        for _, s in nums:
            if s not in seen:
                seen.append(s)
        return seen, unused
    return sorted((str(p) for p in present), key=natural_key), unused


def level_label(v: object) -> str:
    if isinstance(v, (float, np.floating)) and float(v).is_integer():
        return str(int(v))
    return str(v)


@dataclass(frozen=True, kw_only=True, eq=False)
class Dataset:
    """An immutable, analysis-ready copy of the user's table.

    Attributes
    ----------
    table : the table as loaded (a private copy; all rows, set-aside ones included).
    response, factors : the column names in use.
    row_ids : ids of the usable rows, in table order (``all_row_ids``: of every row). Held as ``ids`` and
        ``all_ids``: a ``range`` when the ids are row positions or a RangeIndex (no array of n ids is made
        unless ``row_ids`` or ``all_row_ids`` is read; ``ids_at`` and the id look-ups work on the range).
    y : response of the usable rows minus ``offset`` (read-only float64), in units of
        ``2**unit_exponent`` (0, i.e. the response's own unit, unless its squares would
        overflow or underflow; see :mod:`.response_unit`). ``offset`` is in the same unit,
        ``offset_text`` is the offset in the response's own unit.
    codes, levels : per factor, integer codes of the usable rows and the level names.
    set_aside : rows left out at load, each with its reason.
    id_source : ``"index"`` when the table's index gave the ids, ``"column 'x'"`` when an id
        column did, ``"position"`` otherwise.
    """

    table: pd.DataFrame
    response: str
    factors: tuple[str, ...]
    ids: np.ndarray | range
    y: np.ndarray
    offset: float
    offset_text: str
    codes: Mapping[str, np.ndarray]
    levels: Mapping[str, tuple[str, ...]]
    set_aside: tuple[SetAsideRow, ...]
    id_source: str
    source: str
    all_ids: np.ndarray | range
    #: The rows' hashes behind ``fingerprint``, ``row_digests`` and ``block_digests``, made when first read.
    hashes: RowHashes | None = field(default=None, repr=False)
    id_column: str | None = None
    notes: tuple[str, ...] = field(default=())
    unit_exponent: int = 0
    #: The transform the response holds (see :mod:`.transforms`), and the dataset as measured when not 'none'.
    transform: str | float = "none"
    untransformed: Dataset | None = field(default=None, repr=False)
    #: Numeric covariates of the usable rows (read-only float64), by column name.
    covariates: Mapping[str, np.ndarray] = field(default_factory=dict)
    _positions: dict[str, Any] = field(default_factory=dict, repr=False)  # id lookup, built on first use
    _memo: dict[str, int | None] = field(default_factory=dict, repr=False)  # derived once from the frozen data

    @property
    def fingerprint(self) -> str:
        """The fingerprint by the first definition (``"pandas-row-hash"``, a hash of every row's text).

        Kept for replay code written before study files named their definition: such code
        asserts ``study.dataset.fingerprint == <saved value>`` and must still pass on the same
        data. Everything the kit writes or compares now uses ``fingerprint_by("column-sha256")``,
        which is several times cheaper on large tables.
        """
        return self._hashes().fingerprint_by(PANDAS_ROW_HASH)

    @property
    def column_fingerprint(self) -> str:
        """32 hexadecimal digits of SHA-256 over the names, the row count and the columns' bytes
        (:mod:`.column_digest`): what a study file saved now is checked against."""
        return self._hashes().fingerprint_by(COLUMN_SHA256)

    def fingerprint_by(self, method: str) -> str:
        """The fingerprint by a named definition (:data:`.column_digest.FINGERPRINT_METHODS`; older study
        files were written with ``"pandas-row-hash"``)."""
        return self._hashes().fingerprint_by(method)

    @property
    def row_digests(self) -> np.ndarray:
        """The low 32 bits of every row's hash (:mod:`.row_hash`; all rows, set-aside ones included)."""
        return self._hashes().row_digests

    @property
    def block_digests(self) -> np.ndarray:
        """Per block of consecutive rows (:mod:`.column_digest`): digests of the ids and of the whole rows."""
        return self._hashes().block_digests

    def block_digests_by(self, method: str) -> np.ndarray:
        """The per-block digests by a named definition (as :meth:`fingerprint_by`)."""
        return self._hashes().block_digests_by(method)

    def _hashes(self) -> RowHashes:
        if self.hashes is None:
            raise DataError("this dataset was built without its rows' hashes")
        return self.hashes

    @property
    def n(self) -> int:
        return int(self.y.size)

    @property
    def row_ids(self) -> np.ndarray:
        """Ids of the usable rows (read-only; made from the range when first read, then kept)."""
        return self._id_array("row_ids", self.ids)

    @property
    def all_row_ids(self) -> np.ndarray:
        """Ids of every row, set-aside ones included (read-only; as ``row_ids``)."""
        return self._id_array("all_row_ids", self.all_ids)

    def _id_array(self, key: str, ids: np.ndarray | range) -> np.ndarray:
        if not isinstance(ids, range):
            return ids
        made = self._positions.get(key)
        if made is None:
            made = self._positions[key] = read_only(id_array(ids))
        out: np.ndarray = made
        return out

    def ids_at(self, positions: np.ndarray) -> np.ndarray:
        """Ids of the usable rows at ``positions`` (integers; computed from the range when the ids are one)."""
        ids = self.ids
        if isinstance(ids, range):
            return ids.start + ids.step * np.asarray(positions, dtype=np.int64)
        out: np.ndarray = ids[positions]
        return out

    @property
    def y_original(self) -> np.ndarray:
        return self.y + self.offset

    def reading_decimals(self) -> int | None:
        """Decimals the response was recorded with (0.1 µm steps: 1), from the usable rows as read;
        ``None`` when the readings have no fixed decimal step. Shown numbers follow it
        (:mod:`explorer.formatting`)."""
        if "decimals" not in self._memo:
            col = self.table[self.response]
            raw = (col.to_numpy() if col.dtype == np.float64  # the column itself, no copy
                   else pd.to_numeric(col, errors="coerce").to_numpy(dtype=float, na_value=np.nan))
            self._memo["decimals"] = measurement_decimals(raw)
        return self._memo["decimals"]

    def positions(self, rows: Iterable[RowId] | RowId) -> np.ndarray:
        """Positions (among usable rows) of the given row ids; clear error for unknown ids.

        Looked up without a per-row table: integer ids by binary search over the ids in
        order (no copy when they are already increasing, as positions and ranges are),
        text ids through one hashed index built on first use.
        """
        if isinstance(rows, (str, int, np.integer)):
            rows = [rows]
        keys = [_py(r) for r in rows]
        found = self._find(keys)
        if not found.size or found.min() >= 0:
            return found
        missing: list[RowId] = []
        aside: list[RowId] = []
        set_aside_ids = {s.row for s in self.set_aside}
        for key, pos in zip(keys, found.tolist()):
            if pos < 0:
                (aside if key in set_aside_ids else missing).append(key)
        if aside:
            raise EditError(f"rows {preview(aside)} were set aside when the data were loaded (see study.set_aside)")
        if missing:
            sample = preview(self.ids_at(np.arange(min(self.n, 5))).tolist(), 5)
            raise EditError(f"no rows with ids {preview(missing)}; row ids look like {sample} ({self.id_source})")
        return found

    def _find(self, keys: list[RowId]) -> np.ndarray:
        """Position of each key among the usable rows, -1 where there is none (an integer's text finds it too)."""
        ids = self.ids
        if isinstance(ids, range):
            ints = [k for k in keys if type(k) is int]
            if len(ints) == len(keys):  # integer ids in a range: an id's position is arithmetic
                return np.array([ids.index(k) if k in ids else -1 for k in ints], dtype=np.int64)
        if isinstance(ids, range) or ids.dtype.kind in "iu":
            wanted = np.array([k if isinstance(k, int) else int(k) if _INT_TEXT.fullmatch(k) else 0 for k in keys],
                              dtype=object)
            usable = np.array([isinstance(k, int) or bool(_INT_TEXT.fullmatch(k)) for k in keys], dtype=bool)
            usable &= np.array([-(2**63) <= int(w) < 2**63 for w in wanted], dtype=bool)
            w = np.where(usable, wanted, 0).astype(np.int64)
            if isinstance(ids, range):  # position = (id - start) / step when that is a whole number in range
                off = w - ids.start
                pos = off // ids.step
                hit = usable & (off % ids.step == 0) & (pos >= 0) & (pos < len(ids))
                return np.where(hit, pos, -1).astype(np.int64)
            order = self._id_order()
            sorted_ids = ids if order is None else ids[order]
            at = np.minimum(np.searchsorted(sorted_ids, w), max(ids.size - 1, 0))
            hit = usable & (ids.size > 0) & (sorted_ids[at] == w)
            pos = at if order is None else order[at]
            return np.where(hit, pos, -1).astype(np.int64)
        index = self._positions.get("index")
        if index is None:
            index = self._positions["index"] = pd.Index(ids)
        direct = np.asarray(index.get_indexer(pd.Index(keys, dtype=object)), dtype=np.int64)
        return direct

    def _id_order(self) -> np.ndarray | None:
        """``None`` when integer ids are increasing (the common case), else the order that sorts them (kept)."""
        if "order" not in self._positions:
            ids = self.row_ids
            self._positions["order"] = None if bool(np.all(ids[1:] > ids[:-1])) else np.argsort(ids, kind="stable")
        order: np.ndarray | None = self._positions["order"]
        return order

    def row_id(self, position: int) -> RowId:
        return _py(self.ids[position])

    def describe_ids(self) -> str:
        if self.id_source == "index":
            index = self.table.index
            if isinstance(index, pd.RangeIndex) and index.start == 0 and index.step == 1:
                return ("rows are named by their 0-based position among the data rows (row 0 is the first row "
                        "under the header); name an id column to use its values instead")
            return "row ids are the table's index labels"
        if self.id_source.startswith("column"):
            return f"row ids are the values of {self.id_source}"
        return "row ids are row positions 0..n-1 (the table's index was not unique or not usable as ids)"


def id_array(ids: np.ndarray | range) -> np.ndarray:
    """Row ids as an array (int64 for a range)."""
    if isinstance(ids, range):
        return np.arange(ids.start, ids.stop, ids.step, dtype=np.int64)
    return ids


def _py(v: object) -> RowId:
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, (int, str)):
        return v
    return str(v)


def factorize(col: pd.Series) -> tuple[np.ndarray, Any]:
    """Integer codes of a column (-1 where missing) and its distinct values, in order of first appearance.

    As ``pd.factorize``; an Arrow-backed text column without missing values is encoded by Arrow's
    dictionary encoding, whose 32-bit codes are read without the 64-bit copy pandas makes.
    """
    if isinstance(col.dtype, pd.StringDtype) and col.dtype.storage == "pyarrow" and not col.hasnans:
        import pyarrow as pa
        import pyarrow.compute as pc

        chunked = col.array.__arrow_array__()  # the Arrow data itself (the Arrow interchange protocol)
        if chunked.num_chunks == 1:  # codes from the system allocator: freed when let go, not kept by a pool
            encoded = pc.dictionary_encode(chunked.chunk(0), memory_pool=pa.system_memory_pool())
            codes: np.ndarray = encoded.indices.to_numpy(zero_copy_only=False)
            return codes, encoded.dictionary.to_numpy(zero_copy_only=False)
    raw, uniques = pd.factorize(col, sort=False)
    return raw, uniques


def _id_index(frame: pd.DataFrame, id_column: str, response: str, factors: Sequence[str]) -> pd.Index:
    """The id column as an index; clear errors when it is missing, repeated or incomplete."""
    if id_column not in frame.columns:
        near = closest_names(id_column, [str(c) for c in frame.columns])
        hint = f" Did you mean {near[0]!r}?" if near else ""
        raise ColumnError(f"id column {id_column!r} is not in the table.{hint}")
    if id_column == response or id_column in factors:
        raise ColumnError(f"column {id_column!r} cannot be both the row id and the response or a factor")
    col = frame[id_column]
    if col.isna().any():
        rows = [int(i) for i in np.flatnonzero(col.isna().to_numpy())]
        raise DataError(f"id column {id_column!r} is empty in rows (positions) {preview(rows)}; every row needs an id")
    text = col.map(str)
    blank = text.str.strip() == ""
    if blank.any():
        rows = [int(i) for i in np.flatnonzero(blank.to_numpy())]
        raise DataError(f"id column {id_column!r} is blank in rows (positions) {preview(rows)}; every row needs an id")
    dup = col[col.duplicated(keep=False)]
    if len(dup):
        raise DataError(
            f"id column {id_column!r} repeats ids {preview(sorted({str(v) for v in dup}))}; ids must be unique "
            "(leave id_column out to use row positions)"
        )
    same = text[text.duplicated(keep=False)]
    if len(same):
        first = same.iloc[0]
        where = np.flatnonzero((text == first).to_numpy())
        shown = " and ".join(f"{col.iloc[int(i)]!r} (position {int(i)})" for i in where[:4])
        raise DataError(
            f"id column {id_column!r} has ids that read the same as text {first!r}: {shown} "
            f"(positions {', '.join(str(int(i)) for i in where[:8])}); make the ids one type, e.g. "
            f"df[{id_column!r}] = df[{id_column!r}].astype(str), after making them unique"
        )
    return pd.Index(col.to_numpy(), name=None)


def _resolve_columns(frame: pd.DataFrame, response: str, factors: Sequence[str]) -> None:
    cols = [str(c) for c in frame.columns]
    for role, name in [("response", response)] + [("factor", f) for f in factors]:
        if name not in frame.columns:
            near = closest_names(name, cols)
            hint = f" Did you mean {', '.join(repr(n) for n in near)}?" if near else ""
            raise ColumnError(f"{role} column {name!r} is not in the table.{hint} Columns: {preview(cols, 12)}")
    if response in factors:
        raise ColumnError(f"column {response!r} is named as both the response and a factor; pick one role")
    if len(set(factors)) != len(factors):
        raise ColumnError(f"a factor is named twice in {list(factors)}")


def build_dataset(
    data: pd.DataFrame | str | Path,
    response: str,
    factors: Sequence[str],
    id_column: str | None = None,
    covariates: Sequence[str] = (),
) -> Dataset:
    """Copy and validate the table; see :class:`Dataset`.

    ``id_column`` names a column of unique row labels (panel, sample or plot ids) to use
    as row ids instead of the index. ``covariates`` are numeric columns measured on each
    row (analysis of covariance); a row without a value is set aside with the reason.
    """
    response = column_names(response, "response")[0]
    factors = column_names(factors, "factors")
    if id_column is not None:
        id_column = column_names(id_column, "id column")[0]
    texts: dict[str, pd.Series] = {}
    if isinstance(data, (str, Path)):
        source = str(Path(data).name)
        frame, texts = read_table(data, (response,))
    elif isinstance(data, pd.DataFrame):
        source = "DataFrame"
        # pandas 3 copies on write: a shallow copy already behaves as a copy (the caller's later changes copy
        # their side), without doubling the table in memory; older pandas needs the deep copy.
        frame = data.copy(deep=not _COPY_ON_WRITE)
    else:
        raise DataError(f"data must be a pandas DataFrame or a file path, not {type(data).__name__}")
    factors = tuple(factors)
    if not factors:
        raise ColumnError("name at least one factor column (the grouping, e.g. factors='machine')")
    frame, notes = text_columns(frame)
    _resolve_columns(frame, response, factors)

    # Row ids: a named id column, else the index when it is unique and made of ints or strings.
    if id_column is not None:
        frame = frame.set_index(_id_index(frame, id_column, response, factors), drop=False)
    idx = frame.index
    int_index = pd.api.types.is_integer_dtype(idx.dtype)
    blank_index = not int_index and any(isinstance(v, str) and not v.strip() for v in idx)
    usable_index = idx.is_unique and not blank_index and (int_index or all(isinstance(v, str) for v in idx))
    ids: np.ndarray | range
    if id_column is not None:
        ids = np.asarray(idx, dtype=np.int64) if pd.api.types.is_integer_dtype(idx.dtype) else np.asarray(
            [str(v) for v in idx], dtype=object)
        id_source = f"column {id_column!r}"
    elif usable_index:
        ids = (np.asarray([_py(v) for v in idx], dtype=object) if not pd.api.types.is_integer_dtype(idx.dtype)
               else range(idx.start, idx.stop, idx.step) if isinstance(idx, pd.RangeIndex)
               else np.asarray(idx, dtype=np.int64))
        id_source = "index"
    else:
        ids = range(len(frame))
        id_source = "position"
        why = ("not unique" if not idx.is_unique else "made of strings, some of them blank" if blank_index
               else "neither integers nor strings")
        notes.append(f"The table's index is {why}, so rows are identified by position 0..{len(frame) - 1}.")

    # Response: numeric, finite. A float64 column is read where it lies (no copy; copy-on-write keeps it).
    col = frame[response]
    check_response_values(col, response)
    if col.dtype == np.float64:
        yv = col.to_numpy()
    else:
        numeric = pd.to_numeric(col, errors="coerce")
        bad = numeric.isna() & col.notna()
        if bad.any():
            bad_ids = id_array(ids)[np.flatnonzero(bad.to_numpy())].tolist()
            shown = [str(v) for v in col[bad].head(3)]
            raise DataError(
                f"response column {response!r} has non-numeric values in rows {preview(bad_ids)} (e.g. "
                f"{preview(shown, 3)}); fix or remove them, or pick another response.{decimal_comma_hint(shown)}"
            )
        yv = numeric.to_numpy(dtype=np.float64, na_value=np.nan)
        del numeric, bad
    all_finite = bool(np.isfinite(yv.max()) and np.isfinite(yv.min())) if yv.size else True  # NaN propagates
    if not all_finite:
        inf = np.isinf(yv)
        if inf.any():
            raise DataError(
                f"response column {response!r} has infinite values in rows {preview(id_array(ids)[inf].tolist())}; "
                "replace them with real measurements or drop those rows before loading"
            )
        del inf

    # Rows with a missing response, factor or covariate value are set aside with a reason.
    reasons: dict[int, list[str]] = {}
    for i in ([] if all_finite else np.flatnonzero(np.isnan(yv))):
        reasons.setdefault(int(i), []).append(f"missing {response}")
    cov_values = _covariate_values(frame, covariates, response, factors, id_column,
                                    id_array(ids) if covariates else np.empty(0, dtype=np.int64))
    for c, v in cov_values.items():
        for i in np.flatnonzero(np.isnan(v)):
            reasons.setdefault(int(i), []).append(f"missing {c}")
    for f in factors:
        fcol = frame[f]
        for i in np.flatnonzero(fcol.isna().to_numpy()):
            reasons.setdefault(int(i), []).append(f"missing {f}")
        if pd.api.types.is_float_dtype(fcol.dtype) or pd.api.types.is_integer_dtype(fcol.dtype):
            notes.append(f"Factor {f!r} is numeric; each distinct value is treated as a level, not as a quantity.")
    every = not reasons
    usable = np.ones(len(frame), dtype=bool)
    usable[list(reasons)] = False
    set_aside = tuple(SetAsideRow(_py(ids[i]), "; ".join(r)) for i, r in sorted(reasons.items()))
    if set_aside:
        notes.append(f"{len(set_aside)} row(s) set aside at load for missing values (see study.set_aside).")
    if not usable.any():
        counts: dict[str, int] = {}
        for r in reasons.values():
            for why in r:
                counts[why] = counts.get(why, 0) + 1
        worst = [f"{why.removeprefix('missing ')!r} on {'all ' if n == len(frame) else ''}{n} rows"
                 for why, n in sorted(counts.items(), key=lambda kv: -kv[1])[:3]]
        raise DataError(f"every row has a missing {response!r}, factor or covariate value (missing "
                        f"{', '.join(worst)}); nothing to analyse")

    # Exact shift of the response, then an exact power-of-two unit when squares would overflow or underflow.
    if response in texts:
        t = texts[response][usable].str.strip().tolist()
        y, offset, offset_text = shift_text(t)
    else:
        y, offset, offset_text = shift_float(yv if every else yv[usable])
    y, offset, unit = safe_unit(y, offset, yv if every else yv[usable])
    if unit:
        notes.append(unit_note(response, unit))
    y = read_only(np.ascontiguousarray(y, dtype=np.float64))

    codes: dict[str, np.ndarray] = {}
    levels: dict[str, tuple[str, ...]] = {}
    for f in factors:
        fcol = frame[f] if every else frame[f][usable]
        # One factorisation: each distinct value is labelled once, rows get codes from their value's label.
        raw, uniques = factorize(fcol)
        unique_labels = [level_label(u) for u in uniques]
        if fcol.dtype == object:
            labels = pd.Series(np.asarray(unique_labels, dtype=object)[raw], index=fcol.index)
            refuse_text_collisions(fcol, labels, id_array(ids)[usable], f"factor {f!r}")
        order, unused = _level_order(fcol, pd.Series(uniques), unique_labels)
        if unused:
            notes.append(f"Factor {f!r}: unused categories {preview(unused)} are left out.")
        lookup = {lab: i for i, lab in enumerate(order)}
        per_value = np.array([lookup[lab] for lab in unique_labels], dtype=np.int32)
        codes[f], levels[f] = read_only(per_value[raw]), tuple(order)
        del raw

    # All rows usable: the same ids (an array or a range), no copy.
    row_ids = ids if every else read_only(id_array(ids)[usable])
    if not isinstance(ids, range):
        read_only(ids)
    head = f"{response}|{'|'.join(factors)}|{len(frame)}".encode()
    if cov_values:  # files of studies without covariates keep their fingerprints
        head += f"|covariates {'|'.join(cov_values)}".encode()
    hashes = RowHashes(head, ids, response, frame, factors, cov_values, codes, levels, np.flatnonzero(~usable))
    del yv
    kept_cov = {}
    for c, v in cov_values.items():
        kv = np.ascontiguousarray(v[usable])
        e = unit_exponent(float(np.max(np.abs(kv - np.median(kv))))) if kv.size else 0
        if e:  # as for the response: an exact power-of-two unit when squares would overflow or underflow
            kv = rescale(kv, e)
            notes.append(f"Covariate {c!r} in units of 2**{e}: its spread is so far from 1 that squares would "
                         f"{'overflow' if e > 0 else 'underflow'}; its slope is per that unit, F tests and adjusted "
                         "means do not depend on it.")
        kept_cov[c] = read_only(kv)
    return Dataset(
        table=frame,
        response=response,
        factors=factors,
        ids=row_ids,
        y=y,
        offset=offset,
        offset_text=offset_text,
        codes=codes,
        levels=levels,
        set_aside=set_aside,
        id_source=id_source,
        source=source,
        hashes=hashes,
        all_ids=ids,
        id_column=id_column,
        notes=tuple(notes),
        unit_exponent=unit,
        covariates=kept_cov,
    )


class RowHashes:
    """The hashes of a table's rows, computed when first asked for (a build need not wait for them).

    Holds the columns it hashes. Two definitions (:mod:`.column_digest`): ``"column-sha256"``
    over the columns' bytes (what study files are written with) and ``"pandas-row-hash"``
    over per-row hashes (:mod:`.row_hash`; files without ``fingerprint_method``, and the
    per-row digests of small tables); each is computed once, when first read.
    """

    def __init__(self, head: bytes, ids: np.ndarray | range, response: str, frame: pd.DataFrame,
                 factors: Sequence[str],
                 covariates: Mapping[str, np.ndarray], codes: Mapping[str, np.ndarray] | None = None,
                 levels: Mapping[str, Sequence[str]] | None = None, aside: np.ndarray | None = None) -> None:
        self._inputs: tuple[Any, ...] = (head, ids, response, frame, tuple(factors), dict(covariates))
        self._columns = (codes, levels, np.zeros(0, dtype=np.int64) if aside is None else aside)
        self._done: tuple[str, np.ndarray, np.ndarray] | None = None
        self._column_done: tuple[str, np.ndarray | None] | None = None

    def _compute(self) -> tuple[str, np.ndarray, np.ndarray]:
        if self._done is None:
            head, ids, response, frame, factors, covariates = self._inputs
            hashed, id_hashed = row_hashes(id_array(ids), self._response(), frame, factors, covariates)
            fingerprint = hashlib.sha256(head + hashed.tobytes()).hexdigest()[:32]
            digests = read_only((hashed & 0xFFFFFFFF).astype(np.uint32))
            self._done = (fingerprint, digests, read_only(block_digests(hashed, id_hashed)))
        return self._done

    def _response(self) -> np.ndarray:
        frame, response = self._inputs[3], self._inputs[2]
        col = frame[response]
        if col.dtype == np.float64:  # numpy float64: read where it lies (NaN is already its missing value)
            read: np.ndarray = col.to_numpy()
            return read
        y: np.ndarray = pd.to_numeric(col, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
        return y

    def _column_bytes(self) -> ColumnBytes:
        head, ids, response, frame, factors, covariates = self._inputs
        codes, levels, aside = self._columns
        if codes is None or levels is None:
            raise DataError("this dataset was built without its factor codes for the column fingerprint")
        return column_bytes(response, factors, id_array(ids), self._response(), frame, codes, levels, aside, covariates)

    def _column(self, blocks: bool) -> tuple[str, np.ndarray | None]:
        done = self._column_done
        if done is None or (blocks and done[1] is None):
            cols = self._column_bytes()
            done = self._column_done = (cols.fingerprint(), read_only(cols.block_digests()) if blocks else None)
        return done

    def fingerprint_by(self, method: str) -> str:
        """The fingerprint by one of :data:`~.column_digest.FINGERPRINT_METHODS`."""
        if method == COLUMN_SHA256:
            return self._column(False)[0]
        if method == PANDAS_ROW_HASH:
            return self._compute()[0]
        raise DataError(f"no fingerprint method {method!r}; known: {', '.join(FINGERPRINT_METHODS)}")

    def block_digests_by(self, method: str) -> np.ndarray:
        """The per-block digests by one of :data:`~.column_digest.FINGERPRINT_METHODS`."""
        if method == COLUMN_SHA256:
            digests = self._column(True)[1]
            assert digests is not None
            return digests
        if method == PANDAS_ROW_HASH:
            return self._compute()[2]
        raise DataError(f"no fingerprint method {method!r}; known: {', '.join(FINGERPRINT_METHODS)}")

    @property
    def fingerprint(self) -> str:
        """The first definition's fingerprint (see :attr:`Dataset.fingerprint`)."""
        return self.fingerprint_by(PANDAS_ROW_HASH)

    @property
    def row_digests(self) -> np.ndarray:
        return self._compute()[1]

    @property
    def block_digests(self) -> np.ndarray:
        return self.block_digests_by(COLUMN_SHA256)


def _covariate_values(frame: pd.DataFrame, covariates: Sequence[str], response: str, factors: Sequence[str],
                      id_column: str | None, ids: np.ndarray) -> dict[str, np.ndarray]:
    """Each covariate as float64 over all rows (NaN where missing); clear errors for unusable columns."""
    out: dict[str, np.ndarray] = {}
    names = column_names(covariates, "covariates") if isinstance(covariates, str) or covariates else ()
    for c in names:
        if c not in frame.columns:
            near = closest_names(c, [str(x) for x in frame.columns])
            hint = f" Did you mean {', '.join(repr(n) for n in near)}?" if near else ""
            raise ColumnError(f"covariate column {c!r} is not in the table.{hint}")
        if c == response or c in factors or c == id_column:
            raise ColumnError(f"column {c!r} cannot be both a covariate and the response, a factor or the row id")
        if c in out:
            raise ColumnError(f"covariate {c!r} is named twice")
        col = frame[c]
        if pd.api.types.is_bool_dtype(col.dtype) or isinstance(col.dtype, pd.CategoricalDtype):
            raise DataError(f"covariate {c!r} is not a number column ({col.dtype}); a covariate is a quantity measured "
                            "on each row (a grouping belongs in factors= or blocks=)")
        numeric = pd.to_numeric(col, errors="coerce")
        bad = numeric.isna() & col.notna()
        if bad.any():
            bad_ids = ids[np.flatnonzero(bad.to_numpy())].tolist()
            shown = [str(v) for v in col[bad].head(3)]
            raise DataError(f"covariate {c!r} has non-numeric values in rows {preview(bad_ids)} (e.g. {preview(shown, 3)})"
                            f"; a covariate is a number measured on each row.{decimal_comma_hint(shown)}")
        v = numeric.to_numpy(dtype=np.float64, na_value=np.nan)
        if np.isinf(v).any():
            raise DataError(f"covariate {c!r} has infinite values in rows {preview(ids[np.isinf(v)].tolist())}")
        out[c] = v
    return out



def encode_digests(ids: np.ndarray, digests: np.ndarray) -> dict[str, Any]:
    """Compact per-row digests for a saved file (ids as a list, digests base64)."""
    return {"ids": [_py(i) for i in ids.tolist()], "digests": base64.b64encode(digests.astype("<u4").tobytes()).decode()}


def decode_digests(blob: dict[str, Any]) -> dict[RowId, int]:
    raw = np.frombuffer(base64.b64decode(blob["digests"]), dtype="<u4")
    return {(_py(i)): int(d) for i, d in zip(blob["ids"], raw)}


# The names these had before they were shared between modules; kept for code written against them, removed in the
# next release.
_label = level_label
_natural_key = natural_key
