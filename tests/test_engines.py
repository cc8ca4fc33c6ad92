"""Smoke tests of the engine harness: start, load, view, query, reset on every engine.

An engine that cannot start fails the test when CI=true and is skipped elsewhere.
"""
import datetime as dt
import os
from decimal import Decimal

import pytest
from engines import ENGINE_NAMES, EngineError, EngineUnavailable, start_engine

COLUMNS = [('user', 'text'), ('n', 'integer'), ('big', 'bigint'), ('x', 'double'),
           ('day', 'date'), ('timestamp', 'timestamp'), ('ts_utc', 'timestamptz'),
           ('amount', 'decimal(10,2)'), ('flag', 'boolean')]
PLUS_TWO = dt.timezone(dt.timedelta(hours=2))
ROWS = [
    ('alice', 1, 2 ** 40, 1.5, dt.date(2020, 2, 29), dt.datetime(2020, 2, 29, 13, 45, 30, 123456),
     dt.datetime(2020, 2, 29, 23, 30, tzinfo=PLUS_TWO), Decimal('12.34'), True),
    (None,) * len(COLUMNS),
]
# What each portable type reads back as; SQLite keeps text, REAL and 0/1 (see engines.py).
EXPECTED = ('alice', 1, 2 ** 40, 1.5, dt.date(2020, 2, 29),
            dt.datetime(2020, 2, 29, 13, 45, 30, 123456), dt.datetime(2020, 2, 29, 21, 30),
            Decimal('12.34'), True)
SQLITE_EXPECTED = EXPECTED[:5] + ('2020-02-29 13:45:30.123456', '2020-02-29 21:30:00', 12.34, 1)


# Each engine's tests stay on one xdist worker, as in the rest of the suite.
@pytest.fixture(scope='module', params=[
    pytest.param(name, id=name, marks=pytest.mark.xdist_group(name)) for name in ENGINE_NAMES])
def engine(request):
    """A started engine, or the reason it could not start (failed on in the test)."""
    try:
        started = start_engine(request.param)
    except EngineUnavailable as exc:
        yield exc
        return
    yield started
    started.close()


def live(engine):
    """The engine itself; fail (CI=true) or skip when it could not start."""
    if isinstance(engine, EngineUnavailable):
        if os.environ.get('CI') == 'true':
            pytest.fail(f'engine unavailable in CI: {engine}')
        pytest.skip(f'engine unavailable: {engine}')
    return engine


def view_sql(engine, name, body):
    """CREATE VIEW, as TEMP on SQLite (its main-schema views cannot read attached schemas)."""
    temp = 'TEMP ' if engine.name == 'sqlite' else ''
    return f'-- smoke view\nCREATE {temp}VIEW {name} AS {body};'


def test_round_trip_every_portable_type(engine):
    eng = live(engine)
    eng.create_table('raw.events', COLUMNS, ROWS)
    cols = ', '.join(eng.quote(c) for c, _ in COLUMNS)
    eng.execute([view_sql(eng, 'events_v', f'SELECT {cols} FROM raw.events')])
    rows = sorted(eng.query('SELECT * FROM events_v', date_columns=[4]), key=lambda r: r[1] is None)
    assert eng.column_names('SELECT * FROM events_v') == [c for c, _ in COLUMNS]
    assert rows[1] == (None,) * len(COLUMNS)
    expected = SQLITE_EXPECTED if eng.name == 'sqlite' else EXPECTED
    assert rows[0] == expected
    assert [type(v) for v in rows[0][:8]] == [type(v) for v in expected[:8]]
    if eng.name not in ('sqlite', 'mysql'):    # these two store booleans as 0/1 integers
        assert rows[0][8] is True


def test_cte_and_window_function_in_view(engine):
    eng = live(engine)
    eng.create_table('raw.events', COLUMNS[:2], [('a', 1), ('b', 2), ('c', None)])
    body = ('WITH t AS (SELECT n FROM raw.events WHERE n IS NOT NULL) '
            'SELECT n, SUM(n) OVER (ORDER BY n) AS running FROM t')
    eng.execute([view_sql(eng, 'running_v', body)])
    assert [tuple(int(v) for v in r) for r in eng.query('SELECT * FROM running_v ORDER BY n')] \
        == [(1, 1), (2, 3)]


def test_bulk_load_and_reset(engine):
    eng = live(engine)
    start = dt.date(2020, 1, 1)
    rows = [(f'u{i % 5000}', start + dt.timedelta(days=i % 400), Decimal(i % 1000) / 100)
            for i in range(70_000)]
    columns = [('user_id', 'text'), ('day', 'date'), ('amount', 'decimal(12,2)')]
    eng.create_table('bulk', columns, rows)
    [(count, users, total, first)] = eng.query(
        'SELECT COUNT(*), COUNT(DISTINCT user_id), SUM(amount), MIN(day) FROM bulk',
        date_columns=[3])
    assert (count, users, first) == (70_000, 5000, dt.date(2020, 1, 1))
    assert type(count) is int and Decimal(str(total)) == Decimal('349650.00')
    eng.reset()
    with pytest.raises(EngineError, match=eng.name):
        eng.query('SELECT * FROM bulk')
    eng.create_table('raw.events', COLUMNS[:1], [('again',)])     # usable after reset
    assert eng.query('SELECT * FROM raw.events') == [('again',)]


# The epoch shown in the session zone, per engine: proves session_zone really changes the
# zone queries run under (the session-zone tests in test_session_zones.py rely on it).
EPOCH_AS_TEXT = {
    'duckdb': 'SELECT CAST(to_timestamp(0) AS VARCHAR)',
    'postgres': 'SELECT CAST(to_timestamp(0) AS TEXT)',
    'mysql': 'SELECT CAST(FROM_UNIXTIME(0) AS CHAR)',
    'spark': 'SELECT CAST(from_unixtime(0) AS STRING)',
    'clickhouse': 'SELECT toString(toDateTime(0))',
    'sqlite': "SELECT datetime(0, 'unixepoch', 'localtime')",
}


def test_session_zone_changes_the_zone_of_queries(engine):
    eng = live(engine)
    sql = EPOCH_AS_TEXT[eng.name]
    with eng.session_zone('Asia/Kolkata'):      # UTC+05:30 in 1970 (tz database)
        assert eng.query(sql)[0][0].startswith('1970-01-01 05:30:00')
    assert eng.query(sql)[0][0].startswith('1970-01-01 00:00:00')   # back to UTC
    if eng.name == 'mysql':
        from engines import MYSQL_SYSTEM_ZONE
        assert MYSQL_SYSTEM_ZONE == 'Australia/Adelaide'
        with eng.session_zone('SYSTEM'):        # the server's TZ: UTC+09:30 in 1970
            assert eng.query(sql)[0][0].startswith('1970-01-01 09:30:00')


def test_failing_statement_names_engine_and_statement(engine):
    eng = live(engine)
    with pytest.raises(EngineError) as info:
        eng.execute(['SELECT 1', 'SELECT * FROM no_such_table_anywhere;'])
    assert info.value.engine == eng.name
    assert 'no_such_table_anywhere' in info.value.statement


@pytest.mark.xdist_group('clickhouse')
def test_embedded_engine_is_shared_within_a_process():
    try:
        first = start_engine('clickhouse')
    except EngineUnavailable as exc:
        live(exc)
    second = start_engine('clickhouse')
    assert second is first
    second.close()
    assert first.query('SELECT 1') == [(1,)]      # still running for the first caller
    first.close()
