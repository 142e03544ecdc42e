"""Save and load a study's edit log as JSON, guarded by the data's fingerprint.

File layout (schema 2)::

    {"format": "variance-explorer/study", "schema": 2, "spec": {...},
     "data": {"source", "fingerprint", "fingerprint_method", "rows", "id_source",
              "block_check": {"rows", "digests"}, "level_order": {factor: [label, ...]}},
     "edits": [{"kind": ..., "reason": ..., "at": ..., ...}, ...],
     "position": k, "comparisons": "tukey-kramer",
     "ledger": {"complete": true, "entries": [{"kind", "what", "at", "count", ...}, ...]}}

``fingerprint_method`` names the definition the fingerprint and the block digests follow
(:mod:`~explorer.engine.column_digest`): ``"column-sha256"`` (the columns' bytes) in files
written now; a file without it was written with ``"pandas-row-hash"`` (per-row hashes,
:mod:`~explorer.engine.row_hash`) and is checked that way.
``level_order`` holds, for each factor of at most :data:`MAX_LEVEL_ORDER` levels, its level names in the
order the study was analysed with (a categorical's categories, else numbers by value and text in natural
order: :mod:`~explorer.engine.dataset`). Neither fingerprint sees a categorical's order, yet
'later' contrasts and two-level differences (first - second) follow it, so a load on data whose shared
levels are in another order is refused (:func:`describe_order_mismatch`); files without it load as before.
``row_check`` (tables of at most 1024 rows) holds each row id and a 32-bit digest of its row;
larger tables get ``block_check`` instead: two 8-byte digests (the ids; the whole rows) of
each of 1024 blocks of consecutive rows, so the file's size stops growing with the table.
When the data differ, the blocks whose digests differ say where, and the ids of the rows
there are read from the data given.
``position`` is the undo cursor: edits after it were undone but are kept for redo.
``ledger`` is the whole record (:mod:`.ledger`): every edit made, undone ones included
(also those a later edit replaced on the redo branch), every undo, redo, reset,
specification choice and search, each with its time; the disclosure is computed from it.
Schema 1 had ``searches`` (``[{"what", "count"}]``) instead of ``ledger`` and no
``comparisons``; such files still load, with a ledger rebuilt from what they hold and
marked incomplete (:data:`~.ledger.OLDER_FILE_NOTE`).
The published JSON Schema of each format and version ships in ``explorer/schemas``;
:func:`read_study_file` checks a file against it before anything uses the file.
"""

from __future__ import annotations

import base64
import binascii
import json
import stat
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from ..engine.column_digest import COLUMN_SHA256, PANDAS_ROW_HASH
from ..engine.dataset import Dataset, decode_digests, encode_digests
from ..engine.edits import Edit, check_utc_time, edit_from_dict
from ..engine.errors import ReplayError, preview
from ..engine.row_hash import BLOCKS, block_bounds
from ..engine.spec import ModelSpec
from .ledger import Ledger
from .schema_check import SCHEMA_FILES, first_violation, load_schema

__all__ = ["FORMAT", "MAX_DEPTH", "MAX_LEVEL_ORDER", "MAX_STUDY_FILE_BYTES", "SCHEMA", "check_ledger",
           "check_study_doc", "describe_mismatch", "describe_order_mismatch", "edits_from_doc", "fingerprint_method",
           "ledger_from_doc", "level_order", "parse_study_json", "read_study_file", "study_to_dict"]

FORMAT = "variance-explorer/study"
SCHEMA = 2
#: Factors with more levels than this have no ``data.level_order`` entry (the schema's bound on each list).
MAX_LEVEL_ORDER = 1000


def study_to_dict(dataset: Dataset, spec: ModelSpec, edits: list[Edit], position: int, ledger: Ledger,
                  comparisons: str = "tukey-kramer") -> dict[str, Any]:
    check = _row_check(dataset)  # first: the block digests and the fingerprint then share one read of the columns
    return {
        "format": FORMAT,
        "schema": SCHEMA,
        "spec": spec.to_dict(),
        "data": {
            "source": dataset.source,
            "fingerprint": dataset.fingerprint_by(COLUMN_SHA256),
            "fingerprint_method": COLUMN_SHA256,
            "rows": int(len(dataset.table)),
            "id_source": dataset.id_source,
            "id_column": dataset.id_column,
            **check,
            **({"level_order": order} if (order := level_order(dataset, spec)) else {}),
        },
        "edits": [e.to_dict() for e in edits],
        "position": position,
        "comparisons": comparisons,
        "ledger": ledger.to_dict(),
    }


