"""The comment lines of many frames turned into per-frame columns, with memory bounded by the data.

Each key becomes one column over all frames: numbers as float64 (NaN where a
frame lacks the key), lists of numbers of one shape as float64 arrays
``(frames, ...)``, anything else as a :class:`TextColumn` (one int32 code per
frame into a table of distinct strings, so a value repeated on every frame is
stored once).  Limits keep memory proportional to the frames, whatever the
lines say: at most :data:`MAX_KEYS` keys, :data:`MAX_FLAGS` distinct words
without ``=``, :data:`MAX_DISTINCT` distinct texts per key; what goes beyond is
dropped and said once in a note.  (Common practice, no source: a word that
changes on every frame, as in ``frame 17 time=17.0``, used to become a key of
its own with a list over all frames, growing with the square of the frames.)
"""

from __future__ import annotations

import re
from array import array
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from basinmark.core.io.comment_line import BadToken, parse_line, parse_value

MAX_KEYS = 256
MAX_FLAGS = 32
MAX_DISTINCT = 1024
#: keys read for the layout of the atom lines or not kept (cell and periodicity mean nothing for a run)
PROPERTIES = "Properties"
DROPPED_KEYS = {"lattice", "pbc"}


class TextColumn(Sequence):
    """Per-frame strings stored as codes into a table of distinct values ("" where a frame has none)."""

    __slots__ = ("table", "codes")

    def __init__(self, table, codes: np.ndarray):
        self.table = tuple(table)
        self.codes = np.asarray(codes, dtype=np.int32)

    @classmethod
    def from_strings(cls, values) -> "TextColumn":
        table: dict[str, int] = {"": 0}
        codes = np.fromiter((table.setdefault(v, len(table)) for v in values), dtype=np.int32)
        return cls(table, codes)

    def __len__(self) -> int:
        return int(self.codes.size)

    def __getitem__(self, i):
        if isinstance(i, slice):
            return [self.table[c] for c in self.codes[i].tolist()]
        return self.table[int(self.codes[i])]

    def __iter__(self):
        table = self.table
        return (table[c] for c in self.codes.tolist())

    def __eq__(self, other) -> bool:
        if isinstance(other, TextColumn):
            other = list(other)
        if not isinstance(other, (list, tuple)):
            return NotImplemented
        return len(other) == len(self) and list(self) == list(other)

    def __repr__(self) -> str:
        head = list(self[:5])
        return f"TextColumn({head}{' ...' if len(self) > 5 else ''}, {len(self)} frames)"

    def distinct(self) -> int:
        return len(self.table) - (0 if (self.codes == 0).any() else 1)


def as_text(value) -> str:
    """A parsed value as the text kept for it: booleans T/F, lists space-separated (rows by '; ').

    A number is written as its float (``0`` -> ``0.0``) whether it was read as a whole number or
    not: a key that mixes numbers and text is stored as text, and a file read in pieces sees a
    piece of numbers alone (stored as floats) before the text turns up, so only the float form gives
    the same text both ways.
    """
    if isinstance(value, (bool, np.bool_)):
        return "T" if value else "F"
    if isinstance(value, (int, np.integer)):
        return repr(float(value))
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, np.ndarray):
        if value.ndim == 2:
            return "; ".join(as_text(row) for row in value)
        return " ".join(as_text(v.item() if hasattr(v, "item") else v) for v in value)
    return str(value)


@dataclass
class Comments:
    """What the comment lines of a block of frames hold."""

    n: int
    info: dict[str, np.ndarray] = field(default_factory=dict)
    vectors: dict[str, np.ndarray] = field(default_factory=dict)
    text: dict[str, TextColumn] = field(default_factory=dict)
    properties: TextColumn | None = None
    bad: list[tuple[int, BadToken]] = field(default_factory=list)  # (frame index, token), first few per text
    bad_count: dict[str, int] = field(default_factory=dict)  # token text -> how many lines
    dropped: dict[str, str] = field(default_factory=dict)  # what was not kept -> why
    flags: set[str] = field(default_factory=set)  # keys that were words without '='
    free_missed: int = 0  # lines a free-form template did not match
    free_first_miss: int | None = None  # the first of them (frame index)
    free_bad: list[tuple[int, str]] = field(default_factory=list)  # first template fields that were not numbers
    free_bad_count: int = 0


