"""Start, load and query every SQL engine the test suite runs generated SQL on.

Usage::

    engine = start_engine('postgres')      # raises EngineUnavailable
    engine.create_table('raw.events', [('user_id', 'text'), ('day', 'date')], rows)
    engine.execute(['CREATE VIEW v AS SELECT * FROM raw.events;'])
    engine.query('SELECT * FROM v')        # -> list of tuples of plain Python values
    engine.reset()                          # drop everything created so far
    with engine.session_zone('Asia/Kolkata'):   # queries read under another session zone
        engine.query('SELECT * FROM v')
    engine.close()

Portable column types: text, integer, bigint, double, date, timestamp (naive),
timestamptz, decimal(P,S), boolean. Each engine class documents how it maps them.

Result values are normalised to plain Python: dates -> datetime.date, exact
numbers -> int or decimal.Decimal, floating point -> float, NULL -> None, and
every timestamp -> a *naive* datetime.datetime in UTC (zone-aware values are
converted to UTC and their tzinfo dropped), so results compare across engines.

Servers (postgres, mysql) run from temporary folders on free loopback ports, so
several test processes (xdist workers) can each run their own. spark and clickhouse
are embedded once per process: start_engine hands out the live instance again. All
that is started here is stopped, and its folder removed, at interpreter exit (atexit)
even when a test fails, and by a small watchdog process if this one is killed.
"""
from __future__ import annotations

import atexit
import contextlib
import datetime as dt
import json
import logging
import os
import pwd
import re
import shutil
import socket
import sqlite3
import subprocess
import sys
import tempfile
import time
import uuid
from decimal import Decimal

ENGINE_NAMES: tuple[str, ...] = ('duckdb', 'sqlite', 'postgres', 'mysql', 'spark', 'clickhouse')

PG_BIN = '/usr/lib/postgresql/15/bin'
_UTC = dt.UTC
_TYPE_RE = re.compile(r'^\s*(\w+)\s*(?:\(\s*(\d+)\s*,\s*(\d+)\s*\))?\s*$')
_PORTABLE = {'text', 'integer', 'bigint', 'double', 'date', 'timestamp', 'timestamptz',
             'decimal', 'boolean'}


class EngineUnavailable(Exception):
    """The engine cannot be started on this machine; the message says why."""


class EngineError(Exception):
    """A statement failed on an engine."""

    def __init__(self, engine: str, statement: str, message: str):
        self.engine, self.statement, self.message = engine, statement[:2000], message
        super().__init__(f'[{engine}] {message}\n--- statement ---\n{self.statement}')


# ---------------------------------------------------------------- helpers

def parse_type(portable: str) -> tuple[str, tuple[int, int] | None]:
    """Split a portable type name into (kind, (precision, scale) or None)."""
    match = _TYPE_RE.match(portable.lower())
    if not match or match.group(1) not in _PORTABLE or (
            (match.group(1) == 'decimal') != (match.group(2) is not None)):
        raise ValueError(f'unknown portable type {portable!r}')
    kind, p, s = match.groups()
    return kind, (int(p), int(s)) if p else None


def clean_statement(sql: str) -> str:
    """Drop leading/trailing whole-line '--' comments, blank lines and a trailing ';'."""
    lines = sql.strip().splitlines()
    while lines and (not lines[0].strip() or lines[0].lstrip().startswith('--')):
        lines.pop(0)
    while lines and (not lines[-1].strip() or lines[-1].lstrip().startswith('--')):
        lines.pop()
    return '\n'.join(lines).rstrip().rstrip(';').rstrip()


def _to_utc_naive(value: dt.datetime) -> dt.datetime:
    if value.tzinfo is not None:
        value = value.astimezone(_UTC).replace(tzinfo=None)
    return value


def normalize(value):
    """Turn one result value into a plain Python value (see module docstring)."""
    if hasattr(value, 'to_pydatetime'):      # pandas Timestamp
        value = value.to_pydatetime()
    if isinstance(value, dt.datetime):
        return _to_utc_naive(value)
    if isinstance(value, list):
        return [normalize(v) for v in value]
    if type(value).__module__ == 'numpy' and hasattr(value, 'item'):
        return value.item()
    return value


def _coerce(kind: str, value):
    """Prepare one input value for loading into a column of a portable kind."""
    if value is None:
        return None
    if isinstance(value, dt.datetime):
        return _to_utc_naive(value)
    if kind == 'decimal' and not isinstance(value, Decimal):
        return Decimal(str(value))
    if kind == 'double' and isinstance(value, Decimal):
        return float(value)
    return value


def _coerce_rows(columns, rows) -> list[tuple]:
    kinds = [parse_type(t)[0] for _, t in columns]
    return [tuple(_coerce(k, v) for k, v in zip(kinds, row, strict=True)) for row in rows]


def _split_name(name: str) -> tuple[str | None, str]:
    parts = name.split('.')
    if len(parts) > 2 or not all(parts):
        raise ValueError(f'table name must be "table" or "schema.table": {name!r}')
    return (parts[0], parts[1]) if len(parts) == 2 else (None, parts[0])