def level_order(dataset: Dataset, spec: ModelSpec) -> dict[str, list[str]]:
    """Each of the model's factors (blocks and subject too) with its level names in the order the analysis uses
    (factors of at most MAX_LEVEL_ORDER levels)."""
    return {f: list(dataset.levels[f]) for f in spec.columns
            if f in dataset.levels and len(dataset.levels[f]) <= MAX_LEVEL_ORDER}


def _row_check(dataset: Dataset) -> dict[str, Any]:
    """A digest per row id for tables of at most :data:`~explorer.engine.row_hash.BLOCKS` rows (a mismatch names
    each row), else digests of that many blocks of rows (the file's size stops growing with the table)."""
    if len(dataset.table) <= BLOCKS:
        return {"row_check": encode_digests(dataset.all_row_ids, dataset.row_digests)}
    return {"block_check": {"rows": int(len(dataset.table)),
                            "digests": base64.b64encode(dataset.block_digests_by(COLUMN_SHA256).astype("<u8").tobytes())
                            .decode()}}


def ledger_from_doc(doc: dict[str, Any], edits: list[Edit], position: int) -> Ledger:
    """The saved ledger (schema 2), or for a schema-1 file one rebuilt from its log and searches."""
    if "ledger" in doc:
        return Ledger.from_dict(doc["ledger"], "ledger")  # checked with the file (check_study_doc)
    return Ledger.from_older_file(edits, position, doc.get("searches", []))


def check_ledger(ledger: Ledger, logged: int, position: int, name: str = "the study file") -> None:
    """Refuse a ledger that records fewer edits or undos than the edit log shows (it would understate the search)."""
    if ledger.edits_made < logged:
        raise ReplayError(f"{name}: ledger: records {ledger.edits_made} edit(s) made but the edit log holds {logged}; "
                          "the file's history is incomplete or was altered")
    if ledger.undos - ledger.redos < logged - position:
        raise ReplayError(f"{name}: ledger: records {ledger.undos} undo(s) and {ledger.redos} redo(s), too few for the "
                          f"{logged - position} undone edit(s) in the log; the file's history was altered")


#: A study file larger than this is refused before it is read (row ids and digests of ~20 million rows).
MAX_STUDY_FILE_BYTES = 512 * 1024 * 1024
#: Lists and objects nested deeper than this are refused (the schemas need 5 levels).
MAX_DEPTH = 32


def read_study_file(path: str | Path, format_marker: str = FORMAT) -> dict[str, Any]:
    """The saved study at ``path`` as a dict, checked against its shipped JSON Schema before use.

    Every problem is a :class:`ReplayError` naming the file and, for content, the field
    (``edits[2].reason: must be text (a string), not a whole number``): a missing file,
    a folder or other non-file, an oversize file, bytes that are not UTF-8, invalid or
    too deeply nested JSON, another format, a newer schema, and any break of the schema
    (types, missing keys, negative counts, times that are not ISO 8601 UTC, digests
    that are not base64 of whole 32-bit words, an undo position past the log).
    """
    p = Path(path)
    name = f"study file {p.name!r}"
    try:
        info = p.stat()
    except FileNotFoundError:
        raise ReplayError(f"no saved study at {str(p)!r}") from None
    except OSError as exc:
        raise ReplayError(f"cannot read the study file {str(p)!r}: {exc.strerror or exc}") from None
    if stat.S_ISDIR(info.st_mode):
        raise ReplayError(f"{str(p)!r} is a folder; give the path of a study file (*.study.json)")
    if not stat.S_ISREG(info.st_mode):
        raise ReplayError(f"{str(p)!r} is not a regular file (a device, pipe or socket); give a study file")
    if info.st_size > MAX_STUDY_FILE_BYTES:
        raise ReplayError(f"{name} is {info.st_size / 2**20:.0f} MiB, more than the "
                          f"{MAX_STUDY_FILE_BYTES // 2**20} MiB a study file may have; it is not a study file")
    try:
        with open(p, "rb") as fh:
            raw = fh.read(MAX_STUDY_FILE_BYTES + 1)
    except OSError as exc:
        raise ReplayError(f"cannot read the study file {str(p)!r}: {exc.strerror or exc}") from None
    if len(raw) > MAX_STUDY_FILE_BYTES:
        raise ReplayError(f"{name} grew past {MAX_STUDY_FILE_BYTES // 2**20} MiB while it was read")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ReplayError(f"{name} is not UTF-8 text (byte {exc.start} is 0x{raw[exc.start]:02x}); "
                          "it may be a binary file or another encoding") from None
    doc = parse_study_json(text, name)
    return check_study_doc(doc, format_marker, name)


