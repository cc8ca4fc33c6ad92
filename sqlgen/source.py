"""Read a YAML spec safely, keeping the line and column of every key and value.

Only plain YAML is accepted: mappings, sequences and scalars. Anchors and aliases (the
alias-expansion bomb), explicit tags (object construction) and oversized files are refused.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import yaml

from .errors import Problem, SpecError

MAX_SPEC_BYTES = 256 * 1024

_PLAIN_TAGS = {
    "tag:yaml.org,2002:" + name
    for name in ("str", "int", "float", "bool", "null", "map", "seq", "timestamp")
}


@dataclass
class Node:
    """A YAML value with its 1-based position; mappings keep their keys' positions."""

    value: Any
    line: int
    col: int
    key_pos: dict[str, tuple[int, int]] = field(default_factory=dict)


def read_spec_text(path: str) -> str:
    """Read a spec file as text, refusing files that are too large or not UTF-8."""
    try:
        with open(path, "rb") as handle:
            data = handle.read(MAX_SPEC_BYTES + 1)
    except OSError as err:
        raise SpecError([Problem(path, 1, 1, "", f"cannot read the spec: {err.strerror}")])
    if len(data) > MAX_SPEC_BYTES:
        raise SpecError([Problem(path, 1, 1, "", f"spec is larger than {MAX_SPEC_BYTES} bytes")])
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as err:
        raise SpecError([Problem(path, 1, 1, "", f"spec is not UTF-8 text ({err.reason})")])


def parse_yaml(text: str, filename: str) -> Node:
    """Parse YAML text into a Node tree, or raise SpecError with the position."""
    try:
        _refuse_anchors(text, filename)
        root = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.MarkedYAMLError as err:
        mark = err.problem_mark or err.context_mark
        line, col = (mark.line + 1, mark.column + 1) if mark else (1, 1)
        raise SpecError([Problem(filename, line, col, "", f"not valid YAML: {err.problem}")])
    except yaml.YAMLError as err:
        raise SpecError([Problem(filename, 1, 1, "", f"not valid YAML: {err}")])
    if root is None:
        raise SpecError([Problem(filename, 1, 1, "", "the spec is empty")])
    return _convert(root, filename)


def _refuse_anchors(text: str, filename: str) -> None:
    for event in yaml.parse(text, Loader=yaml.SafeLoader):
        anchor = getattr(event, "anchor", None)
        if isinstance(event, yaml.AliasEvent) or anchor:
            mark = event.start_mark
            raise SpecError([Problem(filename, mark.line + 1, mark.column + 1, "",
                                     "YAML anchors and aliases are not allowed in a spec")])


def _convert(node: yaml.Node, filename: str) -> Node:
    line, col = node.start_mark.line + 1, node.start_mark.column + 1
    if node.tag not in _PLAIN_TAGS:
        raise SpecError([Problem(filename, line, col, "",
                                 f"YAML tag {node.tag!r} is not allowed; write plain values")])
    if isinstance(node, yaml.MappingNode):
        return _convert_mapping(node, filename, line, col)
    if isinstance(node, yaml.SequenceNode):
        return Node([_convert(item, filename) for item in node.value], line, col)
    try:
        value = yaml.SafeLoader(" ").construct_object(node, deep=True)
    except ValueError:  # looks like a date but is none (2015-13-01): the key's check says so
        value = node.value
    return Node(value, line, col)


def _convert_mapping(node: yaml.MappingNode, filename: str, line: int, col: int) -> Node:
    result: dict[str, Node] = {}
    positions: dict[str, tuple[int, int]] = {}
    for key_node, value_node in node.value:
        kline, kcol = key_node.start_mark.line + 1, key_node.start_mark.column + 1
        if not isinstance(key_node, yaml.ScalarNode) or key_node.tag != "tag:yaml.org,2002:str":
            raise SpecError([Problem(filename, kline, kcol, "", "mapping keys must be plain text")])
        key = key_node.value
        if key in result:
            raise SpecError([Problem(filename, kline, kcol, key, "key appears twice")])
        result[key] = _convert(value_node, filename)
        positions[key] = (kline, kcol)
    return Node(result, line, col, positions)
