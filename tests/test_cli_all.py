"""`--dialect all` on real specs, warnings on stderr, and the demo's manifest."""

from __future__ import annotations

import re
from pathlib import Path

from hostile import EXIT_OK, run_cli
from sqlgen.cli import _parser
from sqlgen.dialects import TARGETS

ROOT = Path(__file__).resolve().parent.parent


def readme_spec() -> str:
    """The spec block of the README's "The spec" section, as a user would copy it."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text[text.index("## The spec"):]
    return re.search(r"```yaml\n(.*?)```", section, re.DOTALL).group(1)


def test_the_readme_spec_builds_with_dialect_all(tmp_path):
    spec = tmp_path / "growth.yml"
    spec.write_text(readme_spec(), encoding="utf-8")
    out = tmp_path / "sql"
    result = run_cli("build", str(spec), "--dialect", "all", "--out", str(out))
    assert result.returncode == EXIT_OK, result.stderr
    assert "Traceback" not in result.stderr
    # Its timezone, schema and qualified table: SQLite and T-SQL cannot express them; every
    # reason is listed once, at the key that asks for it.
    lines = result.stderr.splitlines()
    assert lines[0] == ("sqlgen: built 10 of 12 dialects; skipped sqlite, tsql, which cannot "
                        "express this spec:")
    assert [re.sub(r"^.*?growth\.yml:(\d+:\d+): ", r"\1 ", line).split(": ")[0:2]
            for line in lines[1:]] == [
        ["8:13 activity.timezone", "dialect 'sqlite' cannot generate activity.timezone"],
        ["15:11 output.schema", "dialect 'sqlite' cannot generate output.schema"],
        ["3:10 activity.table", "dialect 'sqlite' cannot generate activity.table"],
        ["8:13 activity.timezone", "dialect 'tsql' cannot generate activity.timezone"]]
    built = sorted(p.name for p in out.iterdir())
    assert built == sorted(set(TARGETS) - {"sqlite", "tsql"})
    check = run_cli("build", str(spec), "--dialect", "all", "--out", str(out), "--check")
    assert check.returncode == EXIT_OK and "up to date" in check.stdout, check.stderr
    assert "skipped sqlite, tsql" in check.stderr


def test_dialect_all_builds_every_dialect_when_each_can_express_the_spec(tmp_path):
    """No timezone, schema or qualified table: nothing is skipped and nothing is said."""
    spec = tmp_path / "plain.yml"
    spec.write_text("version: 1\nactivity:\n  table: events\n  user: u\n  timestamp: ts\n")
    result = run_cli("build", str(spec), "--dialect", "all", "--out", str(tmp_path / "all"))
    assert result.returncode == EXIT_OK and result.stderr == "", result.stderr
    assert sorted(p.name for p in (tmp_path / "all").iterdir()) == sorted(TARGETS)


SPEC = "version: 1\nactivity:\n  table: events\n  user: u\n  timestamp: ts\n"


def test_week_start_without_week_grain_warns_at_its_place(tmp_path):
    spec = tmp_path / "spec.yml"
    spec.write_text(SPEC + "grain: month\nweek_start: sunday\n")
    warning = (f"{spec}:7:13: week_start: warning: has no effect with grain: month; it sets "
               "the first day of a week for grain: week only. Remove it or set grain: week")
    for args in (["validate", str(spec)], ["build", str(spec), "--out", str(tmp_path / "o")]):
        result = run_cli(*args)
        assert result.returncode == EXIT_OK, result.stderr
        assert result.stderr.splitlines() == [warning]
    spec.write_text(SPEC + "grain: week\nweek_start: sunday\n")
    assert run_cli("validate", str(spec)).stderr == ""
    spec.write_text(SPEC + "grain: month\nweek_start: monday\n")  # the default: no change
    assert run_cli("validate", str(spec)).stderr == ""


def test_the_demo_folder_is_vouched_for_and_ignored(tmp_path):
    folder = tmp_path / "demo"
    assert run_cli("demo", "--folder", str(folder), timeout=300).returncode == EXIT_OK
    check = run_cli("build", str(folder / "spec.yml"), "--check")
    assert check.returncode == EXIT_OK and "up to date" in check.stdout
    assert check.stderr == "", "the demo's manifest must vouch for its files"
    demo = next(a for a in _parser()._subparsers._group_actions[0].choices["demo"]._actions
                if a.dest == "folder")
    ignored = (ROOT / ".gitignore").read_text().splitlines()
    assert f"/{demo.default}/" in ignored


def test_all_with_no_dialect_left_is_a_spec_error(tmp_path):
    """Every target of the choice is blocked: an error listing each gap, not an empty build."""
    import pytest

    from sqlgen.cli import Dialects, _buildable
    from sqlgen.errors import EXIT_SPEC, UnsupportedError
    from sqlgen.spec import parse_spec

    spec = parse_spec(SPEC.replace("  timestamp: ts\n", "  timestamp: ts\n  timezone: UTC\n"),
                      "z.yml")
    assert _buildable(spec, Dialects(("duckdb", "sqlite"), every=True)) == ["duckdb"]
    with pytest.raises(UnsupportedError) as caught:
        _buildable(spec, Dialects(("sqlite", "tsql"), every=True))
    assert caught.value.exit_code == EXIT_SPEC
    assert caught.value.render().splitlines() == [
        "z.yml:6:13: activity.timezone: dialect 'sqlite' cannot generate activity.timezone: "
        + TARGETS["sqlite"].unsupported["activity.timezone"],
        "z.yml:6:13: activity.timezone: dialect 'tsql' cannot generate activity.timezone: "
        + TARGETS["tsql"].unsupported["activity.timezone"]]
