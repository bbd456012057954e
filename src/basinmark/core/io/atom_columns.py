"""The atom lines of an XYZ / extended-XYZ text turned into arrays, column by column.

The column layout comes from ``Properties=`` (name:type:count triples, types
S, R, I, L) or, without it, element and three coordinates.  Two numeric paths,
chosen automatically:

* fixed-width columns (what dynamics codes and ase write): the atom lines
  form a byte matrix; it is transposed once, every byte column classified by
  its minimum and maximum, and each number assembled from its digit columns
  by exact float32 vector-matrix products, the fastest way we measured;
* anything else (irregular spacing, mixed widths, long mantissas):
  whitespace tokens joined and converted in C by ``numpy.fromstring``.

Both give the correctly rounded value of every token.  The fixed-width path
gives up on anything unexpected, and the general path then reads the text and
reports problems with their line.  Integer (I) and logical (L) columns are
checked: a value of another kind is an error naming its line.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from basinmark.core.errors import TrajectoryFileError

# ---------------------------------------------------------------------------------------------
# number words

_FORTRAN = bytes.maketrans(b"dD", b"eE")
_NUMBER = re.compile(rb"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eEdD][+-]?\d+)?|[+-]?(?:nan|inf|infinity)", re.I)
_INTEGER_TEXT = re.compile(rb"[0-9+\- \n]*")
_BOOL_TOKENS = [b"T", b"F", b"True", b"False", b"true", b"false", b"TRUE", b"FALSE", b"1", b"0"]
_TRUE_TOKENS = [b"T", b"True", b"true", b"TRUE", b"1"]
_WHOLE = re.compile(rb"[+-]?\d+")


# ---------------------------------------------------------------------------------------------
# per-atom column layout (extended XYZ Properties=)


@dataclass(frozen=True)
class _Column:
    name: str
    kind: str  # S, R, I, L
    count: int
    start: int  # first token index within an atom line


_LAYOUTS: dict[str, list[_Column]] = {}


def _layout(props: str | None, path: Path, line: int) -> list[_Column]:
    """The atom lines' columns from a ``Properties=`` value (remembered: the files of a set repeat it)."""
    cols = _LAYOUTS.get(props) if props is not None else None
    if cols is None:
        cols = _read_layout(props, path, line)
        if props is not None:
            if len(_LAYOUTS) >= 64:
                _LAYOUTS.clear()
            _LAYOUTS[props] = cols
    return list(cols)


def _read_layout(props: str | None, path: Path, line: int) -> list[_Column]:
    if props is None:
        return [_Column("species", "S", 1, 0), _Column("pos", "R", 3, 1)]
    parts = props.split(":")
    bad = TrajectoryFileError(
        path,
        f"Properties={props} is not a valid column list "
        "(name:type:count triples, type one of S, R, I, L)",
        line,
    )
    if len(parts) % 3:
        raise bad
    cols, start = [], 0
    for i in range(0, len(parts), 3):
        name, kind, count = parts[i], parts[i + 1].upper(), parts[i + 2]
        if kind not in ("S", "R", "I", "L") or not count.isdigit() or int(count) < 1 or not name:
            raise bad
        cols.append(_Column(name, kind, int(count), start))
        start += int(count)
    names = [c.name for c in cols]
    if "pos" not in names and "positions" not in names:
        raise TrajectoryFileError(path, "Properties= names no 'pos' column, so there are no coordinates", line)
    if "species" not in names and "Z" not in names:
        raise TrajectoryFileError(path, "Properties= names no 'species' (or 'Z') column, so the atoms are unknown",
                                  line)
    pos = cols[names.index("pos" if "pos" in names else "positions")]
    if pos.kind not in ("R", "I") or pos.count != 3:
        raise TrajectoryFileError(
            path, f"Properties= declares {pos.name} as {pos.kind}:{pos.count}; coordinates need R:3", line)
    for i, c in enumerate(cols):
        if c.name in ("species", "Z") and c.count != 1:
            raise TrajectoryFileError(path, f"Properties= declares {c.name} with {c.count} values per atom; "
                                      "it needs 1", line)
        if c.name == "species" and c.kind != "S":
            cols[i] = _Column(c.name, "S", 1, c.start)  # symbols or atomic numbers, read as text either way
        if c.name == "Z" and c.kind != "I":
            cols[i] = _Column(c.name, "I", 1, c.start)
    return cols


# ---------------------------------------------------------------------------------------------
# numeric parsing


class _Slow(Exception):
    """The fixed-width path does not apply; use the general path."""


