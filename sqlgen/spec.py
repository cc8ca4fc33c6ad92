"""The spec: its keys (one table, also used to generate the reference docs) and the typed model.

``load_spec(path)`` reads a YAML file, checks every key and collects every problem before
raising, so a user fixes a spec in one pass.
"""

from __future__ import annotations

import datetime as dt
import difflib
import hashlib
import json
import datetime as dt
import os
import zoneinfo
from dataclasses import asdict, dataclass, field, fields, is_dataclass, replace
from typing import Any, Callable

from . import names
from .comments import MESSAGE_LIMIT, cut, printable, shown, unsafe
from .dialects import TARGETS, target_names
from .errors import Problem, SpecError
from .filters import known_function, parse_filter
from .source import Node, parse_yaml, read_spec_text

GRAINS = ("day", "week", "month", "quarter", "year")
WEEKDAYS = ("monday", "tuesday", "wednesday", "thursday", "friday", "saturday", "sunday")
TIMESTAMP_TYPES = ("timestamp", "timestamptz", "date")
REVENUE_SHAPES = ("charges", "subscriptions")
INTERVALS = ("month", "quarter", "year")
MEASURES = ("run_rate", "recognized")
SEGMENT_KINDS = ("event", "user")
MAX_SCALE = 6
MAX_WINDOW_DAYS = 366
# The valid time range of a source's rows (local dates, `valid_from` inclusive, `valid_until`
# exclusive). The defaults leave out the sentinel dates warehouses use for "unknown" or
# "never" (common practice): 0001-01-01, 1900-01-01, epoch zero 1970-01-01, 9999-12-31.
VALID_FROM = dt.date(1990, 1, 1)
VALID_UNTIL = dt.date(2100, 1, 1)
EARLIEST_DATE = dt.date(1000, 1, 1)  # MySQL's DATE starts here (from memory of its manual)
LATEST_DATE = dt.date(9999, 1, 1)  # a margin below 9999-12-31, the largest date most engines hold
MAX_CALENDAR_PERIODS = 10 ** 6  # the longest calendar of periods (or days) a view may build
MATERIALIZE = ("view", "table", "incremental")
LOOKBACK_DAYS = 3  # output.lookback's default: late events up to 3 days old are picked up
MAX_LOOKBACK_DAYS = 366


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
        "over the table's columns, in the spec's dialect, using only the operations listed in "
        "docs/filters.md.",
        example="event_name <> 'push_received'"),
    Key("activity.timezone", "timezone",
        "Optional reporting time zone (IANA name). Timestamps are converted to local time in "
        "this zone before they are assigned to periods.", example="America/New_York"),
    Key("activity.valid_from", "date",
        "First local date of a valid row (inclusive), a date like `2015-01-01`. Rows dated "
        "earlier are left out of every view and counted in `activity_source_summary."
        "out_of_range_rows`. The default leaves out the common sentinel dates 0001-01-01, "
        "1900-01-01 and epoch zero 1970-01-01 (see docs/time-range.md).",
        default=VALID_FROM, example="2015-01-01"),
    Key("activity.valid_until", "date",
        "First local date after the valid rows (exclusive). Rows dated on or after it are "
        "left out and counted like those before `valid_from`; the default leaves out the "
        "sentinel 9999-12-31.", default=VALID_UNTIL, example="2031-01-01"),
    Key("activity.first_seen", "mapping",
        "Optional table with the date each user was first seen (signed up): a user first "
        "seen in a period before their first active period is resurrected, not new, in it; "
        "cohorts are by first-seen period. A user's earliest row counts; see "
        "docs/definitions.md."),
    Key("activity.first_seen.table", "table", "Users table, optionally qualified: `app.users`.",
        required=True, example="app.users"),
    Key("activity.first_seen.user", "column",
        "Column of that table holding the user key (the same values as `activity.user`).",
        required=True, example="user_id"),
    Key("activity.first_seen.timestamp", "column",
        "Column holding when the user was first seen. Converted to a local date like the "
        "activity timestamp; NULL or outside the valid range: not seen.", required=True,
        example="signed_up_at"),
    Key("activity.first_seen.timestamp_type", "choice",
        "Type of that column, as for `activity.timestamp_type`.", default="timestamp",
        choices=TIMESTAMP_TYPES),
    Key("activity.report_from", "date",
        "Optional first date to report, a date like `2023-01-01`: every view leaves out the "
        "periods before the one holding it (they are still computed, so the states of the "
        "first period shown are known). Overrides the top-level `report_from`.",
        example="2023-01-01"),
    Key("definitions", "definitions",
        "Optional further activity definitions, by name: each takes the keys of `activity` "
        "(a key left out is taken from `activity`, except `where`) and gets its own views, "
        "named `<prefix><name>_<view>` (see docs/definitions.md).",
        example="{purchasers: {where: \"event_name = 'purchase'\"}}"),
    Key("report_from", "date",
        "Optional first date to report for every activity definition without its own "
        "`report_from`.", example="2023-01-01"),
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
    Key("revenue.measure", "choice",
        "Subscriptions: what a period's revenue is. `run_rate`: the monthly amount (amount / "
        "months in the interval) of every subscription in force at the period's end, at "
        "every grain; `recognized`: each subscription apportioned to the days it covers in "
        "the period (see docs/revenue.md).", default="run_rate", choices=MEASURES),
    Key("revenue.timestamp_type", "choice",
        "Type of the timestamp, start and end columns, as for `activity.timestamp_type`.",
        default="timestamp", choices=TIMESTAMP_TYPES),
    Key("revenue.where", "filter",
        "Optional condition selecting the rows to count, in the spec's dialect; use it to "
        "keep one currency.", example="currency = 'EUR'"),
    Key("revenue.timezone", "timezone",
        "Optional reporting time zone (IANA name), applied as for `activity.timezone`.",
        example="Europe/Berlin"),
    Key("revenue.valid_from", "date",
        "First local date of a valid row (inclusive), as for `activity.valid_from`: a charge "
        "or a subscription start dated earlier (or a subscription end before it) leaves the "
        "row out, counted in `revenue_source_summary.out_of_range_rows`.",
        default=VALID_FROM, example="2015-01-01"),
    Key("revenue.valid_until", "date",
        "First local date after the valid rows (exclusive): a charge or a subscription start "
        "on or after it leaves the row out; a subscription end on or after it (such as "
        "9999-12-31) means the subscription has no end, like NULL.",
        default=VALID_UNTIL, example="2031-01-01"),
    Key("grain", "choice", "Length of a period.", default="month", choices=GRAINS),
    Key("week_start", "choice", "First day of a week, for `grain: week`; monday is ISO 8601.",
        default="monday", choices=WEEKDAYS),
    Key("output", "mapping", "Where and how the views are generated."),
    Key("output.dialect", "choice", "Default target dialect; `sqlgen build --dialect` overrides.",
        default="duckdb", choices=tuple(target_names())),
    Key("output.schema", "schema", "Optional schema (or catalog.schema) to create the views in.",
        example="growth"),
    Key("output.prefix", "prefix",
        "Optional prefix for every view name, and so for every file name "
        "(`<prefix><view>.sql`, `<prefix>create_all.sql`); specs sharing a folder need "
        "different ones.", default="", example="ga_"),
    Key("output.folder", "text",
        "Folder for the generated files, relative to the spec file; `--out` overrides.",
        default="sql"),
    Key("output.materialize", "choice",
        "How each query is kept: `view` (computed when read), `table` (computed by "
        "`create_all.sql`, rebuilt in full by each run of it) or `incremental` (tables "
        "created by `create_all.sql` and brought up to date by `refresh.sql`, which reads "
        "only the source rows from the stored high-water mark minus `output.lookback`). "
        "See docs/materialize.md.", default="view", choices=MATERIALIZE, example="table"),
    Key("output.lookback", "lookback",
        "For `materialize: incremental`: how far before the stored high-water mark "
        "`refresh.sql` reads again, for late-arriving events: `N days` or `N weeks`, "
        f"0 to {MAX_LOOKBACK_DAYS} days. Rows older than that are counted in the state "
        "table, not added (run `create_all.sql` to rebuild in full).",
        default=f"{LOOKBACK_DAYS} days", example="3 days"),
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
    Key("segments", "segments",
        "Optional splits of the activity views by a property: a mapping from each segment's "
        "name (letters, digits and _; shown in the views' `segment` column) to its "
        "definition below. Adds `growth_accounting_by_segment`, `user_states_by_segment`, "
        "`cohort_retention_by_segment` (with `cohorts: true`) and "
        "`revenue_accounting_by_segment` (for a segment with `customer_key`); see "
        "docs/segments.md.", example="{platform: {kind: event, column: platform}}"),
    Key("segments.<name>.kind", "choice",
        "`event`: a property of each activity row, a user may be active in several values "
        "and the per-value counts need not add up to the totals; `user`: an attribute of the "
        "user, exactly one value per user, so the per-value counts add up to the totals.",
        required=True, choices=SEGMENT_KINDS),
    Key("segments.<name>.column", "segment column",
        "Column holding the segment's value: of the activity table, or of `table` when it "
        "is given. Its values are shown as text in `segment_value`; NULL is a group of its "
        "own.", required=True, example="platform"),
    Key("segments.<name>.table", "table",
        "`kind: user` only: a table with one row per user holding the value (users missing "
        "from it get NULL; a user listed more than once gets the smallest non-NULL value). "
        "Without it, a user's value is the one on the user's first counted activity row "
        "(ties: the smallest non-NULL value).", example="app.users"),
    Key("segments.<name>.key", "segment column",
        "The user key column of `table`, compared with `activity.user`; `table` needs `key`, "
        "`customer_key` or both.", example="user_id"),
    Key("segments.<name>.customer_key", "segment column",
        "`kind: user` with `table` only: the column of `table` holding the revenue customer "
        "key (`revenue.customer`); the segment then splits `revenue_accounting_by_segment` "
        "(and the activity views only when `key` is given too).", example="account_id"),
    Key("allow_functions", "functions",
        "Optional list of further function names the `where` filters may call, e.g. "
        "`[is_internal_account]`: a trust decision. These functions run with the privileges of "
        "whoever creates the views and are read by everyone who queries them; sqlgen passes "
        "them through (names in capitals) and cannot check that every target has them.",
        example="[is_internal_account]"),
)

