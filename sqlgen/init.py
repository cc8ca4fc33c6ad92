"""``sqlgen init SOURCE``: a commented starter spec for one table of a schema source.

``starter_spec(source, table)`` returns the spec text; ``write_starter(source, path,
table)`` writes it, never over an existing file. The proposals (user key, timestamp column
and its ``timestamp_type``, valid range, grain) come from column names and types, and for
sources that hold rows, from the dates in the timestamp column; each says why in a comment.
"""

from __future__ import annotations

import datetime as dt
import os
import re
import textwrap
from dataclasses import dataclass
from pathlib import Path

from .errors import OutputError, SqlgenError
from .names import BARE
from .schema import DEFAULT_SCHEMAS, Catalog, Column, Table, date_span, open_source, suggest, table_list
from .spec import VALID_FROM, VALID_UNTIL

# Names a user key is often given, best first (common practice); then any *_id column.
USER_NAMES = ("user_id", "userid", "user", "member_id", "account_id", "customer_id",
              "client_id", "person_id", "visitor_id", "device_id", "player_id")
# Names of the time an event happened, best first (common practice); then *_at, *_time...
TIME_NAMES = ("occurred_at", "event_time", "event_timestamp", "event_at", "timestamp",
              "ts", "created_at", "happened_at", "logged_at", "event_date", "date", "day")
_TIME_SUFFIXES = ("_at", "_time", "_ts", "_timestamp", "_date", "_on")
SHORT_SPAN_DAYS = 120  # shorter data than this gets weekly periods: months would be few


class InitError(SqlgenError):
    """The source holds no table, or no column fit for a user key or a timestamp."""


@dataclass(frozen=True)
class Proposal:
    """A pick and the reason shown beside it in the starter spec."""

    value: str
    why: str


def choose_table(catalog: Catalog, wanted: str | None) -> Table:
    """The table ``--table`` names (``schema.table`` or ``table``), or the only one."""
    if wanted:
        parts = tuple((p, False) for p in wanted.split("."))
        table = catalog.find(parts)
        if table is None:
            raise InitError(f"--table {wanted!r}: no such table in {catalog.label}; it holds "
                            f"{table_list(catalog)}.{suggest(wanted, catalog.names())}")
        return table
    if not catalog.tables:
        raise InitError(f"{catalog.label} holds no tables")
    if len(catalog.tables) > 1:
        raise InitError(f"{catalog.label} holds {len(catalog.tables)} tables "
                        f"({table_list(catalog)}); choose one with --table")
    return catalog.tables[0]


def propose_user(table: Table) -> Proposal:
    fit = [c for c in table.columns if c.kind in ("text", "integer", "decimal")]
    by_name = {c.name.lower(): c for c in fit}
    for name in USER_NAMES:
        if name in by_name:
            return Proposal(by_name[name].name, f"named like a user key ({by_name[name].type})")
    ids = [c for c in fit if c.name.lower().endswith("_id") or c.name.lower() == "id"]
    if ids:
        return Proposal(ids[0].name, f"the first *_id column ({ids[0].type}); check that it "
                                     "identifies a user, not an event")
    if not fit:
        raise InitError(f"{table.display} has no text or whole-number column to use as the "
                        "user key")
    return Proposal(fit[0].name, f"the first text or whole-number column ({fit[0].type}); "
                                 "no column is named like a user key, so check it")


def propose_time(table: Table) -> tuple[Column, Proposal]:
    fit = [c for c in table.columns if c.kind in ("timestamptz", "timestamp", "date")]
    if not fit:
        raise InitError(f"{table.display} has no DATE, TIMESTAMP or TIMESTAMPTZ column for "
                        "when the activity happened")
    by_name = {c.name.lower(): c for c in fit}
    for name in TIME_NAMES:
        if name in by_name:
            return by_name[name], Proposal(by_name[name].name, "named like an event time")
    for column in fit:
        if column.name.lower().endswith(_TIME_SUFFIXES):
            return column, Proposal(column.name, "named like a time; check that it is when "
                                                 "the activity happened")
    return fit[0], Proposal(fit[0].name, "the first date or time column; check that it is "
                                         "when the activity happened")


_TYPE_WHY = {
    "timestamptz": "holds instants (a time zone type): read the same in every session zone",
    "timestamp": "holds times without a zone: taken as UTC when a timezone is set",
    "date": "holds dates: no time of day to convert",
}


def starter_spec(source: str, wanted: str | None = None) -> str:
    """The text of a commented starter spec for one table of ``source``."""
    catalog = open_source(source)
    table = choose_table(catalog, wanted)
    user = propose_user(table)
    time_column, time = propose_time(table)
    span = date_span(source, catalog, table, time_column, VALID_FROM, VALID_UNTIL)
    return _render(catalog, table, user, time, time_column, span)


