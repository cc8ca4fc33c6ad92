"""Create a spec's schema and views in a database, in one transaction (``sqlgen apply``).

``apply_spec(spec, to)`` takes a DuckDB database file or a ``postgresql://`` URL: it checks
the spec against the database's schema (as ``validate --schema`` does), compiles the views
for the database's dialect and runs the same statements as ``create_all.sql`` in one
transaction. A statement the database refuses rolls everything back: the database is left
as it was, and the error names the view and gives the database's own message (without the
URL's secrets). On PostgreSQL, where a view's columns can only change by dropping it, the
views are dropped first, each after the views that read it, without CASCADE: a view of
yours that reads one of them stops the run with the database's message instead of being
dropped along with it.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

from . import names
from .compiler import compile_spec, create_schema, view_drops
from .dialects import TARGETS
from .errors import EXIT_DATABASE, SpecError, SqlgenError
from .schema import open_source, pg_connect, redact, scrub

_POSTGRES_URL = re.compile(r"^postgres(ql)?(\+\w+)?://", re.IGNORECASE)


class ApplyError(SqlgenError):
    """The database refused a statement (everything was rolled back), or cannot be used."""

    exit_code = EXIT_DATABASE


@dataclass(frozen=True)
class Applied:
    """What ``apply_spec`` did: the database (as messages show it, no secrets), the target
    its SQL was compiled for, the schema it created (None: there was one, or none asked),
    and each view with ``created`` or ``replaced``, in the order they were created."""

    database: str
    target: str
    schema_created: str | None
    views: tuple[tuple[str, str], ...]

    def lines(self) -> list[str]:
        """One line per object, then a summary: what ``sqlgen apply`` prints."""
        out = [f"{self.database}: created schema {self.schema_created}"] if self.schema_created \
            else []
        out += [f"{self.database}: {how} view {name}" for name, how in self.views]
        out.append(f"{self.database}: {len(self.views)} view(s) applied in one transaction "
                   f"(target {self.target})")
        return out


def target_of(to: str) -> str:
    """The dialect of a database ``apply`` can run on: ``postgres`` for a PostgreSQL URL,
    ``duckdb`` for a file; ApplyError for anything else."""
    if _POSTGRES_URL.match(to):
        return "postgres"
    if "://" in to:
        raise ApplyError(f"{redact(to)}: sqlgen apply runs on a DuckDB database file or a "
                         "postgresql:// URL; for other databases run create_all.sql "
                         "(`sqlgen build`) with the database's own client")
    path = Path(to)
    if not path.is_file():
        raise ApplyError(f"{redact(to)}: no such DuckDB database file (apply does not create "
                         "one: the views read tables that must exist already)")
    if path.suffix.lower() in (".csv", ".tsv", ".parquet"):
        raise ApplyError(f"{redact(to)}: a data file, not a database; apply creates views "
                         "in a DuckDB database file or a PostgreSQL database")
    return "duckdb"


def apply_spec(spec, to: str, check_schema: bool = True) -> Applied:
    """Create the spec's schema and views in the database ``to`` in one transaction.

    Raises SpecError when the spec does not fit the database's tables (nothing is run),
    ApplyError when the database refuses a statement (nothing is changed).
    """
    target = TARGETS[target_of(to)]
    if check_schema:
        from .schemacheck import check_spec

        problems = check_spec(spec, open_source(to))
        if problems:
            raise SpecError(problems)
    compiled = compile_spec(spec, target.name)
    steps = [("schema", s) for s in (create_schema(spec, target),) if s]
    steps += [(f"view {_shown(spec, c.view.name)}", s)
              for c, s in zip(reversed(compiled), view_drops(spec, target, compiled, False))]
    steps += [(f"view {_shown(spec, c.view.name)}", s) for c in compiled for s in c.statements]
    with _connect(to, target.name) as db:
        existing = db.views([c.view.name for c in compiled], spec)
        schema_new = bool(spec.output.schema) and not db.has_schema(spec)
        db.run(steps)
    views = tuple((_shown(spec, c.view.name), "replaced" if c.view.name in existing else "created")
                  for c in compiled)
    schema = names.display(spec.output.schema) if schema_new else None
    return Applied(redact(to), target.name, schema, views)


def _shown(spec, view: str) -> str:
    """A view's name as the spec writes it: ``growth.user_states``."""
    name = f"{spec.output.prefix}{view}"
    return f"{names.display(spec.output.schema)}.{name}" if spec.output.schema else name


