"""``sqlgen demo``: an invented app's activity, the views built on it, the result printed.

The scenario is made up: Quillfinch, a journaling app, over 2024 and 2025. About 8,000 users
arrive at a growing rate; "habit" users write most months, "casual" users fade and sometimes
come back, "tourists" try it once. Some pay: a plan mix of Quill (4.00 a month), Inkwell
(9.00 a month) and Inkwell yearly (90.00 a year); some switch plans, cancel, or come back.
The data stops on 2025-12-15, so December is a period still in progress. Everything is
generated inside DuckDB from a fixed seed, so every run prints the same table.
"""

from __future__ import annotations

from pathlib import Path

import duckdb

from .compiler import build_inputs, render_files
from .errors import OutputError
from .output import spec_owner, write_files
from .spec import parse_spec

SEED = "quillfinch-1"
DATA_END = "2025-12-15"  # the newest activity is the day before: December is in progress
DB_NAME = "quillfinch.duckdb"
MARKER_TABLE = "sqlgen_demo_marker"

SPEC_TEMPLATE = """\
# Demo spec written by `sqlgen demo`: an invented journaling app, Quillfinch.
version: 1
activity:
  table: app.journal_events
  user: member_id
  timestamp: happened_at
  where: "event_name <> 'push_received'"
revenue:
  shape: subscriptions
  table: app.subscriptions
  customer: member_id
  start: started_on
  end: ended_on
  amount: plan_amount
  interval_column: billing_interval
  timestamp_type: date
grain: {grain}
cohorts: {cohorts}
engagement: true
trailing_windows: [7, 28]
output:
  dialect: duckdb
  schema: growth
  folder: sql
"""

# A uniform number in [0, 1) from a hash of its inputs and the seed: reproducible everywhere.
_U = "((hash({args}, '" + SEED + "') % 1000003) / 1000003.0)"


def _u(*args: str) -> str:
    return _U.format(args=", ".join(args))


