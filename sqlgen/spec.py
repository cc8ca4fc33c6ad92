"""The spec: its keys (one table, also used to generate the reference docs) and the typed model.

``load_spec(path)`` reads a YAML file, checks every key and collects every problem before
raising, so a user fixes a spec in one pass.
"""

from __future__ import annotations

import difflib
import hashlib
import json
import os
import zoneinfo
from dataclasses import asdict, dataclass, field
from typing import Any, Callable

from . import names
from .dialects import TARGETS, target_names
from .errors import Problem, SpecError
from .filters import parse_filter
from .source import Node, parse_yaml, read_spec_text

GRAINS = ("day", "week", "month", "quarter", "year")
WEEKDAYS = ("monday", "tuesday", "wednesday", "thursday", "friday", "saturday", "sunday")
TIMESTAMP_TYPES = ("timestamp", "timestamptz", "date")


@dataclass(frozen=True)
class Key:
    """One spec key: what it takes, its default and its documentation."""

    path: str
    kind: str
    doc: str
    required: bool = False
    default: Any = None
    choices: tuple[str, ...] = ()
    example: str = ""


KEYS: tuple[Key, ...] = (
    Key("version", "integer", "Spec format version. Always 1.", required=True, example="1"),
    Key("activity", "mapping", "Where user activity comes from.", required=True),
    Key("activity.table", "table", "Activity table, optionally qualified: `raw.app_events`.",
        required=True, example="raw.app_events"),
    Key("activity.user", "column", "Column holding the user key.", required=True,
        example="user_id"),
    Key("activity.timestamp", "column", "Column holding when the activity happened.",
        required=True, example="occurred_at"),
    Key("activity.timestamp_type", "choice",
        "Type of the timestamp column: `timestamp` (no zone; taken as UTC when `timezone` is "
        "set), `timestamptz` (an instant) or `date`.",
        default="timestamp", choices=TIMESTAMP_TYPES),
    Key("activity.where", "filter",
        "Optional condition selecting which rows count as activity; one boolean SQL expression "
        "over the table's columns, in the spec's dialect.",
        example="event_name <> 'push_received'"),
    Key("activity.timezone", "timezone",
        "Optional reporting time zone (IANA name). Timestamps are converted to local time in "
        "this zone before they are assigned to periods.", example="America/New_York"),
    Key("grain", "choice", "Length of a period.", default="month", choices=GRAINS),
    Key("week_start", "choice", "First day of a week, for `grain: week`; monday is ISO 8601.",
        default="monday", choices=WEEKDAYS),
    Key("output", "mapping", "Where and how the views are generated."),
    Key("output.dialect", "choice", "Default target dialect; `sqlgen build --dialect` overrides.",
        default="duckdb", choices=tuple(target_names())),
    Key("output.schema", "schema", "Optional schema (or catalog.schema) to create the views in.",
        example="growth"),
    Key("output.prefix", "prefix", "Optional prefix for every view name.", default="",
        example="ga_"),
    Key("output.folder", "text",
        "Folder for the generated files, relative to the spec file; `--out` overrides.",
        default="sql"),
)

KEYS_BY_PATH = {key.path: key for key in KEYS}


@dataclass(frozen=True)
class ActivitySource:
    table: tuple[names.Part, ...]
    user: names.Part
    timestamp: names.Part
    timestamp_type: str
    where: str | None
    timezone: str | None


@dataclass(frozen=True)
class Output:
    dialect: str
    schema: tuple[names.Part, ...] | None
    prefix: str
    folder: str


@dataclass(frozen=True)
class Spec:
    """A validated spec. ``file`` is where it came from (for messages and headers)."""

    version: int
    activity: ActivitySource
    grain: str
    week_start: str
    output: Output
    file: str = field(default="spec.yml", compare=False)

    def digest(self) -> str:
        """A short stable hash of the spec's meaning (not its formatting)."""
        data = asdict(self)
        data.pop("file")
        text = json.dumps(data, sort_keys=True, separators=(",", ":"))
        return hashlib.sha256(text.encode()).hexdigest()[:16]


def load_spec(path: str) -> Spec:
    """Read and validate a spec file; raise SpecError listing every problem."""
    text = read_spec_text(path)
    return parse_spec(text, path)


def parse_spec(text: str, filename: str = "spec.yml") -> Spec:
    """Validate spec text; raise SpecError listing every problem."""
    root = parse_yaml(text, filename)
    checker = _Checker(filename)
    values = checker.section(root, "")
    _cross_checks(checker, root, values)
    if checker.problems:
        raise SpecError(checker.problems)
    return _build(values, filename)


def _cross_checks(checker: _Checker, root: Node, v: dict[str, Any]) -> None:
    activity = root.value.get("activity") if isinstance(root.value, dict) else None
    if not activity or not isinstance(activity.value, dict):
        return
    zone = activity.value.get("timezone")
    if zone is not None and v.get("activity.timestamp_type") == "date":
        checker.report((zone.line, zone.col), "activity.timezone",
                       "a date column has no time of day to convert; remove timezone or "
                       "set timestamp_type: timestamp")


def _build(v: dict[str, Any], filename: str) -> Spec:
    activity = ActivitySource(
        table=v["activity.table"], user=v["activity.user"], timestamp=v["activity.timestamp"],
        timestamp_type=v["activity.timestamp_type"], where=v["activity.where"],
        timezone=v["activity.timezone"])
    output = Output(dialect=v["output.dialect"], schema=v["output.schema"],
                    prefix=v["output.prefix"], folder=v["output.folder"])
    return Spec(version=v["version"], activity=activity, grain=v["grain"],
                week_start=v["week_start"], output=output, file=os.path.basename(filename))


