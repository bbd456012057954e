"""One extended-XYZ comment line read as ``key=value`` pairs, with typed values.

What a value may be (the extended-XYZ conventions):

* a number: integers, decimals, exponents with ``e``/``E`` and the Fortran
  ``d``/``D`` (``1.5d-3``), ``nan``/``inf``;
* a boolean: ``T F True False true false TRUE FALSE``;
* a bare word (anything without whitespace; it may hold ``=``, so
  ``key=a=b`` gives ``"a=b"``), backslash escapes removed;
* a double-quoted string with backslash escapes (``\\n`` newline, ``\\t`` tab,
  ``\\\\``, ``\\"``, any other ``\\c`` is ``c``); runs of spaces inside are kept.
  A quoted string that holds only numbers or only booleans (``" 0.5d0"``,
  ``"1 2 3"``) is that number or that list, as the older writers meant it;
  single quotes work like double quotes without escapes;
* braces ``{0.5}`` / ``{1 2 3}``: one value or a list, like a quoted string;
* a list in brackets, elements separated by commas and/or spaces, elements
  bare or quoted: ``[1, 2, 3]``, ``[T T F]``, ``["a b", c]``; a list of equal
  lists is two-dimensional: ``[[1, 2], [3, 4]]``.  Lists of integers become
  int64 arrays, of numbers float64, of booleans bool, anything else str.

A word without ``=`` is a flag (True).  Spaces around ``=`` are allowed, and a
single trailing comma after a bare value is a separator (``i = 5, t = 2.5``).
A token that cannot be read (an unclosed quote or bracket, ``=`` without a
key, ``key=`` with nothing after it, rows of unequal length) is reported as a
:class:`BadToken`; the rest of the line is read on.

Written by hand with regular expressions rather than a grammar library: the
reader calls it once per distinct value and, for irregular files, once per
line, so it must cost microseconds (a general parser generator measured about
100x slower per line).
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

_Q = r'"(?:[^"\\]|\\.)*"'
_SQ = r"'[^']*'"
_ELEM = _Q + r"|" + _SQ + r"|[^\s,\"'\[\]{}]+"
_LIST_BODY = r"\s*(?:(?:" + _ELEM + r")(?:\s*,\s*|\s+|(?=\s*$)))*\s*"
_ARR1 = r"\[(?:[^\[\]\"']|" + _Q + r"|" + _SQ + r")*\]"
_ARR2 = r"\[\s*(?:" + _ARR1 + r"\s*,?\s*)+\]"
_BRACE = r"\{(?:[^{}\"']|" + _Q + r")*\}"

_KEY = re.compile(r'"((?:[^"\\]|\\.)*)"|((?:[^\s="\\]|\\.)+)')
_EQ = re.compile(r"[ ]*=[ ]*")
_SPACE = re.compile(r"[ ]*")
_VALUE = re.compile(
    r"(?P<arr2>" + _ARR2 + r")|(?P<arr1>" + _ARR1 + r")|(?P<brace>" + _BRACE + r")"
    r"|(?P<dq>" + _Q + r")|(?P<sq>" + _SQ + r")|(?P<bare>(?:[^\s\"'\\\[{]|\\.)(?:[^\s\"'\\]|\\.)*)")
_END = re.compile(r"\s|$")
_TOKEN_END = re.compile(r"\S*")
_ELEMENTS = re.compile(_ELEM)
_LIST_OK = re.compile(_LIST_BODY)
_ROWS = re.compile(_ARR1)
_QUOTES = re.compile(_Q + r"|" + _SQ)

INT = re.compile(r"[+-]?\d+")
FLOAT = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eEdD][+-]?\d+)?|[+-]?(?:nan|inf|infinity)", re.I)
TRUE = frozenset({"T", "True", "true", "TRUE"})
FALSE = frozenset({"F", "False", "false", "FALSE"})
_ESCAPES = {"n": "\n", "t": "\t", "r": "\r"}
_ESCAPE = re.compile(r"\\(.)")


@dataclass(frozen=True)
class BadToken:
    """A piece of a comment line that could not be read, and why."""

    text: str
    why: str


@dataclass(frozen=True)
class Pair:
    key: str
    value: object  # int, float, bool, str or numpy array
    start: int  # span of the whole pair in the line
    end: int
    spaced: bool  # written with spaces around '=', or with a quoted key
    flag: bool = False  # a word without '=' (value True)


def unescape(text: str) -> str:
    if "\\" not in text:
        return text
    return _ESCAPE.sub(lambda m: _ESCAPES.get(m.group(1), m.group(1)), text)


def scalar(word: str):
    """A bare word as int, float, bool or (unescaped) str."""
    if FLOAT.fullmatch(word):
        if INT.fullmatch(word):
            return int(word)
        return float(word.replace("d", "e").replace("D", "e"))
    if word in TRUE:
        return True
    if word in FALSE:
        return False
    return unescape(word)


def _typed_list(words: list[str], quoted: list[bool]) -> np.ndarray:
    if not any(quoted):
        if all(INT.fullmatch(w) for w in words):
            return np.array([int(w) for w in words], dtype=np.int64)
        if all(FLOAT.fullmatch(w) for w in words):
            return np.array([float(w.replace("d", "e").replace("D", "e")) for w in words], dtype=np.float64)
        if all(w in TRUE or w in FALSE for w in words):
            return np.array([w in TRUE for w in words], dtype=bool)
    return np.array([_strip_quotes(w) for w in words], dtype=str)


def _strip_quotes(word: str) -> str:
    if len(word) >= 2 and word[0] == '"' and word[-1] == '"':
        return unescape(word[1:-1])
    if len(word) >= 2 and word[0] == "'" and word[-1] == "'":
        return word[1:-1]
    return unescape(word)


def _split_list(body: str) -> tuple[list[str], list[bool]] | None:
    if not _LIST_OK.fullmatch(body):
        return None
    words = _ELEMENTS.findall(body)
    return words, [w[:1] in ('"', "'") for w in words]


def _old_style(content: str):
    """Contents of quotes or braces: one number/boolean, a list of them, or None (it is text)."""
    words = re.split(r"\s*,\s*|\s+", content.strip())
    if not words or words == [""]:
        return None
    if all(FLOAT.fullmatch(w) for w in words) or all(w in TRUE or w in FALSE for w in words):
        arr = _typed_list(words, [False] * len(words))
        return arr[0].item() if arr.size == 1 else arr
    return None


def parse_value(text: str):
    """One value as written after ``=``; raises ValueError (with the reason) when it is not one whole value."""
    m = _VALUE.match(text)
    if m is None or m.end() != len(text):
        raise ValueError("not a single value")
    return _convert(m)


def _convert(m: re.Match):
    kind, raw = m.lastgroup, m.group(m.lastgroup)
    if kind == "bare":
        return scalar(raw)
    if kind == "dq":
        content = unescape(raw[1:-1])
        old = _old_style(content)
        return content if old is None else old
    if kind == "sq":
        content = raw[1:-1]
        old = _old_style(content)
        return content if old is None else old
    if kind == "brace":
        content = raw[1:-1]
        old = _old_style(content)
        if old is not None:
            return old
        split = _split_list(content)
        if split is None or not split[0]:
            raise ValueError("the braces hold no readable list")
        arr = _typed_list(*split)
        return arr[0].item() if arr.size == 1 else arr
    if kind == "arr1":
        split = _split_list(raw[1:-1])
        if split is None:
            raise ValueError("the list's elements cannot be separated")
        if not split[0]:
            raise ValueError("the list is empty")
        arr = _typed_list(*split)
        if arr.dtype.kind == "U" and "," not in _QUOTES.sub("", raw):
            return unescape(raw[1:-1])  # words separated by spaces only: one text, as both reference readers take it
        return arr
    # two-dimensional: a list of equal lists
    rows_text = _ROWS.findall(raw[1:-1])
    rows = []
    for r in rows_text:
        split = _split_list(r[1:-1])
        if split is None or not split[0]:
            raise ValueError("a row of the table cannot be read")
        rows.append(split)
    if len({len(w) for w, _ in rows}) != 1:
        raise ValueError("the rows of the table have different lengths")
    flat = _typed_list([w for ws, _ in rows for w in ws], [q for _, qs in rows for q in qs])
    return flat.reshape(len(rows), -1)


def parse_line(line: str) -> tuple[list[Pair], list[BadToken]] | None:
    """All pairs of one comment line, and what could not be read; None for a line without any ``=`` (free text)."""
    if "=" not in line:
        return None
    pairs: list[Pair] = []
    bad: list[BadToken] = []
    pos, n = 0, len(line)
    while True:
        pos = _SPACE.match(line, pos).end()
        if pos >= n:
            break
        start = pos
        km = _KEY.match(line, pos)
        if km is None:  # '=' with no key, or an unmatched quote where a key should be
            end = _TOKEN_END.match(line, pos + 1).end()
            bad.append(BadToken(line[start:end], "'=' without a key before it" if line[pos] == "="
                                else "a quote that is never closed"))
            pos = end
            continue
        quoted_key = km.group(1) is not None
        key = unescape(km.group(1) if quoted_key else km.group(2))
        pos = km.end()
        eq = _EQ.match(line, pos)
        if eq is None or eq.end() == eq.start():
            # a flag (a word without '=')
            if pos < n and not line[pos].isspace():
                end = _TOKEN_END.match(line, pos).end()
                bad.append(BadToken(line[start:end], "a quote inside a word"))
                pos = end
                continue
            pairs.append(Pair(key, True, start, pos, quoted_key, flag=True))
            continue
        pos = eq.end()
        if pos >= n or (eq.group().endswith(" ") and "=" in line[pos:_TOKEN_END.match(line, pos).end()]):
            # 'key=' at the end, or followed by another pair: the key has no value
            bad.append(BadToken(line[start:pos].rstrip(), "nothing after '='"))
            continue
        vm = _VALUE.match(line, pos)
        stop = vm.end() if vm is not None else pos
        if vm is not None and vm.lastgroup == "bare" and vm.group().endswith(",") and len(vm.group()) > 1:
            vm = _VALUE.match(line[:stop - 1], pos)  # a trailing comma separates pairs
        if vm is None or not _END.match(line, stop):
            end = _TOKEN_END.match(line, pos).end()
            what = line[pos:pos + 1]
            why = {"[": "a list that is never closed", "{": "braces that are never closed",
                   '"': "a quote that is never closed", "'": "a quote that is never closed"}.get(
                       what, "a value that cannot be read")
            bad.append(BadToken(line[start:max(end, stop)], why))
            pos = max(end, stop)
            continue
        try:
            value = _convert(vm)
        except ValueError as exc:
            bad.append(BadToken(line[start:stop], str(exc)))
            pos = stop
            continue
        spaced = quoted_key or eq.end() - eq.start() != 1
        pairs.append(Pair(key, value, start, stop, spaced))
        pos = stop
    return pairs, bad
