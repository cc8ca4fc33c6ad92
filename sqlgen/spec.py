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
REVENUE_SHAPES = ("charges", "subscriptions")
INTERVALS = ("month", "quarter", "year")
MAX_SCALE = 6
MAX_WINDOW_DAYS = 366


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
    Key("activity", "mapping",
        "Where user activity comes from. A spec needs `activity`, `revenue` or both."),
    Key("activity.table", "table", "Activity table, optionally qualified: `raw.app_events`.",
        required=True, example="raw.app_events"),
    Key("activity.user", "column", "Column holding the user key.", required=True,
        example="user_id"),
    Key("activity.timestamp", "column", "Column holding when the activity happened.",
        required=True, example="occurred_at"),
    Key("activity.timestamp_type", "choice",
        "Type of the timestamp column: `timestamp` (no zone; taken as UTC when `timezone` is "
        "set), `timestamptz` (an instant) or `date`. On MySQL an instant is a `TIMESTAMP` "
        "column, read the same in every session zone (`occurred_at TIMESTAMP(6)`: "
        "`timestamptz`), and a `DATETIME` holding UTC is a `timestamp` (`occurred_at "
        "DATETIME(6)` with `timezone: America/New_York`); see docs/support-matrix.md.",
        default="timestamp", choices=TIMESTAMP_TYPES),
    Key("activity.where", "filter",
        "Optional condition selecting which rows count as activity; one boolean SQL expression "
        "over the table's columns, in the spec's dialect.",
        example="event_name <> 'push_received'"),
    Key("activity.timezone", "timezone",
        "Optional reporting time zone (IANA name). Timestamps are converted to local time in "
        "this zone before they are assigned to periods.", example="America/New_York"),
    Key("revenue", "mapping",
        "Where recurring revenue comes from, in one currency (see docs/revenue.md). A spec "
        "needs `activity`, `revenue` or both."),
    Key("revenue.shape", "choice",
        "`charges`: one row per invoice line or payment; `subscriptions`: one row per "
        "subscription with a recurring amount.", default="charges", choices=REVENUE_SHAPES),
    Key("revenue.table", "table",
        "Charges or subscriptions table, optionally qualified: `billing.invoice_lines`.",
        required=True, example="billing.invoice_lines"),
    Key("revenue.customer", "column", "Column holding the customer key.", required=True,
        example="account_id"),
    Key("revenue.timestamp", "column",
        "Charges: column holding when the row was charged; required for `shape: charges`.",
        example="invoiced_at"),
    Key("revenue.amount", "column",
        "DECIMAL column: a charge's amount (negative for a refund or credit), or a "
        "subscription's recurring amount per billing interval.", required=True,
        example="amount"),
    Key("revenue.scale", "scale",
        f"Digits after the decimal point of `amount` (its DECIMAL scale, 0 to {MAX_SCALE}: 2 "
        "for cents). Money columns keep this scale; apportioned subscription amounts are "
        "rounded to it.", default=2, example="2"),
    Key("revenue.start", "column",
        "Subscriptions: column holding the first day the subscription covers; required for "
        "`shape: subscriptions`.", example="started_at"),
    Key("revenue.end", "column",
        "Subscriptions: optional column holding the first day no longer covered, NULL while "
        "the subscription runs.", example="ended_at"),
    Key("revenue.interval", "choice",
        "Subscriptions: the billing interval of every row, when it is fixed.",
        default="month", choices=INTERVALS),
    Key("revenue.interval_column", "column",
        "Subscriptions: column holding each row's billing interval instead: `month`, "
        "`quarter` or `year` (or `monthly`, `quarterly`, `yearly`; any case).",
        example="billing_interval"),
    Key("revenue.timestamp_type", "choice",
        "Type of the timestamp, start and end columns, as for `activity.timestamp_type`.",
        default="timestamp", choices=TIMESTAMP_TYPES),
    Key("revenue.where", "filter",
        "Optional condition selecting the rows to count, in the spec's dialect; use it to "
        "keep one currency.", example="currency = 'EUR'"),
    Key("revenue.timezone", "timezone",
        "Optional reporting time zone (IANA name), applied as for `activity.timezone`.",
        example="Europe/Berlin"),
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
    Key("cohorts", "boolean",
        "Build `cohort_retention` (users by first active period and age), and "
        "`revenue_cohorts` when the spec has revenue.", default=False, example="true"),
    Key("engagement", "boolean",
        "Build `engagement_depth` (active days per user in each period).", default=False,
        example="true"),
    Key("trailing_windows", "windows",
        f"Window lengths in days for `trailing_activity`: distinct whole numbers from 1 to "
        f"{MAX_WINDOW_DAYS}, e.g. `[7, 28]`; leave out (or `[]`) for no such view.",
        example="[7, 28]"),
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
class RevenueSource:
    """Where recurring revenue comes from: a charges or a subscriptions table.

    Charges use ``timestamp``; subscriptions use ``start``, ``end`` (optional) and either a
    fixed ``interval`` or an ``interval_column``. ``scale`` is the amount's DECIMAL scale.
    """

    shape: str
    table: tuple[names.Part, ...]
    customer: names.Part
    amount: names.Part
    scale: int
    timestamp: names.Part | None
    start: names.Part | None
    end: names.Part | None
    interval: str
    interval_column: names.Part | None
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
    activity: ActivitySource | None
    grain: str
    week_start: str
    output: Output
    cohorts: bool = False
    engagement: bool = False
    trailing_windows: tuple[int, ...] = ()
    file: str = field(default="spec.yml", compare=False)
    revenue: RevenueSource | None = None

    def digest(self) -> str:
        """A short stable hash of the spec's meaning (not its formatting)."""
        data = asdict(self)
        data.pop("file")
        if data.get("revenue") is None:
            data.pop("revenue", None)  # specs without revenue keep their earlier hash
        for name, off in (("cohorts", False), ("engagement", False), ("trailing_windows", [])):
            if data.get(name) == off:
                data.pop(name)  # nor do specs without these views
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
    if not isinstance(root.value, dict):
        return
    if not v.get("activity") and not v.get("revenue"):
        checker.report((root.line, root.col), "activity",
                       "required key is missing from the spec; a spec needs activity, "
                       "revenue or both")
    for name in ("activity", "revenue"):
        section = root.value.get(name)
        if section is not None and isinstance(section.value, dict):
            _date_zone_check(checker, section, name, v)
    revenue = root.value.get("revenue")
    if revenue is not None and isinstance(revenue.value, dict):
        _revenue_shape_checks(checker, revenue, v)
    _activity_view_checks(checker, root, v)


