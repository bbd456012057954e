"""Free text that people type (reasons, notes, labeler names): refused when it could lie on screen,
escaped when an older file holds some anyway.

Refused at entry, and escaped by :func:`printable` wherever text is shown:

* control characters: C0 (U+0000–U+001F, which includes newline, tab, carriage return and the ESC that
  starts ANSI terminal escapes), DEL (U+007F) and C1 (U+0080–U+009F) -- Unicode general category Cc;
* the line and paragraph separators U+2028 and U+2029 (categories Zl, Zp);
* the bidirectional controls (Unicode property Bidi_Control, PropList.txt: U+061C, U+200E, U+200F,
  U+202A–U+202E, U+2066–U+2069), which reorder what follows them on screen;
* lone surrogates (category Cs), which only a damaged decoding produces.

A newline in a reason would fake a whole row in a printed table; an ANSI escape can recolour or clear
a terminal; a right-to-left override makes ``exe.txt`` read as ``txt.exe``.
"""

from __future__ import annotations

import unicodedata

from basinmark.core.errors import BasinmarkError

#: Unicode's Bidi_Control characters (PropList.txt)
BIDI_CONTROLS = frozenset("\u061c\u200e\u200f\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069")
_ESCAPES = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}

#: labeler names that mean an automatic source or a selector of one (compare --labelers auto hand final);
#: a person may not use them (compared without regard to case)
RESERVED_LABELERS = frozenset({"auto", "automatic", "rule", "hand", "final"})
_RESERVED_PREFIXES = ("rule:",)
MAX_LABELER_LENGTH = 64
MAX_REASON_LENGTH = 2000


class TextError(BasinmarkError):
    """Text typed by a person cannot be stored as it is (a control character, a reserved name, too long)."""


def is_hidden(ch: str) -> bool:
    """Whether ``ch`` is a character that must not reach the screen as it is."""
    return ch in BIDI_CONTROLS or unicodedata.category(ch) in ("Cc", "Zl", "Zp", "Cs")


def _describe(ch: str) -> str:
    name = unicodedata.name(ch, "")
    if not name and ch in _ESCAPES:
        name = {"\n": "LINE FEED", "\r": "CARRIAGE RETURN", "\t": "CHARACTER TABULATION"}[ch]
    if not name and ch == "\x1b":
        name = "ESCAPE, which starts terminal control sequences"
    return f"U+{ord(ch):04X}" + (f" {name.lower()}" if name else " a control character")


def printable(value: object) -> str:
    """``value`` as text with every hidden character shown as an escape (``\\n``, ``\\x1b``, ``\\u202e``).

    The one function every table, list and label of the program uses for text that came from a file.
    """
    text = "" if value is None else str(value)
    if text.isascii() and text.isprintable():  # no hidden character is printable ASCII: the usual case, one C pass
        return text
    if not any(is_hidden(c) for c in text):  # the common case, kept cheap
        return text
    out = []
    for c in text:
        if not is_hidden(c):
            out.append(c)
        elif c in _ESCAPES:
            out.append(_ESCAPES[c])
        elif ord(c) < 0x100:
            out.append(f"\\x{ord(c):02x}")
        else:
            out.append(f"\\u{ord(c):04x}")
    return "".join(out)


def check_plain_text(value: object, what: str, *, max_length: int = MAX_REASON_LENGTH) -> str:
    """``value`` (None → "") if it is one line of plain text; else :class:`TextError` naming the character."""
    if value is None:
        return ""
    if not isinstance(value, str):
        raise TextError(f"the {what} must be text, not {type(value).__name__}")
    for i, c in enumerate(value):
        if is_hidden(c):
            return _refuse(what, value, i, c)
    if len(value) > max_length:
        raise TextError(f"the {what} is {len(value)} characters long; at most {max_length} are allowed")
    return value


def _refuse(what: str, value: str, i: int, c: str):
    raise TextError(f"the {what} {printable(value[:60])!s}{'…' if len(value) > 60 else ''} contains "
                    f"{_describe(c)} at character {i + 1}; it must be one line of plain text (no line breaks, "
                    "tabs, terminal escapes or direction overrides)")


def is_reserved_labeler(name: str) -> bool:
    folded = name.strip().casefold()
    return folded in RESERVED_LABELERS or folded.startswith(_RESERVED_PREFIXES)


def check_labeler(name: object, *, person: bool = True) -> str:
    """A labeler name, stripped: one short line of plain text; a person may not take an automatic source's name."""
    text = check_plain_text(name, "labeler name", max_length=MAX_LABELER_LENGTH).strip()
    if not text:
        raise TextError("the labeler name cannot be empty")
    if person and is_reserved_labeler(text):
        raise TextError(f"the labeler name {text!r} is reserved for automatic labels and their selectors "
                        f"({', '.join(sorted(RESERVED_LABELERS))}, rule:…); choose a person's name")
    return text
