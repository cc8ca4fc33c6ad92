"""The report page: opened in headless Chromium, its embedded numbers compared with the
views' rows read straight from the database, its PNGs, the messages that replace a chart,
and a PostgreSQL source giving the numbers DuckDB gives.

Every customer, user and amount here is invented.
"""

from __future__ import annotations

import base64
import datetime as dt
import json
import os
import re
import shutil
import struct
import subprocess
import sys
from decimal import Decimal
from pathlib import Path

import duckdb
import pytest
from browser import Browser, BrowserUnavailable, find_chromium
from conftest import selected_engines

from sqlgen.compiler import render_files
from sqlgen.report import charts, make_report
from sqlgen.report.charts import HEIGHT, PNG_SCALE, WIDTH
from sqlgen.report.run import REPORTED, plain, run_report_views
from sqlgen.spec import parse_spec

pytest.importorskip("altair")
pytest.importorskip("vl_convert")

pytestmark = pytest.mark.slow

SPEC = """\
version: 1
activity:
  table: app.events
  user: user_id
  timestamp: seen_at
revenue:
  shape: subscriptions
  table: billing.plans
  customer: account
  start: started_on
  end: ended_on
  amount: amount
  interval_column: every
  timestamp_type: date
grain: month
cohorts: true
engagement: true
trailing_windows: [7, 28]
output:
  dialect: duckdb
  schema: growth
"""

EVENTS = [("user_id", "text"), ("seen_at", "timestamp")]
PLANS = [("account", "text"), ("started_on", "date"), ("ended_on", "date"),
         ("amount", "decimal(10,2)"), ("every", "text")]


def events(months: int = 6) -> list[tuple]:
    """30 invented users over ``months`` months of 2024; the last month stops on the 14th
    (so it is in progress); each user active in a fixed pattern of months and days."""
    rows = []
    for i in range(30):
        for m in range(i % 4, months):
            if (i * 7 + m * 3) % 5 == 0:
                continue
            for k in range(1 + (i + m) % 3):
                day = min(1 + (i * 3 + m * 5 + k * 7) % 28, 14 if m == months - 1 else 28)
                rows.append((f"u{i:02d}", dt.datetime(2024, 1 + m, day, 8 + k, 30)))
    return rows


def plans() -> list[tuple]:
    """Invented subscriptions: monthly and yearly plans, upgrades, downgrades, a return."""
    d = dt.date
    return [
        ("acme-a", d(2024, 1, 3), None, Decimal("10.00"), "month"),
        ("acme-b", d(2024, 1, 10), d(2024, 3, 10), Decimal("20.00"), "month"),
        ("acme-b", d(2024, 3, 10), None, Decimal("35.00"), "month"),  # upgrade
        ("acme-c", d(2024, 2, 1), d(2024, 4, 1), Decimal("120.00"), "year"),
        ("acme-c", d(2024, 5, 20), None, Decimal("120.00"), "year"),  # back after a gap
        ("acme-d", d(2024, 2, 14), d(2024, 5, 1), Decimal("30.00"), "month"),
        ("acme-d", d(2024, 5, 1), None, Decimal("15.00"), "month"),  # downgrade
        ("acme-e", d(2024, 3, 5), d(2024, 5, 5), Decimal("12.50"), "month"),  # churns
        ("acme-f", d(2024, 4, 2), None, Decimal("8.00"), "month"),
        ("acme-g", d(2024, 6, 1), None, Decimal("9.00"), "month"),
    ]


def duckdb_file(path: Path, event_rows: list[tuple], plan_rows: list[tuple]) -> Path:
    con = duckdb.connect(str(path))
    con.execute("CREATE SCHEMA app; CREATE SCHEMA billing; "
                "CREATE TABLE app.events (user_id TEXT, seen_at TIMESTAMP); "
                "CREATE TABLE billing.plans (account TEXT, started_on DATE, ended_on DATE, "
                "amount DECIMAL(10, 2), every TEXT)")
    if event_rows:
        con.executemany("INSERT INTO app.events VALUES (?, ?)", event_rows)
    if plan_rows:
        con.executemany("INSERT INTO billing.plans VALUES (?, ?, ?, ?, ?)", plan_rows)
    con.close()
    return path