def _suggest(word: str, options: list[str] | tuple[str, ...]) -> str:
    close = difflib.get_close_matches(str(word), list(options), n=1, cutoff=0.6)
    return f" Did you mean {close[0]!r}?" if close else ""


class _Checker:
    """Walks the YAML tree against KEYS, collecting problems and cleaned values."""

    def __init__(self, filename: str):
        self.filename = filename
        self.problems: list[Problem] = []
        self.values: dict[str, Any] = {}
        self.dialect = "duckdb"

    def report(self, node_pos: tuple[int, int], key: str, message: str) -> None:
        self.problems.append(Problem(self.filename, node_pos[0], node_pos[1], key, message))

    def section(self, node: Node, prefix: str) -> dict[str, Any]:
        if not isinstance(node.value, dict):
            where = prefix or "the spec"
            self.report((node.line, node.col), prefix, f"{where} must be a mapping of keys")
            return self.values
        children = [k for k in KEYS if _parent(k.path) == prefix]
        allowed = [_leaf(k.path) for k in children]
        for name, pos in node.key_pos.items():
            if name not in allowed:
                path = f"{prefix}.{name}" if prefix else name
                self.report(pos, path, f"unknown key.{_suggest(name, allowed)} "
                            f"Allowed here: {', '.join(allowed)}")
        dialect_key = [k for k in children if k.path == "output.dialect"]
        for key in dialect_key + [k for k in children if k.path != "output.dialect"]:
            self.key(node, key)
        if prefix == "" and "output" not in node.value:
            self.section(Node({}, node.line, node.col), "output")
        return self.values

    def key(self, parent: Node, key: Key) -> None:
        leaf = _leaf(key.path)
        child = parent.value.get(leaf)
        if child is None or child.value is None:
            if key.required:
                where = _parent(key.path) or "the spec"
                self.report((parent.line, parent.col), key.path,
                            f"required key is missing from {where}"
                            + (f"; e.g. {leaf}: {key.example}" if key.example else ""))
            self.values[key.path] = key.default
            if key.kind == "mapping":
                self.section(Node({}, parent.line, parent.col), key.path)
            return
        if key.kind == "mapping":
            self.section(child, key.path)
            return
        try:
            self.values[key.path] = _CHECKS[key.kind](self, key, child.value)
        except ValueError as err:
            self.values[key.path] = key.default
            self.report((child.line, child.col), key.path, str(err))


def _parent(path: str) -> str:
    return path.rpartition(".")[0]


def _leaf(path: str) -> str:
    return path.rpartition(".")[2]


def _text(value: Any, what: str = "text") -> str:
    if not isinstance(value, str) or isinstance(value, bool):
        raise ValueError(f"expected {what}, got {type(value).__name__} {value!r}")
    return value


def _check_integer(_c: _Checker, key: Key, value: Any) -> int:
    if key.path == "version":
        if value != 1 or isinstance(value, bool):
            raise ValueError(f"expected 1 (the only spec version), got {value!r}")
    return int(value)


def _check_choice(c: _Checker, key: Key, value: Any) -> str:
    text = str(value) if not isinstance(value, bool) else repr(value).lower()
    if text not in key.choices:
        raise ValueError(f"{text!r} is not one of {', '.join(key.choices)}."
                         f"{_suggest(text, key.choices)}")
    if key.path == "output.dialect":
        c.dialect = TARGETS[text].sqlglot_dialect
    return text


def _check_name(max_parts: int) -> Callable[[_Checker, Key, Any], tuple[names.Part, ...]]:
    def check(_c: _Checker, key: Key, value: Any) -> tuple[names.Part, ...]:
        try:
            parts = names.split_name(_text(value, "a name"), max_parts)
        except names.NameError_ as err:
            raise ValueError(f"{value!r} {err}") from None
        for text, _quoted in parts:
            if text.lower().startswith(names.RESERVED_PREFIX):
                raise ValueError(f"names starting with {names.RESERVED_PREFIX!r} are reserved")
        return parts
    return check


def _check_column(c: _Checker, key: Key, value: Any) -> names.Part:
    return _check_name(1)(c, key, value)[0]


def _check_filter(c: _Checker, _key: Key, value: Any) -> str:
    text = _text(value, "an SQL condition as text").strip()
    parse_filter(text, c.dialect)
    return text


def _check_timezone(_c: _Checker, _key: Key, value: Any) -> str:
    zone = _text(value, "an IANA time zone name")
    if zone not in _zones():
        raise ValueError(f"{zone!r} is not an IANA time zone name.{_suggest(zone, _zones())}")
    return zone


def _zones() -> list[str]:
    return sorted(zoneinfo.available_timezones())


def _check_prefix(_c: _Checker, _key: Key, value: Any) -> str:
    text = _text(value)
    if text and not names.BARE.fullmatch(text):
        raise ValueError(f"{text!r} must be letters, digits and _ (starting with a letter or _)")
    return text


def _check_text(_c: _Checker, _key: Key, value: Any) -> str:
    return _text(value)


_CHECKS: dict[str, Callable[[_Checker, Key, Any], Any]] = {
    "integer": _check_integer,
    "choice": _check_choice,
    "table": _check_name(3),
    "schema": _check_name(2),
    "column": _check_column,
    "filter": _check_filter,
    "timezone": _check_timezone,
    "prefix": _check_prefix,
    "text": _check_text,
}
