"""Text from the data or the configuration, made inert for every report format and error line.

Column names, cell values, row labels and paths are written by people we do
not know. Printed raw, an escape sequence in a column name can clear a
terminal and draw a fake verdict, a right-to-left override can reorder what
a reader sees, a newline can break a layout, and a 5 MB cell can bury a
report. Every writer passes such text through this module:

- :func:`cut` shortens a text longer than :data:`LONG_TEXT` characters to
  its first :data:`KEPT_CHARACTERS` and states the full length;
- :func:`escape_controls` shows control characters (C0, DEL, C1), the
  bidirectional controls and the line and paragraph separators as escapes
  (``\\n``, ``\\t``, ``\\x1b``, ``\\u202e``);
- :func:`inert` does both, for one name, label or value;
- :func:`inert_message` does both for a sentence that quotes such texts,
  cutting each long run of it;
- :func:`json_inert` escapes the same characters in a JSON document with
  JSON's own ``\\uXXXX`` syntax, so the values read back unchanged.
"""

from __future__ import annotations

import re
from typing import Any

LONG_TEXT = 200
KEPT_CHARACTERS = 80
NAME_CHARACTERS = LONG_TEXT
MESSAGE_CHARACTERS = 4_000

# C0 controls, DEL and C1 controls; the Arabic letter mark, left-to-right and right-to-left marks,
# the line and paragraph separators, the embeddings and overrides U+202A-U+202E, the isolates
# U+2066-U+2069, and the byte-order mark (a zero-width no-break space inside text).
_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u061c\u200e\u200f\u2028\u2029\u202a-\u202e\u2066-\u2069\ufeff]")
_NAMED = {"\n": "\\n", "\t": "\\t", "\r": "\\r"}
_LONG_RUN = re.compile(r"\S{%d,}" % (LONG_TEXT + 1))


def _escape(match: re.Match[str]) -> str:
    char = match.group()
    if char in _NAMED:
        return _NAMED[char]
    code = ord(char)
    return f"\\x{code:02x}" if code <= 0xFF else f"\\u{code:04x}"


def escape_controls(text: str) -> str:
    """``text`` with every control, bidirectional and separator character shown as an escape."""
    return _CONTROL.sub(_escape, text)


def cut(text: str, limit: int = LONG_TEXT) -> str:
    """``text`` itself when at most ``limit`` characters, else its first characters and its length.

    >>> cut("x" * 5000)[-25:]
    'xxxx... (5,000 characters)'
    """
    if len(text) <= limit:
        return text
    return f"{text[:min(KEPT_CHARACTERS, limit)]}... ({len(text):,} characters)"


def inert(text: object, limit: int | None = NAME_CHARACTERS) -> str:
    """One name, label or value as printable, one-line text: cut when longer than ``limit``, controls escaped."""
    shown = str(text)
    if limit is not None:
        shown = cut(shown, limit)
    return escape_controls(shown)


def cut_message(text: str) -> str:
    """A sentence with each run of more than :data:`LONG_TEXT` non-blank characters cut, and the whole cut at :data:`MESSAGE_CHARACTERS`."""
    shortened = _LONG_RUN.sub(lambda match: cut(match.group()), text)
    return cut(shortened, MESSAGE_CHARACTERS)


def inert_message(text: str) -> str:
    """A sentence that quotes names or values, as printable one-line text (see :func:`cut_message`)."""
    return escape_controls(cut_message(text))


_JSON_UNSAFE = re.compile("[\x7f-\x9f\u061c\u200e\u200f\u2028\u2029\u202a-\u202e\u2066-\u2069\ufeff]")


def json_inert(document: str) -> str:
    """A JSON document with the characters :func:`escape_controls` shows escaped written as ``\\uXXXX``.

    ``json.dumps`` already escapes the C0 controls; the others are legal raw
    in JSON strings, so escaping them changes no value a parser reads back.
    """
    return _JSON_UNSAFE.sub(lambda match: f"\\u{ord(match.group()):04x}", document)


def cut_texts(value: Any) -> Any:
    """A JSON-like value with every text in it (keys too) passed through :func:`cut_message`."""
    if isinstance(value, str):
        return cut_message(value)
    if isinstance(value, dict):
        return {cut_texts(k): cut_texts(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [cut_texts(v) for v in value]
    return value
