"""A small JSON Schema validator for the subset of Draft 2020-12 the kit's study-file schemas use.

The schemas ship with the package (``explorer/schemas/*.schema.json``, one file per
format and schema version, shared parts in ``defs-N``). This module implements exactly
the keywords they use (listed in :data:`KEYWORDS`) with the specification's meaning
(JSON Schema Core and Validation, Draft 2020-12): an integer-valued number is an
integer, ``true`` is not a number, ``pattern`` is searched, not anchored, ``if``/``then``
applies ``then`` only where ``if`` holds. A schema that uses any other keyword is
refused when it is loaded, so the subset cannot drift silently; a test checks that
``jsonschema`` agrees on generated valid and broken files.

Errors name the field as a path (``edits[2].reason``) and say what was expected in
plain words.
"""

from __future__ import annotations

import json
import math
import re
from functools import lru_cache
from importlib import resources
from typing import Any

__all__ = ["SchemaViolation", "load_schema", "first_violation", "KEYWORDS", "SCHEMA_FILES"]

#: The keywords this validator implements; annotations (title, description, ...) are ignored.
KEYWORDS = frozenset({
    "type", "enum", "const", "properties", "required", "additionalProperties", "items", "minItems", "maxItems",
    "minLength", "maxLength", "pattern", "minimum", "maximum", "exclusiveMinimum", "exclusiveMaximum", "allOf",
    "if", "then", "$ref", "$defs",
})
ANNOTATIONS = frozenset({"$schema", "$id", "$comment", "title", "description"})

#: (format marker, schema version) -> file name in explorer/schemas.
SCHEMA_FILES = {
    ("variance-explorer/study", 1): "study-1.schema.json",
    ("variance-explorer/summary-study", 1): "summary-study-1.schema.json",
    ("variance-explorer/study", 2): "study-2.schema.json",
    ("variance-explorer/summary-study", 2): "summary-study-2.schema.json",
}
_SHARED = ("defs-1.schema.json", "defs-2.schema.json")

_TYPE_WORDS = {"string": "text (a string)", "integer": "a whole number", "number": "a number",
               "boolean": "true or false", "null": "null", "array": "a list", "object": "an object"}


class SchemaViolation(Exception):
    """Where (a path such as ``edits[2].reason``) and what is wrong."""

    def __init__(self, where: str, problem: str) -> None:
        super().__init__(f"{where or 'the file'}: {problem}")
        self.where, self.problem = where, problem


def _read(name: str) -> dict[str, Any]:
    return json.loads(resources.files("explorer").joinpath("schemas").joinpath(name).read_text(encoding="utf-8"))


@lru_cache(maxsize=None)
def _registry() -> dict[str, dict[str, Any]]:
    docs = [_read(n) for n in (*_SHARED, *SCHEMA_FILES.values())]
    for doc in docs:
        _check_keywords(doc, doc["$id"])
    return {doc["$id"]: doc for doc in docs}


def load_schema(format_marker: str, version: int) -> dict[str, Any]:
    """The shipped schema for a format and version (KeyError when there is none)."""
    name = SCHEMA_FILES[(format_marker, version)]
    return _registry()[_read(name)["$id"]]


def _check_keywords(schema: Any, where: str) -> None:
    if isinstance(schema, bool):
        return
    unknown = set(schema) - KEYWORDS - ANNOTATIONS
    if unknown:
        raise ValueError(f"schema {where} uses keywords this validator does not implement: {sorted(unknown)}")
    for key in ("properties", "$defs"):
        for name, sub in schema.get(key, {}).items():
            _check_keywords(sub, f"{where}/{key}/{name}")
    for key in ("additionalProperties", "items", "if", "then"):
        if key in schema:
            _check_keywords(schema[key], f"{where}/{key}")
    for i, sub in enumerate(schema.get("allOf", [])):
        _check_keywords(sub, f"{where}/allOf/{i}")


def _type_of(value: Any) -> str:
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "boolean"
    if isinstance(value, int):
        return "integer"
    if isinstance(value, float):
        return "integer" if math.isfinite(value) and value.is_integer() else "number"
    if isinstance(value, str):
        return "string"
    if isinstance(value, list):
        return "array"
    if isinstance(value, dict):
        return "object"
    return type(value).__name__


def _is_type(value: Any, name: str) -> bool:
    actual = _type_of(value)
    return actual == name or (name == "number" and actual == "integer")


def _json_equal(a: Any, b: Any) -> bool:
    """Equality as JSON Schema defines it: 1 == 1.0, but true != 1 and lists/objects compare by item."""
    if isinstance(a, bool) or isinstance(b, bool):
        return isinstance(a, bool) and isinstance(b, bool) and a == b
    if isinstance(a, (int, float)) and isinstance(b, (int, float)):
        return a == b
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(_json_equal(x, y) for x, y in zip(a, b))
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(_json_equal(a[k], b[k]) for k in a)
    return type(a) is type(b) and a == b


def _describe(value: Any) -> str:
    kind = _type_of(value)
    return {"string": "text", "integer": "a whole number", "number": "a number", "boolean": "true/false",
            "null": "null", "array": "a list", "object": "an object"}.get(kind, kind)


def _join(where: str, key: str | int) -> str:
    if isinstance(key, int):
        return f"{where}[{key}]"
    return f"{where}.{key}" if where else key


