"""The views give the same local dates whatever the session's time zone is.

A view is evaluated in the session of whoever reads it, so an instant must never be read
through the session zone (MySQL, for one, hands a TIMESTAMP column to a query in the
session's ``time_zone``). Each case loads its table once, under UTC, then reads the views
under several session zones: UTC, one west of UTC with DST, one east of UTC with a
half-hour offset, and on MySQL 'SYSTEM' (the server runs under engines.MYSQL_SYSTEM_ZONE).
Every reading must equal the plain-Python reference, and so each other.

How each engine's session zone is set is in engines.py (``session_zone``): DuckDB and
Postgres ``TimeZone``, MySQL ``time_zone``, Spark ``spark.sql.session.timeZone``,
ClickHouse ``session_timezone``, SQLite (no session zone) the process's ``TZ``.
"""

from __future__ import annotations

import datetime as dt
from decimal import Decimal as D

import pytest
import reference as ref
import reference_revenue as rr
from conftest import engine_target_pairs
from harness import prepare, read_revenue, read_views, run_revenue
from test_revenue import check_views
from test_views import check_all

from sqlgen.dialects import TARGETS
from sqlgen.support import support

PAIRS = engine_target_pairs()
ZONES = ("UTC", "America/Los_Angeles", "Asia/Kolkata")
# MySQL also reads under its server's zone; Spark, the slowest engine, under one zone that
# is not UTC (the rest of the suite reads it under UTC).
SESSION_ZONES = {"mysql": ZONES + ("SYSTEM",), "spark": ("Asia/Kolkata",)}
REPORTING_ZONE = "America/New_York"
UTC = dt.UTC
# An instant a microsecond before midnight in New York (EST, UTC-5): rounded to the second
# it would fall on the next local day.
LAST_MICROSECOND = dt.datetime(2021, 3, 14, 4, 59, 59, 999999, tzinfo=UTC)


def session_zones(engine_name: str) -> tuple[str, ...]:
    return SESSION_ZONES.get(engine_name, ZONES)


def as_loaded(events, kind: str):
    """The instants as loaded: aware (``timestamptz``) or UTC wall clock (``timestamp``)."""
    if kind == "timestamptz":
        return events
    return [(u, ts.astimezone(UTC).replace(tzinfo=None), *rest) for u, ts, *rest in events]


def skip_unsupported(target: str, feature: str, zone: str | None) -> None:
    if zone and support(TARGETS[target], feature)[0] == "unsupported":
        pytest.skip(f"{target} cannot convert to {zone} (tests/test_views.py pins the refusal)")


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("kind,timezone", [("timestamptz", REPORTING_ZONE),
                                           ("timestamptz", None), ("timestamp", REPORTING_ZONE)])
def test_activity_views_ignore_session_zone(engines, engine_name, target, kind, timezone):
    """``timestamptz``: the engine's instant type; ``timestamp``: the same instants stored
    as a UTC wall clock (MySQL: DATETIME(6)), read as UTC as ``timezone`` is set."""
    skip_unsupported(target, "activity.timezone", timezone)
    raw = ref.read_fixture_events(ref.FIXTURES_DIR / "dst_new_york" / "events_tz.csv",
                                  "timestamptz") + [("ivy", LAST_MICROSECOND, "login")]
    loaded = as_loaded(raw, kind)
    engine = engines(engine_name)
    prepare(engine, target, loaded, kind=kind, grain="day", timezone=timezone)
    events = [(u, ts) for u, ts, _name in loaded]
    readings = {}
    for zone in session_zones(engine_name):
        with engine.session_zone(zone):
            readings[zone] = read_views(engine, target)
        check_all(readings[zone], events, "day", "monday", timezone or "UTC")
    first = next(iter(readings.values()))
    assert all(_sorted(r) == _sorted(first) for r in readings.values())


# Charges near midnight UTC: in New York the first two fall in the month before.
CHARGES = [("a", dt.datetime(2024, 2, 1, 3, 0, tzinfo=UTC), D("10.00")),
           ("a", dt.datetime(2024, 3, 1, 4, 59, 59, 999999, tzinfo=UTC), D("11.00")),
           ("b", dt.datetime(2024, 3, 1, 5, 0, tzinfo=UTC), D("7.00")),
           ("b", dt.datetime(2024, 4, 30, 22, 0, tzinfo=UTC), D("7.00"))]


@pytest.mark.parametrize("engine_name,target", PAIRS)
@pytest.mark.parametrize("kind", ["timestamptz", "timestamp"])
def test_revenue_views_ignore_session_zone(engines, engine_name, target, kind):
    """The revenue timestamps go through the same conversion as the activity ones."""
    skip_unsupported(target, "revenue.timezone", REPORTING_ZONE)
    engine = engines(engine_name)
    charges = as_loaded(CHARGES, kind)
    run_revenue(engine, target, charges, kind=kind, timezone=REPORTING_ZONE, views=())
    expected = rr.revenue_views(CHARGES, "charges", "month", timezone=REPORTING_ZONE)
    months = set()
    for zone in session_zones(engine_name):
        with engine.session_zone(zone):
            accounting, _ = check_views(read_revenue(engine, target), expected, engine_name)
        months.add(tuple(sorted(r["period_start"] for r in accounting)))
    assert months == {(dt.date(2024, 1, 1), dt.date(2024, 2, 1), dt.date(2024, 3, 1),
                       dt.date(2024, 4, 1))}


def _sorted(results: dict) -> dict:
    return {name: sorted(map(repr, rows)) for name, rows in results.items()}
