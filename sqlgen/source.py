"""Read a YAML spec safely, keeping the line and column of every key and value.

Only plain YAML is accepted: mappings, sequences and scalars. Anchors and aliases (the
alias-expansion bomb), explicit tags (object construction), nesting deeper than
``MAX_DEPTH``, control characters, oversized files and anything but a regular file are
refused, each at its line and column.
"""

from __future__ import annotations

import os
import re
import stat
import unicodedata
from dataclasses import dataclass, field
from typing import Any

import yaml

from .comments import shown
from .errors import Problem, SpecError

MAX_SPEC_BYTES = 256 * 1024
MAX_DEPTH = 64  # lists and mappings inside one another; a spec needs 3
_STR_TAG = "tag:yaml.org,2002:str"
_MERGE_TAG = "tag:yaml.org,2002:merge"

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
    refused: bool = False  # a value the reader refused (and reported): checks skip it


def read_spec_text(path: str) -> str:
    """Read a spec file as text, refusing what is not a regular file, too large, or not UTF-8.

    A FIFO, device, socket or directory is refused from ``os.stat`` before anything opens
    it (opening a FIFO blocks until a writer comes); the file is then opened without
    blocking and checked again, so a swap between the two steps cannot block either.
    """
    try:
        _refuse_special(path, os.stat(path).st_mode)
        fd = os.open(path, os.O_RDONLY | os.O_NONBLOCK | getattr(os, "O_CLOEXEC", 0))
        with os.fdopen(fd, "rb") as handle:
            _refuse_special(path, os.fstat(handle.fileno()).st_mode)
            data = handle.read(MAX_SPEC_BYTES + 1)
    except OSError as err:
        raise SpecError([Problem(path, 1, 1, "", f"cannot read the spec: {err.strerror}")])
    if len(data) > MAX_SPEC_BYTES:
        raise SpecError([Problem(path, 1, 1, "", f"spec is larger than {MAX_SPEC_BYTES} bytes")])
    return decode_spec(data, path)


_KINDS = ((stat.S_ISDIR, "a directory"), (stat.S_ISFIFO, "a FIFO (named pipe)"),
          (stat.S_ISCHR, "a character device"), (stat.S_ISBLK, "a block device"),
          (stat.S_ISSOCK, "a socket"))


def _refuse_special(path: str, mode: int) -> None:
    if stat.S_ISREG(mode):
        return
    kind = next((name for test, name in _KINDS if test(mode)), "not a regular file")
    raise SpecError([Problem(path, 1, 1, "", f"the spec is {kind}, not a regular file; "
                                             "name a YAML file")])


def decode_spec(data: bytes, filename: str) -> str:
    """UTF-8 bytes as text; a bad byte is reported at its own line and column."""
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as err:
        line, col = position(data[:err.start].decode("utf-8"))
        raise SpecError([Problem(filename, line, col, "",
                                 f"spec is not UTF-8 text: byte 0x{data[err.start]:02x} "
                                 f"({err.reason}); save the file as UTF-8")])


_BREAK = re.compile("\r\n|[\r\n\x85\u2028\u2029]")


def position(before: str) -> tuple[int, int]:
    """1-based (line, col) just after ``before``, counting line breaks as YAML does."""
    breaks = list(_BREAK.finditer(before))
    if not breaks:
        return 1, len(before) + 1
    return len(breaks) + 1, len(before) - breaks[-1].end() + 1


def _refuse_unprintable(text: str, filename: str) -> None:
    found = yaml.reader.Reader.NON_PRINTABLE.search(text)
    if found:
        line, col = position(text[:found.start()])
        char = found.group()
        name = unicodedata.name(char, "a control character")
        raise SpecError([Problem(filename, line, col, "",
                                 f"character U+{ord(char):04X} ({name}) is not allowed in a "
                                 "spec; remove it")])