def _resolve(ref: str, base: str) -> tuple[dict[str, Any], str]:
    uri, _, pointer = ref.partition("#")
    doc_id = uri or base
    node: Any = _registry()[doc_id]
    for part in [p for p in pointer.split("/") if p]:
        node = node[part.replace("~1", "/").replace("~0", "~")]
    return node, doc_id


#: Python types that always satisfy a JSON type (json.loads makes exactly these); others take the full check.
_EXACT: dict[str, tuple[type, ...]] = {"string": (str,), "integer": (int,), "number": (int, float),
                                       "boolean": (bool,), "null": (type(None),), "array": (), "object": ()}


def _only_type(schema: Any, base: str) -> tuple[str, ...] | None:
    """The allowed types when ``schema`` (following $ref) says nothing but ``type``, else None."""
    for _ in range(8):
        if not isinstance(schema, dict):
            return None
        keys = set(schema) - ANNOTATIONS
        if keys == {"$ref"}:
            schema, base = _resolve(schema["$ref"], base)
            continue
        if keys == {"type"}:
            t = schema["type"]
            return tuple(t) if isinstance(t, list) else (t,)
        return None
    return None


def first_violation(value: Any, schema: dict[str, Any] | bool, base: str, where: str = "") -> SchemaViolation | None:
    """The first place where ``value`` breaks ``schema`` (resolved against the document ``base``), or None."""
    if schema is True:
        return None
    if schema is False:
        return SchemaViolation(where, "is not allowed here")
    assert isinstance(schema, dict)
    if "$ref" in schema:
        target, doc = _resolve(schema["$ref"], base)
        found = first_violation(value, target, doc, where)
        if found:
            return found
    if "type" in schema:
        names = schema["type"] if isinstance(schema["type"], list) else [schema["type"]]
        if not any(_is_type(value, n) for n in names):
            wanted = " or ".join(_TYPE_WORDS[n] for n in names)
            return SchemaViolation(where, f"must be {wanted}, not {_describe(value)}")
    if "const" in schema and not _json_equal(value, schema["const"]):
        return SchemaViolation(where, f"must be {schema['const']!r}, not {value!r}"[:300])
    if "enum" in schema and not any(_json_equal(value, e) for e in schema["enum"]):
        return SchemaViolation(where, f"must be one of {schema['enum']}, not {value!r}"[:300])
    if isinstance(value, str):
        if len(value) < schema.get("minLength", 0):
            return SchemaViolation(where, "must not be empty" if schema["minLength"] == 1
                                   else f"must have at least {schema['minLength']} characters")
        if "maxLength" in schema and len(value) > schema["maxLength"]:
            return SchemaViolation(where, f"must have at most {schema['maxLength']} characters")
        if "pattern" in schema and not re.search(schema["pattern"], value):
            wanted = f"is not {schema['title']}" if "title" in schema else "does not have the expected form"
            return SchemaViolation(where, f"{value[:60]!r} {wanted}")
    if _is_type(value, "number"):
        if "minimum" in schema and value < schema["minimum"]:
            return SchemaViolation(where, f"must be at least {schema['minimum']}, not {value!r}")
        if "maximum" in schema and value > schema["maximum"]:
            return SchemaViolation(where, f"must be at most {schema['maximum']}, not {value!r}")
        if "exclusiveMinimum" in schema and value <= schema["exclusiveMinimum"]:
            return SchemaViolation(where, f"must be greater than {schema['exclusiveMinimum']}, not {value!r}")
        if "exclusiveMaximum" in schema and value >= schema["exclusiveMaximum"]:
            return SchemaViolation(where, f"must be less than {schema['exclusiveMaximum']}, not {value!r}")
    if isinstance(value, list):
        if len(value) < schema.get("minItems", 0):
            return SchemaViolation(where, f"must have at least {schema['minItems']} item(s)")
        if "maxItems" in schema and len(value) > schema["maxItems"]:
            return SchemaViolation(where, f"must have at most {schema['maxItems']} item(s)")
        if "items" in schema:
            simple = _only_type(schema["items"], base)
            exact = {t for n in simple for t in _EXACT[n]} if simple else set()
            for i, item in enumerate(value):
                if type(item) in exact:
                    continue  # fast path for long lists of plain values (row ids); the rest take the full check
                found = first_violation(item, schema["items"], base, _join(where, i))
                if found:
                    return found
    if isinstance(value, dict):
        for key in schema.get("required", []):
            if key not in value:
                return SchemaViolation(_join(where, key), "is missing")
        props = schema.get("properties", {})
        for key, item in value.items():
            if key in props:
                sub = props[key]
            elif "additionalProperties" in schema:
                sub = schema["additionalProperties"]
                if sub is False:
                    return SchemaViolation(_join(where, key), "is not a field of this file"
                                           + (f" (fields here: {sorted(props)})" if props else ""))
            else:
                continue
            found = first_violation(item, sub, base, _join(where, key))
            if found:
                return found
    for sub in schema.get("allOf", []):
        found = first_violation(value, sub, base, where)
        if found:
            return found
    if "if" in schema and first_violation(value, schema["if"], base, where) is None and "then" in schema:
        found = first_violation(value, schema["then"], base, where)
        if found:
            return found
    return None