def _activity_view_checks(checker: _Checker, root: Node, v: dict[str, Any]) -> None:
    """engagement and trailing_windows read activity: refuse them in a spec without it."""
    if v.get("activity") or not v.get("revenue"):
        return
    for name in ("engagement", "trailing_windows"):
        node = root.value.get(name)
        if node is not None and v.get(name):
            checker.report((node.line, node.col), name,
                           "needs an activity section: these views count active users")


def _date_zone_check(checker: _Checker, section: Node, name: str, v: dict[str, Any]) -> None:
    zone = section.value.get("timezone")
    if zone is not None and v.get(f"{name}.timestamp_type") == "date":
        checker.report((zone.line, zone.col), f"{name}.timezone",
                       "a date column has no time of day to convert; remove timezone or "
                       "set timestamp_type: timestamp")


_SHAPE_KEYS = {"charges": ("timestamp",), "subscriptions": ("start", "end", "interval",
                                                            "interval_column")}
_SHAPE_NEEDS = {"charges": "timestamp", "subscriptions": "start"}


def _revenue_shape_checks(checker: _Checker, section: Node, v: dict[str, Any]) -> None:
    """Keys that belong to the other shape, the shape's required key, one interval source."""
    given = {name for name, child in section.value.items() if child.value is not None}
    shape_node = section.value.get("shape")
    if shape_node is not None and str(shape_node.value) not in REVENUE_SHAPES:
        return
    shape = v.get("revenue.shape") or "charges"
    for other, keys in _SHAPE_KEYS.items():
        for name in keys:
            if other != shape and name in section.value:
                checker.report(section.key_pos[name], f"revenue.{name}",
                               f"only used with shape: {other}; remove it or set shape: {other}")
    needed = _SHAPE_NEEDS[shape]
    if needed not in given:
        example = KEYS_BY_PATH[f"revenue.{needed}"].example
        checker.report((section.line, section.col), f"revenue.{needed}",
                       f"required key is missing from revenue for shape: {shape}; "
                       f"e.g. {needed}: {example}")
    if shape == "subscriptions" and {"interval", "interval_column"} <= given:
        checker.report(section.key_pos["interval_column"], "revenue.interval_column",
                       "give interval (one value for every row) or interval_column, not both")


