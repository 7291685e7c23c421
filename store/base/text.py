"""Stored text made inert for a terminal: nothing in it can move the cursor, retitle the
window, clear the screen or reorder the line.

Notes, register names, conditions, batches, the plant's name: whatever a book holds (typed
long ago, imported, merged from another laptop) is shown through `inert` by the command
line and the app. Control characters become visible: C0 as the Unicode control pictures
(ESC as ␛, CR as ␍), DEL as ␡, C1 (U+0080-U+009F, e.g. U+009B, a one-character CSI) and
the bidirectional overrides (U+202A-U+202E, U+2066-U+2069) as the replacement character
U+FFFD. A line break stays a line break (notes have lines) and a tab becomes a space.
One character for one: styled text keeps its styles in place.
"""

from __future__ import annotations

import re

_BIDI = (*range(0x202A, 0x202F), *range(0x2066, 0x206A))
_TABLE: dict[int, str] = {c: chr(0x2400 + c) for c in range(0x20)}
_TABLE |= {0x0A: "\n", 0x09: " ", 0x7F: "\u2421"}
_TABLE |= dict.fromkeys((*range(0x80, 0xA0), *_BIDI), "\ufffd")
_TABLE_ONE_LINE = _TABLE | {0x0A: "\u240a"}


def inert(text: str) -> str:
    """`text` with every control and escape character made visible (see the module)."""
    if text.isprintable():  # the common case, at C speed (Cc and Cf are not printable)
        return text
    return text.translate(_TABLE)


def inert_line(text: str) -> str:
    """As `inert`, and a line break shown as ␊: for one-line places (a table cell, a title)."""
    if text.isprintable():
        return text
    return text.translate(_TABLE_ONE_LINE)


_JSON_TABLE = {c: f"\\u{c:04x}" for c in (0x7F, *range(0x80, 0xA0), *_BIDI)}


# What _JSON_TABLE rewrites. A search for it runs at C speed over a plant's whole status (about
# a megabyte), where a translate of the text builds it again character by character (150 ms).
_JSON_ODD = re.compile("[\x7f-\x9f\u202a-\u202e\u2066-\u2069]")


def json_inert(text: str) -> str:
    """JSON text (which escapes C0 itself) with DEL, C1 and the bidirectional overrides
    written as \\u escapes too: the same JSON value, nothing a terminal acts on."""
    if _JSON_ODD.search(text) is None:  # the common case: nothing to rewrite
        return text
    return text.translate(_JSON_TABLE)