class _Sparse:
    """One key's values on the frames that have it (general path), kept in flat arrays."""

    __slots__ = ("kind", "frames", "nums", "shape", "codes", "table")

    def __init__(self):
        self.kind = None  # 'num' | 'vec' | 'text'
        self.frames = array("i")
        self.nums = array("d")
        self.shape = ()
        self.codes = array("i")
        self.table: dict[str, int] = {"": 0}

    def add(self, frame: int, value) -> bool:
        """Store one value; False when the key holds too many distinct texts to keep."""
        if isinstance(value, (bool, np.bool_, str)):
            kind = "text"
        elif isinstance(value, (int, float)):
            kind = "num"
        elif isinstance(value, np.ndarray) and value.dtype.kind in "iuf":
            kind = "vec"
        else:
            kind = "text"
        if self.kind == "text" or (kind == "vec" and self.kind == "vec" and value.shape != self.shape):
            kind = "text"
        if self.kind is None:
            self.kind = kind
            self.shape = value.shape if kind == "vec" else ()
        elif kind != self.kind:  # numbers here, text there: keep all as text
            if not self._to_text():
                return False
            kind = "text"
        self.frames.append(frame)
        if self.kind == "text":
            code = self.table.setdefault(as_text(value), len(self.table))
            self.codes.append(code)
            return len(self.table) <= MAX_DISTINCT + 1
        if self.kind == "num":
            self.nums.append(float(value))
        else:
            self.nums.extend(np.asarray(value, dtype=np.float64).ravel().tolist())
        return True

    def _to_text(self) -> bool:
        size = int(np.prod(self.shape)) if self.kind == "vec" else 1
        values = np.frombuffer(self.nums, dtype=np.float64) if len(self.nums) else np.zeros(0)
        for i in range(len(self.frames)):
            v = values[i * size:(i + 1) * size]
            text = as_text(float(v[0]) if self.kind == "num" else v.reshape(self.shape))
            self.codes.append(self.table.setdefault(text, len(self.table)))
        self.kind, self.nums, self.shape = "text", array("d"), ()
        return len(self.table) <= MAX_DISTINCT + 1

    def store(self, key: str, out: Comments) -> None:
        frames = np.frombuffer(self.frames, dtype=np.int32) if len(self.frames) else np.zeros(0, np.int32)
        if self.kind == "num":
            arr = np.full(out.n, np.nan)
            arr[frames] = np.frombuffer(self.nums, dtype=np.float64)
            out.info[key] = arr
        elif self.kind == "vec":
            arr = np.full((out.n,) + self.shape, np.nan)
            arr[frames] = np.frombuffer(self.nums, dtype=np.float64).reshape((-1,) + self.shape)
            out.vectors[key] = arr
        else:
            codes = np.zeros(out.n, np.int32)
            codes[frames] = np.frombuffer(self.codes, dtype=np.int32)
            out.text[key] = TextColumn(self.table, codes)


def _note_bad(out: Comments, frame: int, bad: list[BadToken]) -> None:
    for b in bad:
        count = out.bad_count.get(b.text, 0)
        if count == 0 and len(out.bad_count) < 20:
            out.bad.append((frame, b))
        if count or len(out.bad_count) < 20:
            out.bad_count[b.text] = count + 1
        else:
            out.bad_count["…"] = out.bad_count.get("…", 0) + 1