def spec_file(folder: Path, text: str = SPEC) -> tuple[Path, object]:
    path = folder / "growth.yml"
    path.write_text(text)
    return path, parse_spec(text, str(path))


def rows_in_database(db: Path, spec, folder: Path) -> dict[str, list[dict]]:
    """The reported views' rows, read directly: the build's create_all.sql run on a copy
    of the database, each view selected in full."""
    copy = folder / "direct.duckdb"
    shutil.copy(db, copy)
    con = duckdb.connect(str(copy))
    con.execute(render_files(spec)["create_all.sql"])
    found = {}
    for view in (v for v in REPORTED if (spec.revenue or "revenue" not in v)):
        try:
            order = ", ".join(REPORTED[view]) or "1"  # each view's key, in its order
            cursor = con.execute(f"SELECT * FROM growth.{view} ORDER BY {order}")
        except duckdb.CatalogException:
            continue  # a view the spec does not enable
        names = [d[0] for d in cursor.description]
        found[view] = [{k: plain(v) for k, v in zip(names, row)} for row in cursor.fetchall()]
    con.close()
    return found


def png_size(path: Path) -> tuple[int, int]:
    """Width and height from the IHDR chunk, which the PNG specification (ISO/IEC 15948,
    section 5.6) puts first, right after the 8-byte signature."""
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR", path
    return struct.unpack(">II", data[16:24])


@pytest.fixture(scope="session")  # once per worker, whatever runs in between
def browser():
    if find_chromium() is None:
        if os.environ.get("CI") == "true":
            pytest.fail("chromium missing in CI (.ci/setup_engines.sh installs it)")
        pytest.skip("chromium not installed")
    try:
        with Browser.start() as started:
            yield started
    except BrowserUnavailable as err:
        pytest.fail(str(err))