def _refuse_constant(token: str) -> Any:
    raise ValueError(f"{token} is not a JSON number")


def parse_study_json(text: str, name: str = "the study file") -> Any:
    """JSON text to Python values; NaN/Infinity, bad syntax and deep nesting become ReplayError."""
    try:
        doc = json.loads(text, parse_constant=_refuse_constant)
    except json.JSONDecodeError as exc:
        raise ReplayError(f"{name} is not valid JSON (line {exc.lineno}, column {exc.colno}): {exc.msg}") from None
    except ValueError as exc:
        raise ReplayError(f"{name} is not valid JSON: {exc}") from None
    except RecursionError:
        raise ReplayError(f"{name}: lists or objects are nested too deeply to be a study file") from None
    where = _too_deep(doc)
    if where is not None:
        raise ReplayError(f"{name}: {where or 'the file'}: lists or objects nested more than {MAX_DEPTH} deep; "
                          "a study file needs far fewer")
    return doc


def _too_deep(doc: Any) -> str | None:
    """The path of the first value nested deeper than MAX_DEPTH, else None (iterative: no recursion).

    Only containers are visited; paths are spelled out only once a value is found too deep.
    """
    stack: list[tuple[Any, int]] = [(doc, 0)] if isinstance(doc, (dict, list)) else []  # a bare value: not deep
    while stack:
        value, depth = stack.pop()
        if depth > MAX_DEPTH:
            return _path_to(doc, value)
        children = value.values() if isinstance(value, dict) else value
        stack.extend((v, depth + 1) for v in children if isinstance(v, (dict, list)))
    return None


def _path_to(doc: Any, target: Any) -> str:
    """The path (``edits[0].rows[0]...``) from ``doc`` to the object ``target`` (by identity)."""
    stack: list[tuple[Any, str]] = [(doc, "")]
    while stack:
        value, where = stack.pop()
        if value is target:
            return where
        items = value.items() if isinstance(value, dict) else enumerate(value)
        for k, v in items:
            if isinstance(v, (dict, list)):
                stack.append((v, f"{where}[{k}]" if isinstance(k, int) else (f"{where}.{k}" if where else str(k))))
    return ""


