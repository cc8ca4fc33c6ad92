"""Text from a spec or a file name made safe for a comment line and for a message.

Every text that reaches a generated file outside a quoted identifier or literal (the spec's
file name, table names and ``where`` text shown in the header, view summaries, cautions)
passes through ``comment_text``; every value echoed in a message through ``shown``.

Why each replacement (the generated files are run by SQL clients, not only by engines):

- A line break of any kind ends a ``--`` comment: the rest of the text would run as SQL.
  Engines and clients differ on what breaks a line (``\\r`` alone does for several, and
  U+2028/U+2029/U+0085 for tools that split lines the Unicode way), so every control
  character and every Unicode line or paragraph separator is written as ``\\xNN`` or
  ``\\uNNNN`` instead.
- ``/*`` and ``*/`` are written ``/ *`` and ``* /``: MySQL's client and ClickHouse look for
  ``/*`` inside a line, and a tool that strips comments could otherwise pair them up.
- A backslash is written ``\\\\`` so that an escape written above cannot be forged from the
  text, and no psql meta-command (``\\!``) can be spelled (no line break survives anyway,
  so nothing from the text can start a line).
- Very long text is cut, with ``...`` at the end.
"""

from __future__ import annotations

import unicodedata

HEADER_LIMIT = 200  # characters of spec text on one header line
MESSAGE_LIMIT = 80  # characters of a value echoed in a message


def _escape_char(char: str) -> str:
    code = ord(char)
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"


def unsafe(char: str) -> bool:
    """Control characters (C0, DEL, C1), line/paragraph separators and format characters."""
    return unicodedata.category(char) in ("Cc", "Zl", "Zp", "Cf", "Cs", "Co", "Cn") \
        and char != " "


def printable(text: str, backslashes: bool = True) -> str:
    """``text`` on one line: every unsafe character escaped, backslashes doubled (unless
    ``backslashes`` is false: a message that shows text already escaped)."""
    return "".join("\\\\" if c == "\\" and backslashes else _escape_char(c) if unsafe(c)
                   else c for c in text)


def cut(text: str, limit: int) -> str:
    """``text`` cut to ``limit`` characters, ending in ``...`` when cut."""
    return text if len(text) <= limit else text[:max(limit - 3, 0)] + "..."


def comment_text(text: str, limit: int = HEADER_LIMIT) -> str:
    """``text`` safe inside a ``-- `` comment line on every target, at most ``limit`` long."""
    safe = printable(text).replace("/*", "/ *").replace("*/", "* /")
    return cut(safe, limit)


def shown(value: object, limit: int = MESSAGE_LIMIT) -> str:
    """A value from a spec as a message shows it: quoted text, cut, on one line."""
    text = value if isinstance(value, str) else str(value)
    return "'" + cut(printable(text).replace("'", "\\'"), limit) + "'"
