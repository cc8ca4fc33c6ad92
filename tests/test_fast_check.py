"""`sqlgen build --check` answered from the spec text and the manifests alone.

A build records a hash of the spec file's text in each folder's manifest entry
(``spec-text``). When that hash, the spec file name, the sqlgen version and the generator
hash are today's and every file still has its recorded SHA-256, `--check` answers without
loading the spec (no YAML validation, no compiler, no sqlglot). Each test below proves
that the shortcut is taken only then: every change it must not hide (a generated file
edited or missing, another sqlgen version, an edited spec, another output folder) is
still found, by the full path. The outputs of the shortcut are compared with those of the
full path, not with hand-written text. No timing is asserted (bench/cli_speed.py).
"""

from __future__ import annotations

import contextlib
import io
import json
import subprocess
import sys
from pathlib import Path

import pytest

import sqlgen.cli as cli
from sqlgen import compiler, freshness, spec as spec_module
from sqlgen.output import MANIFEST

SPEC = """\
version: 1
activity:
  table: app_events
  user: user_id
  timestamp: occurred_at
  where: "event_name <> 'push_received'"
  timezone: America/New_York
grain: month
output:
  dialect: postgres
"""


def run(*args: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = cli.main(list(args))
    return code, out.getvalue(), err.getvalue()


@pytest.fixture
def no_load(monkeypatch):
    """Fail the test if the command loads the spec or compiles anything."""
    def refuse(*args, **kwargs):
        raise AssertionError("loaded the spec although the manifests vouch for every folder")
    monkeypatch.setattr(spec_module, "parse_spec", refuse)
    monkeypatch.setattr(compiler, "render_targets", refuse)


@pytest.fixture
def spec(tmp_path: Path) -> Path:
    path = tmp_path / "growth.yml"
    path.write_text(SPEC)
    code, _, err = run("build", str(path))
    assert code == 0, err
    return path


UP_TO_DATE = (0, "sqlgen: generated files are up to date\n", "")


def test_unchanged_spec_is_checked_without_loading_it(spec, no_load):
    assert run("build", str(spec), "--check") == UP_TO_DATE
    # a build of the unchanged spec writes nothing, and needs no load either
    code, stdout, _ = run("build", str(spec))
    assert code == 0 and "0 written, 5 unchanged" in stdout


def test_the_shortcut_imports_no_compiler(spec):
    """In a fresh process: the answer comes without sqlglot, Jinja or the compiler."""
    probe = ("import sys, sqlgen.cli; code = sqlgen.cli.main(['build', sys.argv[1], "
             "'--check']); print(code, sorted(m for m in ('sqlglot', 'jinja2', "
             "'sqlgen.compiler', 'sqlgen.spec') if m in sys.modules))")
    done = subprocess.run([sys.executable, "-c", probe, str(spec)], capture_output=True,
                          text=True, timeout=120)
    assert done.stdout.splitlines()[-1] == "0 []", done.stderr


def _full_path(monkeypatch) -> None:
    monkeypatch.setattr(freshness, "vouched", lambda *args, **kwargs: None)


@pytest.mark.parametrize("options", [[], ["--dialect", "all"], ["--dialect", "duckdb,trino"],
                                     ["--dialect", "spark", "--out", "elsewhere"]])
@pytest.mark.parametrize("as_json", [False, True])
def test_the_shortcut_says_what_the_full_path_says(spec, monkeypatch, options, as_json):
    """Same exit code, stdout and stderr (the note naming the dialects `all` skips included)
    as the path that loads the spec, for each way of choosing dialects and folders."""
    options = [o if o != "elsewhere" else str(spec.parent / "elsewhere") for o in options]
    assert run("build", str(spec), *options)[0] == 0
    fmt = ["--format", "json"] if as_json else []
    with monkeypatch.context() as patched:
        _full_path(patched)
        expected = run("build", str(spec), *options, "--check", *fmt)
    with monkeypatch.context() as patched:
        patched.setattr(spec_module, "parse_spec", None)  # a load would fail
        assert run("build", str(spec), *options, "--check", *fmt) == expected
    assert expected[0] == 0
    if options == ["--dialect", "all"]:
        assert "skipped sqlite, tsql" in expected[2]


def test_edited_generated_file_is_found(spec):
    path = spec.parent / "sql" / "growth_accounting.sql"
    path.write_text(path.read_text().replace("active_users", "actives", 1))
    code, stdout, err = run("build", str(spec), "--check")
    assert code == 1 and f"--- {path} (on disk)" in stdout and "1 file(s) out of date" in err


def test_missing_generated_file_is_found(spec):
    path = spec.parent / "sql" / "user_states.sql"
    path.unlink()
    code, stdout, _ = run("build", str(spec), "--check")
    assert code == 1 and f"{path} (missing)" in stdout


def test_missing_folder_of_all_is_found(spec):
    assert run("build", str(spec), "--dialect", "all")[0] == 0
    (spec.parent / "sql" / "trino" / MANIFEST).unlink()
    (spec.parent / "sql" / "trino" / "create_all.sql").unlink()
    code, stdout, _ = run("build", str(spec), "--dialect", "all", "--check")
    assert code == 1 and f"{spec.parent / 'sql' / 'trino' / 'create_all.sql'} (missing)" in stdout


def test_other_sqlgen_version_is_found(spec, monkeypatch):
    """Another version writes its number in every header: the shortcut must not vouch."""
    for module in (freshness, compiler):
        monkeypatch.setattr(module, "__version__", "9.9.9")
    code, stdout, err = run("build", str(spec), "--check")
    assert code == 1 and "5 file(s) out of date" in err and "sqlgen 9.9.9" in stdout


def test_other_generator_is_checked_by_a_full_compile(spec, monkeypatch):
    for module in (freshness, compiler):
        monkeypatch.setattr(module, "generator_digest", lambda: "0" * 64)
    code, stdout, err = run("build", str(spec), "--check")
    assert (code, stdout) == (0, "sqlgen: generated files are up to date\n")
    assert "checked by a full compile" in err


def test_changed_spec_is_found(spec):
    spec.write_text(SPEC.replace("grain: month", "grain: quarter"))
    code, stdout, _ = run("build", str(spec), "--check")
    assert code == 1 and "@@" in stdout


def test_comment_only_edit_is_checked_by_a_full_compile(spec):
    """Same meaning, other text: not vouched for by the text hash; the full compile finds
    the files right, and the next build records the new text."""
    spec.write_text(SPEC + "# a comment\n")
    code, stdout, err = run("build", str(spec), "--check")
    assert (code, stdout) == (0, "sqlgen: generated files are up to date\n")
    assert "checked by a full compile" in err
    code, stdout, _ = run("build", str(spec))
    assert code == 0 and "0 written, 5 unchanged" in stdout
    assert run("build", str(spec), "--check") == UP_TO_DATE


def test_other_output_folder_is_checked_there(spec):
    spec.write_text(SPEC + "  folder: views\n")
    code, stdout, _ = run("build", str(spec), "--check")
    assert code == 1 and f"{spec.parent / 'views' / 'create_all.sql'} (missing)" in stdout


def test_build_with_out_does_not_vouch_for_the_default_folder(spec):
    """Files built with --out elsewhere say nothing about the spec's own folder."""
    (spec.parent / "sql" / "create_all.sql").unlink()
    assert run("build", str(spec), "--out", str(spec.parent / "sql2"))[0] == 0
    code, stdout, _ = run("build", str(spec), "--check")
    assert code == 1 and "create_all.sql (missing)" in stdout


def test_renamed_spec_is_not_vouched_for(spec):
    """The spec file name is in every header: a copy under another name is checked in full."""
    other = spec.with_name("other.yml")
    other.write_text(SPEC)
    code, stdout, err = run("build", str(other), "--check")
    assert code != 0 or "checked by a full compile" in err


def test_spec_with_warnings_always_takes_the_full_path(tmp_path):
    path = tmp_path / "growth.yml"
    path.write_text(SPEC + "week_start: sunday\n")  # valid, but changes nothing at month grain
    code, _, err = run("build", str(path))
    assert code == 0 and "week_start" in err
    assert f"{freshness.SPEC_TEXT} " not in (tmp_path / "sql" / MANIFEST).read_text()
    code, stdout, err = run("build", str(path), "--check")
    assert code == 0 and "week_start" in err  # printed again


def test_tampered_record_is_not_trusted(spec):
    """A spec-text record naming another folder (or unreadable) sends --check the full way."""
    manifest = spec.parent / "sql" / MANIFEST
    lines = manifest.read_text().splitlines()
    at = next(i for i, line in enumerate(lines) if line.startswith("spec-text "))
    key, digest, data = lines[at].split(" ", 2)
    lines[at] = f"{key} {digest} {json.dumps({**json.loads(data), 'folder': 'x'})}"
    manifest.write_text("\n".join(lines) + "\n")
    code, _, err = run("build", str(spec), "--check")
    assert code == 0 and "checked by a full compile" in err


def test_default_folder_guess_is_the_spec_default():
    assert freshness.DEFAULT_FOLDER == spec_module.KEYS_BY_PATH["output.folder"].default