KEYS_BY_PATH = {key.path: key for key in KEYS}


@dataclass(frozen=True)
class FirstSeen:
    """A users table with the date each user was first seen (``activity.first_seen``)."""

    table: tuple[names.Part, ...]
    user: names.Part
    timestamp: names.Part
    timestamp_type: str


@dataclass(frozen=True)
class ActivitySource:
    table: tuple[names.Part, ...]
    user: names.Part
    timestamp: names.Part
    timestamp_type: str
    where: str | None
    timezone: str | None
    valid_from: dt.date = VALID_FROM
    valid_until: dt.date = VALID_UNTIL
    first_seen: FirstSeen | None = None
    report_from: dt.date | None = None


@dataclass(frozen=True)
class Definition:
    """A further activity definition (``definitions.<name>``): its own source and views."""

    name: str
    source: ActivitySource


@dataclass(frozen=True)
class RevenueSource:
    """Where recurring revenue comes from: a charges or a subscriptions table.

    Charges use ``timestamp``; subscriptions use ``start``, ``end`` (optional) and either a
    fixed ``interval`` or an ``interval_column``, and a ``measure`` (None for charges).
    ``scale`` is the amount's DECIMAL scale.
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
    measure: str | None = None  # subscriptions only: run_rate or recognized
    valid_from: dt.date = VALID_FROM
    valid_until: dt.date = VALID_UNTIL


@dataclass(frozen=True)
class Segment:
    """One segment: a name, where its value comes from, and whether it splits revenue.

    ``kind`` event: a column of the activity table, read per row; user: one value per user,
    from ``table`` (keyed by ``key``) or else from the user's first counted activity row.
    ``customer_key``: the column of ``table`` holding the revenue customer key.
    """

    name: str
    kind: str
    column: names.Part
    table: tuple[names.Part, ...] | None = None
    key: names.Part | None = None
    customer_key: names.Part | None = None

    @property
    def from_events(self) -> bool:
        """True when the value is read from the activity rows (no table of its own)."""
        return self.table is None

    @property
    def splits_activity(self) -> bool:
        """True when the segment splits the activity views: read from the activity rows, or
        from a table with a user key (a table with only customer_key splits revenue only)."""
        return self.table is None or self.key is not None


@dataclass(frozen=True)
class Output:
    dialect: str
    schema: tuple[names.Part, ...] | None
    prefix: str
    folder: str
    materialize: str = "view"
    lookback: int = LOOKBACK_DAYS  # days


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
    allow_functions: tuple[str, ...] = ()
    segments: tuple[Segment, ...] = ()
    # Where each key's value was written: key path -> (line, col), filled by the checker;
    # ``path`` is the spec file as the user named it. Neither is part of the meaning.
    positions: dict[str, tuple[int, int]] = field(default_factory=dict, compare=False,
                                                  repr=False)
    path: str = field(default="", compare=False, repr=False)
    # Located notes about keys that are valid but have no effect; the caller shows them.
    warnings: tuple[Problem, ...] = field(default=(), compare=False, repr=False)
    definitions: tuple[Definition, ...] = ()
    # A part of a spec with definitions (see ``parts``): the definition's name, and the spec.
    definition: str = field(default="", compare=False)
    parent: Spec | None = field(default=None, compare=False, repr=False)

    def parts(self) -> tuple[Spec, ...]:
        """The spec itself (its `activity` and `revenue` views), then one spec per
        definition: its source as `activity`, no revenue, and the prefix
        ``<prefix><name>_``. Compiling each part compiles the whole spec."""
        subs = []
        for d in self.definitions:
            at = f"definitions.{d.name}"
            positions = {**self.positions, **{"activity" + k[len(at):]: pos
                                             for k, pos in self.positions.items()
                                             if k == at or k.startswith(at + ".")}}
            subs.append(replace(self, activity=d.source, revenue=None, definitions=(),
                                output=replace(self.output,
                                               prefix=f"{self.output.prefix}{d.name}_"),
                                definition=d.name, parent=self, positions=positions))
        return (self, *subs)

    def where(self, key: str) -> str:
        """``file:line:col`` of a spec key (or the nearest section written), for messages."""
        while key and key not in self.positions:
            key = key.rpartition(".")[0]
        line, col = self.positions.get(key, (1, 1))
        return f"{printable(self.path or self.file, False)}:{line}:{col}"

    def digest(self) -> str:
        """A short stable hash of the spec's meaning (not its formatting or file name).

        The one spec hash: the header of every generated file and the manifest show it.
        """
        data = {f.name: getattr(self, f.name) for f in fields(self) if f.compare}
        data = {name: asdict(v) if is_dataclass(v) else v for name, v in data.items()}
        if data["output"]["materialize"] == "view":  # specs of views keep their earlier hash
            data["output"].pop("materialize")
            data["output"].pop("lookback")
        if not data.get("allow_functions"):
            data.pop("allow_functions")  # specs without it keep their earlier hash
        if data.get("revenue") is None:
            data.pop("revenue", None)  # specs without revenue keep their earlier hash
        elif data["revenue"]["measure"] in (None, "recognized"):
            data["revenue"].pop("measure")  # nor do charges, nor recognized (as before)
        segments = data.pop("segments", ())
        if segments:  # specs without segments keep their earlier hash
            data["segments"] = [asdict(segment) for segment in segments]
        for name, off in (("cohorts", False), ("engagement", False), ("trailing_windows", [])):
            if data.get(name) == off:
                data.pop(name)  # nor do specs without these views
        if not data.get("definitions"):
            data.pop("definitions", None)  # specs without definitions keep their hash
        else:
            data["definitions"] = [asdict(d) for d in self.definitions]
        sources = [data.get("activity"), data.get("revenue")]
        sources += [d["source"] for d in data.get("definitions", [])]
        for source in sources:
            _range_digest(source or {})
        text = json.dumps(data, sort_keys=True, separators=(",", ":"))
        return hashlib.sha256(text.encode()).hexdigest()[:16]


def _range_digest(source: dict[str, Any]) -> None:
    """A source's valid range in the digest only when set away from the default (specs
    written before the range existed keep their hash), as ISO text."""
    for name, default in (("valid_from", VALID_FROM), ("valid_until", VALID_UNTIL),
                          ("report_from", None), ("first_seen", None)):
        if name not in source:
            continue
        if source[name] == default:
            source.pop(name)  # (first_seen and report_from: specs without them, as before)
        elif isinstance(source[name], dt.date):
            source[name] = source[name].isoformat()


def load_spec(path: str) -> Spec:
    """Read and validate a spec file; raise SpecError listing every problem."""
    text = read_spec_text(path)
    return parse_spec(text, path)


def parse_spec(text: str, filename: str = "spec.yml") -> Spec:
    """Validate spec text; raise SpecError listing every problem."""
    problems: list[Problem] = []
    root = parse_yaml(text, filename, problems)
    checker = _Checker(filename)
    checker.problems = problems  # the reader's problems (a key written twice, a tag) first
    values = checker.section(root, "")
    _cross_checks(checker, root, values)
    if checker.problems:
        raise SpecError(checker.problems)
    positions = {"": (root.line, root.col), **checker.positions}
    spec = replace(_build(values, filename, set(checker.positions)), positions=positions,
                   path=filename)
    problems = _built_checks(spec, checker)
    if problems:
        raise SpecError(problems)
    return replace(spec, warnings=tuple(_warnings(checker, spec)))


def _built_checks(spec: Spec, checker: _Checker) -> list[Problem]:
    """Checks of values a definition may take from `activity` or the top level: a
    report_from that would leave every period out."""
    found = []
    for part in spec.parts():
        source = part.activity
        at = f"definitions.{part.definition}" if part.definition else "activity"
        if source is None:
            continue
        if source.report_from is not None and source.report_from >= source.valid_until:
            key = next((k for k in (f"{at}.report_from", "activity.report_from", "report_from")
                        if k in checker.positions), "report_from")
            line, col = checker.positions[key]
            found.append(Problem(checker.filename, line, col, key,
                                 f"{source.report_from} is on or after valid_until "
                                 f"{source.valid_until}{' of ' + at if part.definition else ''}"
                                 ": every period would be left out; give an earlier date"))
    return found


def _warnings(checker: _Checker, spec: Spec) -> list[Problem]:
    """Keys that are valid but change nothing in this spec."""
    found = []
    default = KEYS_BY_PATH["week_start"].default
    if spec.grain != "week" and "week_start" in checker.positions and spec.week_start != default:
        line, col = checker.positions["week_start"]
        found.append(Problem(checker.filename, line, col, "week_start",
                             f"warning: has no effect with grain: {spec.grain}; it sets the "
                             "first day of a week for grain: week only. Remove it or set "
                             "grain: week"))
    if spec.output.materialize != "incremental" and "output.lookback" in checker.positions:
        line, col = checker.positions["output.lookback"]
        found.append(Problem(checker.filename, line, col, "output.lookback",
                             "warning: has no effect with materialize: "
                             f"{spec.output.materialize}; it sets how far refresh.sql reads "
                             "back for materialize: incremental only. Remove it or set "
                             "materialize: incremental"))
    return found


def _cross_checks(checker: _Checker, root: Node, v: dict[str, Any]) -> None:
    if not isinstance(root.value, dict):
        return
    if not v.get("activity") and not v.get("revenue") and not v.get("definitions"):
        checker.report((root.line, root.col), "activity",
                       "required key is missing from the spec; a spec needs activity, "
                       "revenue or both")
    for name in ("activity", "revenue"):
        section = root.value.get(name)
        if section is not None and isinstance(section.value, dict):
            _date_zone_check(checker, section, name, v)
            _range_checks(checker, section, name, v)
    _definition_checks(checker, root, v)
    revenue = root.value.get("revenue")
    if revenue is not None and isinstance(revenue.value, dict):
        _revenue_shape_checks(checker, revenue, v)
    _activity_view_checks(checker, root, v)
    _segment_revenue_check(checker, v)
    _incremental_checks(checker, v)


def _incremental_checks(checker: _Checker, v: dict[str, Any]) -> None:
    """What `materialize: incremental` cannot keep exact yet, refused at its key: a time zone
    conversion or an instant type (a local date then differs from the timestamp's date, so
    the days a refresh reads and the days it computes again would not match)."""
    if v.get("output.materialize") != "incremental":
        return
    pos = checker.positions.get("output.materialize", (1, 1))
    sources = ["activity"] + [f"definitions.{name}" for name in v.get("definitions") or ()]
    for path in sources:
        if v.get(f"{path}.timezone"):
            checker.report(pos, "output.materialize",
                           f"incremental does not support {path}.timezone yet: use "
                           "materialize: table, or a spec without a time zone conversion")
        if v.get(f"{path}.timestamp_type") == "timestamptz":
            checker.report(pos, "output.materialize",
                           f"incremental does not support {path}.timestamp_type: timestamptz "
                           "yet: use materialize: table")


def _segment_revenue_check(checker: _Checker, v: dict[str, Any]) -> None:
    """customer_key splits revenue: refuse it in a spec without revenue."""
    if v.get("revenue"):
        return
    for segment in v.get("segments") or ():
        if segment.customer_key is not None:
            key = f"segments.{segment.name}.customer_key"
            checker.report(checker.positions[key], key,
                           "splits revenue_accounting_by_segment, and the spec has no "
                           "revenue section; add one or remove customer_key")


PG_NAME_LIMIT = 63  # PostgreSQL cuts longer identifiers (NAMEDATALEN - 1, from its manual)


def _definition_checks(checker: _Checker, root: Node, v: dict[str, Any]) -> None:
    """Each definition has the keys it cannot take from `activity`, and names views that
    collide with no other view's name (without case, and cut as PostgreSQL cuts them)."""
    from .views import VIEWS  # views reads the Spec type

    node = root.value.get("definitions")
    if node is None or not isinstance(node.value, dict):
        return
    prefix = v.get("output.prefix") or ""
    taken = {_view_key(prefix + view.name): view.name for view in VIEWS}
    for name in v.get("definitions") or ():
        pos = node.key_pos[name]
        path = f"definitions.{name}"
        if not v.get("activity"):
            for leaf in ("table", "user", "timestamp"):
                if f"{path}.{leaf}" not in checker.positions:
                    example = KEYS_BY_PATH[f"activity.{leaf}"].example
                    checker.report(pos, f"{path}.{leaf}",
                                   f"required key is missing from {path} (the spec has no "
                                   f"activity section to take it from); e.g. {leaf}: {example}")
        for view in VIEWS:
            full = f"{prefix}{name}_{view.name}"
            if len(full) > PG_NAME_LIMIT:
                checker.report(pos, path,
                               f"gives the view name {full} ({len(full)} characters), longer "
                               f"than the {PG_NAME_LIMIT} PostgreSQL keeps, so names could "
                               "collide; use a shorter name")
                break
            other = taken.get(_view_key(full))
            if other is not None:
                checker.report(pos, path, f"gives the view name {full}, the same as the "
                               f"view {prefix}{other}; rename the definition")
                break
            taken[_view_key(full)] = full