def _build(v: dict[str, Any], filename: str) -> Spec:
    activity = None
    if v.get("activity"):
        activity = ActivitySource(
            table=v["activity.table"], user=v["activity.user"],
            timestamp=v["activity.timestamp"], timestamp_type=v["activity.timestamp_type"],
            where=v["activity.where"], timezone=v["activity.timezone"])
    output = Output(dialect=v["output.dialect"], schema=v["output.schema"],
                    prefix=v["output.prefix"], folder=v["output.folder"])
    return Spec(version=v["version"], activity=activity, grain=v["grain"],
                week_start=v["week_start"], output=output, cohorts=v["cohorts"],
                engagement=v["engagement"], trailing_windows=tuple(v["trailing_windows"] or ()),
                file=os.path.basename(filename), revenue=_build_revenue(v))


def _build_revenue(v: dict[str, Any]) -> RevenueSource | None:
    if not v.get("revenue"):
        return None
    charges = v["revenue.shape"] == "charges"
    return RevenueSource(
        shape=v["revenue.shape"], table=v["revenue.table"], customer=v["revenue.customer"],
        amount=v["revenue.amount"], scale=v["revenue.scale"],
        timestamp=v["revenue.timestamp"] if charges else None,
        start=None if charges else v["revenue.start"],
        end=None if charges else v["revenue.end"],
        interval=v["revenue.interval"],
        interval_column=None if charges else v["revenue.interval_column"],
        timestamp_type=v["revenue.timestamp_type"], where=v["revenue.where"],
        timezone=v["revenue.timezone"])


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
            if key.kind == "mapping" and (key.required or not _requires_keys(key.path)):
                self.section(Node({}, parent.line, parent.col), key.path)
            return
        if key.kind == "mapping":
            self.values[key.path] = True  # the section is present
            self.section(child, key.path)
            return
        try:
            self.values[key.path] = _CHECKS[key.kind](self, key, child.value)
        except ValueError as err:
            self.values[key.path] = key.default
            self.report((child.line, child.col), key.path, str(err))


def _requires_keys(section: str) -> bool:
    """True when an optional section has required keys: left out, they are not asked for."""
    return any(k.required and k.path.startswith(section + ".") for k in KEYS)


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


def _check_scale(_c: _Checker, _key: Key, value: Any) -> int:
    if not isinstance(value, int) or isinstance(value, bool) or not 0 <= value <= MAX_SCALE:
        raise ValueError(f"expected a whole number of decimal places from 0 to {MAX_SCALE}, "
                         f"got {value!r}")
    return value


def _check_boolean(_c: _Checker, _key: Key, value: Any) -> bool:
    if not isinstance(value, bool):
        raise ValueError(f"expected true or false, got {value!r}")
    return value


def _check_windows(_c: _Checker, _key: Key, value: Any) -> tuple[int, ...]:
    if not isinstance(value, list):
        raise ValueError(f"expected a list of window lengths in days, e.g. [7, 28]; got {value!r}")
    days = [item.value for item in value]
    for day in days:
        if not isinstance(day, int) or isinstance(day, bool):
            raise ValueError(f"window length {day!r} is not a whole number of days")
        if not 1 <= day <= MAX_WINDOW_DAYS:
            raise ValueError(f"window length {day} must be from 1 to {MAX_WINDOW_DAYS} days")
    repeated = sorted({day for day in days if days.count(day) > 1})
    if repeated:
        raise ValueError(f"window length {repeated[0]} appears more than once")
    return tuple(days)


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
    "scale": _check_scale,
    "boolean": _check_boolean,
    "windows": _check_windows,
}
