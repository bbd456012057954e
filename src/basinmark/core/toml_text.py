"""The one way basinmark reads TOML (manifest, rules, anything else): text, errors and lines.

* A UTF-8 byte-order mark at the start is accepted (editors on some systems write one; :mod:`tomllib`
  alone rejects it as "Invalid statement").
* A syntax error becomes :class:`TomlTextError` naming the file and the line.
* :func:`line_of` finds the line of a key or table header, for errors found after parsing (tomllib gives
  no positions).
"""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

from basinmark.core.errors import BasinmarkError

BOM = "\ufeff"


class TomlTextError(BasinmarkError):
    """A TOML file that cannot be read: ``source``, ``line`` (1-based, or None) and a plain ``problem``."""

    def __init__(self, source: str | Path, problem: str, line: int | None = None, detail: str = ""):
        self.source = str(source)
        self.problem = problem
        self.line = line
        self.detail = detail or problem  # for syntax errors: the parser's own words, without the position
        where = self.source if line is None else f"{self.source}, line {line}"
        super().__init__(f"{where}: {problem}")


def decode(data: bytes, source: str | Path) -> str:
    """UTF-8 text of a file's bytes, without a leading byte-order mark."""
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise TomlTextError(source, f"not UTF-8 text (byte {exc.start}); save the file as UTF-8", line) from None
    return text[1:] if text.startswith(BOM) else text


def loads(text: str, source: str | Path = "<text>") -> dict:
    """Parse TOML text (a leading byte-order mark is dropped); a syntax error names the source and line."""
    if text.startswith(BOM):
        text = text[1:]
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = re.search(r"\(at line (\d+), column \d+\)", msg)
        line = int(m.group(1)) if m else getattr(exc, "lineno", None)
        if line is None and "end of document" in msg:
            line = max(1, len(text.splitlines()))
        problem = re.sub(r" \((at line|at end of document).*\)", "", msg)
        raise TomlTextError(source, f"not valid TOML: {problem}", line, detail=problem) from None


def read(path: str | Path) -> tuple[dict, str]:
    """``(document, text)`` of a TOML file; every problem is a :class:`TomlTextError` naming the file."""
    path = Path(path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise TomlTextError(path, f"cannot be read ({exc.strerror or exc})") from None
    text = decode(data, path)
    return loads(text, path), text


_HEADER = re.compile(r"^\s*\[\[?\s*([^\[\]]+?)\s*\]\]?")


def line_of(text: str, table: str = "", key: str | None = None) -> int | None:
    """1-based line of ``key`` in ``[table]`` ("" for the top level), or of the table's header; None if absent.

    A plain scan (no positions from tomllib), enough for files of one key per line; dotted table names
    are compared without spaces, keys may be bare or quoted.
    """
    current, header = "", None
    for number, line in enumerate(text.splitlines(), start=1):
        m = _HEADER.match(line)
        if m:
            current = re.sub(r"\s+", "", m.group(1)).replace('"', "")
            if current == table and header is None:
                header = number
            if key is None and current == table:
                return number
            continue
        if key is not None and current == table:
            if re.match(rf"""^\s*["']?{re.escape(key)}["']?\s*=""", line):
                return number
    return header