def _arrow_table(columns, rows):
    """Build a pyarrow Table with an explicit schema from portable columns and rows."""
    import pyarrow as pa
    kinds = {'text': pa.string(), 'integer': pa.int32(), 'bigint': pa.int64(),
             'double': pa.float64(), 'date': pa.date32(), 'timestamp': pa.timestamp('us'),
             'timestamptz': pa.timestamp('us', tz='UTC'), 'boolean': pa.bool_()}
    fields = []
    for col, portable in columns:
        kind, args = parse_type(portable)
        fields.append(pa.field(col, pa.decimal128(*args) if kind == 'decimal' else kinds[kind]))
    data = list(zip(*_coerce_rows(columns, rows), strict=True)) or [[] for _ in columns]
    arrays = [pa.array(list(values), type=f.type) for values, f in zip(data, fields, strict=True)]
    return pa.Table.from_arrays(arrays, schema=pa.schema(fields))


def _write_parquet(columns, rows, folder: str, utc_timestamps: bool = False) -> str:
    """Write rows to a new parquet file in `folder`; naive timestamps as UTC if asked."""
    import pyarrow as pa
    import pyarrow.parquet as pq
    table = _arrow_table(columns, rows)
    if utc_timestamps:
        table = table.cast(pa.schema(
            pa.field(f.name, pa.timestamp('us', tz='UTC'))
            if pa.types.is_timestamp(f.type) else f for f in table.schema))
    os.makedirs(folder, exist_ok=True)
    path = os.path.join(folder, f'{uuid.uuid4().hex}.parquet')
    pq.write_table(table, path)
    return path


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(('127.0.0.1', 0))
        return sock.getsockname()[1]


# A helper process that undoes what this process started when it dies without running
# atexit (killed by a signal): it reads cleanup tasks from a pipe and, when the pipe
# closes, runs the tasks still registered (kill a pid, run a stop command, remove a folder).
_WATCHDOG_CODE = r"""
import json, os, shutil, signal, subprocess, sys
signal.signal(signal.SIGINT, signal.SIG_IGN)
tasks = {}
for line in sys.stdin:
    key, task = json.loads(line)
    tasks.pop(key, None)
    if task:
        tasks[key] = task
for task in reversed(list(tasks.values())):
    try:
        if task.get('pid'):
            os.kill(task['pid'], signal.SIGKILL)
        if task.get('command'):
            subprocess.run(task['command'], capture_output=True, timeout=60)
    except Exception:
        pass
    shutil.rmtree(task['folder'], ignore_errors=True)
"""
_watchdog: list = []


def _guard(folder: str, command: list[str] | None = None, pid: int | None = None) -> None:
    """Have the watchdog stop what runs in `folder` and remove it if this process is killed."""
    _tell_watchdog([folder, {'folder': folder, 'command': command, 'pid': pid}])


def _unguard(folder: str) -> None:
    """Tell the watchdog that `folder` was cleaned up normally."""
    _tell_watchdog([folder, None])


def _tell_watchdog(message: list) -> None:
    try:
        if not _watchdog:
            _watchdog.append(subprocess.Popen(
                [sys.executable, '-c', _WATCHDOG_CODE], stdin=subprocess.PIPE, text=True,
                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True))
        _watchdog[0].stdin.write(json.dumps(message) + '\n')
        _watchdog[0].stdin.flush()
    except OSError:
        pass


# Engine data folders go to memory when the machine has a tmpfs: MariaDB's DDL (one file
# per table, each synced) is several times faster there, and no engine keeps data past its
# run. Elsewhere the system's temporary folder.
FAST_TMP = '/dev/shm' if os.path.isdir('/dev/shm') and os.access('/dev/shm', os.W_OK) else None


def _mkdtemp(prefix: str) -> str:
    """A new temporary folder, removed by the watchdog if this process is killed."""
    folder = tempfile.mkdtemp(prefix=prefix, dir=FAST_TMP)
    _guard(folder)
    return folder


def _run(cmd: list[str], **kwargs) -> None:
    """Run a command; raise EngineUnavailable with its output if it fails."""
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=180, **kwargs)
    if proc.returncode != 0:
        raise EngineUnavailable(f'{" ".join(cmd)[:300]} failed: {proc.stderr or proc.stdout}')


# ---------------------------------------------------------------- base class

