"""Run a spec's views on a source and read back the aggregate rows a report shows.

The views are created inside a transaction that is always rolled back (PostgreSQL, a
DuckDB file attached read-only), so a report leaves the warehouse as it found it. Only
views of aggregates are read (``REPORTED``): the per-user views are created because
others read them, never queried.
"""

from __future__ import annotations

import datetime as dt
import sys
from collections.abc import Callable, Iterator
from dataclasses import dataclass, replace
from decimal import Decimal
from pathlib import Path

from sqlglot import exp

from ..compiler import create_schema, ddl_statements, view_table
from ..dialects import TARGETS
from ..errors import SqlgenError
from ..schema import _URL, pg_connect, redact, scrub
from ..spec import Spec
from ..support import require_support
from ..views import planned_views

# The views a report reads, each with the order its rows are read in.
REPORTED: dict[str, tuple[str, ...]] = {
    "activity_source_summary": (),
    "growth_accounting": ("period_start",),
    "growth_accounting_by_segment": ("segment", "segment_value", "period_start"),
    "revenue_source_summary": (),
    "revenue_accounting": ("period_start",),
    "cohort_retention": ("cohort_start", "age"),
    "revenue_cohorts": ("cohort_start", "age"),
    "engagement_depth": ("period_start", "active_days"),
    "trailing_activity": ("window_days", "day"),
}


class ReportSourceError(SqlgenError):
    """A source the report cannot read; the message names it (secrets redacted)."""

    exit_code = 4


@dataclass(frozen=True)
class Rows:
    """One view's rows as plain values: dates as ISO text, numbers as int or float."""

    view: str
    columns: tuple[str, ...]
    rows: tuple[tuple, ...]

    def records(self) -> list[dict]:
        return [dict(zip(self.columns, row, strict=True)) for row in self.rows]


def plain(value: object) -> object:
    """A value as the page embeds it: DECIMAL as float, dates as ISO text."""
    if isinstance(value, Decimal):
        return float(value)
    if isinstance(value, (dt.date, dt.datetime)):
        return value.isoformat()
    return value


@dataclass
class Session:
    """A connection the views run on: ``execute`` runs a statement, ``fetch`` a query."""

    target: str
    execute: Callable[[str], None]
    fetch: Callable[[str], tuple[tuple[str, ...], list[tuple]]]
    close: Callable[[], None]
    adapt: Callable[[Spec], Spec] = lambda spec: spec  # where this session reads and writes


def run_report_views(spec: Spec, source: str, progress: bool | None = None) -> dict[str, Rows]:
    """Create the spec's views on ``source`` in a rolled-back transaction and read every
    reported view; a progress bar on a terminal (one step per view)."""
    with _session(spec, source) as session:
        spec = session.adapt(spec)
        target = TARGETS[session.target]
        views = planned_views(spec)
        require_support(spec, target, [view.name for view in views])
        steps = _progress(len(views), progress)
        found: dict[str, Rows] = {}
        try:
            schema = create_schema(spec, target)
            if schema:
                session.execute(schema)
            for view in views:
                steps.set_description(view.name)
                for statement in ddl_statements(view, spec, target):
                    session.execute(statement)
                if view.name in REPORTED:
                    found[view.name] = _read(session, spec, target, view.name)
                steps.update(1)
        except SqlgenError:
            raise
        except Exception as err:
            raise ReportSourceError(f"{redact(source)}: running the views failed: "
                                    f"{scrub(_first_line(err), source)}") from None
        finally:
            steps.close()
        return found


def _read(session: Session, spec: Spec, target, name: str) -> Rows:
    query = exp.select("*").from_(view_table(spec, name))
    if REPORTED[name]:
        query = query.order_by(*REPORTED[name])
    columns, rows = session.fetch(query.sql(target.sqlglot_dialect))
    return Rows(name, columns, tuple(tuple(plain(v) for v in row) for row in rows))


def _first_line(err: Exception) -> str:
    text = str(err).strip().splitlines()
    return text[0] if text else type(err).__name__


class _Quiet:
    def set_description(self, text: str) -> None:
        pass

    def update(self, n: int) -> None:
        pass

    def close(self) -> None:
        pass


def _progress(total: int, wanted: bool | None):
    """A tqdm bar on stderr when it is a terminal (or ``wanted``), else nothing."""
    if wanted is False or (wanted is None and not sys.stderr.isatty()):
        return _Quiet()
    try:
        from tqdm import tqdm
    except ImportError:
        return _Quiet()
    return tqdm(total=total, unit="view", file=sys.stderr, leave=False)


# ---------------------------------------------------------------- sources

class _Opened:
    def __init__(self, session: Session):
        self.session = session

    def __enter__(self) -> Session:
        return self.session

    def __exit__(self, *exc) -> None:
        self.session.close()