def _general(lines: list[str], out: Comments) -> None:
    """Each line read on its own (keys differ between frames, or the lines are irregular)."""
    cols: dict[str, _Sparse] = {}
    free = _Sparse()
    flags: set[str] = set()
    flags_dropped = False
    n_free = 0
    for i, line in enumerate(lines):
        parsed = parse_line(line)
        if parsed is None:
            if line and "comment" not in out.dropped:
                n_free += 1
                if not free.add(i, line):
                    out.dropped["comment"] = ("the free-text comment lines differ on nearly every frame "
                                              f"(more than {MAX_DISTINCT} different lines), so they were not kept")
            continue
        pairs, bad = parsed
        if bad:
            _note_bad(out, i, bad)
        for p in pairs:
            key = p.key
            low = key.lower()
            if low in DROPPED_KEYS:
                continue
            if low == PROPERTIES.lower():
                key = PROPERTIES
            if p.flag:
                if flags_dropped:
                    continue
                if key not in flags:
                    flags.add(key)
                    if len(flags) > MAX_FLAGS:
                        flags_dropped = True
                        out.dropped["flags"] = _FLAGS_NOTE.format(", ".join(repr(f) for f in sorted(flags)[:3]))
                        for f in flags:
                            cols.pop(f, None)
                        continue
            if key in out.dropped:
                continue
            col = cols.get(key)
            if col is None:
                if len(cols) >= MAX_KEYS:
                    out.dropped.setdefault("keys", f"the comment lines name more than {MAX_KEYS} different keys; "
                                                   f"the keys after the first {MAX_KEYS} were not kept")
                    continue
                col = cols[key] = _Sparse()
            if not col.add(i, p.value):
                del cols[key]
                out.dropped[key] = (f"key {key!r} holds text that changes on nearly every frame (more than "
                                    f"{MAX_DISTINCT} different values), so it was not kept")
    out.flags = set() if flags_dropped else flags
    for key, col in cols.items():
        if key == PROPERTIES:
            tmp = Comments(out.n)
            col.store(key, tmp)
            out.properties = tmp.text.get(key)
            if out.properties is None:  # a numeric 'Properties=': keep it as text for the error message
                out.properties = TextColumn.from_strings(["" if np.isnan(v) else repr(v) for v in tmp.info[key]])
            continue
        col.store(key, out)
    if n_free and "comment" not in out.dropped:
        free.store("comment", out)


def _dense(key: str, values: list, out: Comments) -> bool:
    """A complete column (every frame has the key); False when its values need the general path."""
    kinds = {type(v) for v in values}
    if kinds <= {int, float}:
        out.info[key] = np.array(values, dtype=np.float64)
        return True
    if kinds == {np.ndarray}:
        shapes = {v.shape for v in values}
        if len(shapes) == 1 and all(v.dtype.kind in "iuf" for v in values):
            out.vectors[key] = np.array(values, dtype=np.float64)
            return True
    texts = [as_text(v) for v in values]
    col = TextColumn.from_strings(texts)
    if len(col.table) > MAX_DISTINCT + 1:
        out.dropped[key] = (f"key {key!r} holds text that changes on nearly every frame (more than {MAX_DISTINCT} "
                            "different values), so it was not kept")
        return True
    if key == PROPERTIES:
        out.properties = col
    else:
        out.text[key] = col
    return True