def _view_key(name: str) -> str:
    """A view name as engines compare it: without case, cut as PostgreSQL cuts it."""
    return name.lower()[:PG_NAME_LIMIT]


def _activity_view_checks(checker: _Checker, root: Node, v: dict[str, Any]) -> None:
    """engagement and trailing_windows read activity: refuse them in a spec without it."""
    if v.get("activity") or v.get("definitions") or not v.get("revenue"):
        return
    splits = any(segment.splits_activity for segment in v.get("segments") or ())
    for name in ("engagement", "trailing_windows", "segments"):
        node = root.value.get(name)
        if node is not None and v.get(name) and (name != "segments" or splits):
            checker.report((node.line, node.col), name,
                           "needs an activity section: these views count active users")


def _date_zone_check(checker: _Checker, section: Node, name: str, v: dict[str, Any]) -> None:
    zone = section.value.get("timezone")
    if zone is not None and v.get(f"{name}.timestamp_type") == "date":
        checker.report((zone.line, zone.col), f"{name}.timezone",
                       "a date column has no time of day to convert; remove timezone or "
                       "set timestamp_type: timestamp")


def _range_checks(checker: _Checker, section: Node, name: str, v: dict[str, Any]) -> None:
    """valid_from before valid_until, and a range the calendar of periods can hold whole."""
    start, end = v[f"{name}.valid_from"], v[f"{name}.valid_until"]
    given = [k for k in ("valid_until", "valid_from") if section.value.get(k) is not None]
    keys = (f"{name}.valid_from", f"{name}.valid_until")
    if not given or any(problem.key in keys for problem in checker.problems):
        return
    node = section.value[given[0]]
    key = f"{name}.{given[0]}"
    if start >= end:
        checker.report((node.line, node.col), key,
                       f"valid_from {start} must be before valid_until {end} (valid_until "
                       "is the first date left out)")
        return
    grains = [(v["grain"], v["grain"])] if v.get("grain") in GRAINS else []
    if name == "activity" and v.get("trailing_windows"):
        grains.append(("day", "trailing_windows"))
    for grain, why in grains:
        count = range_periods(start, end, grain)
        if count > MAX_CALENDAR_PERIODS:
            checker.report((node.line, node.col), key,
                           f"{start} to {end} holds {count:,} {grain} periods (for {why}), "
                           f"more than the {MAX_CALENDAR_PERIODS:,} a view's calendar can "
                           "hold; narrow the range or use a longer grain")