def check_study_doc(doc: Any, format_marker: str = FORMAT, name: str = "the study file") -> dict[str, Any]:
    """``doc`` if it is a valid study of ``format_marker`` (schema, then the checks a schema cannot state)."""
    if not isinstance(doc, dict) or doc.get("format") != format_marker:
        raise ReplayError(f"{name} is not a saved study of this kind (no format marker {format_marker!r})")
    version = doc.get("schema")
    if isinstance(version, bool) or not isinstance(version, int) or version < 1:
        raise ReplayError(f"{name}: schema: must be a whole number from 1, not {version!r}"[:300])
    known = sorted(v for (f, v) in SCHEMA_FILES if f == format_marker)
    if version > known[-1]:
        raise ReplayError(f"{name} uses schema {version}, newer than this kit reads ({known[-1]}); upgrade the kit")
    if version not in known:
        raise ReplayError(f"{name} uses schema {version}, which this kit cannot read (it reads {known})")
    base = load_schema(format_marker, version)["$id"]
    problem = first_violation(doc, load_schema(format_marker, version), base)
    if problem is not None:
        raise ReplayError(f"{name}: {problem}")
    position = doc.get("position", len(doc["edits"]))
    if position > len(doc["edits"]):
        raise ReplayError(f"{name}: position: {position} is past the end of the edit log ({len(doc['edits'])} edits)")
    for i, edit in enumerate(doc["edits"]):
        check_utc_time(edit["at"], f"{name}: edits[{i}].at")
    if "ledger" in doc:  # its times, each edit's saved form, and counts that cover the log
        check_ledger(Ledger.from_dict(doc["ledger"], f"{name}: ledger"), len(doc["edits"]), position, name)
    blocks = doc["data"].get("block_check")
    if blocks is not None:
        raw = _base64_field(blocks["digests"], f"{name}: data.block_check.digests")
        expected = 16 * (len(block_bounds(blocks["rows"])) - 1)
        if len(raw) != expected:
            raise ReplayError(f"{name}: data.block_check.digests: holds {len(raw)} bytes, not the {expected} of "
                              f"{expected // 16} blocks of {blocks['rows']} rows")
    _check_level_order(doc, name)
    check = doc["data"].get("row_check")
    if check is not None:
        raw = _base64_field(check["digests"], f"{name}: data.row_check.digests")
        if len(raw) != 4 * len(check["ids"]):
            raise ReplayError(f"{name}: data.row_check.digests: holds {len(raw)} bytes, not 4 for each of the "
                              f"{len(check['ids'])} row ids")
    return doc


def _check_level_order(doc: dict[str, Any], name: str) -> None:
    """``data.level_order`` (types and sizes already checked by the schema): known factors, no repeated level."""
    order = doc["data"].get("level_order")
    if order is None:
        return
    spec = doc["spec"]
    known = [*spec["factors"], *spec.get("blocks", []), *([spec["subject"]] if "subject" in spec else [])]
    for factor, labels in order.items():
        if factor not in known:
            raise ReplayError(f"{name}: data.level_order: {factor[:60]!r} is not a factor of the model "
                              f"({preview(known)})")
        seen: set[str] = set()
        for label in labels:
            if label in seen:
                raise ReplayError(f"{name}: data.level_order.{factor[:60]}: level {label[:60]!r} appears twice")
            seen.add(label)


def describe_order_mismatch(doc: dict[str, Any], dataset: Dataset, name: str = "the study file") -> str | None:
    """``None`` when each factor's levels shared by the file's ``data.level_order`` and ``dataset`` are in the same
    order (or the file has no such field), else a sentence naming the factor, both orders and the fix."""
    for factor, saved in doc["data"].get("level_order", {}).items():
        if factor not in dataset.levels:
            continue
        now = list(dataset.levels[factor])
        now_set, saved_set = set(now), set(saved)
        then_shared = [x for x in saved if x in now_set]
        now_shared = [x for x in now if x in saved_set]
        if then_shared == now_shared:
            continue
        k = next(i for i, (a, b) in enumerate(zip(then_shared, now_shared)) if a != b)
        short = len(then_shared) <= 12
        target = repr(then_shared) if short else "order"
        categorical = isinstance(dataset.table[factor].dtype, pd.CategoricalDtype)
        fix = (f"df[{factor!r}] = df[{factor!r}].cat.reorder_categories({target})" if categorical
               else f"df[{factor!r}] = df[{factor!r}].astype(pd.CategoricalDtype({target}))")
        if not short:
            fix += f", with order the list data.level_order[{factor!r}] of {name}"
        return (f"{name}: data.level_order: factor {factor!r} was analysed with its levels in the order "
                f"[{preview(then_shared)}], but the data given have them in the order [{preview(now_shared)}] "
                f"(level {k + 1}: {then_shared[k]!r} then, {now_shared[k]!r} now). 'Later' contrasts, two-level "
                "differences (first - second) and the order of tables follow this order, so the numbers would "
                "change without any other sign. Put the levels in the saved order and load again, e.g. "
                f"{fix}")
    return None