class Engine:
    """One SQL engine, session-wide. Subclasses set `name`, `types` and the hooks."""

    name: str = ''
    targets: tuple[str, ...] = ()
    quote_char = '"'
    types: dict[str, str] = {}
    _drop_suffix = ''

    def __init__(self):
        self._tmp: str | None = None
        self._closed = False
        self._users = 1     # start_engine calls sharing this instance (spark, clickhouse)

    # -- public API
    def quote(self, identifier: str) -> str:
        """Quote one identifier (e.g. a keyword column name) for this engine."""
        q = self.quote_char
        return q + identifier.replace(q, q + q) + q

    def qualified(self, name: str) -> str:
        """Quote a 'table' or 'schema.table' name for this engine."""
        return '.'.join(self.quote(p) for p in name.split('.'))

    def sql_type(self, portable: str) -> str:
        """The engine column type for a portable type name."""
        kind, args = parse_type(portable)
        p, s = args or (None, None)
        return self.types[kind].format(p=p, s=s)

    def create_table(self, name: str, columns: list[tuple[str, str]], rows: list[tuple]) -> None:
        """(Re)create table `name` ('t' or 'schema.t') with portable `columns` and load `rows`."""
        schema, _ = _split_name(name)
        if schema:
            self.ensure_schema(schema)
        target = self.qualified(name)
        cols = ', '.join(f'{self.quote(c)} {self.sql_type(t)}' for c, t in columns)
        self._exec(f'DROP TABLE IF EXISTS {target}{self._drop_suffix}')
        self._exec(f'CREATE TABLE {target} ({cols}){self._table_suffix()}')
        if rows:
            self._load(target, columns, rows)

    def execute(self, statements: list[str]) -> None:
        """Run complete SQL statements in order; raise EngineError on the first failure."""
        for statement in statements:
            self._exec(clean_statement(statement))

    def query(self, sql: str, date_columns: list[int] | None = None) -> list[tuple]:
        """Run a query; return its rows as tuples of normalised Python values.

        `date_columns`: result column indexes whose 'YYYY-MM-DD' strings are parsed to
        datetime.date (needed on SQLite, which has no date type; harmless elsewhere).
        """
        _, rows = self._fetch(clean_statement(sql))
        parse = set(date_columns or ())
        return [tuple(_parse_date(v) if i in parse else normalize(v) for i, v in enumerate(r))
                for r in rows]

    def read(self, sql: str) -> tuple[list[str], list[tuple]]:
        """A query's column names and its rows (normalised as by ``query``), in one run:
        a separate ``column_names`` call would plan (on most engines: run) it again."""
        names, rows = self._fetch(clean_statement(sql))
        return names, [tuple(map(normalize, r)) for r in rows]

    def column_names(self, sql: str) -> list[str]:
        """Result column names of a query, in order."""
        names, _ = self._fetch(clean_statement(sql))
        return names

    def reset(self) -> None:
        """Drop every table, view and schema created so far."""
        raise NotImplementedError

    @contextlib.contextmanager
    def session_zone(self, zone: str):
        """Run the queries of the block under session time zone `zone`, then UTC again.

        `zone` is an IANA name (MySQL also takes 'SYSTEM', the server's own zone). Load
        tables outside the block: a value is loaded as UTC only under the UTC session.
        """
        self._set_zone(zone)
        try:
            yield self
        finally:
            self._set_zone(self.utc_zone)

    utc_zone = 'UTC'    # the session zone every engine starts with

    def _set_zone(self, zone: str) -> None:
        raise NotImplementedError

    def ensure_schema(self, schema: str) -> None:
        """Create a schema (MySQL, Spark, ClickHouse: database; SQLite: attached db)."""
        self._exec(f'CREATE SCHEMA IF NOT EXISTS {self.quote(schema)}')

    def _ensure_schema(self, schema: str) -> None:
        self.ensure_schema(schema)

    def close(self) -> None:
        """Stop the engine and remove its temporary folder (idempotent).

        A shared instance (see start_engine) stops when its last user closes it.
        """
        self._users -= 1
        if self._closed or self._users > 0:
            return
        self._closed = True
        if self in _LIVE:
            _LIVE.remove(self)
        try:
            self._shutdown()
        finally:
            if self._tmp:
                shutil.rmtree(self._tmp, ignore_errors=True)
                _unguard(self._tmp)

    # -- hooks
    def _start(self) -> None:
        """Start the engine (called once by start_engine)."""

    def _exec(self, sql: str) -> None:
        raise NotImplementedError

    def _fetch(self, sql: str) -> tuple[list[str], list]:
        raise NotImplementedError

    def _load(self, target: str, columns, rows) -> None:
        raise NotImplementedError

    def _table_suffix(self) -> str:
        return ''

    def _shutdown(self) -> None:
        pass

    def _error(self, sql: str, exc: Exception) -> EngineError:
        return EngineError(self.name, sql, f'{type(exc).__name__}: {exc}')


def _parse_date(value):
    if isinstance(value, str) and len(value) == 10:
        try:
            return dt.date.fromisoformat(value)
        except ValueError:
            pass
    return normalize(value)


class _DbApiEngine(Engine):
    """An engine reached through a DB-API connection in `self._conn`."""

    _conn = None

    def _cursor(self):
        return self._conn.cursor()

    def _exec(self, sql: str) -> None:
        try:
            self._cursor().execute(sql)
        except Exception as exc:
            raise self._error(sql, exc) from exc

    def _fetch(self, sql: str):
        try:
            cur = self._cursor()
            cur.execute(sql)
            names = [d[0] for d in cur.description or ()]
            return names, (cur.fetchall() if cur.description else [])
        except Exception as exc:
            raise self._error(sql, exc) from exc

    def _insert_many(self, target: str, columns, rows, mark: str) -> None:
        """executemany() an INSERT of already coerced rows."""
        cols = ', '.join(self.quote(c) for c, _ in columns)
        sql = f'INSERT INTO {target} ({cols}) VALUES ({", ".join([mark] * len(columns))})'
        try:
            self._cursor().executemany(sql, rows)
        except Exception as exc:
            raise self._error(sql, exc) from exc

    def _shutdown(self) -> None:
        if self._conn is not None:
            try:
                self._conn.close()
            except Exception:
                pass


# ---------------------------------------------------------------- embedded engines

