"""The mode file: the transition state's geometry with its Hessian or its normal modes (TOML or JSON).

docs/mode-file.md describes the format for people.  In short (TOML; JSON has the same keys)::

    format = "basinmark-modes"        # optional marker
    version = 1
    symbols = ["C", "H", ...]
    positions = [[x, y, z], ...]      # Å (or length_unit = "bohr" / "nm" / "pm")
    masses = [12.011, ...]            # optional, amu; default ase's standard atomic masses

    [hessian]                         # either this ...
    unit = "eV/Å^2"                   # or hartree/bohr^2, kcal/mol/Å^2, kJ/mol/Å^2
    values = [[...], ...]             # 3N rows of 3N numbers, row 3 × (atom − 1) + axis

    [modes]                           # ... or this
    frequencies_cm1 = [-812.4, 95.1, ...]   # imaginary ones as negative numbers
    vectors = [[[x, y, z], ...], ...]       # one (N × 3) list per mode
    vectors_are = "mass-weighted"           # or "cartesian" (plain displacements, any normalisation)

Every problem is a :class:`ModeFileError` naming the file, the key and (where known) the line.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

import numpy as np

from basinmark.core import toml_text
from basinmark.core.atomic_write import write_text_atomic
from basinmark.core.modes import (
    ModeError,
    NormalModes,
    default_masses,
    hessian_factor,
    modes_from_hessian,
    rigid_basis,
)
from basinmark.core.units import length_factor

FORMAT = "basinmark-modes"
VERSION = 1
#: tolerated departure from orthonormality of given vectors (after normalising each) before refusing
OVERLAP_LIMIT = 0.05
#: largest share of a given mode's length that may lie along the rigid motions before refusing
RIGID_LIMIT = 0.2

_KNOWN = {"": {"format", "version", "symbols", "positions", "length_unit", "masses", "hessian", "modes", "title"},
          "hessian": {"unit", "values"},
          "modes": {"frequencies_cm1", "vectors", "vectors_are"}}


class ModeFileError(ModeError):
    """A mode file that cannot be used: ``path``, ``key`` (like ``hessian.values``), ``line`` (or None)."""

    def __init__(self, path, problem: str, key: str | None = None, line: int | None = None):
        self.path = Path(path)
        self.key = key
        self.line = line
        self.problem = problem
        where = str(self.path) + (f", line {line}" if line else "")
        super().__init__(f"{where}: {key + ': ' if key else ''}{problem}")


class _Doc:
    """The parsed document and a way of finding a key's line in its text."""

    def __init__(self, path: Path, data: dict, text: str, kind: str):
        self.path, self.data, self.text, self.kind = path, data, text, kind

    def line(self, table: str, key: str | None) -> int | None:
        if self.kind == "toml":
            return _toml_line(self.text, table, key)
        name = key if key is not None else table
        m = re.search(rf'"{re.escape(name)}"\s*:', self.text)
        return self.text.count("\n", 0, m.start()) + 1 if m else None

    def fail(self, table: str, key: str | None, problem: str) -> ModeFileError:
        dotted = ".".join(p for p in (table, key) if p) or None
        return ModeFileError(self.path, problem, dotted, self.line(table, key))


_TABLE = re.compile(r"^\s*\[\s*([A-Za-z_][\w\-]*)\s*\]\s*(#.*)?$")


def _toml_line(text: str, table: str, key: str | None) -> int | None:
    """1-based line of ``key`` in ``[table]`` ("" for the top level), or of the table's header.

    Our own scan rather than :func:`toml_text.line_of`: a mode file's arrays span many lines, and their
    rows (``[0.1, 2.0, 3.5],``) must not be taken for table headers; headers here are plain names.
    """
    current, header = "", None
    for number, line in enumerate(text.splitlines(), start=1):
        m = _TABLE.match(line)
        if m:
            current = m.group(1)
            if current == table and header is None:
                header = number
                if key is None:
                    return number
            continue
        if key is not None and current == table and re.match(rf"""^\s*["']?{re.escape(key)}["']?\s*=""", line):
            return number
    return header


def _load(path: Path) -> _Doc:
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise ModeFileError(path, f"cannot be read ({exc.strerror or exc})") from None
    if path.suffix.lower() == ".json":
        try:
            text = raw.decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            raise ModeFileError(path, f"not UTF-8 text (byte {exc.start}); save the file as UTF-8") from None
        try:
            data = json.loads(text)
        except json.JSONDecodeError as exc:
            raise ModeFileError(path, f"not valid JSON: {exc.msg}", line=exc.lineno) from None
        kind = "json"
    else:
        try:
            data, text = toml_text.read(path)
        except toml_text.TomlTextError as exc:
            raise ModeFileError(path, exc.problem, line=exc.line) from None
        kind = "toml"
    if not isinstance(data, dict):
        raise ModeFileError(path, "the file must hold one table (TOML) or object (JSON) of keys")
    return _Doc(path, data, text, kind)