def _base64_field(text: str, field: str) -> bytes:
    """The bytes of a base64 field of a study file, or a ReplayError naming the field."""
    try:
        return base64.b64decode(text, validate=True)
    except (binascii.Error, ValueError) as exc:
        raise ReplayError(f"{field}: not valid base64 ({exc})") from None


def edits_from_doc(doc: dict[str, Any]) -> list[Edit]:
    out = []
    for i, d in enumerate(doc["edits"]):
        try:
            out.append(edit_from_dict(d))
        except (TypeError, ValueError) as exc:
            raise ReplayError(f"edit {i + 1} in the saved log cannot be read: {exc}") from None
    return out


def fingerprint_method(data: dict[str, Any]) -> str:
    """The definition a saved ``data`` section's fingerprint follows (files without the field: the first one)."""
    method = data.get("fingerprint_method", PANDAS_ROW_HASH)
    return str(method)


def describe_mismatch(doc: dict[str, Any], dataset: Dataset) -> str | None:
    """``None`` when the fingerprints match (by the definition the file names), else a sentence on what differs."""
    data = doc["data"]
    method = fingerprint_method(data)
    if data.get("fingerprint") == dataset.fingerprint_by(method):
        return None
    if "block_check" in data:
        return _describe_blocks(data, dataset, method)
    saved = decode_digests(data["row_check"]) if "row_check" in data else {}
    now = {i: int(d) for i, d in zip([x for x in dataset.all_row_ids.tolist()], dataset.row_digests.tolist())}
    missing = [r for r in saved if r not in now]
    added = [r for r in now if r not in saved]
    changed = [r for r in saved if r in now and saved[r] != now[r]]
    parts = [f"the data differ from those the log was saved on ({data.get('rows')} rows then, {len(dataset.table)} now)"]
    if missing:
        parts.append(f"rows missing now: {preview(missing)}")
    if added:
        parts.append(f"rows not in the saved data: {preview(added)}")
    if changed:
        parts.append(f"rows whose values changed: {preview(changed)}")
    if not (missing or added or changed):
        parts.append("the response or factor columns differ")
    return "; ".join(parts)


def _describe_blocks(data: dict[str, Any], dataset: Dataset, method: str) -> str:
    """What differs, from the saved block digests and those of the data given (rows read from the data)."""
    rows_then, rows_now = int(data["block_check"]["rows"]), int(len(dataset.table))
    raw = base64.b64decode(data["block_check"]["digests"])
    saved = np.frombuffer(raw, dtype="<u8").reshape(-1, 2)
    parts = [f"the data differ from those the log was saved on ({data.get('rows', rows_then)} rows then, {rows_now} now)"]
    if rows_then != rows_now:
        now = dataset.block_digests_by(method)
        same = 0
        while same < min(len(saved), len(now)) and bool(np.all(saved[same] == now[same])):
            same += 1
        if same and len(saved) == len(now):
            start = int(block_bounds(rows_now)[same])
            parts.append(f"the first {start} rows (positions 0..{start - 1}) are as saved")
        return "; ".join(parts)
    now = dataset.block_digests_by(method)
    bounds = block_bounds(rows_now)
    ids_differ = [b for b in range(len(now)) if saved[b, 0] != now[b, 0]]
    values_differ = [b for b in range(len(now)) if saved[b, 0] == now[b, 0] and saved[b, 1] != now[b, 1]]
    ids = dataset.all_row_ids

    def where(blocks: list[int]) -> str:
        spans = [f"{_py_id(ids[int(bounds[b])])}..{_py_id(ids[int(bounds[b + 1]) - 1])}" for b in blocks[:4]]
        more = f" and {len(blocks) - 4} more blocks" if len(blocks) > 4 else ""
        return ", ".join(spans) + more

    if ids_differ:
        parts.append(f"row ids differ within the rows now named {where(ids_differ)}")
    if values_differ:
        parts.append(f"values changed within the rows {where(values_differ)}")
    if not (ids_differ or values_differ):
        parts.append("the response or factor columns differ")
    return "; ".join(parts)


def _py_id(v: Any) -> Any:
    return v.item() if isinstance(v, np.generic) else v