class DuckDBEngine(_DbApiEngine):
    """DuckDB, in process, a fresh in-memory database per instance; TimeZone=UTC."""

    name, targets = 'duckdb', ('duckdb',)
    types = dict(text='VARCHAR', integer='INTEGER', bigint='BIGINT', double='DOUBLE',
                 date='DATE', timestamp='TIMESTAMP', timestamptz='TIMESTAMPTZ',
                 boolean='BOOLEAN', decimal='DECIMAL({p},{s})')

    def _start(self):
        self._connect()

    def _cursor(self):
        return self._conn      # registered Arrow tables are visible on this connection only

    def _connect(self):
        import duckdb
        self._conn = duckdb.connect(':memory:')
        self._conn.execute("SET TimeZone = 'UTC'")

    def _load(self, target, columns, rows):
        self._conn.register('__sqlgen_load', _arrow_table(columns, rows))
        try:
            self._exec(f'INSERT INTO {target} SELECT * FROM __sqlgen_load')
        finally:
            self._conn.unregister('__sqlgen_load')

    def reset(self):
        self._conn.close()
        self._connect()

    def _set_zone(self, zone):
        self._exec(f"SET TimeZone = '{zone}'")


class SQLiteEngine(_DbApiEngine):
    """SQLite (stdlib), in memory. A schema is an attached ':memory:' database.

    SQLite has no date, time or decimal types: date -> TEXT 'YYYY-MM-DD', timestamp ->
    TEXT 'YYYY-MM-DD HH:MM:SS[.ffffff]', timestamptz -> the same TEXT holding UTC,
    decimal(P,S) -> REAL (floating point), boolean -> INTEGER 0/1.
    """

    name, targets = 'sqlite', ('sqlite',)
    types = dict(text='TEXT', integer='INTEGER', bigint='INTEGER', double='REAL',
                 date='TEXT', timestamp='TEXT', timestamptz='TEXT', boolean='INTEGER',
                 decimal='REAL')

    def _start(self):
        self._conn = sqlite3.connect(':memory:', isolation_level=None)

    def ensure_schema(self, schema):
        attached = {row[1] for row in self._conn.execute('PRAGMA database_list')}
        if schema not in attached:
            self._exec(f"ATTACH DATABASE ':memory:' AS {self.quote(schema)}")

    def _load(self, target, columns, rows):
        rows = [tuple(_sqlite_value(v) for v in row) for row in _coerce_rows(columns, rows)]
        self._exec('BEGIN')
        self._insert_many(target, columns, rows, '?')
        self._exec('COMMIT')

    def reset(self):
        self._conn.close()
        self._conn = sqlite3.connect(':memory:', isolation_level=None)

    _saved_tz: tuple[str | None] | None = None

    def _set_zone(self, zone):
        """SQLite has no session zone; its 'localtime' modifier reads this process's TZ."""
        if self._saved_tz is None:
            self._saved_tz = (os.environ.get('TZ'),)
        if zone == self.utc_zone and self._saved_tz[0] is None:
            os.environ.pop('TZ', None)
        else:
            os.environ['TZ'] = self._saved_tz[0] if zone == self.utc_zone else zone
        time.tzset()


def _sqlite_value(value):
    if isinstance(value, dt.datetime):
        return value.isoformat(sep=' ')
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, Decimal):
        return float(value)
    return value


# ---------------------------------------------------------------- PostgreSQL

def _pg_os_user() -> str:
    """The unprivileged OS user that owns the PostgreSQL data folder (created if missing)."""
    try:
        pwd.getpwnam('postgres')
    except KeyError:
        _run(['useradd', '--system', '--user-group', '--no-create-home', 'postgres'])
    return 'postgres'


class PostgresEngine(_DbApiEngine):
    """PostgreSQL 15 from PG_BIN: initdb in a temp folder, pg_ctl on 127.0.0.1:<free port>.

    Server TimeZone is UTC; database 'postgres', collation C; psycopg 3, autocommit.
    create_table drops views that depend on the old table (DROP ... CASCADE).
    """

    name, targets = 'postgres', ('postgres',)
    types = dict(text='TEXT', integer='INTEGER', bigint='BIGINT', double='DOUBLE PRECISION',
                 date='DATE', timestamp='TIMESTAMP', timestamptz='TIMESTAMPTZ',
                 boolean='BOOLEAN', decimal='NUMERIC({p},{s})')

    _started = False
    _drop_suffix = ' CASCADE'

    def _start(self):
        import psycopg
        self._tmp = _mkdtemp(prefix='sqlgen-pg-')
        self._data = os.path.join(self._tmp, 'data')
        self._as_user = []
        if os.geteuid() == 0:
            user = _pg_os_user()
            shutil.chown(self._tmp, user)
            self._as_user = ['runuser', '-u', user, '--']
        self._pg('initdb', '-D', self._data, '-U', 'postgres', '-A', 'trust', '-E', 'UTF8',
                 '--locale=C', '--no-sync')
        port = self._start_server()
        # prepare_threshold=None: no server-side prepared statements, whose cached plans
        # break when a test recreates a view with other columns.
        self._conn = psycopg.connect(host='127.0.0.1', port=port, user='postgres',
                                     dbname='postgres', autocommit=True, prepare_threshold=None)

    def _pg(self, tool: str, *args: str) -> None:
        _run([*self._as_user, os.path.join(PG_BIN, tool), *args], cwd=self._tmp)

    def _start_server(self) -> int:
        for attempt in range(3):
            port = _free_port()
            opts = (f'-p {port} -c listen_addresses=127.0.0.1 -k {self._tmp} -c TimeZone=UTC '
                    '-c fsync=off -c synchronous_commit=off -c full_page_writes=off')
            try:
                self._pg('pg_ctl', '-D', self._data, '-l', os.path.join(self._tmp, 'server.log'),
                         '-w', '-t', '60', '-o', opts, 'start')
                self._started = True
                _guard(self._tmp, command=[*self._as_user, os.path.join(PG_BIN, 'pg_ctl'), '-D',
                                           self._data, '-m', 'immediate', 'stop'])
                return port
            except EngineUnavailable:
                if attempt == 2:
                    raise

    def _load(self, target, columns, rows):
        cols = ', '.join(self.quote(c) for c, _ in columns)
        sql = f'COPY {target} ({cols}) FROM STDIN'
        try:
            with self._conn.cursor() as cur, cur.copy(sql) as copy:
                for row in _coerce_rows(columns, rows):
                    copy.write_row(row)
        except Exception as exc:
            raise self._error(sql, exc) from exc

    def reset(self):
        schemas = self._fetch("SELECT nspname FROM pg_namespace WHERE nspname NOT LIKE 'pg\\_%' "
                              "AND nspname <> 'information_schema'")[1]
        for (schema,) in schemas:
            self._exec(f'DROP SCHEMA {self.quote(schema)} CASCADE')
        self._exec('CREATE SCHEMA public')

    def _set_zone(self, zone):
        self._exec(f"SET TimeZone = '{zone}'")

    def _shutdown(self):
        super()._shutdown()
        if self._started:
            self._pg('pg_ctl', '-D', self._data, '-m', 'fast', '-w', '-t', '60', 'stop')