def _fixed_width_matrix(block: bytes, n_lines: int) -> np.ndarray | None:
    """The atom lines as an (n_lines, width) byte matrix, if all have the same length."""
    width = block.find(b"\n") if n_lines > 1 else len(block)
    if width <= 0 or len(block) != n_lines * (width + 1) - 1:
        return None
    buf = np.frombuffer(block, np.uint8)
    # rows of `width` bytes, `width + 1` apart (the last line has no line break after it)
    grid = np.lib.stride_tricks.as_strided(buf, shape=(n_lines, width), strides=(width + 1, 1), writeable=False)
    if n_lines > 1 and not (buf[width::width + 1] == 10).all():
        return None
    return grid


_POW10 = np.array([10.0**k for k in range(309)])
_CLASS_RE = re.compile(r"(m*)(d+)(?:(\.)(d*))?(?:(e)(m?)(d+))?|(m*)(d*)(\.)(d+)(?:(e)(m?)(d+))?")


def _column_classes(cmin: np.ndarray, cmax: np.ndarray) -> str:
    """One letter per byte column: d = digits only, . = dot only, e = one exponent letter, m = mixed."""
    out = []
    for lo, hi in zip(cmin.tolist(), cmax.tolist()):
        if 48 <= lo and hi <= 57:
            out.append("d")
        elif lo == hi == 46:
            out.append(".")
        elif lo == hi and lo in b"eEdD":
            out.append("e")
        else:
            out.append("m")
    return "".join(out)


def _sign_zone(zone: np.ndarray) -> np.ndarray:
    """Check the leading mixed columns of a number (spaces, then an optional sign, then digits).

    ``zone`` is (columns, lines).  Returns a boolean per line: negative.  Raises _Slow on anything else.
    """
    isdig = (zone >= 48) & (zone <= 57)
    space = zone == 32
    minus = zone == 45
    sign = minus | (zone == 43)
    if not (isdig | space | sign).all():
        raise _Slow
    nonspace = ~space
    if (nonspace[:-1] & space[1:]).any() or (sign[1:] & nonspace[:-1]).any():
        raise _Slow
    return minus.any(axis=0)


_W32 = [np.array([10.0 ** (k - 1 - i) for i in range(k)], dtype=np.float32) for k in range(8)]


def _horner(cm: np.ndarray, columns: list[int], mixed: int) -> np.ndarray:
    """Integer value of digit columns (the first ``mixed`` may hold spaces or a sign: counted as 0).

    ``cm`` is the byte matrix transposed, (columns, lines), so each column is
    contiguous.  Columns are taken in chunks of at most 7 from the right; each
    chunk's digits times their place values are summed by a float32
    vector-matrix product.  Every product and partial sum is an integer below
    2**24, so the float32 result is exact; chunks are combined in float64,
    exact below 2**53 (the caller sends longer numbers elsewhere).
    """
    value = np.zeros(cm.shape[1])
    hi = len(columns)
    scale = 1.0
    while hi > 0:
        lo = max(0, hi - 7)
        idx = columns[lo:hi]
        k = hi - lo
        if idx[-1] - idx[0] == k - 1:
            chunk = cm[idx[0]:idx[-1] + 1] - np.uint8(48)
        else:
            chunk = cm[idx] - np.uint8(48)
        if lo < mixed:
            head = chunk[:mixed - lo]
            head[head > 9] = 0
        part = _W32[k] @ chunk.astype(np.float32)
        if scale == 1.0:
            value += part
        else:
            value += part.astype(np.float64) * scale
        scale *= 10.0 ** k
        hi = lo
    return value


def _digit_span(cm: np.ndarray, a: int, n_lead: int) -> int:
    """How many of the leading mixed columns can hold a digit (from the first one that does)."""
    if not n_lead:
        return 0
    capable = np.flatnonzero(cm[a:a + n_lead].max(axis=1) >= 48)
    return n_lead - int(capable[0]) if len(capable) else 0


def _field_by_strtod(cm: np.ndarray, a: int, end: int) -> np.ndarray:
    """Convert a validated field in C with numpy.fromstring (for mantissas beyond 15 digits, where
    place-value sums in float64 would no longer be exact)."""
    w, n = end - a, cm.shape[1]
    text = np.full((n, w + 1), 32, np.uint8)
    text[:, :w] = cm[a:end].T
    raw = text.tobytes()
    if b"d" in raw or b"D" in raw:
        raw = raw.translate(_FORTRAN)
    values = np.fromstring(raw, sep=" ")
    if values.size != n:
        raise _Slow
    return values