def _range(span) -> tuple[dt.date, dt.date, str]:
    if span is None or span.first is None:
        return VALID_FROM, VALID_UNTIL, ("the default range: this source holds no rows to "
                                         "read, or none inside it")
    start = dt.date(span.first.year, 1, 1)
    until = dt.date(min(span.last.year + 2, VALID_UNTIL.year), 1, 1)
    why = (f"the rows run from {span.first} to {span.last}; the range starts on 1 January "
           "of the first year and leaves a year of room after the last")
    if span.outside:
        why += (f"; {span.outside} row(s) fall outside {VALID_FROM} to {VALID_UNTIL} "
                "(sentinel dates?) and are left out, counted in out_of_range_rows")
    return start, until, why


def _grain(span) -> Proposal:
    if span is not None and span.first is not None and (
            span.last - span.first).days < SHORT_SPAN_DAYS:
        return Proposal("week", f"the rows span under {SHORT_SPAN_DAYS} days: weeks give "
                                "more than a few periods")
    return Proposal("month", "monthly active users and monthly periods are the usual start")


def _name(text: str) -> str:
    """A name as a spec writes it: bare when it can be, else in double quotes."""
    if BARE.fullmatch(text) and text == text.lower():
        return text
    return '"' + text.replace('"', '""') + '"'


def _yaml(text: str) -> str:
    """A YAML scalar for a name: single-quoted when it holds quotes or special text."""
    if re.fullmatch(r"[A-Za-z_][A-Za-z0-9_.]*", text):
        return text
    return "'" + text.replace("'", "''") + "'"


def _comments(lines: list[str]) -> list[str]:
    """Comment lines wrapped to 88 characters, continuation lines indented alike."""
    out = []
    for line in lines:
        body = line.lstrip(" ")
        indent = line[:len(line) - len(body)]
        if not body.startswith("# ") or len(line) <= 88 or "    # " in body:
            out.append(line)
            continue
        out += textwrap.wrap(body[2:], 88 - len(indent) - 2, initial_indent=f"{indent}# ",
                             subsequent_indent=f"{indent}# ", break_on_hyphens=False)
    return out


def _render(catalog: Catalog, table: Table, user: Proposal, time: Proposal,
            time_column: Column, span) -> str:
    start, until, range_why = _range(span)
    grain = _grain(span)
    kind = time_column.kind
    schema = [table.schema] if table.schema and table.schema not in DEFAULT_SCHEMAS else []
    qualified = ".".join(_name(p) for p in schema + [table.name])
    lines = [
        f"# Starter spec written by `sqlgen init` from {catalog.label}, table {table.display}.",
        "# Every value below is a proposal: read the reasons, change what is wrong, then run",
        f"#   sqlgen validate --schema {catalog.label} THIS_FILE",
        "# The views hold personal data (one row per user in user_activity): restrict access.",
        "version: 1",
        "activity:",
    ]
    if catalog.kind in ("parquet", "csv"):
        lines.append(f"  # A {catalog.kind} file is one table: create a table or view named "
                     f"{table.name} over it in the warehouse before running the views.")
    lines += [
        f"  table: {_yaml(qualified)}",
        f"  # {user.value}: {user.why}.",
        f"  user: {_yaml(_name(user.value))}",
        f"  # {time.value}: {time.why}; it is {time_column.type}.",
        f"  timestamp: {_yaml(_name(time.value))}",
        f"  # {kind}: the column {_TYPE_WHY[kind]}.",
        f"  timestamp_type: {kind}",
    ]
    if kind != "date":
        lines.append("  # timezone: Europe/Paris    # optional: report in this zone's local time")
    lines += [
        "  # where: event_name <> 'heartbeat'    # optional: which rows count as activity",
        f"  # Valid range: {range_why}.",
        f"  valid_from: {start.isoformat()}",
        f"  valid_until: {until.isoformat()}",
        f"# {grain.value}: {grain.why}.",
        f"grain: {grain.value}",
        "output:",
        f"  dialect: {catalog.dialect}",
        "  folder: sql",
        "",
    ]
    return "\n".join(_comments(lines))


def write_starter(source: str, path: str, wanted: str | None = None) -> str:
    """Write the starter spec to ``path`` (never over an existing file); return the text."""
    text = starter_spec(source, wanted)
    try:
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
    except FileExistsError:
        raise OutputError(f"{path} exists; sqlgen init never overwrites a file. Give "
                          "another name with --out, or remove it") from None
    with os.fdopen(fd, "w", encoding="utf-8") as handle:
        handle.write(text)
    return text


def starter_path(path: str | None) -> str:
    return path or str(Path("growth.yml"))