def _numbers(doc: _Doc, table: str, key: str, value, depth: int) -> np.ndarray:
    """A nested list of numbers of ``depth`` levels as a float array with even rows (else a clear error)."""
    def bad(problem):
        return doc.fail(table, key, problem)

    def walk(v, level, where):
        if level == 0:
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                raise bad(f"{where or 'the value'} is {v!r}, not a number")
            if not math.isfinite(v):
                raise bad(f"{where or 'the value'} is {v!r}, not a finite number")
            return float(v)
        if not isinstance(v, list):
            raise bad(f"{where or 'the value'} must be a list, not {type(v).__name__}")
        return [walk(item, level - 1, f"{where} item {i + 1}".strip()) for i, item in enumerate(v)]

    nested = walk(value, depth, "")
    try:
        return np.array(nested, dtype=float).reshape(_shape(nested, depth))
    except ValueError:
        raise bad("the rows have different lengths") from None


def _shape(nested, depth) -> tuple[int, ...]:
    shape, v = [], nested
    for _ in range(depth):
        shape.append(len(v))
        v = v[0] if len(v) else []
    return tuple(shape)


def read_modes(path) -> NormalModes:
    """Normal modes from a mode file (``.toml``, or ``.json`` with the same keys); see docs/mode-file.md."""
    path = Path(path)
    doc = _load(path)
    d = doc.data
    for table, known in _KNOWN.items():
        section = d if not table else d.get(table)
        if isinstance(section, dict):
            for key in section:
                if key not in known:
                    tables = " and the tables [hessian] or [modes]" if not table else ""
                    raise doc.fail(table, key, f"unknown key; known keys{' in [' + table + ']' if table else ''}: "
                                               + ", ".join(sorted(known - {'hessian', 'modes'})) + tables)
    if "format" in d and d["format"] != FORMAT:
        raise doc.fail("", "format", f"is {d['format']!r}; a mode file says format = \"{FORMAT}\"")
    if "version" in d and d["version"] != VERSION:
        raise doc.fail("", "version", f"version {d['version']!r} is not known to this basinmark (it reads {VERSION})")
    if "symbols" not in d:
        raise doc.fail("", None, "no 'symbols' key: list the chemical symbols, one per atom")
    symbols = d["symbols"]
    if not isinstance(symbols, list) or not symbols or not all(isinstance(s, str) for s in symbols):
        raise doc.fail("", "symbols", "must be a list of chemical symbols such as [\"C\", \"H\"]")
    try:
        default = default_masses(symbols)
    except ModeError as exc:
        raise doc.fail("", "symbols", str(exc)) from None
    n = len(symbols)
    if "positions" not in d:
        raise doc.fail("", None, "no 'positions' key: give the transition state's geometry, one [x, y, z] per atom")
    x = _numbers(doc, "", "positions", d["positions"], 2)
    if x.shape != (n, 3):
        raise doc.fail("", "positions", f"must be {n} rows of [x, y, z] (one per symbol); got shape {x.shape}")
    unit = d.get("length_unit", "Å")
    try:
        x = x * length_factor(str(unit))
    except ValueError as exc:
        raise doc.fail("", "length_unit", str(exc)) from None
    masses = default
    if "masses" in d:
        masses = _numbers(doc, "", "masses", d["masses"], 1)
        if masses.shape != (n,) or np.any(masses <= 0):
            raise doc.fail("", "masses", f"must be {n} positive numbers (amu), one per atom")

    has_h, has_m = isinstance(d.get("hessian"), dict), isinstance(d.get("modes"), dict)
    for name in ("hessian", "modes"):
        if name in d and not isinstance(d[name], dict):
            raise doc.fail("", name, f"must be a table [{name}] (TOML) or an object (JSON)")
    if has_h == has_m:
        raise doc.fail("", None, "give exactly one of [hessian] or [modes]" + (" (both are here)" if has_h else ""))
    if has_h:
        return _from_hessian(doc, symbols, x, masses)
    return _from_modes(doc, symbols, x, masses)


def _from_hessian(doc: _Doc, symbols, x, masses) -> NormalModes:
    h = doc.data["hessian"]
    unit = h.get("unit", "eV/Å^2")
    try:
        hessian_factor(str(unit))
    except ValueError as exc:
        raise doc.fail("hessian", "unit", str(exc)) from None
    if "values" not in h:
        raise doc.fail("hessian", None, "no 'values': give the 3N × 3N Cartesian Hessian as a list of rows")
    values = _numbers(doc, "hessian", "values", h["values"], 2)
    try:
        return modes_from_hessian(symbols, x, values, masses=masses, unit=str(unit), source=str(doc.path))
    except ModeError as exc:
        raise doc.fail("hessian", "values", str(exc)) from None