def range_periods(start: dt.date, end: dt.date, grain: str) -> int:
    """How many periods of ``grain`` the dates start .. end (exclusive) touch, at most."""
    last = end - dt.timedelta(days=1)
    days = (last - start).days
    months = (last.year * 12 + last.month) - (start.year * 12 + start.month)
    quarters = (last.year * 4 + (last.month - 1) // 3) - (start.year * 4 + (start.month - 1) // 3)
    return {"day": days, "week": days // 7 + 1, "month": months, "quarter": quarters,
            "year": last.year - start.year}[grain] + 1


_SHAPE_KEYS = {"charges": ("timestamp",), "subscriptions": ("start", "end", "interval",
                                                            "interval_column", "measure")}
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


def _build(v: dict[str, Any], filename: str, given: set[str] = frozenset()) -> Spec:
    activity = None
    if v.get("activity"):
        activity = _activity_source(v, "activity", v.get("report_from"))
    definitions = []
    for name in v.get("definitions") or ():
        path = f"definitions.{name}"
        def value(leaf: str) -> Any:
            """The definition's own value, else activity's (never activity's where)."""
            if f"{path}.{leaf}" in given or not v.get("activity") or leaf == "where":
                return v[f"{path}.{leaf}"]
            return v[f"activity.{leaf}"]
        own = {leaf: value(leaf) for leaf in ("table", "user", "timestamp", "timestamp_type",
                                             "where", "timezone", "valid_from", "valid_until")}
        seen = (_first_seen(v, path) if f"{path}.first_seen" in given
                else activity.first_seen if activity else None)
        report = value("report_from") or v.get("report_from")
        definitions.append(Definition(name, ActivitySource(**own, first_seen=seen,
                                                           report_from=report)))
    output = Output(dialect=v["output.dialect"], schema=v["output.schema"],
                    prefix=v["output.prefix"], folder=v["output.folder"],
                    materialize=v["output.materialize"],
                    lookback=_lookback_days(v["output.lookback"]))
    return Spec(version=v["version"], activity=activity, grain=v["grain"],
                week_start=v["week_start"], output=output, cohorts=v["cohorts"],
                engagement=v["engagement"], trailing_windows=tuple(v["trailing_windows"] or ()),
                file=os.path.basename(filename), revenue=_build_revenue(v),
                allow_functions=tuple(v["allow_functions"] or ()),
                definitions=tuple(definitions),
                segments=tuple(v["segments"] or ()))


def _activity_source(v: dict[str, Any], path: str, report_from: dt.date | None) -> ActivitySource:
    return ActivitySource(
        table=v[f"{path}.table"], user=v[f"{path}.user"],
        timestamp=v[f"{path}.timestamp"], timestamp_type=v[f"{path}.timestamp_type"],
        where=v[f"{path}.where"], timezone=v[f"{path}.timezone"],
        valid_from=v[f"{path}.valid_from"], valid_until=v[f"{path}.valid_until"],
        first_seen=_first_seen(v, path),
        report_from=v.get(f"{path}.report_from") or report_from)


def _first_seen(v: dict[str, Any], path: str) -> FirstSeen | None:
    if not v.get(f"{path}.first_seen"):
        return None
    at = f"{path}.first_seen"
    return FirstSeen(table=v[f"{at}.table"], user=v[f"{at}.user"],
                     timestamp=v[f"{at}.timestamp"], timestamp_type=v[f"{at}.timestamp_type"])


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
        timezone=v["revenue.timezone"],
        measure=None if charges else v["revenue.measure"], valid_from=v["revenue.valid_from"],
        valid_until=v["revenue.valid_until"])


