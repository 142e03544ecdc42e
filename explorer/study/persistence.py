"""Save and load a study's edit log as JSON, guarded by the data's fingerprint.

File layout (schema 1)::

    {"format": "variance-explorer/study", "schema": 1, "spec": {...},
     "data": {"source", "fingerprint", "rows", "id_source", "row_check": {"ids", "digests"}},
     "edits": [{"kind": ..., "reason": ..., "at": ..., ...}, ...],
     "position": k, "searches": [...]}

``position`` is the undo cursor: edits after it were undone but are kept for redo.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from ..engine.dataset import Dataset, decode_digests, encode_digests
from ..engine.edits import Edit, edit_from_dict
from ..engine.errors import ReplayError, preview
from ..engine.spec import ModelSpec

FORMAT = "variance-explorer/study"
SCHEMA = 1


def study_to_dict(dataset: Dataset, spec: ModelSpec, edits: list[Edit], position: int, searches: list[dict]) -> dict[str, Any]:
    return {
        "format": FORMAT,
        "schema": SCHEMA,
        "spec": spec.to_dict(),
        "data": {
            "source": dataset.source,
            "fingerprint": dataset.fingerprint,
            "rows": int(len(dataset.table)),
            "id_source": dataset.id_source,
            "id_column": dataset.id_column,
            "row_check": encode_digests(dataset.all_row_ids, dataset.row_digests),
        },
        "edits": [e.to_dict() for e in edits],
        "position": position,
        "searches": searches,
    }


def read_study_file(path: str | Path, format_marker: str = FORMAT) -> dict[str, Any]:
    """The saved study at ``path`` as a dict; clear errors for a missing file, bad JSON or another format."""
    p = Path(path)
    if not p.exists():
        raise ReplayError(f"no saved study at {str(p)!r}")
    try:
        doc = json.loads(p.read_text(encoding="utf-8"))
    except json.JSONDecodeError as exc:
        raise ReplayError(f"{p.name!r} is not valid JSON (line {exc.lineno}): {exc.msg}") from None
    if not isinstance(doc, dict) or doc.get("format") != format_marker:
        raise ReplayError(f"{p.name!r} is not a saved study of this kind (no format marker {format_marker!r})")
    if int(doc.get("schema", 0)) > SCHEMA:
        raise ReplayError(f"{p.name!r} uses schema {doc.get('schema')}, newer than this kit reads ({SCHEMA}); upgrade the kit")
    for key in ("spec", "data", "edits"):
        if key not in doc:
            raise ReplayError(f"{p.name!r} has no {key!r} section")
    return doc


def edits_from_doc(doc: dict[str, Any]) -> list[Edit]:
    out = []
    for i, d in enumerate(doc["edits"]):
        try:
            out.append(edit_from_dict(d))
        except (TypeError, ValueError) as exc:
            raise ReplayError(f"edit {i + 1} in the saved log cannot be read: {exc}") from None
    return out


def describe_mismatch(doc: dict[str, Any], dataset: Dataset) -> str | None:
    """``None`` when the fingerprints match, else a sentence on what differs."""
    data = doc["data"]
    if data.get("fingerprint") == dataset.fingerprint:
        return None
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
