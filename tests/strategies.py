"""Hypothesis strategies for growth accounting event data.

Generated datasets are small (at most 60 events by default) and use a
small pool of users so that users recur across periods. Dates cluster in
a window that often starts on a calendar edge: year ends, leap days,
ISO week 53 years (2020, 2026), month and quarter boundaries, and the
2021 New York DST change days. Times favour exact midnight and the last
microsecond of a day. A few rows carry sentinel timestamps outside the spec's default
valid range (0001-01-01, 1900-01-01, epoch zero, 9999-12-31 and the instants just
outside its bounds): the views must leave them out and the summary count them.
"""

from __future__ import annotations

import calendar
from datetime import UTC, date, datetime, time, timedelta

from hypothesis import strategies as st
from reference import GRAINS, WEEKDAYS

FIRST_DAY = date(2019, 1, 1)
LAST_DAY = date(2027, 12, 31)

EDGE_DATES = (
    date(2019, 12, 30),  # Monday of ISO 2020-W01
    date(2019, 12, 31),
    date(2020, 1, 1),
    date(2020, 2, 28),
    date(2020, 2, 29),  # leap day
    date(2020, 3, 1),
    date(2020, 3, 31),
    date(2020, 4, 1),
    date(2020, 6, 30),
    date(2020, 7, 1),
    date(2020, 9, 30),
    date(2020, 10, 1),
    date(2020, 12, 27),
    date(2020, 12, 28),  # Monday of ISO 2020-W53
    date(2020, 12, 31),
    date(2021, 1, 1),
    date(2021, 1, 3),  # Sunday ending ISO 2020-W53
    date(2021, 1, 4),
    date(2021, 3, 13),
    date(2021, 3, 14),  # New York spring-forward day
    date(2021, 11, 6),
    date(2021, 11, 7),  # New York fall-back day
    date(2021, 12, 26),
    date(2022, 1, 1),
    date(2022, 1, 2),
    date(2023, 12, 31),
    date(2024, 1, 1),
    date(2024, 2, 29),  # leap day
    date(2024, 3, 1),
    date(2026, 12, 28),  # Monday of ISO 2026-W53
    date(2026, 12, 31),
    date(2027, 1, 3),  # Sunday ending ISO 2026-W53
    date(2027, 1, 4),
)

# Window lengths in days: one day, a week, a month and a bit, a quarter and
# a bit, a year and a bit, a little over two years.
WINDOW_DAYS = (0, 6, 45, 120, 400, 800)

USER_NAMES = ("ann", "bob", "cat", "dan", "eve", "fin", "gil", "hana", "ivo", "jo")

TIMEZONE_NAMES = ("UTC", "America/New_York", "Europe/Berlin", "Asia/Kolkata", "Pacific/Auckland")

EVENT_KINDS = ("timestamp", "timestamptz", "date")

# Sentinels warehouses store for "unknown" or "never" (common practice), and the last
# microsecond before the default valid_from (1990-01-01) and the default valid_until itself
# (2100-01-01, exclusive): all outside the default valid range in UTC.
SENTINELS = (
    datetime(1, 1, 1),
    datetime(1900, 1, 1),
    datetime(1970, 1, 1),
    datetime(9999, 12, 31, 23, 59, 59),
    datetime(1989, 12, 31, 23, 59, 59, 999999),
    datetime(2100, 1, 1),
)
# ClickHouse's Date holds 1970-01-01 .. 2149-06-06 (its manual, from memory): date-typed
# sentinels outside it cannot even be loaded there.
CLICKHOUSE_DATES = (date(1970, 1, 1), date(2149, 6, 6))
# MySQL's and MariaDB's TIMESTAMP holds 1970-01-01 00:00:01 .. 2038-01-19 03:14:07 UTC (their
# manuals, from memory; the server refuses 0001-01-01 with error 1292, seen in the tests).
MYSQL_INSTANTS = (datetime(1970, 1, 1, 0, 0, 1), datetime(2038, 1, 19, 3, 14, 7))

_TIMES = st.one_of(st.just(time(0, 0)), st.just(time(23, 59, 59, 999999)), st.times())


def grains():
    """Strategy for a grain name."""
    return st.sampled_from(GRAINS)


def week_starts():
    """Strategy for a week_start name."""
    return st.sampled_from(WEEKDAYS)