def _suggest(word: str, options: list[str] | tuple[str, ...]) -> str:
    close = difflib.get_close_matches(str(word), list(options), n=1, cutoff=0.6)
    return f" Did you mean {close[0]!r}?" if close else ""


class _Checker:
    """Walks the YAML tree against KEYS, collecting problems and cleaned values."""

    def __init__(self, filename: str):
        self.filename = filename
        self.problems: list[Problem] = []
        self.values: dict[str, Any] = {}
        self.positions: dict[str, tuple[int, int]] = {}
        self.dialect = "duckdb"
        self.allow_functions: tuple[str, ...] = ()

    def report(self, node_pos: tuple[int, int], key: str, message: str) -> None:
        self.problems.append(Problem(self.filename, node_pos[0], node_pos[1], key, message))

    def section(self, node: Node, prefix: str) -> dict[str, Any]:
        if not isinstance(node.value, dict):
            where = prefix or "the spec"
            self.report((node.line, node.col), prefix, f"{where} must be a mapping of keys")
            return self.values
        children = _children(prefix)
        allowed = [_leaf(k.path) for k in children]
        for name, pos in node.key_pos.items():
            if name not in allowed:
                path = f"{prefix}.{name}" if prefix else name
                self.report(pos, path, f"unknown key.{_suggest(name, allowed)} "
                            f"Allowed here: {', '.join(allowed)}")
        # The dialect and allow_functions first: the where filters are read with them.
        first = sorted((k for k in children if k.path in _READ_FIRST),
                       key=lambda k: _READ_FIRST.index(k.path))
        for key in first + [k for k in children if k.path not in _READ_FIRST]:
            self.key(node, key)
        if prefix == "" and "output" not in node.value:
            self.section(Node({}, node.line, node.col), "output")
        return self.values

    def key(self, parent: Node, key: Key) -> None:
        leaf = _leaf(key.path)
        child = parent.value.get(leaf)
        if child is not None:
            self.positions[key.path] = (child.line, child.col)
        if child is not None and child.refused:  # already reported by the YAML reader
            self.values[key.path] = key.default
            return
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
        self.positions[key.path] = (child.line, child.col)
        if key.kind == "mapping":
            self.values[key.path] = True  # the section is present
            self.section(child, key.path)
            return
        if key.kind == "definitions":
            self.values[key.path] = self.definitions(child)
            return
        if key.kind == "segments":
            self.values[key.path] = _check_segments(self, child)
            return
        try:
            self.values[key.path] = _CHECKS[key.kind](self, key, child.value)
        except _Reported:
            self.values[key.path] = key.default
        except ValueError as err:
            self.values[key.path] = key.default
            self.report((child.line, child.col), key.path, str(err))


    def definitions(self, node: Node) -> tuple[str, ...]:
        """Each definition's name, then its keys, checked as those of `activity`."""
        if not isinstance(node.value, dict):
            self.report((node.line, node.col), "definitions",
                        "expected a mapping of definition names to activity keys, e.g. "
                        "purchasers: {where: \"event_name = 'purchase'\"}")
            return ()
        found: dict[str, str] = {}
        for name, child in node.value.items():
            pos = node.key_pos[name]
            path = f"definitions.{name}"
            problem = _definition_name_problem(name, found)
            if problem:
                self.report(pos, path if names.BARE.fullmatch(str(name)) else "definitions",
                            problem)
                continue
            found[name.lower()] = name
            self.positions[path] = pos
            if child.value is None:
                child = Node({}, child.line, child.col)
            self.section(child, path)
        return tuple(found.values())