@pytest.fixture(scope="session")
def full(tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    db = duckdb_file(folder / "warehouse.duckdb", events(), plans())
    path, spec = spec_file(folder)
    before = db.read_bytes()
    charts.VALIDATE = True  # every chart checked against the Vega-Lite schema, once
    try:
        report = make_report(spec, str(db), folder / "report.html",
                             now=dt.datetime(2024, 6, 15, 9, 0, tzinfo=dt.UTC))
    finally:
        charts.VALIDATE = False
    assert db.read_bytes() == before, "the report must leave the database as it was"
    return folder, db, spec, report


def embedded(page) -> dict[str, dict]:
    """Per chart, its Vega view's datasets named after a reported view, read back from
    the rendered page (the numbers the charts draw)."""
    script = """
      (function () {
        const specs = JSON.parse(document.getElementById('sqlgen-charts').textContent);
        const out = {};
        for (const key of Object.keys(specs)) {
          out[key] = {};
          for (const name of Object.keys(specs[key].datasets)) {
            out[key][name] = window.sqlgenViews[key].data(name);
          }
        }
        return JSON.stringify(out);
      })()"""
    return json.loads(page.evaluate(script))


def same_rows(shown: list[dict], direct: list[dict]) -> bool:
    if len(shown) != len(direct):
        return False
    for a, b in zip(shown, direct, strict=True):
        if not set(b) <= set(a):  # the page may add keys of its own, never lose one
            return False
        for key, value in b.items():
            got = a[key]
            if isinstance(value, float) and got is not None:
                if got != pytest.approx(value, rel=1e-12):
                    return False
            elif got != value:
                return False
    return True


def test_page_in_chromium_numbers_equal_the_database(full, browser):
    folder, db, spec, report = full
    page = browser.open(report.html)
    assert page.console_errors == []
    assert page.requests == [report.html.resolve().as_uri()], "no request but the page itself"
    shot = page.screenshot(folder / "screenshot.png", full_page=True)
    assert shot[:8] == b"\x89PNG\r\n\x1a\n" and len(shot) > 20_000
    direct = rows_in_database(db, spec, folder)
    shown = embedded(page)
    expected_charts = {"users", "net_change", "quick_ratio", "rates", "cohorts", "engagement",
                       "trailing", "trailing_quick_ratio", "revenue", "revenue_retention",
                       "revenue_cohorts"}
    assert set(shown) == expected_charts
    for key, datasets in shown.items():
        views = [name for name in datasets if name in REPORTED]
        assert len(views) == 1, key
        assert same_rows(datasets[views[0]], direct[views[0]]), (key, views[0])
    # The in-progress June is shaded and labelled in the period charts.
    labels = page.evaluate("Array.from(document.querySelectorAll('#chart-users text'))"
                           ".map(t => t.textContent)")
    assert "in progress" in labels
    text = page.evaluate("document.body.innerText")
    assert "Management metrics, not audited figures" in text
    assert "per-user views" in text and "aggregates only" in text
    page_html = page.evaluate("document.documentElement.outerHTML")
    assert "u01" not in page_html and "acme-" not in page_html  # no user or customer keys
    assert "trailing_windows: [7, 28]" in page_html  # the spec, under a toggle


def test_pngs_exist_with_the_stated_size(full):
    _folder, _db, _spec, report = full
    assert {p.stem for p in report.pngs} == {
        "users", "net_change", "quick_ratio", "rates", "cohorts", "engagement", "trailing",
        "trailing_quick_ratio", "revenue", "revenue_retention", "revenue_cohorts"}
    for png in report.pngs:
        assert png.stat().st_size > 5_000, png
        assert png_size(png) == (WIDTH * PNG_SCALE, HEIGHT * PNG_SCALE), png
    html = report.html.read_text()
    assert f'href="{report.html.stem}-charts/users.png"' in html


CASES = {
    "no revenue": (lambda: SPEC.split("revenue:")[0] + "grain:" + SPEC.split("grain:")[1],
                   events, ["No revenue charts: the spec has no `revenue` section"],
                   {"users", "cohorts"}, {"revenue"}),
    "no cohorts": (lambda: SPEC.replace("cohorts: true\n", ""), events,
                   ["No cohort heat map: the spec does not set `cohorts: true`"],
                   {"users", "revenue"}, {"cohorts", "revenue_cohorts"}),
    "one period": (lambda: SPEC, lambda: events(1),
                   ["Only one period of activity so far, starting 2024-01-01 (still in "
                    "progress)"], set(), {"users", "cohorts", "quick_ratio"}),
    "empty activity": (lambda: SPEC, lambda: [],
                       ["No rows to chart: app.events has 0 rows and none of them counted"],
                       {"revenue"}, {"users", "cohorts", "engagement", "trailing"}),
}


@pytest.mark.parametrize("case", list(CASES))
def test_a_missing_part_gives_a_clear_message(case, tmp_path, browser):
    spec_text, event_rows, messages, present, absent = CASES[case]
    db = duckdb_file(tmp_path / "w.duckdb", event_rows(), plans())
    _path, spec = spec_file(tmp_path, spec_text())
    report = make_report(spec, str(db), tmp_path / "report.html", pngs=False)
    page = browser.open(report.html)
    assert page.console_errors == []
    assert page.requests == [report.html.resolve().as_uri()]
    text = page.evaluate("document.body.innerText")
    for message in messages:
        assert message in text
    charts = set(page.evaluate("Object.keys(window.sqlgenViews)"))
    assert present <= charts and not absent & charts, charts
    if case == "one period":  # the numbers are still shown, as a table
        assert page.evaluate("document.querySelectorAll('details[open] table').length") >= 1


MINIMAL = SPEC.split("revenue:")[0] + "grain: month\noutput:\n  schema: growth\n"


def test_the_command_writes_the_page_quietly_off_a_terminal(full, tmp_path):
    _folder, db, _spec, _report = full
    path, _spec = spec_file(tmp_path, MINIMAL)
    out = tmp_path / "out" / "page.html"
    (tmp_path / "out").mkdir()
    result = subprocess.run([sys.executable, "-m", "sqlgen", "report", str(path), "--from",
                             str(db), "--out", str(out)], capture_output=True, text=True,
                            timeout=300)
    assert result.returncode == 0, result.stderr
    assert result.stderr == ""  # no progress bar when stderr is not a terminal
    assert result.stdout == (f"{out}: report written from {db}; 4 PNG(s) in "
                             f"{tmp_path / 'out' / 'page-charts'}/\n")
    assert out.exists() and (tmp_path / "out" / "page-charts" / "users.png").exists()


def test_an_unreadable_source_is_a_clear_error(tmp_path):
    path, _spec = spec_file(tmp_path)
    result = subprocess.run([sys.executable, "-m", "sqlgen", "report", str(path), "--from",
                             str(tmp_path / "missing.duckdb")], capture_output=True,
                            text=True, timeout=120)
    assert result.returncode == 4
    assert result.stderr == f"Error: {tmp_path / 'missing.duckdb'}: no such file\n"
    db = duckdb_file(tmp_path / "other.duckdb", [], [])
    con = duckdb.connect(str(db))
    con.execute("DROP TABLE billing.plans")
    con.close()
    result = subprocess.run([sys.executable, "-m", "sqlgen", "report", str(path), "--from",
                             str(db)], capture_output=True, text=True, timeout=120,
                            cwd=tmp_path)
    assert result.returncode == 4 and "Traceback" not in result.stderr
    assert re.match(rf"Error: {re.escape(str(db))}: running the views failed: .*plans",
                    result.stderr), result.stderr


@pytest.fixture
def pg(engines):
    if "postgres" not in selected_engines():
        pytest.skip("postgres not selected (SQLGEN_ENGINES)")
    engine = engines("postgres")
    engine.reset()  # the server is shared with the worker's other tests: start empty
    engine.create_table("app.events", EVENTS, events())
    engine.create_table("billing.plans", PLANS, plans())
    port = engine._conn.info.port
    return engine, f"postgresql://postgres@127.0.0.1:{port}/postgres"


def test_postgres_gives_the_numbers_duckdb_gives(full, pg, tmp_path):
    _folder, db, spec, _report = full
    engine, url = pg
    on_duckdb = run_report_views(spec, str(db), progress=False)
    on_postgres = run_report_views(spec, url, progress=False)
    assert set(on_postgres) == set(on_duckdb)
    for name, rows in on_duckdb.items():
        theirs = on_postgres[name]
        assert theirs.columns == rows.columns, name
        assert same_rows(theirs.records(), rows.records()), name
    # and the page from PostgreSQL embeds those numbers
    report = make_report(spec, url, tmp_path / "pg.html", pngs=False)
    text = report.html.read_text()
    specs = json.loads(re.search(r'id="sqlgen-charts">(.*?)</script>', text).group(1))
    assert same_rows(specs["users"]["datasets"]["growth_accounting"],
                     on_duckdb["growth_accounting"].records())
    # the views were created in a transaction rolled back: none is left behind
    assert engine.query("SELECT count(*) FROM information_schema.views "
                        "WHERE table_schema = 'growth'") == [(0,)]


@pytest.mark.parametrize("kind", ["parquet", "csv"])
def test_a_data_file_gives_the_numbers_of_the_database(full, tmp_path, kind):
    """A Parquet or CSV file is read as the spec's activity table (named like the file)."""
    _folder, db, _spec, _report = full
    data = tmp_path / f"events.{kind}"
    con = duckdb.connect(str(db), read_only=True)
    con.execute(f"COPY app.events TO '{data}' (FORMAT {kind})")
    con.close()
    _path, spec = spec_file(tmp_path, MINIMAL)
    on_file = run_report_views(spec, str(data), progress=False)
    on_duckdb = run_report_views(spec, str(db), progress=False)
    assert set(on_file) == {"activity_source_summary", "growth_accounting"}
    for name, rows in on_duckdb.items():
        assert on_file[name] == rows, name


def test_progress_shows_on_a_terminal_only(monkeypatch):
    from sqlgen.report import run

    class Tty:
        def __init__(self, tty):
            self.tty = tty

        def isatty(self):
            return self.tty

        def write(self, text):
            return len(text)

        def flush(self):
            pass

    monkeypatch.setattr(run.sys, "stderr", Tty(False))
    assert isinstance(run._progress(5, None), run._Quiet)
    monkeypatch.setattr(run.sys, "stderr", Tty(True))
    bar = run._progress(5, None)
    assert bar.total == 5 and bar.unit == "view"  # tqdm: one step per view
    bar.close()
    assert isinstance(run._progress(5, False), run._Quiet)


def test_the_page_fits_a4_and_letter_when_printed(full, browser):
    """A4 less 12 mm margins each side is 186 mm = 703 CSS pixels (96 per inch), the
    narrower of A4 and Letter (191.9 mm): printed, nothing is wider than that."""
    _folder, _db, _spec, report = full
    page = browser.open(report.html, width=703, height=1000)
    page.send("Emulation.setEmulatedMedia", {"media": "print"})
    widths = page.evaluate("document.querySelectorAll('details').forEach(d => d.open = true);"
                           "[document.documentElement.scrollWidth, window.innerWidth]")
    assert widths[0] <= widths[1] == 703, widths
    pdf = page.send("Page.printToPDF", {"paperWidth": 8.27, "paperHeight": 11.69})["data"]
    assert base64.b64decode(pdf)[:5] == b"%PDF-"
    assert page.console_errors == []


SEGMENT_SPEC = SPEC.replace("output:\n", """\
segments:
  plan:
    kind: user
    table: app.people
    key: user_id
    column: plan
output:
""")


def test_a_segment_gets_a_chart_with_a_value_picker(tmp_path, browser):
    """A kind-user segment from a users table (five users missing from it: NULL): its chart
    embeds the segmented view's rows as read directly, offers every value (NULL included)
    in a drop-down that switches the chart, and its values add up to the totals."""
    db = duckdb_file(tmp_path / "w.duckdb", events(), plans())
    con = duckdb.connect(str(db))
    con.execute("CREATE TABLE app.people (user_id TEXT, plan TEXT)")
    con.executemany("INSERT INTO app.people VALUES (?, ?)",
                    [(f"u{i:02d}", ("free", "solo", "team")[i % 3]) for i in range(25)])
    con.close()
    _path, spec = spec_file(tmp_path, SEGMENT_SPEC)
    report = make_report(spec, str(db), tmp_path / "report.html")
    assert "segment_plan" in {p.stem for p in report.pngs}
    png = next(p for p in report.pngs if p.stem == "segment_plan")
    assert png_size(png) == (WIDTH * PNG_SCALE, HEIGHT * PNG_SCALE)
    page = browser.open(report.html)
    assert page.console_errors == []
    assert page.requests == [report.html.resolve().as_uri()]
    direct = rows_in_database(db, spec, tmp_path)
    split = direct["growth_accounting_by_segment"]

    def order(row: dict) -> tuple:  # NULL's place in ORDER BY differs between engines
        value = row["segment_value"]
        return row["segment"], value is None, str(value), row["period_start"]

    shown = embedded(page)["segment_plan"]["growth_accounting_by_segment"]
    assert same_rows(sorted(shown, key=order), sorted(split, key=order))
    totals = {r["period_start"]: r["active_users"] for r in direct["growth_accounting"]}
    for period, active in totals.items():  # kind user: the values add up to the totals
        assert sum(r["active_users"] for r in split if r["period_start"] == period) == active
    options = page.evaluate("Array.from(document.querySelectorAll('#chart-segment_plan "
                            "select option')).map(o => o.textContent)")
    assert options == ["free", "solo", "team", "NULL"]

    def drawn(index: int) -> set[tuple]:
        """(value, period, active users) of the line's points after picking option
        ``index``, read from Vega's scene graph (what is drawn, not what is embedded)."""
        return {tuple(p) for p in json.loads(page.evaluate(f"""(async function () {{
            const select = document.querySelector('#chart-segment_plan select');
            select.selectedIndex = {index};
            select.dispatchEvent(new Event('change'));
            const view = window.sqlgenViews['segment_plan'];
            await view.runAsync();
            const out = [];
            (function walk(node) {{
              if (!node || !node.items) return;
              if (node.marktype === 'line' || node.marktype === 'symbol') {{
                for (const it of node.items) if (it.datum && 'active_users' in it.datum)
                  out.push([it.datum.segment_value, it.datum.period_start,
                            it.datum.active_users]);
              }}
              for (const it of node.items) walk(it);
            }})(view.scenegraph().root);
            return JSON.stringify(out);
          }})()"""))}

    for index, value in enumerate(["free", "solo", "team", None]):
        want = {(r["segment_value"], r["period_start"], r["active_users"])
                for r in split if r["segment_value"] == value}
        assert drawn(index) == want, value
    assert page.console_errors == []