def _fixed_number(cm: np.ndarray, a: int, end: int, classes: str) -> np.ndarray:
    """Convert one fixed-width numeric field, byte columns ``a:end`` (classes: its column letters)."""
    m = _CLASS_RE.fullmatch(classes)
    if m is None:
        raise _Slow
    g = m.groups()
    if g[0] is not None or g[1] is not None and g[7] is None:  # first form: m* d+ (. d*)? (e m? d+)?
        lead, ipart, dot, frac, exp, esign, edig = g[0:7]
    else:  # second form: m* d* . d+ (e m? d+)?
        lead, ipart, dot, frac, exp, esign, edig = g[7:14]
    lead, ipart, frac = lead or "", ipart or "", frac or ""
    n_lead, n_int = len(lead), len(ipart)
    if _digit_span(cm, a, n_lead) + n_int + len(frac) > 15:
        return _field_by_strtod(cm, a, end)
    negative = _sign_zone(cm[a:a + n_lead]) if n_lead else None
    mant_cols = list(range(a, a + n_lead + n_int))
    if dot:
        mant_cols += list(range(a + n_lead + n_int + 1, a + n_lead + n_int + 1 + len(frac)))
    value = _horner(cm, mant_cols, n_lead)
    decimals = len(frac)
    if exp:
        e0 = a + n_lead + n_int + (1 + len(frac) if dot else 0) + 1
        eneg = _sign_zone(cm[e0:e0 + len(esign)]) if esign else None
        expo = _horner(cm, list(range(e0, e0 + len(esign) + len(edig))), len(esign)).astype(np.int64)
        if eneg is not None:
            np.negative(expo, out=expo, where=eneg)
        q = expo - decimals
        # one multiplication or division by an exact power of ten (10**22 is the largest) rounds
        # correctly; the rare rows beyond that are converted by float() from their text
        far = np.abs(q) > 22
        qc = np.clip(q, -22, 22)
        value = np.where(qc >= 0, value * _POW10[np.clip(qc, 0, None)], value / _POW10[np.clip(-qc, 0, None)])
        for r in np.flatnonzero(far).tolist():
            value[r] = float(cm[a:end, r].tobytes().translate(_FORTRAN))
        if negative is not None and far.any():
            negative = negative & ~far  # float() already applied the sign
    elif decimals:
        value /= _POW10[decimals]
    if negative is not None:
        value *= np.where(negative, -1.0, 1.0)  # (np.negative with where=, or boolean indexing: 7 x slower, measured)
    return value


def _parse_fixed(block: bytes, n_lines: int, cols: list[_Column]) -> dict[str, np.ndarray]:
    """Fixed-width path (columns at the same byte offsets on every atom line); raises _Slow when it does not apply.

    The byte matrix is transposed once so that every byte column is
    contiguous (the strided alternative re-reads the whole file per column).
    Each column is summarised by its minimum and maximum over all lines, which
    classifies it (digits only, the decimal point, an exponent letter, or
    mixed); only the few mixed columns are checked byte by byte.  Any doubt
    raises _Slow, and the general path then parses the file (and reports
    errors with their line).
    """
    if any(c.kind not in ("S", "R", "I") or (c.kind == "S" and c.count != 1) for c in cols):
        raise _Slow
    grid = _fixed_width_matrix(block, n_lines)
    if grid is None:
        raise _Slow
    cm = np.ascontiguousarray(grid.T)
    cmin, cmax = cm.min(axis=1), cm.max(axis=1)
    if cmin.min() < 32 or cmax.max() > 126:
        raise _Slow
    used = (cmax != 32).view(np.int8)
    edges = np.flatnonzero(np.diff(np.concatenate(([0], used, [0]))))
    starts, ends = edges[0::2].tolist(), edges[1::2].tolist()
    if len(starts) != sum(c.count for c in cols):
        raise _Slow
    out: dict[str, np.ndarray] = {}
    for c in cols:
        fields = []
        if c.kind != "S" and c.count > 1:
            spans = [(starts[t], ends[t]) for t in range(c.start, c.start + c.count)]
            classes = {_column_classes(cmin[a:b], cmax[a:b]) for a, b in spans}
            if len(classes) == 1:
                # the fields of this column are laid out alike (x, y, z written by one format): converted as one
                # field over all their lines, a third of the numpy calls (measured: 0.35 -> 0.15 ms per half of
                # 400 frames x 12 atoms); the values are the same, each number still converted on its own
                kind = classes.pop()
                if c.kind == "I" and ("." in kind or "e" in kind):
                    raise _Slow  # not whole numbers: the general path says where
                width = spans[0][1] - spans[0][0]
                joint = np.concatenate([cm[a:b] for a, b in spans], axis=1)
                values = _fixed_number(joint, 0, width, kind)
                out[c.name] = values.reshape(c.count, n_lines).T
                continue
        for t in range(c.start, c.start + c.count):
            a, b = starts[t], ends[t]
            if c.kind == "S":
                ns = cm[a:b] != 32
                # exactly one token per line in this field
                if not ns[0].all() and not ns[-1].all():
                    raise _Slow
                if b - a > 1 and (ns[1:] & ~ns[:-1]).sum() + int(ns[0].sum()) != n_lines:
                    raise _Slow
                fields.append(np.ascontiguousarray(cm[a:b].T).view(f"S{b - a}").ravel())
            else:
                classes = _column_classes(cmin[a:b], cmax[a:b])
                if c.kind == "I" and ("." in classes or "e" in classes):
                    raise _Slow  # not whole numbers: the general path says where
                fields.append(_fixed_number(cm, a, b, classes))
        out[c.name] = fields[0] if c.kind == "S" else np.stack(fields, axis=1)
    return out