DATA_SQL = f"""
CREATE SCHEMA IF NOT EXISTS app;
CREATE OR REPLACE TABLE app.members AS
SELECT
  i AS member_no,
  'm' || lpad(CAST(i AS VARCHAR), 5, '0') AS member_id,
  CAST(floor(24 * sqrt({_u('i', "'arrival'")})) AS INTEGER) AS signup_month,
  CASE WHEN {_u('i', "'kind'")} < 0.25 THEN 'habit'
       WHEN {_u('i', "'kind'")} < 0.75 THEN 'casual' ELSE 'tourist' END AS segment
FROM range(8000) AS t(i);

CREATE OR REPLACE TABLE app.member_months AS
SELECT m.member_id, m.member_no, m.segment, mo.month_index
FROM app.members AS m
JOIN range(24) AS mo(month_index) ON mo.month_index >= m.signup_month
WHERE mo.month_index = m.signup_month
   OR {_u('m.member_no', 'mo.month_index', "'active'")} < CASE m.segment
        WHEN 'habit' THEN 0.85
        WHEN 'casual' THEN 0.12 + 0.5 * pow(0.8, mo.month_index - m.signup_month)
        ELSE 0.04 END;

CREATE OR REPLACE TABLE app.journal_events AS
WITH sized AS (
  SELECT *, 1 + CAST(floor(-ln(1 - {_u('member_no', 'month_index', "'depth'")})
              * CASE segment WHEN 'habit' THEN 14 WHEN 'casual' THEN 4 ELSE 1.5 END)
              AS INTEGER) AS n_events
  FROM app.member_months
), exploded AS (
  SELECT member_id, member_no, month_index, unnest(range(n_events)) AS k FROM sized
)
SELECT
  member_id,
  CAST(DATE '2024-01-01' + to_months(month_index) AS TIMESTAMP)
    + to_seconds(CAST(floor({_u('member_no', 'month_index', 'k', "'when'")}
      * 86400 * day(last_day(DATE '2024-01-01' + to_months(month_index)))) AS BIGINT))
    AS happened_at,
  CASE WHEN {_u('member_no', 'month_index', 'k', "'what'")} < 0.2 THEN 'push_received'
       WHEN {_u('member_no', 'month_index', 'k', "'what'")} < 0.6 THEN 'entry_written'
       ELSE 'app_opened' END AS event_name
FROM exploded
WHERE happened_at < TIMESTAMP '{DATA_END}';

-- Subscriptions: a first plan some months after signing up, then for some a second one
-- (a switch of plan at once, or a return after a gap). Ends past the data's end are open.
CREATE OR REPLACE TABLE app.plans AS
SELECT * FROM (VALUES (0, 'quill', 4.00, 'month'), (1, 'inkwell', 9.00, 'month'),
                      (2, 'inkwell_yearly', 90.00, 'year')) AS p(plan_no, plan, price, every);

CREATE OR REPLACE TABLE app.subscriptions AS
WITH payers AS (
  SELECT member_id, member_no, segment, signup_month,
         signup_month + 1 + CAST(floor(3 * {_u('member_no', "'wait'")}) AS INTEGER) AS first_month,
         CAST(floor(3 * {_u('member_no', "'plan'")}) AS INTEGER) AS first_plan,
         1 + CAST(floor(-ln(1 - {_u('member_no', "'stay'")})
                  * CASE segment WHEN 'habit' THEN 16 ELSE 4 END) AS INTEGER) AS months,
         {_u('member_no', "'next'")} AS next_u
  FROM app.members
  WHERE {_u('member_no', "'pays'")} < CASE segment WHEN 'habit' THEN 0.45
                                                   WHEN 'casual' THEN 0.12 ELSE 0.01 END
), terms AS (
  SELECT member_id, member_no, first_plan AS plan_no, first_month AS start_month,
         first_month + months AS end_month FROM payers
  UNION ALL
  SELECT member_id, member_no, (first_plan + 1 + CAST(floor(2 * next_u) AS INTEGER)) % 3,
         first_month + months + CASE WHEN next_u < 0.5 THEN 0 ELSE 2 END,
         first_month + months + 30
  FROM payers WHERE next_u < 0.75
)
SELECT * FROM (
  SELECT t.member_id, p.plan, CAST(p.price AS DECIMAL(10, 2)) AS plan_amount,
         p.every AS billing_interval,
         CAST(DATE '2024-01-01' + to_months(t.start_month)
              + to_days(CAST(floor(27 * {_u('t.member_no', 't.start_month', "'day'")})
                             AS INTEGER)) AS DATE) AS started_on,
         CASE WHEN DATE '2024-01-01' + to_months(t.end_month) < DATE '{DATA_END}'
              THEN CAST(DATE '2024-01-01' + to_months(t.end_month) AS DATE) END AS ended_on
  FROM terms AS t JOIN app.plans AS p USING (plan_no)
) WHERE started_on < DATE '{DATA_END}';

CREATE OR REPLACE TABLE {MARKER_TABLE} AS SELECT 'sqlgen demo database' AS note;
"""

COLUMNS = (
    ("period_start", "period", "{}"),
    ("active_users", "active", "{:,}"),
    ("new_users", "new", "{:,}"),
    ("retained_users", "retained", "{:,}"),
    ("resurrected_users", "resurrected", "{:,}"),
    ("churned_users", "churned", "{:,}"),
    ("net_change", "net", "{:+,}"),
    ("quick_ratio", "quick ratio", "{:.2f}"),
    ("retention_rate", "retention", "{:.1%}"),
    ("period_status", "status", "{}"),
)