def _constant(key: str, value, out: Comments) -> None:
    """A column with the same value on every frame."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        out.info[key] = np.full(out.n, float(value))
    elif isinstance(value, np.ndarray) and value.dtype.kind in "iuf":
        out.vectors[key] = np.broadcast_to(value.astype(np.float64), (out.n,) + value.shape).copy()
    else:
        col = TextColumn(("", as_text(value)), np.ones(out.n, np.int32))
        if key == PROPERTIES:
            out.properties = col
        else:
            out.text[key] = col


_SPECIAL = re.compile(rb"[=\"'\[\]{}\\]")


_PLAIN_NUMBERS = re.compile(rb"[0-9eE.+\- ]*")


def _column_floats(text: bytes, n: int) -> np.ndarray | None:
    """The ``n`` numbers of ``text`` (values separated by single spaces) converted in C by float(); None if
    any value is something else.

    float() also takes '1_000' and 'infinity', which the format does not write: values holding '_' or
    letters other than e/E are left to the value parser."""
    if not _PLAIN_NUMBERS.fullmatch(text):
        return None
    words = text.split(b" ")
    if len(words) != n:
        return None  # an empty value ('key=' with nothing after it)
    try:
        return np.fromiter(map(float, words), dtype=np.float64, count=n)
    except ValueError:
        return None


_CONSTANTS: dict[bytes, tuple] = {}


def _constant_value(raw: bytes) -> tuple | None:
    """``(value,)`` of a value written the same on every line, None when it cannot be read.  Texts and numbers
    are remembered (files of a set repeat their ``Properties=``: reading it cost 0.1 ms per file, measured);
    lists are read each time, their arrays being mutable."""
    hit = _CONSTANTS.get(raw)
    if hit is not None:
        return hit
    try:
        value = parse_value(raw.decode("utf-8", "replace"))
    except ValueError:
        return None
    if isinstance(value, (str, int, float, bool)):
        if len(_CONSTANTS) >= 256:
            _CONSTANTS.clear()
        _CONSTANTS[raw] = (value,)
    return (value,)


def _column_values(col: list[bytes], skip: int, toks, width: int, j0: int, j1: int):
    """One column's values the general way (each distinct value read once): a tuple of one value when it is the
    same on every line, else a list; None when a value cannot be read (the line-by-line path decides)."""
    if j1 - j0 == 1 and col.count(col[0]) == len(col):  # one token, the same on every line: read once
        return _constant_value(col[0][skip:])
    raw = [t[skip:] for t in col] if skip else col
    if j1 - j0 > 1:
        raw = [b" ".join(x) for x in zip(raw, *(toks[jj::width] for jj in range(j0 + 1, j1)))]
    n = len(raw)
    if raw.count(raw[0]) == n:  # the same on every line (Properties=, tags): read once
        return _constant_value(raw[0])
    cache: dict[bytes, object] = {}
    values = []
    for r in raw:
        v = cache.get(r, cache)
        if v is cache:
            try:
                v = parse_value(r.decode("utf-8", "replace"))
            except ValueError:
                return None
            if len(cache) < 4 * MAX_DISTINCT:
                cache[r] = v
        values.append(v)
    return values


def _regular(lines: list[bytes], out: Comments) -> bool:
    """Fast path when every line has the first line's keys in the same order, written ``key=value``.

    The lines are split into whitespace tokens once; each key then owns the
    same token positions on every line, which is verified for every line by
    counting ``"\\n" + key + "="`` in the joined column (a key out of place
    anywhere breaks the count).  A value spanning several tokens (a list
    written with spaces) is joined again with single spaces, which is exact
    only when no line holds two spaces in a row; that is checked.  Distinct
    values are read once each.  Returns False, leaving ``out`` untouched, when
    the lines are not that regular.
    """
    n = len(lines)
    first = lines[0].decode("utf-8", "replace")
    parsed = parse_line(first)
    if parsed is None or parsed[1] or not parsed[0]:
        return False
    pairs = parsed[0]
    joined = b"\n".join(lines)
    multi_ok = None  # whether a value of several tokens can be joined again exactly: asked only when one is met
    t0 = lines[0].split()
    spans = []
    j = 0
    for p in pairs:
        if p.spaced:
            return False
        expect = first[p.start:p.end].encode().split()
        if t0[j:j + len(expect)] != expect:
            return False
        if len(expect) > 1:
            if multi_ok is None:
                multi_ok = b"  " not in joined and first.isascii()
            if not multi_ok:
                return False
        is_flag = p.flag
        spans.append((p.key, first[p.start:p.end].split("=", 1)[0].encode(), is_flag, j, j + len(expect), p.value))
        j += len(expect)
    width = j
    if width != len(t0):
        return False
    toks = joined.split()
    if len(toks) != n * width:
        return False
    columns: list[tuple[str, object]] = []
    flag_keys: list[str] = []
    varying: dict[bytes, None] = {}
    batch: list[tuple[int, bytes]] = []  # (slot in columns, the column's values joined by spaces)
    for key, raw_key, is_flag, j0, j1, first_value in spans:
        col = toks[j0::width]
        if is_flag:
            if col.count(raw_key) != n:
                # a word that changes from line to line (``frame 17``): many distinct words are not keys
                if _SPECIAL.search(b"".join(col)):
                    return False
                distinct = set(col)
                if len(distinct) <= MAX_FLAGS:
                    return False  # few distinct words: flags, read line by line
                varying.update(dict.fromkeys(col[:3]))
                continue
            flag_keys.append(key)
            continue
        prefix = raw_key + b"="
        text = b" ".join(col)  # tokens hold no whitespace: ' key=' counts the tokens that start with it
        if (b" " + text).count(b" " + prefix) != n:
            return False
        low = key.lower()
        if low in DROPPED_KEYS:
            continue
        if j1 - j0 == 1 and isinstance(first_value, (int, float)) and not isinstance(first_value, bool) \
                and text.count(prefix) == n:  # the key nowhere but at the start of its tokens: strip it at once
            batch.append((len(columns), text.replace(prefix, b"")))
            columns.append((key, None))
            continue
        values = _column_values(col, len(prefix), toks, width, j0, j1)
        if values is None:
            return False
        columns.append((key, values))
    if batch:
        # every numeric column of every frame converted in one go (one C-level float() pass over the values)
        nums = _column_floats(b" ".join(text for _, text in batch), n * len(batch))
        for i, (slot, text) in enumerate(batch):
            key = columns[slot][0]
            if nums is not None:
                values = nums[i * n:(i + 1) * n]
            else:  # a value that is not a plain number somewhere: these columns one by one, the general way
                values = _column_floats(text, n)
                if values is None:
                    values = _column_values(text.split(b" "), 0, None, 0, 0, 1)
                    if values is None:
                        return False
            columns[slot] = (key, values)
    if varying:
        examples = ", ".join(repr(w.decode("utf-8", "replace")) for w in list(varying)[:3])
        out.dropped["flags"] = _FLAGS_NOTE.format(examples)
    else:
        for key in flag_keys:
            columns.append((key, (True,)))
            out.flags.add(key)
    for key, values in columns:
        if key.lower() == PROPERTIES.lower():
            key = PROPERTIES
        if isinstance(values, np.ndarray):
            out.info[key] = values
        elif isinstance(values, tuple):
            _constant(key, values[0], out)
        else:
            _dense(key, values, out)
    return True


def parse_comments(lines: list[bytes], free_form=None) -> Comments:
    """Per-frame columns of the comment lines of a block of frames.

    A line without any ``=`` is free text (kept under ``"comment"`` when it
    repeats enough to be worth keeping); a word without ``=`` in a key=value
    line is a flag ("T").  Lines that cannot be read in full give bad tokens
    (``Comments.bad``) and keep every other key.  ``free_form`` (a
    :class:`~basinmark.core.io.free_form.CommentFormat`) takes numbers out of
    free-form lines; its fields replace keys of the same name, and the free
    text itself is then not kept.
    """
    out = _parse_comments(lines)
    if free_form is not None:
        values, missed, bad = free_form.extract(lines)
        for name, arr in values.items():
            out.text.pop(name, None)
            out.vectors.pop(name, None)
            out.info[name] = arr
        out.text.pop("comment", None)
        out.dropped.pop("comment", None)
        out.free_missed = len(missed)
        out.free_first_miss = missed[0] if missed else None
        out.free_bad = bad[:5]
        out.free_bad_count = len(bad)
    return out


def _parse_comments(lines: list[bytes]) -> Comments:
    out = Comments(len(lines))
    if not lines:
        return out
    if not any(b"=" in ln for ln in lines):
        lines = [ln.strip() for ln in lines]
        if any(lines):
            col = TextColumn.from_strings(ln.decode("utf-8", "replace") for ln in lines)
            if len(col.table) > MAX_DISTINCT + 1:
                out.dropped["comment"] = ("the free-text comment lines differ on nearly every frame (more than "
                                          f"{MAX_DISTINCT} different lines), so they were not kept")
            else:
                out.text["comment"] = col
        return out
    if _regular(lines, out):
        return out
    out = Comments(len(lines))
    _general([ln.strip().decode("utf-8", "replace") for ln in lines], out)
    return out


_FLAGS_NOTE = (f"the comment lines hold more than {MAX_FLAGS} different words without '=' (such as {{}}); words "
               "that change from frame to frame are not keys, so none of them were kept")
_TEXT_NOTE = ("key {!r} holds text that changes on nearly every frame (more than " + str(MAX_DISTINCT)
              + " different values), so it was not kept")


def _as_texts(part: Comments, key: str) -> TextColumn:
    """One part's column as text, whatever it was stored as."""
    if key in part.text:
        return part.text[key]
    if key in part.info:
        return TextColumn.from_strings("" if np.isnan(v) else as_text(float(v)) for v in part.info[key].tolist())
    rows = part.vectors[key]
    return TextColumn.from_strings("" if np.isnan(r).all() else as_text(r) for r in rows)