def _from_modes(doc: _Doc, symbols, x, masses) -> NormalModes:
    s = doc.data["modes"]
    n = len(symbols)
    for key in ("frequencies_cm1", "vectors"):
        if key not in s:
            raise doc.fail("modes", None, f"no '{key}'")
    freq = _numbers(doc, "modes", "frequencies_cm1", s["frequencies_cm1"], 1)
    vec = _numbers(doc, "modes", "vectors", s["vectors"], 3)
    if vec.ndim != 3 or vec.shape[1:] != (n, 3) or vec.shape[0] != len(freq):
        raise doc.fail("modes", "vectors", f"must be {len(freq)} modes (one per frequency), each {n} rows of "
                                           f"[x, y, z]; got shape {vec.shape}")
    kind = s.get("vectors_are", "mass-weighted")
    if kind not in ("mass-weighted", "cartesian"):
        raise doc.fail("modes", "vectors_are", f"is {kind!r}; use \"mass-weighted\" or \"cartesian\"")
    if not 1 <= len(freq) <= 3 * n:
        raise doc.fail("modes", "frequencies_cm1", f"give between 1 and {3 * n} modes for {n} atoms")
    flat = vec.reshape(len(freq), -1)
    if kind == "cartesian":
        flat = flat * np.sqrt(np.repeat(masses, 3))[None]
    norms = np.linalg.norm(flat, axis=1)
    if np.any(norms == 0):
        k = int(np.argmin(norms))
        raise doc.fail("modes", "vectors", f"mode {k + 1} is all zeros")
    flat = flat / norms[:, None]
    rigid = rigid_basis(x, masses)
    along = np.linalg.norm(flat @ rigid.T, axis=1)
    if along.max() > RIGID_LIMIT:
        k = int(np.argmax(along))
        raise doc.fail("modes", "vectors", f"mode {k + 1} moves the molecule as a whole ({along[k]:.0%} of it is "
                                           "translation or rotation); are positions and vectors in the same "
                                           f"orientation, and are the vectors {kind}?")
    gram = flat @ flat.T
    off = np.abs(gram - np.eye(len(flat)))
    if off.max() > OVERLAP_LIMIT:
        i, j = np.unravel_index(np.argmax(off), off.shape)
        raise doc.fail("modes", "vectors", f"modes {i + 1} and {j + 1} overlap by {gram[i, j]:.2f} (normal modes are "
                                           f"orthogonal once mass-weighted); are the vectors {kind}?")
    # small rounding in printed vectors: remove rigid parts, then symmetric (Löwdin) orthonormalisation,
    # which moves every vector as little as possible
    flat = flat - (flat @ rigid.T) @ rigid
    w, u = np.linalg.eigh(flat @ flat.T)
    flat = (u @ np.diag(w ** -0.5) @ u.T) @ flat
    order = np.argsort(freq, kind="stable")
    return NormalModes(frequencies_cm1=freq[order], modes=flat[order].reshape(-1, n, 3), masses=masses,
                       positions=x, symbols=tuple(symbols), linear=rigid.shape[0] == 5, source=str(doc.path))


def _num(v: float) -> str:
    return repr(float(v))


def mode_file_text(modes: NormalModes, *, comment: str = "") -> str:
    """TOML text of ``modes`` in the modes form (mass-weighted vectors), readable by :func:`read_modes`."""
    lines = [f"# {c}" for c in comment.splitlines()] if comment else []
    lines += ["# Normal modes of a transition state for basinmark (docs/mode-file.md).",
              f'format = "{FORMAT}"', f"version = {VERSION}",
              "symbols = [" + ", ".join(f'"{s}"' for s in modes.symbols) + "]",
              "positions = [  # Å"]
    lines += [f"  [{_num(a)}, {_num(b)}, {_num(c)}]," for a, b, c in modes.positions]
    lines += ["]", "masses = [" + ", ".join(_num(m) for m in modes.masses) + "]  # amu", "", "[modes]",
              'vectors_are = "mass-weighted"',
              "frequencies_cm1 = [" + ", ".join(_num(f) for f in modes.frequencies_cm1) + "]", "vectors = ["]
    for k, v in enumerate(modes.modes):
        lines.append(f"  [  # mode {k + 1}, {modes.frequencies_cm1[k]:.1f} cm^-1")
        lines += [f"    [{_num(a)}, {_num(b)}, {_num(c)}]," for a, b, c in v]
        lines.append("  ],")
    lines.append("]")
    return "\n".join(lines) + "\n"


def write_modes(path, modes: NormalModes, *, comment: str = "") -> None:
    """Write ``modes`` to ``path`` as a TOML mode file (whole or not at all)."""
    write_text_atomic(Path(path), mode_file_text(modes, comment=comment))


__all__ = ["FORMAT", "VERSION", "ModeFileError", "read_modes", "write_modes", "mode_file_text"]
