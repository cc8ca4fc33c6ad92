"""Names from a spec (tables, schemas, columns) turned into sqlglot identifiers.

A bare name (``app_events``) follows the target's rules for unquoted names, exactly as if it
were written in SQL; a name in double quotes or backticks (``'"AppEvents"'``) is taken
exactly. Either way it reaches SQL only as a quoted sqlglot identifier, never as pasted text.
"""

from __future__ import annotations

import re

from sqlglot import exp

from .comments import unsafe

BARE = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
RESERVED_PREFIX = "sqlgen_"

Part = tuple[str, bool]  # (text, written quoted)


class NameError_(ValueError):
    """A name that cannot be read; the message says what to write instead."""


def split_name(text: str, max_parts: int) -> tuple[Part, ...]:
    """Split ``a.b."C d"`` into parts; each bare or quoted; at most ``max_parts``.

    A control character or line separator is refused even inside quotes: engines differ
    on whether an identifier may hold one, and no real table needs it.
    """
    bad = next((i for i, char in enumerate(text) if unsafe(char)), None)
    if bad is not None:
        raise NameError_(f"holds a control character (U+{ord(text[bad]):04X}) at position "
                         f"{bad + 1}; names are printable text")
    parts: list[Part] = []
    pos = 0
    while True:
        part, pos = _read_part(text, pos)
        parts.append(part)
        if pos == len(text):
            break
        if text[pos] != ".":
            raise NameError_(f"unexpected {text[pos]!r} at position {pos + 1}; "
                             "quote a name with special characters: '\"my name\"'")
        pos += 1
    if len(parts) > max_parts:
        raise NameError_(f"has {len(parts)} dot-separated parts; at most {max_parts} allowed")
    return tuple(parts)


def _read_part(text: str, pos: int) -> tuple[Part, int]:
    if pos < len(text) and text[pos] in "\"`":
        return _read_quoted(text, pos)
    match = BARE.match(text, pos)
    if not match:
        shown = text[pos:pos + 1] or "end of text"
        raise NameError_(f"expected a name at position {pos + 1}, found {shown!r}; "
                         "names are letters, digits and _, or quoted: '\"my name\"'")
    return (match.group(), False), match.end()


def _read_quoted(text: str, pos: int) -> tuple[Part, int]:
    quote, out, i = text[pos], [], pos + 1
    while i < len(text):
        if text[i] == quote:
            if text[i + 1:i + 2] == quote:
                out.append(quote)
                i += 2
                continue
            if not out:
                raise NameError_("a quoted name cannot be empty")
            return ("".join(out), True), i + 1
        out.append(text[i])
        i += 1
    raise NameError_(f"quoted name starting at position {pos + 1} is not closed")


def identifier(part: Part) -> exp.Identifier:
    """A sqlglot identifier for a spec name part, marked for the dialect layer's quoting."""
    text, quoted = part
    ident = exp.Identifier(this=text, quoted=True)
    ident.meta["sqlgen_bare"] = not quoted
    return ident


def table(parts: tuple[Part, ...]) -> exp.Table:
    """A sqlglot table from 1-3 parts: [catalog.][schema.]table."""
    idents = [identifier(p) for p in parts]
    names = dict(zip(("this", "db", "catalog"), reversed(idents)))
    return exp.Table(**names)


def column(part: Part) -> exp.Column:
    """A sqlglot column reference for a spec column name."""
    return exp.Column(this=identifier(part))


def display(parts: tuple[Part, ...]) -> str:
    """The name as a user would write it, for messages."""
    return ".".join(f'"{t}"' if q else t for t, q in parts)