def _merge_text(cols: list[TextColumn | None], sizes: list[int], limit: int | None) -> TextColumn | None:
    table: dict[str, int] = {"": 0}
    codes = np.zeros(sum(sizes), np.int32)
    at = 0
    for col, size in zip(cols, sizes):
        if col is not None:
            remap = np.array([table.setdefault(t, len(table)) for t in col.table], dtype=np.int32)
            codes[at:at + size] = remap[col.codes]
            if limit is not None and len(table) > limit + 1:
                return None
        at += size
    return TextColumn(table, codes)


def merge(parts: list[Comments]) -> Comments:
    """The columns of consecutive blocks of frames joined into one (a file read piece by piece)."""
    if len(parts) == 1:
        return parts[0]
    sizes = [p.n for p in parts]
    starts = np.cumsum([0] + sizes[:-1]).tolist()
    out = Comments(sum(sizes))
    for p in parts:
        for k, v in p.dropped.items():
            out.dropped.setdefault(k, v)
    for p, at in zip(parts, starts):
        for frame, bad in p.bad:
            if bad.text not in out.bad_count and len(out.bad) < 20:
                out.bad.append((frame + at, bad))
        for text, count in p.bad_count.items():
            out.bad_count[text] = out.bad_count.get(text, 0) + count
    for p, at in zip(parts, starts):
        out.free_missed += p.free_missed
        if p.free_first_miss is not None and out.free_first_miss is None:
            out.free_first_miss = p.free_first_miss + at
        out.free_bad += [(f + at, t) for f, t in p.free_bad][:max(0, 5 - len(out.free_bad))]
        out.free_bad_count += p.free_bad_count
    flags = set().union(*(p.flags for p in parts))
    if "flags" in out.dropped or len(flags) > MAX_FLAGS:
        out.dropped.setdefault("flags", _FLAGS_NOTE.format(", ".join(repr(f) for f in sorted(flags)[:3])))
        skip = flags
    else:
        skip = set()
        out.flags = flags
    keys = [k for k in dict.fromkeys(k for p in parts for k in (*p.info, *p.vectors, *p.text))
            if k not in skip and k not in out.dropped]
    if len(keys) > MAX_KEYS:
        out.dropped.setdefault("keys", f"the comment lines name more than {MAX_KEYS} different keys; the keys after "
                                       f"the first {MAX_KEYS} were not kept")
        keys = keys[:MAX_KEYS]
    for key in keys:
        where = [("num" if key in p.info else "vec" if key in p.vectors else "text" if key in p.text else None)
                 for p in parts]
        kinds = {w for w in where if w is not None}
        shapes = {p.vectors[key].shape[1:] for p, w in zip(parts, where) if w == "vec"}
        if kinds == {"num"}:
            arr = np.full(out.n, np.nan)
            for p, at, w in zip(parts, starts, where):
                if w:
                    arr[at:at + p.n] = p.info[key]
            out.info[key] = arr
        elif kinds == {"vec"} and len(shapes) == 1:
            arr = np.full((out.n,) + shapes.pop(), np.nan)
            for p, at, w in zip(parts, starts, where):
                if w:
                    arr[at:at + p.n] = p.vectors[key]
            out.vectors[key] = arr
        else:
            col = _merge_text([_as_texts(p, key) if w else None for p, w in zip(parts, where)], sizes, MAX_DISTINCT)
            if col is None:
                out.dropped[key] = _TEXT_NOTE.format(key)
            else:
                out.text[key] = col
    if any(p.properties is not None for p in parts):
        out.properties = _merge_text([p.properties for p in parts], sizes, None)
    return out