def parse_yaml(text: str, filename: str, problems: list[Problem] | None = None) -> Node:
    """Parse YAML text into a Node tree, or raise SpecError with the position.

    Problems that leave the rest of the tree usable (a key written twice, a tag) are added
    to ``problems`` when given, so that the checks go on and report every problem at once.
    """
    collected: list[Problem] = [] if problems is None else problems
    _refuse_unprintable(text, filename)
    try:
        _check_events(text, filename)
        root = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.MarkedYAMLError as err:
        mark = err.problem_mark or err.context_mark
        line, col = (mark.line + 1, mark.column + 1) if mark else (1, 1)
        raise SpecError([Problem(filename, line, col, "", f"not valid YAML: {err.problem}")])
    except yaml.YAMLError as err:
        raise SpecError([Problem(filename, 1, 1, "", f"not valid YAML: {err}")])
    if root is None:
        raise SpecError([Problem(filename, 1, 1, "", "the spec is empty")])
    tree = _Converter(filename, collected).convert(root, "")
    if tree.value is None and not tree.refused:  # `---` or `~` alone
        raise SpecError([Problem(filename, 1, 1, "", "the spec is empty")])
    if problems is None and collected:
        raise SpecError(collected)
    return tree


def _check_events(text: str, filename: str) -> None:
    """Refuse anchors, aliases and nesting deeper than MAX_DEPTH, from the event stream.

    The event parser is not recursive, so even 100,000 nested brackets are read without
    exhausting the stack, and the first one too deep is reported where it starts.
    """
    depth = 0
    for event in yaml.parse(text, Loader=yaml.SafeLoader):
        mark = event.start_mark
        anchor = getattr(event, "anchor", None)
        if isinstance(event, yaml.AliasEvent) or anchor:
            raise SpecError([Problem(filename, mark.line + 1, mark.column + 1, "",
                                     "YAML anchors and aliases are not allowed in a spec")])
        if isinstance(event, (yaml.MappingStartEvent, yaml.SequenceStartEvent)):
            depth += 1
            if depth > MAX_DEPTH:
                raise SpecError([Problem(filename, mark.line + 1, mark.column + 1, "",
                                         f"lists and mappings are nested more than {MAX_DEPTH} "
                                         "deep; a spec needs three levels")])
        elif isinstance(event, (yaml.MappingEndEvent, yaml.SequenceEndEvent)):
            depth -= 1


_DATE_TAG = "tag:yaml.org,2002:timestamp"


class _Converter:
    """yaml nodes -> Nodes; problems that spare the rest of the tree are collected."""

    def __init__(self, filename: str, problems: list[Problem]):
        self.filename, self.problems = filename, problems

    def report(self, mark: yaml.Mark, key: str, message: str) -> None:
        self.problems.append(Problem(self.filename, mark.line + 1, mark.column + 1, key,
                                     message))

    def convert(self, node: yaml.Node, path: str) -> Node:
        line, col = node.start_mark.line + 1, node.start_mark.column + 1
        if node.tag not in _PLAIN_TAGS:
            self.report(node.start_mark, path, f"YAML tag {shown(node.tag)} is not allowed; "
                                               "write plain values")
            return Node(None, line, col, refused=True)
        if isinstance(node, yaml.MappingNode):
            return self._mapping(node, path, line, col)
        if isinstance(node, yaml.SequenceNode):
            return Node([self.convert(item, f"{path}[{i}]") for i, item in enumerate(node.value)],
                        line, col)
        try:
            value = yaml.SafeLoader(" ").construct_object(node, deep=True)
        except ValueError if node.tag == _DATE_TAG else ():
            return Node(node.value, line, col)  # 2015-13-01: the key's own check says why
        except (yaml.YAMLError, ValueError, OverflowError) as err:
            problem = getattr(err, "problem", None) or str(err)
            self.report(node.start_mark, path, f"cannot read the value: {shown(problem)}")
            return Node(None, line, col, refused=True)
        return Node(value, line, col)

    def _mapping(self, node: yaml.MappingNode, path: str, line: int, col: int) -> Node:
        result: dict[str, Node] = {}
        positions: dict[str, tuple[int, int]] = {}
        for key_node, value_node in node.value:
            mark = key_node.start_mark
            if key_node.tag == _MERGE_TAG:
                self.report(mark, path, "YAML merge keys (<<) are not allowed; write the "
                                        "keys out")
                continue
            if not isinstance(key_node, yaml.ScalarNode) or key_node.tag != _STR_TAG:
                self.report(mark, path, "mapping keys must be plain text")
                continue
            key = key_node.value
            full = f"{path}.{key}" if path else key
            if key in result:
                first = positions[key][0]
                self.report(mark, full, f"key appears twice (first on line {first}); "
                                        "keep one")
                continue
            result[key] = self.convert(value_node, full)
            positions[key] = (mark.line + 1, mark.column + 1)
        return Node(result, line, col, positions)