def timezones():
    """Strategy for an IANA timezone name (including ones with DST and +05:30)."""
    return st.sampled_from(TIMEZONE_NAMES)


def _first_of_month(d):
    """Return the first day of d's month."""
    return d.replace(day=1)


def _last_of_month(d):
    """Return the last day of d's month."""
    return d.replace(day=calendar.monthrange(d.year, d.month)[1])


@st.composite
def _window(draw):
    """Draw ``(start, end)`` dates of the window a dataset's events fall in."""
    start = draw(st.one_of(st.sampled_from(EDGE_DATES), st.dates(FIRST_DAY, LAST_DAY)))
    days = draw(st.sampled_from(WINDOW_DAYS))
    return start, min(start + timedelta(days=days), LAST_DAY)


def _days(start, end):
    """Strategy for dates in [start, end], biased to month ends and edge dates."""
    inside = st.dates(start, end)
    choices = [inside, inside.map(_first_of_month), inside.map(_last_of_month)]
    edges = [d for d in EDGE_DATES if start <= d <= end]
    if edges:
        choices.append(st.sampled_from(edges))
    return st.one_of(choices)


def _timestamps(kind, start, end):
    """Strategy for one event timestamp of ``kind`` within the window."""
    days = _days(start, end)
    if kind == "date":
        return days
    naive = st.builds(datetime.combine, days, _TIMES)
    if kind == "timestamp":
        return naive
    if kind == "timestamptz":
        return naive.map(lambda ts: ts.replace(tzinfo=UTC))
    raise ValueError(f"unknown kind {kind!r}; expected one of {EVENT_KINDS}")


def _maybe_none(values, allow_none):
    """Strategy drawing from ``values``, giving None about one time in ten."""
    if not allow_none:
        return values
    return st.tuples(st.integers(0, 9), values).map(lambda pair: None if pair[0] == 0 else pair[1])


def sentinel_values(kind="timestamp", engine=None):
    """The sentinels as values of ``kind``; on ClickHouse, date-typed ones it can store."""
    if kind == "date":
        days = sorted({ts.date() for ts in SENTINELS})
        if engine == "clickhouse":
            days = [d for d in days if CLICKHOUSE_DATES[0] <= d <= CLICKHOUSE_DATES[1]]
        return days
    if kind == "timestamptz":
        instants = [ts.replace(tzinfo=UTC) for ts in SENTINELS]
        if engine == "mysql":  # a TIMESTAMP column (MySQL's instant type) holds no others
            instants = [ts for ts in instants
                        if MYSQL_INSTANTS[0] <= ts.replace(tzinfo=None) <= MYSQL_INSTANTS[1]]
        return instants
    return list(SENTINELS)


@st.composite
def events(draw, kind="timestamp", max_size=60, allow_none=True, user_type=str,
           sentinels=None):
    """Strategy for a list of ``(user, ts)`` events.

    ``kind``: 'timestamp' (naive datetimes), 'timestamptz' (UTC-aware
    datetimes) or 'date'. ``user_type``: str or int. With ``allow_none``
    about one user and one timestamp in ten is None. Some rows are repeated
    exactly to make duplicate events. Up to three more rows carry a sentinel
    timestamp (``sentinels``, by default sentinel_values(kind)). At most
    ``max_size`` rows before the sentinels.
    """
    if user_type is str:
        pool = draw(st.lists(st.sampled_from(USER_NAMES), min_size=1, max_size=6, unique=True))
    else:
        pool = draw(st.lists(st.integers(1, 99), min_size=1, max_size=6, unique=True))
    start, end = draw(_window())
    row = st.tuples(
        _maybe_none(st.sampled_from(pool), allow_none),
        _maybe_none(_timestamps(kind, start, end), allow_none),
    )
    size = draw(st.integers(0, max_size))  # uniform size: plain st.lists stays very short
    rows = draw(st.lists(row, min_size=size, max_size=size))
    if rows:
        repeats = draw(
            st.lists(st.integers(0, len(rows) - 1), max_size=min(10, max_size - len(rows)))
        )
        rows += [rows[i] for i in repeats]
    values = sentinel_values(kind) if sentinels is None else list(sentinels)
    if values:
        rows += draw(st.lists(st.tuples(st.sampled_from(pool), st.sampled_from(values)),
                              max_size=3))
    return draw(st.permutations(rows))