def _definition_name_problem(name: Any, found: dict[str, str]) -> str:
    """Why a definition name cannot be used ("" when it can): it names views."""
    if not isinstance(name, str) or not names.BARE.fullmatch(name):
        return (f"definition name {_describe(name)} must be letters, digits and _ (starting "
                "with a letter or _): it becomes part of view names")
    if name.lower().startswith(names.RESERVED_PREFIX):
        return f"names starting with {names.RESERVED_PREFIX!r} are reserved"
    if name.lower() in found:
        return (f"definition {shown(name)} has the same name as definition "
                f"{shown(found[name.lower()])} (view names are compared without regard to "
                "case); rename one")
    return ""


def _canonical(path: str) -> str:
    """The KEYS path a spec path is checked as: `definitions.<name>.x` as `activity.x`."""
    parts = path.split(".")
    if parts[0] == "definitions" and len(parts) >= 2:
        return ".".join(["activity", *parts[2:]])
    return path


def _children(prefix: str) -> list[Key]:
    """The keys of a section, with paths under ``prefix``. In a definition the keys of
    `activity` itself are optional: one left out is taken from `activity`."""
    canon = _canonical(prefix)
    keys = [k for k in KEYS if _parent(k.path) == canon]
    if canon == prefix:
        return keys
    return [replace(k, path=prefix + k.path[len(canon):],
                    required=k.required and canon != "activity") for k in keys]


_READ_FIRST = ("output", "output.dialect", "allow_functions")


def _requires_keys(section: str) -> bool:
    """True when an optional section has required keys: left out, they are not asked for."""
    section = _canonical(section)
    return any(k.required and k.path.startswith(section + ".") for k in KEYS)


def _parent(path: str) -> str:
    return path.rpartition(".")[0]


def _leaf(path: str) -> str:
    return path.rpartition(".")[2]


def _describe(value: Any) -> str:
    """A YAML value as a message names it: never a repr of sqlgen's own objects."""
    if isinstance(value, list):
        return "a list"
    if isinstance(value, dict):
        return "a mapping"
    if value is None:
        return "nothing"
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, (int, float)):
        return cut(str(value), MESSAGE_LIMIT)
    if isinstance(value, (dt.date, dt.datetime)):
        return f"the date {value.isoformat()}"
    return shown(value)


