"""A repository of specs: `sqlgen build` and `--check` over several specs and folders of
them, each spec in its own output folder; a view removed from a spec removes its file,
never a hand-written one."""

from __future__ import annotations

from pathlib import Path

import duckdb
import pytest

from sqlgen.cli import main

APP = """\
version: 1
activity:
  table: raw.app_events
  user: user_id
  timestamp: occurred_at
grain: month
cohorts: true
"""

REVENUE = """\
version: 1
revenue:
  table: billing.charges
  customer: account_id
  timestamp: charged_on
  timestamp_type: date
  amount: amount
  where: "currency = '{currency}'"
output:
  prefix: {prefix}
"""


def run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture
def repo(tmp_path: Path, monkeypatch) -> Path:
    """growth/app.yml (its own sql/ folder) and revenue/usd.yml, revenue/eur.yml sharing
    revenue/sql/ with a prefix each; a README.yml-free folder of specs."""
    monkeypatch.chdir(tmp_path)
    (tmp_path / "growth").mkdir()
    (tmp_path / "growth" / "app.yml").write_text(APP)
    (tmp_path / "revenue").mkdir()
    for currency in ("usd", "eur"):
        (tmp_path / "revenue" / f"{currency}.yml").write_text(
            REVENUE.format(currency=currency.upper(), prefix=f"{currency}_"))
    return tmp_path


def _files(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir())


def test_a_whole_repository_builds_and_checks(capsys, repo):
    code, out, err = run(capsys, "build", "growth", "revenue")
    assert (code, err) == (0, "")
    assert out.splitlines() == ["growth/sql: 6 written, 0 unchanged",
                                "revenue/sql: 4 written, 0 unchanged",
                                "revenue/sql: 4 written, 0 unchanged"]
    assert "cohort_retention.sql" in _files(repo / "growth" / "sql")
    assert _files(repo / "revenue" / "sql") == [
        ".sqlgen-manifest", "eur_create_all.sql", "eur_customer_revenue.sql",
        "eur_revenue_accounting.sql", "eur_revenue_source_summary.sql", "usd_create_all.sql",
        "usd_customer_revenue.sql", "usd_revenue_accounting.sql",
        "usd_revenue_source_summary.sql"]
    # one check for the whole repository, files and folders mixed
    code, out, err = run(capsys, "build", "--check", "growth/app.yml", "revenue")
    assert (code, out, err) == (0, "sqlgen: generated files are up to date\n", "")
    code, out, err = run(capsys, "build", "--check", "--full", "growth", "revenue")
    assert code == 0 and out == "sqlgen: generated files are up to date\n"
    # the generated SQL runs: each spec's create_all.sql on an empty DuckDB warehouse
    with duckdb.connect() as conn:
        conn.execute("CREATE SCHEMA raw; CREATE TABLE raw.app_events (user_id VARCHAR, "
                     "occurred_at TIMESTAMP); CREATE SCHEMA billing; CREATE TABLE "
                     "billing.charges (account_id BIGINT, charged_on DATE, amount "
                     "DECIMAL(12,2), currency VARCHAR)")
        for path in ("growth/sql/create_all.sql", "revenue/sql/usd_create_all.sql",
                     "revenue/sql/eur_create_all.sql"):
            conn.execute((repo / path).read_text())


def test_check_names_exactly_the_stale_spec_files(capsys, repo):
    assert run(capsys, "build", "growth", "revenue")[0] == 0
    eur = repo / "revenue" / "eur.yml"
    eur.write_text(eur.read_text().replace("'EUR'", "'CHF'"))
    code, out, err = run(capsys, "build", "--check", "growth", "revenue")
    assert code == 1
    stale = sorted(line.split()[1] for line in out.splitlines() if line.startswith("--- revenue"))
    assert stale == ["revenue/sql/eur_create_all.sql", "revenue/sql/eur_customer_revenue.sql",
                     "revenue/sql/eur_revenue_accounting.sql",
                     "revenue/sql/eur_revenue_source_summary.sql"]
    assert "4 file(s) out of date" in err


def test_a_view_removed_from_a_spec_removes_its_file_never_a_hand_written_one(capsys, repo):
    assert run(capsys, "build", "growth", "revenue")[0] == 0
    sql = repo / "growth" / "sql"
    (sql / "team_notes.sql").write_text("-- our own query\nSELECT 1;\n")
    app = repo / "growth" / "app.yml"
    app.write_text(app.read_text().replace("cohorts: true\n", ""))
    code, out, _ = run(capsys, "build", "growth", "revenue")
    assert code == 0 and "growth/sql: 5 written, 0 unchanged, 1 removed" in out
    assert "cohort_retention.sql" not in _files(sql) and "team_notes.sql" in _files(sql)
    # a hand-written file where a view added back would go is refused, nothing is written
    (sql / "cohort_retention.sql").write_text("SELECT 2;\n")
    app.write_text(APP)
    before = {p: p.read_bytes() for p in repo.rglob("*") if p.is_file()}
    code, out, err = run(capsys, "build", "growth", "revenue")
    assert code == 4 and out == ""
    assert err == (f"Error: {Path('growth/sql/cohort_retention.sql')}: not generated by "
                   "sqlgen, so not overwritten; move it away or choose another folder with "
                   "--out\n")
    assert {p: p.read_bytes() for p in repo.rglob("*") if p.is_file()} == before


def test_two_specs_of_one_build_writing_one_file_are_refused_first(capsys, repo):
    (repo / "revenue" / "gbp.yml").write_text(REVENUE.format(currency="GBP", prefix="usd_"))
    code, out, err = run(capsys, "build", "revenue")
    assert code == 4 and out == ""
    assert err.startswith("Error: revenue/sql/usd_")
    assert ("revenue/sql/usd_revenue_accounting.sql: written by both revenue/gbp.yml and "
            "revenue/usd.yml in this build; give each spec its own output.prefix") in err
    assert not (repo / "revenue" / "sql").exists()


def test_the_problems_of_every_spec_are_reported_together(capsys, repo):
    for name in ("usd", "eur"):
        path = repo / "revenue" / f"{name}.yml"
        path.write_text(path.read_text().replace("grain", "grain").replace(
            "amount: amount", "amount: amount\ngrain: wek"))
    code, out, err = run(capsys, "build", "growth", "revenue")
    assert code == 3 and out == ""
    lines = err.splitlines()
    assert [line.split(":")[0] for line in lines] == ["revenue/eur.yml", "revenue/usd.yml"]
    assert not (repo / "growth" / "sql").exists()


def test_several_specs_with_out_get_a_folder_each(capsys, repo):
    code, out, _ = run(capsys, "build", "growth", "revenue", "--out", "build")
    assert code == 0
    assert sorted(p.name for p in (repo / "build").iterdir()) == ["app", "eur", "usd"]


def test_a_folder_without_specs_is_a_usage_error(capsys, repo):
    (repo / "empty").mkdir()
    code, out, err = run(capsys, "build", "empty")
    assert code == 2 and err == "Error: empty: a folder without a spec (*.yml or *.yaml) in it\n"
