"""`sqlgen schema`: the JSON Schema generated from spec.KEYS, checked with the independent
`jsonschema` package: it accepts every spec in the docs that the validator accepts, and
rejects the broken specs the validator rejects (those a schema can express)."""

from __future__ import annotations

import datetime as dt
import json
import re
from pathlib import Path

import pytest
import yaml
from test_hostile_spec import WRONG_SHAPES, with_value
from test_spec import CASES

from sqlgen import SpecError, parse_spec
from sqlgen.cli import main
from sqlgen.spec import KEYS
from sqlgen.specschema import spec_schema

jsonschema = pytest.importorskip("jsonschema")
ROOT = Path(__file__).resolve().parent.parent


def _as_editor_reads(value):
    """YAML as a YAML 1.2 editor hands it to a JSON Schema: dates are text."""
    if isinstance(value, dict):
        return {k: _as_editor_reads(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_as_editor_reads(v) for v in value]
    if isinstance(value, dt.date):
        return value.isoformat()
    return value


def _errors(text: str) -> list[str]:
    validator = jsonschema.Draft202012Validator(spec_schema())
    return [e.message for e in validator.iter_errors(_as_editor_reads(yaml.safe_load(text)))]


def _doc_specs() -> list[tuple[str, str]]:
    """Every ```yaml block of the README and docs/ that is a whole spec (``version:``)."""
    found = []
    for path in [ROOT / "README.md", *sorted((ROOT / "docs").glob("*.md"))]:
        blocks = re.findall(r"```yaml\n(.*?)```", path.read_text(), re.S)
        found += [(f"{path.name}#{i}", b) for i, b in enumerate(blocks) if "version:" in b]
    # and every spec the golden files are generated from (segments, definitions, revenue)
    from test_golden import SPECS
    found += [(f"golden:{label}", text.format(grain=grain, week_start=start))
              for label, (text, (grain, start)) in sorted(SPECS.items())]
    return found


DOC_SPECS = _doc_specs()


def test_the_docs_hold_specs_to_check():
    assert len(DOC_SPECS) >= 3


@pytest.mark.parametrize("name,text", DOC_SPECS, ids=[n for n, _ in DOC_SPECS])
def test_every_spec_the_validator_accepts_in_the_docs_is_accepted(name, text):
    try:
        parse_spec(text, name)
    except SpecError:
        pytest.skip("not a whole valid spec on its own (a fragment)")
    assert _errors(text) == []


SCHEMA_CASES = ["grain: wek", "unknown keys", "dialect", "version", "not a mapping", "prefix",
                "week start"]


@pytest.mark.parametrize("name,text", [(n, t) for n, t, _ in CASES if n in SCHEMA_CASES])
def test_broken_specs_of_the_validator_are_rejected(name, text):
    with pytest.raises(SpecError):
        parse_spec(text, "s.yml")
    assert _errors(text)


@pytest.mark.parametrize(("path", "value"), WRONG_SHAPES)
def test_a_wrong_shape_of_every_key_is_rejected(path, value):
    assert _errors(with_value(path, value))


@pytest.mark.parametrize("text", [
    "version: 1\ngrain: month\n",  # neither activity nor revenue
    "version: 1\nrevenue:\n  table: t\n  customer: c\n  amount: a\n",  # charges, no timestamp
    "version: 1\nrevenue:\n  shape: subscriptions\n  table: t\n  customer: c\n  amount: a\n",
    "version: 1\nactivity:\n  table: t\n  user: u\n  timestamp: ts\ntrailing_windows: [7, 7]\n",
    "version: 1\nactivity:\n  table: t\n  user: u\n  timestamp: ts\n  valid_from: soon\n",
])
def test_rules_between_keys(text):
    with pytest.raises(SpecError):
        parse_spec(text, "s.yml")
    assert _errors(text)


def test_every_key_is_in_the_schema_with_its_doc_default_and_choices():
    schema = spec_schema()
    for key in KEYS:
        node = schema
        for part in key.path.split("."):
            if part == "<name>":  # a mapping of names: each name's value
                node = node["additionalProperties"]
            else:
                node = node["properties"][part]
        assert node["description"] == key.doc
        inner = node["anyOf"][0] if "anyOf" in node else node
        if key.choices:
            assert inner["enum"] == list(key.choices)
        if key.default not in (None, "", ()) and key.kind != "mapping":
            assert node["default"] in (key.default, getattr(key.default, "isoformat",
                                                             lambda: None)())


def test_sqlgen_schema_prints_a_valid_json_schema(capsys):
    assert main(["schema"]) == 0
    printed = json.loads(capsys.readouterr().out)
    jsonschema.Draft202012Validator.check_schema(printed)
    assert printed == json.loads(json.dumps(spec_schema()))