def _session(spec: Spec, source: str) -> _Opened:
    if _URL.match(source):
        scheme = source.split("://", 1)[0].lower()
        if scheme in ("postgresql", "postgres") or scheme.startswith("postgresql+"):
            return _Opened(_postgres(source))
        raise ReportSourceError(f"{redact(source)}: a report reads a DuckDB file, a Parquet "
                                "or CSV file, or a postgresql:// URL")
    path = Path(source)
    if not path.is_file():
        raise ReportSourceError(f"{redact(source)}: no such file")
    suffix = path.suffix.lower()
    if suffix in (".parquet", ".csv", ".tsv"):
        return _Opened(_data_file(spec, path, "parquet" if suffix == ".parquet" else "csv"))
    return _Opened(_duckdb_file(path))


def _duckdb(con) -> Session:
    def fetch(sql: str):
        cursor = con.execute(sql)
        return tuple(d[0] for d in cursor.description), cursor.fetchall()

    def close() -> None:
        con.rollback()
        con.close()

    return Session("duckdb", lambda sql: con.execute(sql), fetch, close)


def _duckdb_file(path: Path) -> Session:
    """The file attached read-only (``SOURCE_CATALOG``) to an in-memory database, where
    the views are created: ``on_source`` names the spec's tables in that catalog."""
    import duckdb

    try:
        duckdb.connect(str(path), read_only=True).close()
    except duckdb.Error as err:
        raise ReportSourceError(f"{redact(str(path))}: not a DuckDB database file, nor a "
                                f".parquet or .csv file ({_first_line(err)})") from None
    con = duckdb.connect(":memory:")
    con.execute(f"ATTACH ? AS {SOURCE_CATALOG} (READ_ONLY)", [str(path)])
    con.execute("BEGIN")
    session = _duckdb(con)
    session.adapt = on_source
    return session


SOURCE_CATALOG = "sqlgen_source"


def on_source(spec: Spec) -> Spec:
    """The spec with its tables read from the attached DuckDB file and its views put in
    the in-memory database (a view in DuckDB reads names in its own catalog)."""
    def moved(table: tuple) -> tuple:
        rest = table[-2:] if len(table) > 1 else (("main", False), table[0])
        return ((SOURCE_CATALOG, False), *rest)

    schema = spec.output.schema[-1] if spec.output.schema else ("main", False)
    changes: dict = {name: replace(source, table=moved(source.table))
                     for name, source in (("activity", spec.activity), ("revenue", spec.revenue))
                     if source is not None}
    seen = spec.activity.first_seen if spec.activity is not None else None
    if seen is not None:  # a users table with first-seen dates
        changes["activity"] = replace(changes["activity"],
                                      first_seen=replace(seen, table=moved(seen.table)))
    changes["segments"] = tuple(segment if segment.table is None else
                                replace(segment, table=moved(segment.table))
                                for segment in spec.segments)
    return replace(spec, output=replace(spec.output, schema=(("memory", False), schema)),
                   **changes)


def _data_file(spec: Spec, path: Path, kind: str) -> Session:
    """A Parquet or CSV file read as the spec's one source table (or the one named like the
    file, when the spec reads two)."""
    import duckdb

    tables = [s.table for s in (spec.activity, spec.revenue) if s is not None]
    chosen = [t for t in tables if t[-1][0].lower() == path.stem.lower()] or tables
    if len({t for t in chosen}) != 1:
        raise ReportSourceError(f"{redact(str(path))}: the spec reads two tables; name the "
                                "file after one of them, or use a DuckDB file holding both")
    table = chosen[0][-2:]  # schema.table: the file stands for that table in memory
    node = exp.Table(this=exp.to_identifier(table[-1][0], quoted=True),
                     db=exp.to_identifier(table[0][0], quoted=True) if len(table) > 1 else None)
    reader = exp.Anonymous(this="read_parquet" if kind == "parquet" else "read_csv",
                           expressions=[exp.Literal.string(str(path))])
    con = duckdb.connect(":memory:")
    con.execute("BEGIN")
    try:
        if node.args.get("db"):
            con.execute(exp.Create(this=exp.Table(this=node.args["db"].copy()), kind="SCHEMA",
                                   exists=True).sql("duckdb"))
        con.execute(exp.Create(this=node, kind="VIEW", expression=exp.select("*").from_(
            reader)).sql("duckdb"))
    except duckdb.Error as err:
        con.close()
        raise ReportSourceError(f"{redact(str(path))}: cannot be read as {kind} "
                                f"({_first_line(err)})") from None
    return _duckdb(con)


def _postgres(url: str) -> Session:
    try:
        import psycopg
    except ImportError:
        raise ReportSourceError("a report on PostgreSQL needs psycopg: "
                                "pip install 'sqlgen-growth[report]'") from None
    try:
        conn = pg_connect(url, prepare_threshold=None)
    except psycopg.Error as err:
        raise ReportSourceError(f"{redact(url)}: {scrub(_first_line(err), url)}") from None

    def fetch(sql: str) -> tuple[tuple[str, ...], list[tuple]]:
        cursor = conn.execute(sql)
        return tuple(d.name for d in cursor.description), cursor.fetchall()

    def close() -> None:
        conn.rollback()  # the views were never meant to stay
        conn.close()

    return Session("postgres", lambda sql: conn.execute(sql) and None, fetch, close)


def iter_views(found: dict[str, Rows]) -> Iterator[Rows]:
    """The rows read, in the order of ``REPORTED``."""
    return (found[name] for name in REPORTED if name in found)