# ---------------------------------------------------------------- MySQL (MariaDB)

MYSQL_SYSTEM_DBS = ('information_schema', 'mysql', 'performance_schema', 'sys')
# The server's own zone (time_zone 'SYSTEM'): east of UTC, a half-hour offset, and DST.
MYSQL_SYSTEM_ZONE = 'Australia/Adelaide'
# MySQL 8.0's default sql_mode (from memory of the MySQL 8.0 reference manual).
MYSQL8_SQL_MODE = ('ONLY_FULL_GROUP_BY,STRICT_TRANS_TABLES,NO_ZERO_IN_DATE,NO_ZERO_DATE,'
                   'ERROR_FOR_DIVISION_BY_ZERO,NO_ENGINE_SUBSTITUTION')


class MySQLEngine(_DbApiEngine):
    """MariaDB (stand-in for MySQL 8) from a temp data folder, on 127.0.0.1:<free port>.

    Connects over the unix socket as root with pymysql, autocommit, time_zone '+00:00',
    MySQL 8's default sql_mode, utf8mb4 with a case-insensitive collation (as MySQL 8's
    default). The default database is 'sqlgen'; a schema is a database.
    timestamp -> DATETIME(6) (a wall clock); timestamptz -> TIMESTAMP(6) NULL, MySQL's
    instant type, which a query reads in the session's time_zone (loaded under '+00:00').
    The server runs with TZ=MYSQL_SYSTEM_ZONE, so session_zone('SYSTEM') is not UTC.
    boolean -> BOOLEAN = TINYINT(1), so booleans come back as 0/1.
    """

    name, targets = 'mysql', ('mysql',)
    quote_char = '`'
    database = 'sqlgen'
    types = dict(text='TEXT', integer='INT', bigint='BIGINT', double='DOUBLE', date='DATE',
                 timestamp='DATETIME(6)', timestamptz='TIMESTAMP(6) NULL', boolean='BOOLEAN',
                 decimal='DECIMAL({p},{s})')

    _proc = None
    utc_zone = '+00:00'

    def _start(self):
        self._tmp = _mkdtemp(prefix='sqlgen-my-')
        self._data = os.path.join(self._tmp, 'data')
        self._socket = os.path.join(self._tmp, 'mysqld.sock')
        _run([_which('mariadb-install-db'), '--no-defaults', f'--datadir={self._data}',
              '--user=root', '--auth-root-authentication-method=normal', '--skip-test-db',
              '--skip-name-resolve'], cwd=self._tmp)
        self._conn = self._start_server()
        self._load_time_zones()
        self._exec("SET time_zone = '+00:00'")
        self._exec(f"SET sql_mode = '{MYSQL8_SQL_MODE}'")
        self._use_default_db()

    def _load_time_zones(self):
        """Fill the server's time zone tables so CONVERT_TZ knows IANA names."""
        tool = shutil.which('mariadb-tzinfo-to-sql')
        client = shutil.which('mariadb')
        if not tool or not client:
            raise EngineUnavailable('mariadb-tzinfo-to-sql or mariadb missing: run '
                                    '.ci/setup_engines.sh (package mariadb-client)')
        sql = subprocess.run([tool, '/usr/share/zoneinfo'], capture_output=True, check=True)
        subprocess.run([client, '--no-defaults', f'--socket={self._socket}', '-uroot', 'mysql'],
                       input=sql.stdout, capture_output=True, check=True)

    def _server_cmd(self, port: int) -> list[str]:
        return [_which('mariadbd'), '--no-defaults', f'--datadir={self._data}',
                f'--socket={self._socket}', f'--port={port}', '--bind-address=127.0.0.1',
                '--user=root', f'--pid-file={self._tmp}/mysqld.pid', f'--tmpdir={self._tmp}',
                f'--log-error={self._tmp}/server.log', '--skip-name-resolve',
                '--default-time-zone=+00:00', '--character-set-server=utf8mb4',
                '--collation-server=utf8mb4_unicode_520_ci', '--innodb-buffer-pool-size=256M',
                '--innodb-flush-log-at-trx-commit=0', '--innodb-doublewrite=0',
                '--max-allowed-packet=64M', '--skip-log-bin']

    def _start_server(self):
        for _ in range(3):
            self._proc = subprocess.Popen(self._server_cmd(_free_port()), cwd=self._tmp,
                                          env={**os.environ, 'TZ': MYSQL_SYSTEM_ZONE},
                                          stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
            _guard(self._tmp, pid=self._proc.pid)
            conn = self._wait_connect(deadline=time.monotonic() + 60)
            if conn is not None:
                return conn
        raise EngineUnavailable(f'mariadbd did not start: {_tail(self._tmp + "/server.log")}')

    def _wait_connect(self, deadline: float):
        import pymysql
        while time.monotonic() < deadline and self._proc.poll() is None:
            if _accepts(self._socket):
                return pymysql.connect(unix_socket=self._socket, user='root', charset='utf8mb4',
                                       autocommit=True)
            time.sleep(0.1)
        self._stop_proc()
        return None

    def _use_default_db(self):
        self._exec(f'CREATE DATABASE IF NOT EXISTS {self.quote(self.database)}')
        self._conn.select_db(self.database)

    def ensure_schema(self, schema):
        self._exec(f'CREATE DATABASE IF NOT EXISTS {self.quote(schema)}')

    def _load(self, target, columns, rows):
        self._insert_many(target, columns, _coerce_rows(columns, rows), '%s')

    def reset(self):
        for (db,) in self._fetch('SHOW DATABASES')[1]:
            if db.lower() not in MYSQL_SYSTEM_DBS:
                self._exec(f'DROP DATABASE {self.quote(db)}')
        self._use_default_db()

    def _set_zone(self, zone):
        self._exec(f"SET time_zone = '{zone}'")

    def _stop_proc(self):
        if self._proc is not None and self._proc.poll() is None:
            self._proc.terminate()
            try:
                self._proc.wait(60)
            except subprocess.TimeoutExpired:
                self._proc.kill()
                self._proc.wait()

    def _shutdown(self):
        super()._shutdown()
        self._stop_proc()


def _which(program: str) -> str:
    found = shutil.which(program) or shutil.which(program, path='/usr/sbin:/usr/bin:/sbin')
    if not found:
        raise EngineUnavailable(f'{program} not found (run .ci/setup_engines.sh)')
    return found


def _accepts(unix_socket: str) -> bool:
    """True when a server listens on the unix socket path."""
    with socket.socket(socket.AF_UNIX) as sock:
        try:
            sock.connect(unix_socket)
            return True
        except OSError:
            return False


def _tail(path: str, chars: int = 2000) -> str:
    try:
        with open(path, errors='replace') as handle:
            return handle.read()[-chars:]
    except OSError:
        return '(no log)'


# ---------------------------------------------------------------- Spark

_SPARK: dict = {}   # the process-wide SparkSession and its temp folder


def _spark_session():
    """The one local[2] SparkSession of this process (created on first use)."""
    if 'session' not in _SPARK:
        from pyspark.sql import SparkSession
        tmp = _mkdtemp(prefix='sqlgen-spark-')
        os.environ.setdefault('SPARK_LOCAL_IP', '127.0.0.1')
        # The client JIT only and the serial collector: a test run is short and the
        # machine has two cores, so the JVM's optimising compiler and parallel GC threads
        # cost more than they save (a Spark fixture run about 15 % faster).
        java_opts = (f'-Dderby.system.home={tmp}/derby -Duser.timezone=UTC '
                     f'-Dlog4j2.configurationFile=file:{_spark_log_config(tmp)} '
                     '-XX:TieredStopAtLevel=1 -XX:+UseSerialGC')
        session = (SparkSession.builder.master('local[2]').appName('sqlgen-tests')
                   .config('spark.sql.session.timeZone', 'UTC')
                   .config('spark.sql.warehouse.dir', f'{tmp}/warehouse')
                   .config('spark.local.dir', f'{tmp}/local')
                   .config('spark.driver.extraJavaOptions', java_opts)
                   .config('spark.sql.catalogImplementation', 'in-memory')
                   .config('spark.driver.host', '127.0.0.1')
                   .config('spark.driver.bindAddress', '127.0.0.1')
                   .config('spark.ui.enabled', 'false')
                   .config('spark.ui.showConsoleProgress', 'false')
                   .config('spark.sql.shuffle.partitions', '1')
                   # Test tables hold a few hundred rows: adaptive execution's re-planning
                   # costs more than the work, so it is off (SPARK_DEFAULTS). Results do not
                   # depend on it or on code generation below; one test
                   # (test_views.test_spark_default_settings) runs with Spark's defaults. (Interpreted expressions, factoryMode
                   # NO_CODEGEN, were faster still but break the catalog's listTables.)
                   .config('spark.sql.adaptive.enabled', 'false')
                   # Whole-stage code generation compiles Java for every plan; on test
                   # tables that costs more than the rows (about 10 % of a fixture run).
                   .config('spark.sql.codegen.wholeStage', 'false')
                   .config('spark.driver.memory', '2g')
                   .getOrCreate())
        session.sparkContext.setLogLevel('ERROR')
        logging.getLogger('SQLQueryContextLogger').setLevel(logging.CRITICAL)
        session.sql('SELECT 1').collect()     # pay Spark SQL's first-statement cost here
        _SPARK.update(session=session, tmp=tmp)
        atexit.register(_stop_spark)
    return _SPARK['session']


# Spark's own defaults of the settings the test session changes (restored by
# SparkEngine.default_settings).
SPARK_DEFAULTS = {'spark.sql.adaptive.enabled': 'true', 'spark.sql.codegen.wholeStage': 'true'}


def _spark_log_config(tmp: str) -> str:
    """Write a log4j2 config that keeps the JVM quiet below ERROR."""
    path = os.path.join(tmp, 'log4j2.properties')
    with open(path, 'w') as handle:
        handle.write('rootLogger.level = error\nrootLogger.appenderRef.stderr.ref = console\n'
                     'appender.console.type = Console\nappender.console.name = console\n'
                     'appender.console.target = SYSTEM_ERR\n'
                     'appender.console.layout.type = PatternLayout\n'
                     'appender.console.layout.pattern = %d %p %c: %m%n\n')
    return path


def _stop_spark():
    session, tmp = _SPARK.pop('session', None), _SPARK.pop('tmp', None)
    try:
        if session is not None:
            session.stop()
    finally:
        if tmp:
            shutil.rmtree(tmp, ignore_errors=True)
            _unguard(tmp)


class SparkEngine(Engine):
    """PySpark in local mode; runs the SQL of the spark and databricks targets.

    One SparkSession per process (session time zone UTC, in-memory catalog, warehouse
    in a temp folder); close() only drops what was created, the session stops at exit.
    Tables are real catalog tables (a permanent view cannot use a temporary view):
    external parquet tables over a file written by pyarrow, so loading runs no Spark job.
    timestamp and timestamptz -> TIMESTAMP (instants shown in the UTC session zone).
    """

    name, targets = 'spark', ('spark', 'databricks')
    quote_char = '`'
    types = dict(text='STRING', integer='INT', bigint='BIGINT', double='DOUBLE', date='DATE',
                 timestamp='TIMESTAMP', timestamptz='TIMESTAMP', boolean='BOOLEAN',
                 decimal='DECIMAL({p},{s})')

    def _start(self):
        self._spark = _spark_session()
        self._folders = {}  # table made by create_table -> its folder (for _load)

    def create_table(self, name, columns, rows):
        """(Re)create `name` as a parquet table over the rows written to a new folder."""
        schema, _ = _split_name(name)
        if schema:
            self.ensure_schema(schema)
        target = self.qualified(name)
        folder = os.path.join(_SPARK['tmp'], 'tables', uuid.uuid4().hex)
        _write_parquet(columns, rows, folder, utc_timestamps=True)
        cols = ', '.join(f'{self.quote(c)} {self.sql_type(t)}' for c, t in columns)
        self._exec(f'DROP TABLE IF EXISTS {target}')
        self._exec(f"CREATE TABLE {target} ({cols}) USING parquet LOCATION '{folder}'")
        self._folders[target] = folder

    def _load(self, target, columns, rows):
        """Append rows to a table made by create_table: one more file in its folder."""
        _write_parquet(columns, rows, self._folders[target], utc_timestamps=True)
        self._exec(f'REFRESH TABLE {target}')

    def _exec(self, sql):
        try:
            self._spark.sql(sql).collect()
        except Exception as exc:
            raise self._error(sql, exc) from exc

    def _fetch(self, sql):
        from pyspark.sql.types import TimestampType
        try:
            frame = self._spark.sql(sql)
            local = [isinstance(f.dataType, TimestampType) for f in frame.schema.fields]
            rows = [tuple(map(_spark_value, row, local)) for row in frame.collect()]
            return frame.columns, rows
        except Exception as exc:
            raise self._error(sql, exc) from exc

    def column_names(self, sql):
        """Result column names (Spark analyses the query without running it)."""
        try:
            return self._spark.sql(clean_statement(sql)).columns
        except Exception as exc:
            raise self._error(sql, exc) from exc

    def reset(self):
        spark = self._spark
        for db in spark.catalog.listDatabases():
            if db.name != 'default':
                self._exec(f'DROP DATABASE {self.quote(db.name)} CASCADE')
        for table in spark.catalog.listTables('default'):
            if table.isTemporary:
                spark.catalog.dropTempView(table.name)
            else:
                kind = 'VIEW' if table.tableType == 'VIEW' else 'TABLE'
                self._exec(f'DROP {kind} IF EXISTS default.{self.quote(table.name)}')
        spark.catalog.clearCache()
        shutil.rmtree(os.path.join(_SPARK['tmp'], 'tables'), ignore_errors=True)

    def _set_zone(self, zone):
        self._spark.conf.set('spark.sql.session.timeZone', zone)

    @contextlib.contextmanager
    def default_settings(self):
        """Run the block with Spark's default adaptive execution."""
        conf = self._spark.conf
        saved = {key: conf.get(key) for key in SPARK_DEFAULTS}
        for key, value in SPARK_DEFAULTS.items():
            conf.set(key, value)
        try:
            yield self
        finally:
            for key, value in saved.items():
                conf.set(key, value)

    def _shutdown(self):
        if 'session' in _SPARK:
            self.reset()


def _spark_value(value, local_timestamp: bool):
    """Spark Row -> tuple; TIMESTAMP arrives as naive local time of this process."""
    if local_timestamp and isinstance(value, dt.datetime) and value.tzinfo is None:
        return value.astimezone(_UTC).replace(tzinfo=None)
    if hasattr(value, 'asDict'):
        return tuple(value)
    return value


# ---------------------------------------------------------------- ClickHouse (chdb)

CLICKHOUSE_SYSTEM_DBS = ('system', 'default', 'information_schema', 'INFORMATION_SCHEMA')


class ClickHouseEngine(Engine):
    """ClickHouse embedded through chdb: one Session with a temp path, session_timezone UTC.

    Tables are MergeTree ORDER BY tuple() with Nullable(...) columns; timestamp ->
    DateTime64(6) (shown in UTC), timestamptz -> DateTime64(6, 'UTC'), date -> Date
    (1970..2149), boolean -> Bool. Results are read as Arrow.
    """

    name, targets = 'clickhouse', ('clickhouse',)
    quote_char = '`'
    types = dict(text='Nullable(String)', integer='Nullable(Int32)', bigint='Nullable(Int64)',
                 double='Nullable(Float64)', date='Nullable(Date)',
                 timestamp='Nullable(DateTime64(6))', timestamptz="Nullable(DateTime64(6, 'UTC'))",
                 boolean='Nullable(Bool)', decimal='Nullable(Decimal({p}, {s}))')

    _session = None

    def _start(self):
        from chdb import session
        self._tmp = _mkdtemp(prefix='sqlgen-ch-')
        self._session = session.Session(os.path.join(self._tmp, 'db'))
        self._exec("SET session_timezone = 'UTC'")

    def _table_suffix(self):
        return ' ENGINE = MergeTree ORDER BY tuple()'

    def ensure_schema(self, schema):
        self._exec(f'CREATE DATABASE IF NOT EXISTS {self.quote(schema)}')

    def _exec(self, sql):
        try:
            self._session.query(sql)
        except Exception as exc:
            raise self._error(sql, exc) from exc

    def _fetch(self, sql):
        try:
            table = self._session.query(sql, 'ArrowTable')
        except Exception as exc:
            raise self._error(sql, exc) from exc
        columns = [col.to_pylist() for col in table.columns]
        return list(table.schema.names), list(zip(*columns, strict=True))

    def _load(self, target, columns, rows):
        path = _write_parquet(columns, rows, os.path.join(self._tmp, 'load'))
        try:
            self._exec(f"INSERT INTO {target} SELECT * FROM file('{path}', Parquet)")
        finally:
            os.remove(path)

    def reset(self):
        system = ', '.join(f"'{d}'" for d in CLICKHOUSE_SYSTEM_DBS)
        dbs = self._fetch(f'SELECT name FROM system.databases WHERE name NOT IN ({system})')[1]
        for (db,) in dbs:
            self._exec(f'DROP DATABASE {self.quote(db)} SYNC')
        objects = self._fetch("SELECT name, engine = 'View' FROM system.tables "
                              "WHERE database = 'default' ORDER BY engine = 'View' DESC")[1]
        for table, is_view in objects:
            self._exec(f'DROP {"VIEW" if is_view else "TABLE"} default.{self.quote(table)} SYNC')

    def _set_zone(self, zone):
        self._exec(f"SET session_timezone = '{zone}'")

    def _shutdown(self):
        if self._session is not None:
            self._session.close()


# ---------------------------------------------------------------- start

_CLASSES = {'duckdb': DuckDBEngine, 'sqlite': SQLiteEngine, 'postgres': PostgresEngine,
            'mysql': MySQLEngine, 'spark': SparkEngine, 'clickhouse': ClickHouseEngine}
_LIVE: list[Engine] = []
# One embedded server per process: chdb allows one data path at a time and Spark one
# session, so a second start_engine returns the live instance (closed by its last user).
_SHARED = ('spark', 'clickhouse')


def start_engine(name: str) -> Engine:
    """Start engine `name` (one of ENGINE_NAMES); raise EngineUnavailable if it cannot start.

    spark and clickhouse are one instance per process: a second call returns the live
    one, which then stops only when every caller has closed it.
    """
    if name not in _CLASSES:
        raise ValueError(f'unknown engine {name!r}; expected one of {ENGINE_NAMES}')
    for live in _LIVE:
        if live.name == name and name in _SHARED:
            live._users += 1
            return live
    engine = _CLASSES[name]()
    _LIVE.append(engine)
    try:
        engine._start()
    except Exception as exc:
        _close_quietly(engine)
        if isinstance(exc, EngineUnavailable):
            raise
        raise EngineUnavailable(f'{name}: {type(exc).__name__}: {exc}') from exc
    return engine


def _close_quietly(engine: Engine) -> None:
    try:
        engine.close()
    except Exception:
        pass


@atexit.register
def _close_all() -> None:
    """Stop every engine still running when the interpreter exits."""
    while _LIVE:
        engine = _LIVE.pop()
        engine._users = 1
        _close_quietly(engine)
    if _watchdog:
        _watchdog[0].stdin.close()    # the watchdog exits: nothing is left to clean