def _text(value: Any, what: str = "text") -> str:
    if not isinstance(value, str) or isinstance(value, bool):
        raise ValueError(f"expected {what}, got {_describe(value)}")
    return value


def _check_integer(_c: _Checker, key: Key, value: Any) -> int:
    if key.path == "version":
        if value != 1 or isinstance(value, bool):
            raise ValueError(f"expected 1 (the only spec version), got {_describe(value)}")
    return int(value)


def _check_choice(c: _Checker, key: Key, value: Any) -> str:
    if isinstance(value, (list, dict)) or value is None:
        raise ValueError(f"expected one of {', '.join(key.choices)}, got {_describe(value)}")
    text = str(value) if not isinstance(value, bool) else repr(value).lower()
    if text not in key.choices:
        raise ValueError(f"{shown(text)} is not one of {', '.join(key.choices)}."
                         f"{_suggest(text, key.choices)}")
    if key.path == "output.dialect":
        c.dialect = TARGETS[text].sqlglot_dialect
    return text


def _check_name(max_parts: int) -> Callable[[_Checker, Key, Any], tuple[names.Part, ...]]:
    def check(_c: _Checker, key: Key, value: Any) -> tuple[names.Part, ...]:
        try:
            parts = names.split_name(_text(value, "a name"), max_parts)
        except names.NameError_ as err:
            raise ValueError(f"{shown(value)} {err}") from None
        for text, _quoted in parts:
            if text.lower().startswith(names.RESERVED_PREFIX):
                raise ValueError(f"names starting with {names.RESERVED_PREFIX!r} are reserved")
        return parts
    return check


def _check_column(c: _Checker, key: Key, value: Any) -> names.Part:
    return _check_name(1)(c, key, value)[0]


def _refuse_control(text: str, allowed: str = "") -> None:
    bad = next((i for i, char in enumerate(text) if unsafe(char) and char not in allowed), None)
    if bad is not None:
        raise ValueError(f"holds a control character (U+{ord(text[bad]):04X}) at position "
                         f"{bad + 1}; write printable text")


def _check_filter(c: _Checker, _key: Key, value: Any) -> str:
    text = _text(value, "an SQL condition as text").strip()
    _refuse_control(text, allowed="\t\n\r")  # a condition may span lines
    parse_filter(text, c.dialect, c.allow_functions)
    return text


def _check_functions(c: _Checker, _key: Key, value: Any) -> tuple[str, ...]:
    if not isinstance(value, list):
        raise ValueError(f"expected a list of function names, e.g. [is_internal_account]; "
                         f"got {_describe(value)}")
    found: list[str] = []
    for item in value:
        name = item.value
        if not isinstance(name, str) or not names.BARE.fullmatch(name):
            raise ValueError(f"{_describe(name)} is not a function name (letters, digits and _); "
                             "expected a list of names, e.g. [is_internal_account]")
        if name.lower() in found:
            raise ValueError(f"{shown(name)} appears more than once")
        if known_function(name, c.dialect):
            raise ValueError(f"{shown(name)} is a function sqlgen's parser knows, and it is not on "
                             "the list in docs/filters.md; allow_functions admits only "
                             "functions it does not know")
        found.append(name.lower())
    c.allow_functions = tuple(found)
    return tuple(found)


def _check_timezone(_c: _Checker, _key: Key, value: Any) -> str:
    zone = _text(value, "an IANA time zone name")
    if zone not in _zones():
        raise ValueError(f"{shown(zone)} is not an IANA time zone name.{_suggest(zone, _zones())}")
    return zone


def _zones() -> list[str]:
    return sorted(zoneinfo.available_timezones())


def _check_prefix(_c: _Checker, _key: Key, value: Any) -> str:
    text = _text(value)
    if text and not names.BARE.fullmatch(text):
        raise ValueError(f"{shown(text)} must be letters, digits and _ (starting with a letter "
                         "or _)")
    return text


def _check_text(_c: _Checker, _key: Key, value: Any) -> str:
    text = _text(value)
    _refuse_control(text)
    return text


def _check_scale(_c: _Checker, _key: Key, value: Any) -> int:
    if not isinstance(value, int) or isinstance(value, bool) or not 0 <= value <= MAX_SCALE:
        raise ValueError(f"expected a whole number of decimal places from 0 to {MAX_SCALE}, "
                         f"got {_describe(value)}")
    return value


def _lookback_days(value: int | str) -> int:
    """output.lookback in days: the checked value, or the default's text."""
    return value if isinstance(value, int) else _check_lookback(None, None, value)


def _check_lookback(_c: _Checker | None, _key: Key | None, value: Any) -> int:
    """`N days` or `N weeks` (also `1 day`, `1 week`) -> days; a bare whole number is refused,
    so that the unit is always written."""
    text = str(value).strip().lower() if isinstance(value, (str, int)) else None
    parts = text.split() if text is not None and not isinstance(value, bool) else []
    units = {"day": 1, "days": 1, "week": 7, "weeks": 7}
    if len(parts) != 2 or not parts[0].isdigit() or parts[1] not in units:
        raise ValueError(f"expected a length such as 3 days or 1 week, got {_describe(value)}")
    days = int(parts[0]) * units[parts[1]]
    if days > MAX_LOOKBACK_DAYS:
        raise ValueError(f"{days} days is longer than {MAX_LOOKBACK_DAYS} days; a lookback "
                         "that long is a full rebuild (create_all.sql)")
    return days


def _check_boolean(_c: _Checker, _key: Key, value: Any) -> bool:
    if not isinstance(value, bool):
        raise ValueError(f"expected true or false, got {_describe(value)}")
    return value


class _Reported(Exception):
    """A check already reported its problems (each at its own place)."""