class _Database:
    """One connection, one transaction: ``run`` commits all steps or rolls back on the
    first one refused, raising ApplyError naming its step."""

    def __init__(self, to: str, conn, error_types: tuple[type[BaseException], ...]):
        self.to, self.conn, self.errors = to, conn, error_types

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.conn.close()

    def _rows(self, sql: str, params: tuple = ()) -> list[tuple]:
        return self.conn.execute(sql, params).fetchall()

    def has_schema(self, spec) -> bool:
        wanted = spec.output.schema[-1]
        rows = self._rows("SELECT schema_name FROM information_schema.schemata")
        return any(_same(name, wanted) for (name,) in rows)

    def views(self, view_names: list[str], spec) -> set[str]:
        """Which of the spec's views exist already (so the report says replaced)."""
        prefix = spec.output.prefix
        if spec.output.schema:
            schema_part = spec.output.schema[-1]
        else:
            schema_part = (self._rows("SELECT current_schema()")[0][0], True)
        rows = self._rows("SELECT table_schema, table_name FROM information_schema.tables "
                          "WHERE table_type = 'VIEW'")
        here = {name for schema, name in rows if _same(schema, schema_part)}
        return {v for v in view_names if f"{prefix}{v}" in here}

    def run(self, steps: list[tuple[str, str]]) -> None:
        self._begin()
        done = 0
        try:
            for _label, statement in steps:
                self.conn.execute(statement)
                done += 1
            self.conn.commit()
        except self.errors as err:
            self._rollback()
            message = scrub(str(err).strip().splitlines()[0] if str(err).strip() else
                            type(err).__name__, self.to)
            raise ApplyError(
                f"{redact(self.to)}: {steps[done][0]}: the database refused statement "
                f"{done + 1} of {len(steps)}: {message}; rolled back, nothing was changed"
                + _hint(message)) from None

    def _begin(self) -> None:
        self.conn.execute("BEGIN TRANSACTION")

    def _rollback(self) -> None:
        try:
            self.conn.rollback()
        except self.errors:
            pass


class _Postgres(_Database):
    def _begin(self) -> None:
        pass  # psycopg opens a transaction with the first statement (autocommit off)


def _hint(message: str) -> str:
    if "depend" in message.lower():
        return (" (a view or other object of yours reads one of the views; drop it first, "
                "or apply with output.prefix or output.schema set elsewhere)")
    return ""


def _same(real: str, wanted) -> bool:
    """A schema name in the database against a spec's name part (``(text, quoted)``)."""
    text, quoted = wanted
    return real == text if quoted else real.lower() == text.lower()


def _connect(to: str, target: str) -> _Database:
    try:
        if target == "postgres":
            import psycopg

            return _Postgres(to, pg_connect(to), (psycopg.Error,))
        import duckdb

        return _Database(to, duckdb.connect(to), (duckdb.Error,))
    except ImportError:
        raise ApplyError("applying to PostgreSQL needs psycopg: pip install "
                         "'sqlgen-growth[postgres]'") from None
    except Exception as err:  # a driver's error: shown scrubbed, never with a traceback
        text = str(err).strip().splitlines()
        raise ApplyError(f"{redact(to)}: cannot connect: "
                         f"{scrub(text[0] if text else type(err).__name__, to)}") from None