def _open_database(path: Path) -> duckdb.DuckDBPyConnection:
    if path.exists():
        con = duckdb.connect(str(path))
        found = con.execute("SELECT count(*) FROM information_schema.tables "
                            "WHERE table_name = ?", [MARKER_TABLE]).fetchone()
        if not found or not found[0]:
            con.close()
            raise OutputError(f"{path} exists and is not a sqlgen demo database; "
                              "choose another folder with --folder")
        return con
    path.parent.mkdir(parents=True, exist_ok=True)
    return duckdb.connect(str(path))


def _write_spec(folder: Path, text: str) -> Path:
    path = folder / "spec.yml"
    if path.exists() and not path.read_text(encoding="utf-8").startswith("# Demo spec"):
        raise OutputError(f"{path} exists and was not written by sqlgen demo")
    path.write_text(text, encoding="utf-8")
    return path


def format_table(names: list[str], rows: list[tuple]) -> str:
    """A plain-text table of growth-accounting rows."""
    index = {name: i for i, name in enumerate(names)}
    header = [title for _name, title, _fmt in COLUMNS]
    body = [[("" if row[index[name]] is None else fmt.format(row[index[name]]))
             for name, _title, fmt in COLUMNS] for row in rows]
    widths = [max(len(cell) for cell in column) for column in zip(header, *body)]
    lines = ["  ".join(cell.rjust(width) for cell, width in zip(line, widths))
             for line in [header, *body]]
    return "\n".join([lines[0], "  ".join("-" * w for w in widths), *lines[1:]])


def run_demo(folder: Path, grain: str = "month") -> str:
    """Create the demo data, build and run the views, return the printed report."""
    folder.mkdir(parents=True, exist_ok=True)
    con = _open_database(folder / DB_NAME)
    con.execute(DATA_SQL)
    # Day cohorts over two years are a triangle of some 250,000 cells: too many to draw.
    spec_text = SPEC_TEMPLATE.format(grain=grain, cohorts=str(grain != "day").lower())
    spec_path = _write_spec(folder, spec_text)
    spec = parse_spec(spec_text, str(spec_path))
    files = render_files(spec)
    # With the manifest a build writes, so `sqlgen build --check` on the demo spec vouches
    # for the files without compiling.
    out = folder / spec.output.folder
    write_files(out, files, build_inputs(spec, spec.output.dialect, spec_text),
                spec_owner(spec_path, out))
    con.execute(files["create_all.sql"])  # creates the schema too
    cursor = con.execute("SELECT * FROM growth.growth_accounting ORDER BY period_start")
    names = [d[0] for d in cursor.description]
    rows = cursor.fetchall()
    cursor = con.execute("SELECT * FROM growth.activity_source_summary")
    summary = dict(zip([d[0] for d in cursor.description], cursor.fetchone()))
    cursor = con.execute("SELECT count(*), min(started_on) FROM app.subscriptions")
    subscriptions = cursor.fetchone()
    con.close()
    return "\n".join([
        f"Quillfinch (an invented journaling app): {grain}ly growth accounting",
        format_table(names, rows),
        "",
        f"Source rows: {summary['source_rows']:,}; counted as activity: "
        f"{summary['counted_rows']:,}; filtered out by `where`: {summary['filtered_out_rows']:,}.",
        f"Subscriptions (an invented plan mix): {subscriptions[0]:,}.",
        f"Database: {folder / DB_NAME}   spec: {spec_path}   SQL: {folder / spec.output.folder}/",
        "Management metrics, not audited financial statements. The user_activity, "
        "user_states and customer_revenue views hold per-user data.",
        _report(spec, folder),
    ])


def _report(spec, folder: Path) -> str:
    """The report page for the demo data, or why there is none."""
    from .report.charts import MissingExtra

    try:
        from .report import make_report

        done = make_report(spec, str(folder / DB_NAME), folder / "report.html")
    except MissingExtra as err:
        return f"No report page: {err}"
    return (f"Report (charts as PNG in {done.html.with_name(done.html.stem + '-charts')}/):\n"
            f"{done.html}")