def _parse_tokens(block: bytes, n_lines: int, cols: list[_Column], where) -> dict[str, np.ndarray]:
    """General path: whitespace tokens; numbers converted in C by numpy.fromstring."""
    n_tokens = sum(c.count for c in cols)
    toks = block.split()
    if len(toks) != n_lines * n_tokens:
        _column_count_error(block, n_tokens, cols, where)
    out: dict[str, np.ndarray] = {}
    numeric = [c for c in cols if c.kind in ("R", "I")]
    for c in cols:
        if c.kind in ("S", "L"):
            per = [np.array(toks[t::n_tokens]) for t in range(c.start, c.start + c.count)]
            if c.kind == "L":
                for k, p in enumerate(per):
                    ok = np.isin(p, _BOOL_TOKENS)
                    if not ok.all():
                        i = int(np.flatnonzero(~ok)[0])
                        raise TrajectoryFileError(
                            where.path, f"{_token_name(c.start + k, cols)} holds {p[i].decode('utf-8', 'replace')!r}, "
                            "but Properties= declares it logical (L): T or F", where.line_of(i))
                per = [np.isin(p, _TRUE_TOKENS) for p in per]
            out[c.name] = per[0] if c.count == 1 else np.stack(per, axis=1)
        elif c.kind == "I":
            for t in range(c.start, c.start + c.count):
                col = toks[t::n_tokens]
                if not _INTEGER_TEXT.fullmatch(b" ".join(col)):  # (a stray sign inside is caught as "not a number")
                    i = next(i for i, x in enumerate(col) if not _WHOLE.fullmatch(x))
                    raise TrajectoryFileError(
                        where.path, f"{_token_name(t, cols)} holds {col[i].decode('utf-8', 'replace')!r}, but "
                        "Properties= declares it a whole number (I)", where.line_of(i))
    num_idx = [t for c in numeric for t in range(c.start, c.start + c.count)]
    if num_idx == list(range(n_tokens - len(num_idx), n_tokens)) and n_tokens - len(num_idx) <= 1:
        if n_tokens > len(num_idx):
            del toks[0::n_tokens]  # drop the species column in place (C speed)
        nums = toks
    else:
        nums = np.array(toks, dtype=object).reshape(n_lines, n_tokens)[:, num_idx].ravel().tolist()
    text = b" ".join(nums)
    if b"d" in text or b"D" in text:
        text = text.translate(_FORTRAN)
    try:
        values = np.fromstring(text, sep=" ")
    except ValueError:
        values = np.zeros(0)
    if values.size != len(nums):
        for i, tok in enumerate(nums):
            if not _NUMBER.fullmatch(tok):
                line_index, k = divmod(i, len(num_idx))
                name = _token_name(num_idx[k], cols)
                raise TrajectoryFileError(where.path, f"{name} {tok.decode('utf-8', 'replace')!r} is not a number",
                                          where.line_of(line_index))
        raise TrajectoryFileError(where.path, "some atom lines hold values that are not numbers", where.line_of(0))
    values = values.reshape(n_lines, len(num_idx))
    pos = 0
    for c in numeric:
        out[c.name] = values[:, pos:pos + c.count]
        pos += c.count
    return out


_AXES = "xyz"


def _token_name(t: int, cols: list[_Column]) -> str:
    for c in cols:
        if c.start <= t < c.start + c.count:
            if c.name in ("pos", "positions"):
                return f"the {_AXES[t - c.start]} coordinate"
            return f"column {c.name!r}" + (f" (component {t - c.start + 1})" if c.count > 1 else "")
    return f"column {t + 1}"


def _column_count_error(block: bytes, n_tokens: int, cols: list[_Column], where) -> None:
    if cols[0].name == "species" and cols[1].start == 1 and (len(cols) == 2 or cols[2].name.startswith("_col")):
        what = f"an element and three coordinates, like the first atom line, line {where.line_of(0)}"
    else:
        what = "as Properties= declares: " + ", ".join(
            c.name + (f"×{c.count}" if c.count > 1 else "") for c in cols)
    for i, line in enumerate(block.split(b"\n")):
        k = len(line.split())
        if k != n_tokens:
            raise TrajectoryFileError(
                where.path, f"this atom line has {k} values but {n_tokens} are expected ({what})", where.line_of(i))
    raise TrajectoryFileError(where.path, "the atom lines do not have the expected columns", where.line_of(0))
