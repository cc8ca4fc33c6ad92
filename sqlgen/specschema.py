"""A JSON Schema of the spec (``sqlgen schema``), generated from ``spec.KEYS``, the table the
validator walks: editors with YAML support check and complete a spec as it is typed.

It holds what one key says about itself (its kind, whether it is required, its default,
its choices, its documentation) and two rules between keys that an editor can check (a
spec needs ``activity`` or ``revenue``; charges need ``revenue.timestamp``, subscriptions
``revenue.start``). What only the validator can check (that a ``where`` parses and uses
allowed operations, a time zone name, a valid range in order, columns against a
warehouse) is left to ``sqlgen validate``: a spec the schema accepts may still be refused
there, never the other way round.
"""

from __future__ import annotations

import datetime as dt
import json
from typing import Any

from . import __version__
from .spec import KEYS, MAX_SCALE, MAX_WINDOW_DAYS, Key

SCHEMA_ID = f"sqlgen spec, format version 1 (sqlgen {__version__})"
_NAME = r"^[A-Za-z_][A-Za-z0-9_]*$"

# The JSON type of each kind of key in KEYS (``mapping`` is built from its children).
KINDS: dict[str, dict[str, Any]] = {
    "integer": {"type": "integer"},
    "table": {"type": "string", "minLength": 1},
    "column": {"type": "string", "minLength": 1},
    "segment column": {"type": "string", "minLength": 1},
    "schema": {"type": "string", "minLength": 1},
    "choice": {"type": "string"},
    "filter": {"type": "string", "minLength": 1},
    "timezone": {"type": "string", "minLength": 1},
    "date": {"type": "string", "format": "date", "pattern": r"^\d{4}-\d{2}-\d{2}$"},
    "scale": {"type": "integer", "minimum": 0, "maximum": MAX_SCALE},
    "prefix": {"type": "string", "pattern": r"^$|" + _NAME},
    "text": {"type": "string"},
    "boolean": {"type": "boolean"},
    "lookback": {"type": "string", "pattern": r"^\s*[0-9]+\s+(day|days|week|weeks)\s*$"},
    "windows": {"type": "array", "uniqueItems": True,
                "items": {"type": "integer", "minimum": 1, "maximum": MAX_WINDOW_DAYS}},
    "functions": {"type": "array", "uniqueItems": True,
                  "items": {"type": "string", "pattern": _NAME}},
}


def spec_schema() -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) of a spec, as a dict."""
    root = _mapping("")
    root["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    root["$id"] = "sqlgen-spec.schema.json"
    root["title"] = SCHEMA_ID
    root["anyOf"] = [{"required": ["activity"]}, {"required": ["revenue"]}]
    revenue = root["properties"]["revenue"]
    revenue["if"] = {"properties": {"shape": {"const": "subscriptions"}},
                     "required": ["shape"]}
    revenue["then"] = {"required": ["start"]}
    revenue["else"] = {"required": ["timestamp"]}
    return root


def schema_text() -> str:
    """The schema as ``sqlgen schema`` prints it: sorted keys, two-space indent."""
    return json.dumps(spec_schema(), indent=2, sort_keys=True) + "\n"


def _children(prefix: str) -> list[Key]:
    return [k for k in KEYS if k.path.rpartition(".")[0] == prefix]


def _mapping(prefix: str) -> dict[str, Any]:
    children = _children(prefix)
    node: dict[str, Any] = {
        "type": "object",
        "additionalProperties": False,
        "properties": {k.path.rpartition(".")[2]: _property(k) for k in children},
    }
    required = [k.path.rpartition(".")[2] for k in children if k.required]
    if required:
        node["required"] = required
    return node


def _property(key: Key) -> dict[str, Any]:
    if key.kind == "mapping":
        node = _mapping(key.path)
    elif key.kind == "definitions":
        # Each definition takes the keys of `activity`, none required (left out: inherited).
        each = _mapping("activity")
        each.pop("required", None)
        node = {"type": "object", "propertyNames": {"pattern": _NAME},
                "additionalProperties": {"anyOf": [each, {"type": "null"}]}}
    elif key.kind == "segments":
        node = {"type": "object", "propertyNames": {"pattern": _NAME},
                "additionalProperties": _mapping(f"{key.path}.<name>")}
    else:
        node = dict(KINDS[key.kind])
    if key.path == "version":
        node["const"] = 1
    if key.choices:
        node["enum"] = list(key.choices)
    node["description"] = key.doc
    if key.default not in (None, "", ()) and key.kind != "mapping":
        node["default"] = (key.default.isoformat() if isinstance(key.default, dt.date)
                           else key.default)
    if not key.required and key.kind not in ("mapping", "definitions", "segments"):
        # An optional key written with no value is taken as left out (the validator's rule).
        outer = {"anyOf": [node, {"type": "null"}], "description": key.doc}
        if "default" in node:
            outer["default"] = node["default"]
        node = outer
    return node