def _check_windows(c: _Checker, key: Key, value: Any) -> tuple[int, ...]:
    """Every bad or repeated length is reported at its own place in the list."""
    if not isinstance(value, list):
        raise ValueError(f"expected a list of window lengths in days, e.g. [7, 28]; got {_describe(value)}")
    seen: set[int] = set()
    before = len(c.problems)
    for item in value:
        day = item.value
        if not isinstance(day, int) or isinstance(day, bool):
            message = f"window length {_describe(day)} is not a whole number of days"
        elif not 1 <= day <= MAX_WINDOW_DAYS:
            message = f"window length {day} must be from 1 to {MAX_WINDOW_DAYS} days"
        elif day in seen:
            message = f"window length {day} appears more than once"
        else:
            seen.add(day)
            continue
        c.report((item.line, item.col), key.path, message)
    if len(c.problems) > before:
        raise _Reported
    return tuple(item.value for item in value)


def _check_date(_c: _Checker, _key: Key, value: Any) -> dt.date:
    if isinstance(value, dt.datetime):
        raise ValueError(f"expected a date such as 2015-01-01, got the timestamp {value}; "
                         "write the date alone")
    if isinstance(value, str):
        try:
            value = dt.date.fromisoformat(value.strip())
        except ValueError:
            raise ValueError(f"{shown(value)} is not a date; write it as YYYY-MM-DD, "
                             "e.g. 2015-01-01") from None
    if not isinstance(value, dt.date):
        raise ValueError(f"expected a date such as 2015-01-01, got {_describe(value)}")
    if not EARLIEST_DATE <= value <= LATEST_DATE:
        raise ValueError(f"{value} is outside the dates sqlgen can compare on every engine, "
                         f"{EARLIEST_DATE} to {LATEST_DATE}")
    return value


SEGMENT_KEYS = ("kind", "column", "table", "key", "customer_key")


def _check_segments(c: _Checker, node: Node) -> tuple[Segment, ...]:
    """Each segment checked at its own place; a bad one is reported and left out."""
    if not isinstance(node.value, dict):
        c.report((node.line, node.col), "segments",
                 f"expected a mapping of segment names to their definitions, e.g. "
                 f"{KEYS_BY_PATH['segments'].example}; got {_describe(node.value)}")
        return ()
    found = []
    for name, entry in node.value.items():
        before = len(c.problems)
        _check_segment_name(c, name, node.key_pos[name])
        segment = _check_segment(c, name, entry)
        if segment is not None and len(c.problems) == before:
            found.append(segment)
    return tuple(found)


def _check_segment_name(c: _Checker, name: str, pos: tuple[int, int]) -> None:
    from .views import segment_view_columns  # the views table reads the spec module

    path = f"segments.{name}"
    if not names.BARE.fullmatch(name):
        c.report(pos, path, f"segment name {shown(name)} must be letters, digits and _ "
                            "(starting with a letter or _)")
    elif name.lower().startswith(names.RESERVED_PREFIX):
        c.report(pos, path, f"names starting with {names.RESERVED_PREFIX!r} are reserved")
    else:
        clash = segment_view_columns().get(name.lower())
        if clash:
            c.report(pos, path, f"segment name {shown(name)} is also a column of {clash}; "
                                "rename the segment")


def _check_segment(c: _Checker, name: str, entry: Node) -> Segment | None:
    path = f"segments.{name}"
    if not isinstance(entry.value, dict):
        c.report((entry.line, entry.col), path,
                 f"expected a mapping with kind and column, e.g. {{kind: event, column: "
                 f"platform}}; got {_describe(entry.value)}")
        return None
    for key, pos in entry.key_pos.items():
        if key not in SEGMENT_KEYS:
            c.report(pos, f"{path}.{key}", f"unknown key.{_suggest(key, SEGMENT_KEYS)} "
                     f"Allowed here: {', '.join(SEGMENT_KEYS)}")
    v = {key: _segment_value(c, path, entry, key) for key in SEGMENT_KEYS}
    _segment_rules(c, path, entry, v)
    if v["kind"] is None or v["column"] is None:
        return None
    return Segment(name=name, kind=v["kind"], column=v["column"], table=v["table"],
                   key=v["key"], customer_key=v["customer_key"])


def _segment_value(c: _Checker, path: str, entry: Node, key: str) -> Any:
    """One key of a segment, checked like the spec key of the same kind."""
    doc = KEYS_BY_PATH[f"segments.<name>.{key}"]
    child = entry.value.get(key)
    full = f"{path}.{key}"
    if child is None or child.value is None:
        if doc.required:
            example = doc.example or doc.choices[0]
            c.report((entry.line, entry.col), full,
                     f"required key is missing from {path}; e.g. {key}: {example}")
        return None
    c.positions[full] = (child.line, child.col)
    if child.refused:
        return None
    check = _CHECKS["column" if doc.kind == "segment column" else doc.kind]
    try:
        return check(c, replace(doc, path=full), child.value)
    except ValueError as err:
        c.report((child.line, child.col), full, str(err))
        return None


def _segment_rules(c: _Checker, path: str, entry: Node, v: dict[str, Any]) -> None:
    """table and key together; table and customer_key for kind: user only."""
    pos = entry.key_pos
    if "key" in pos and "table" not in pos:
        c.report(pos["key"], f"{path}.key", "key names the user key column of table; add "
                 "table (e.g. table: app.users) or remove key")
    if "table" in pos and "key" not in pos and "customer_key" not in pos:
        c.report(pos["table"], f"{path}.table", "a segment table needs key, its user key "
                 "column (e.g. key: user_id), or customer_key, its revenue customer column")
    if "customer_key" in pos and "table" not in pos:
        c.report(pos["customer_key"], f"{path}.customer_key", "customer_key names a column "
                 "of table; add table or remove customer_key")
    if v["kind"] == "event":
        for key in ("table", "customer_key"):
            if key in pos:
                c.report(pos[key], f"{path}.{key}", "a kind: event segment reads the activity "
                         f"table; remove {key} or set kind: user")


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
    "lookback": _check_lookback,
    "windows": _check_windows,
    "functions": _check_functions,
    "date": _check_date,
}
