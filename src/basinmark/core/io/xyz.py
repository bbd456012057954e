"""Our XYZ / extended-XYZ reader, vectorised with numpy.

Line offsets come from one numpy scan for line breaks; frame boundaries follow
from the first atom-count line (every frame must have the same atoms); the
atom lines of all frames are cut out frame by frame and parsed in one go; and
element symbols are compared frame by frame as whole arrays.  Why not ``ase.io.read``: it builds one ``Atoms`` per frame
and parses line by line, which is too slow for sets of thousands of runs
(bench/bench_reader.py measures the difference).

The file is streamed: decompressed and cut into pieces of whole frames
(:data:`CHUNK_BYTES` of text each), each piece parsed on its own, and the
pieces' arrays joined at the end, so that memory holds the results and one
piece of text, never the whole text.  Atom lines: atom_columns.py; comment
lines: comment_line.py (one line) and comment_keys.py (columns over frames).
"""

from __future__ import annotations

import re
import warnings as _warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from ase.data import atomic_numbers, chemical_symbols

from basinmark.core.errors import PartialReadWarning, TrajectoryFileError
from basinmark.core.io.atom_columns import _parse_fixed  # noqa: F401  (tests reach it here)
from basinmark.core.io.atom_columns import _AXES, _NUMBER, _Column, _layout, _parse_tokens, _Slow
from basinmark.core.io.comment_keys import Comments, parse_comments
from basinmark.core.io.comment_keys import merge as merge_comments
from basinmark.core.io.registry import RAW_PIECE, ByteStream, FrameBlock, as_path


# ---------------------------------------------------------------------------------------------
# elements


def _element_number(token: bytes) -> int | None:
    s = token.strip().decode("ascii", "replace")
    if s.isdigit():
        z = int(s)
        return z if 1 <= z < len(chemical_symbols) else None
    z = atomic_numbers.get(s[:1].upper() + s[1:].lower())
    return z if z else None  # 'X' (dummy, Z = 0) is not an element


def _numbers(species: np.ndarray, n_frames: int, n_atoms: int, where) -> np.ndarray:
    """Atomic numbers of frame 1, after checking every frame lists the same elements in the same order."""
    table = species.reshape(n_frames, n_atoms)
    first = table[0]
    z_first = []
    for i, tok in enumerate(first):
        z = _element_number(tok)
        if z is None:
            raise TrajectoryFileError(
                where.path,
                f"{tok.strip().decode('utf-8', 'replace')!r} is not an element symbol or atomic number",
                where.line_of(i))
        z_first.append(z)
    z_first = np.array(z_first, dtype=np.int16)
    same = table == first
    if not same.all():
        # maybe only spelled differently ('C' vs 'c', '6'): compare atomic numbers
        uniq, inverse = np.unique(species, return_inverse=True)
        zs = np.array([_element_number(u) or -1 for u in uniq], dtype=np.int16)[inverse].reshape(n_frames, n_atoms)
        diff = np.argwhere(zs != z_first)
        if len(diff):
            f, a = (int(x) for x in diff[0])
            tok = table[f, a].strip().decode("utf-8", "replace")
            if zs[f, a] < 0:
                problem = f"{tok!r} is not an element symbol or atomic number"
            else:
                problem = (f"the element order changes: atom {a + 1} is {chemical_symbols[z_first[a]]} in frame 1 "
                           f"but {chemical_symbols[zs[f, a]]} in frame {f + 1}; every frame must list the same "
                           "atoms in the same order")
            raise TrajectoryFileError(where.path, problem, where.line_of(f * n_atoms + a))
    return z_first


# ---------------------------------------------------------------------------------------------
# frames


@dataclass
class _Where:
    path: Path
    offset: int  # file line number of lines[0], minus 1
    stride: int
    n_atoms: int

    def line_of(self, atom_line: int) -> int:
        """1-based file line of the i-th atom line (over all frames)."""
        f, a = divmod(atom_line, self.n_atoms)
        return self.offset + f * self.stride + 2 + a + 1


_COUNT = re.compile(rb"[ ]*\+?\d+[ ]*")


def _show(line: bytes) -> str:
    s = line.strip().decode("utf-8", "replace")
    return repr(s if len(s) <= 60 else s[:57] + "...")


def _atom_count(line: bytes, path: Path, lineno: int) -> int:
    if not _COUNT.fullmatch(line):
        raise TrajectoryFileError(
            path, f"this line should give the number of atoms (a positive whole number) but reads {_show(line)}",
            lineno)
    n = int(line)
    if n < 1:
        raise TrajectoryFileError(path, "the atom count is 0; a frame needs at least one atom", lineno)
    return n


def _looks_like_atom_line(line: bytes) -> bool:
    toks = line.split()
    return len(toks) >= 4 and all(_NUMBER.fullmatch(t) for t in toks[1:4])


def _frame_boundary_error(lines: list[bytes], k: int, n: int, where: _Where) -> None:
    """Explain why line k*stride is not the atom count of frame k+1."""
    start, prev = k * where.stride, (k - 1) * where.stride
    head = lines[start]
    ln = where.offset + start + 1
    prev_ln = where.offset + prev + 1
    for q in range(prev + 2, start):
        if _COUNT.fullmatch(lines[q]):
            raise TrajectoryFileError(
                where.path,
                f"frame {k} (line {prev_ln}) says {n} atoms, but only {q - prev - 2} atom lines follow before "
                f"the next atom count on line {where.offset + q + 1}; fix the count or the missing lines",
                prev_ln)
    if _COUNT.fullmatch(head):
        m = int(head)
        raise TrajectoryFileError(
            where.path,
            f"the atom count changes: frame {k + 1} has {m} atoms but frame 1 has {n}; every frame of a "
            "trajectory must have the same atoms", ln)
    if _looks_like_atom_line(head):
        raise TrajectoryFileError(
            where.path,
            f"frame {k} (line {prev_ln}) says {n} atoms, but more atom lines follow; line {ln} should start the "
            "next frame with its atom count", prev_ln)
    _atom_count(head, where.path, ln)


def _check_text(data: bytes, path: Path, base: int = 0) -> None:
    """NUL bytes and text that is not UTF-8, named with their line (``base``: file lines before ``data``)."""
    nul = data.find(b"\x00")
    if nul >= 0:
        raise TrajectoryFileError(
            path, "the file holds binary data (a NUL byte), so it is not a text XYZ file",
            base + data.count(b"\n", 0, nul) + 1)
    if not data.isascii():
        try:
            data.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise TrajectoryFileError(
                path,
                f"the file is not UTF-8 text (byte 0x{data[exc.start]:02x} cannot be decoded); it may be binary, "
                "or saved in another encoding — save it as UTF-8 or plain ASCII",
                base + data.count(b"\n", 0, exc.start) + 1) from None


def _comment_warnings(meta: Comments, path: Path, line_of_frame, warnings: list[str], free_form=None) -> None:
    """One warning per distinct unreadable token (naming its first line), one per thing not kept, and one
    for lines a free-form template does not fit."""
    if free_form is not None and meta.free_missed:
        fields = ", ".join(free_form.fields)
        _partial(path, f"{path.name}: {meta.free_missed} of {meta.n} comment lines do not match "
                 f"{free_form.described or 'the free-form comment format'} (the first is line "
                 f"{line_of_frame(meta.free_first_miss)}); their {fields} are missing", warnings)
    if free_form is not None and meta.free_bad_count:
        frame, text = meta.free_bad[0]
        _partial(path, f"{path.name}, line {line_of_frame(frame)}: {text} matched "
                 f"{free_form.described or 'the free-form comment format'} but is not a number"
                 + (f" (and {meta.free_bad_count - 1} more)" if meta.free_bad_count > 1 else ""), warnings)
    for frame, bad in meta.bad:
        more = meta.bad_count.get(bad.text, 1) - 1
        _partial(path, f"{path.name}, line {line_of_frame(frame)}: could not read {bad.text!r} in the comment line ({bad.why}); "
                 "the other keys on the line were kept"
                 + (f" (the same on {more} more line{'s' if more != 1 else ''})" if more else ""), warnings)
    if meta.bad_count.get("…"):
        _partial(path, f"{meta.bad_count['…']} more unreadable pieces of comment lines were skipped", warnings)
    for why in meta.dropped.values():
        _partial(path, why, warnings)


def _partial(path: Path, message: str, warnings: list[str]) -> None:
    warnings.append(message)
    _warnings.warn(f"{path}: {message}", PartialReadWarning, stacklevel=4)


#: text parsed at a time; the arrays made from it are a few times its size, so this bounds the reader's
#: working memory beside its results (measured: 2 MB pieces read as fast as whole files)
CHUNK_BYTES = 2 << 20
_BOM = b"\xef\xbb\xbf"
_WHITESPACE = bytes.maketrans(b"\t\f\v", b"   ")
_BLANK_LINES = re.compile(rb"(?:[ ]*\n)*")


@dataclass
class _Part:
    """The frames parsed from one piece of text."""

    first_line: int  # 1-based file line of the piece's first atom-count line
    n_frames: int
    positions: np.ndarray
    numbers: np.ndarray
    meta: Comments
    arrays: dict
    props: str | None


class _FrameReader:
    """Reads an XYZ text piece by piece: each piece holds whole frames and is parsed on its own."""

    def __init__(self, path: Path, dtype, fixed_width: bool, chunk_bytes: int, comment_format=None):
        self.path = path
        self.comment_format = comment_format
        self.dtype = dtype
        self.fixed_width = fixed_width
        self.chunk_bytes = chunk_bytes
        self.warnings: list[str] = []
        self.line = 0  # file lines before the text not yet parsed
        self.n: int | None = None
        self.count_line = b""
        self.cols: list[_Column] | None = None
        self.parts: list[_Part] = []
        self.at_start = True

    def read(self, pieces) -> None:
        buf = b""
        held_cr = False
        for piece in pieces:
            if self.at_start and not buf and piece.startswith(_BOM):
                piece = piece[3:]  # a UTF-8 byte-order mark, as some Windows editors write
            if held_cr:
                piece = b"\r" + piece
            held_cr = piece.endswith(b"\r")
            if held_cr:
                piece = piece[:-1]  # may be the first half of a CR LF pair
            if b"\r" in piece:
                piece = piece.replace(b"\r\n", b"\n").replace(b"\r", b"\n")
            if b"\t" in piece or b"\f" in piece or b"\v" in piece:
                piece = piece.translate(_WHITESPACE)
            buf = buf + piece if buf else piece
            while len(buf) >= self.chunk_bytes:
                rest = self._consume(buf, final=False)
                if len(rest) == len(buf):
                    break  # not one whole frame yet
                buf = rest
        self._consume(buf + b"\n" if held_cr else buf, final=True)

    def _consume(self, buf: bytes, final: bool) -> bytes:
        """Parse the whole frames at the start of ``buf``; return what is left for the next piece."""
        if self.n is None:
            skip = _BLANK_LINES.match(buf).end()
            if skip:
                self.line += buf.count(b"\n", 0, skip)
                buf = buf[skip:]
            eol = buf.find(b"\n")
            if eol < 0 and not final:
                return buf
            if not buf.strip():
                raise TrajectoryFileError(self.path, "the file is empty (no atom count, no frames)")
            first = buf if eol < 0 else buf[:eol]
            _check_text(first, self.path, self.line)
            self.n = _atom_count(first, self.path, self.line + 1)
            self.count_line = first
        if final:
            if buf.strip() or not self.parts:
                self._parse(buf, final=True)
            return b""
        stride = self.n + 2
        window = np.frombuffer(buf, np.uint8)[:self.chunk_bytes]
        breaks = np.flatnonzero(window == 10)
        k = len(breaks) // stride
        if k == 0:  # a frame longer than a piece: take one whole frame
            breaks = np.flatnonzero(np.frombuffer(buf, np.uint8) == 10)[:stride]
            if len(breaks) < stride:
                return buf
            k = 1
        cut = int(breaks[k * stride - 1])
        self._parse(buf[:cut], final=False)
        self.line += k * stride
        return buf[cut + 1:]

    def _parse(self, data: bytes, final: bool) -> None:
        """Parse whole frames (``final``: the rest of the file, which may end in blank lines or a cut frame)."""
        path, base = self.path, self.line
        _check_text(data, path, base)
        # Line offsets from one numpy scan; the text is cut per frame, not per line (60,000 line objects
        # cost more to create and join again than the parse itself, measured).
        buf = np.frombuffer(data, np.uint8)
        breaks = np.flatnonzero(buf == 10)
        line_start = np.concatenate(([0], breaks + 1))
        line_end = np.append(breaks, len(data))
        end = len(line_start)
        if final:
            while end and not data[line_start[end - 1]:line_end[end - 1]].strip():
                end -= 1
        last_line_ended = end < len(line_start) or not final
        line_start, line_end = line_start[:end], line_end[:end]
        n_total = end
        del breaks

        def line(i: int) -> bytes:
            return data[line_start[i]:line_end[i]]

        def all_lines() -> list[bytes]:  # for diagnosing problems only
            return data.split(b"\n")[:end]

        n = self.n
        # every frame's count line is compared with the file's first one, not with this piece's first
        # line: a piece may start at a damaged count line, which must not become the yardstick
        first = self.count_line
        where = _Where(path, base, n + 2, n)
        stride = n + 2
        n_full, rem = divmod(n_total, stride)

        head_start, head_end = line_start[0::stride], line_end[0::stride]
        same = (head_end - head_start) == len(first)
        if same.any():
            gathered = buf[head_start[same][:, None] + np.arange(len(first))]
            same[same] = (gathered == np.frombuffer(first, np.uint8)).all(axis=1)
        if not same.all():
            lines = all_lines()
            c0 = first.strip()
            for k in np.flatnonzero(~same).tolist():
                if lines[k * stride].strip() != c0:
                    if k == len(head_start) - 1 and rem == 1 and not last_line_ended:
                        break  # the count line itself is cut short: a truncated last frame
                    if _COUNT.fullmatch(lines[k * stride]) and int(lines[k * stride]) == n:
                        continue  # the same count written with other spacing
                    _frame_boundary_error(lines, k, n, where)

        cut = False
        if rem == 0 and not last_line_ended and n_full:
            # no final line break: the last atom line may have been cut mid-way.  Evidence: fewer values
            # than the first atom line, or a shorter line in a file whose other atom lines (at least 8)
            # all have one length (fixed-width output, as dynamics codes write).
            last, ref = line(n_total - 1), line(2)
            cut = len(last.split()) < len(ref.split())
            if not cut and n_full * n > 8:
                widths = (line_end - line_start).reshape(n_full, stride)[:, 2:].ravel()[:-1]
                cut = bool((widths == widths[0]).all() and len(last) < widths[0])
            if cut:
                n_full, rem = n_full - 1, stride
        if rem:
            got = max(rem - 2, 0)
            first_ln = base + n_full * stride + 1
            if cut:
                msg = (f"the last frame (from line {first_ln}) is incomplete: its last line (line {base + n_total}) "
                       "is cut short and the file has no final line break")
            else:
                msg = (f"the last frame (from line {first_ln}) is incomplete: the file ends at line "
                       f"{base + n_total} after {got} of {n} atom lines")
            before = n_full + sum(p.n_frames for p in self.parts)
            if before == 0:
                raise TrajectoryFileError(path, msg + " and there is no complete frame to load; check the atom "
                                          f"count on line {base + 1} or whether the file was cut short",
                                          base + n_total)
            _partial(path, msg + f"; loaded the {before} complete frame{'s' if before != 1 else ''} before it",
                     self.warnings)
        if n_full == 0:
            return

        span = n_full * stride
        comments = [data[a:b] for a, b in zip(line_start[1:span:stride].tolist(), line_end[1:span:stride].tolist())]
        atoms_from = line_start[2:span:stride].tolist()
        atoms_to = line_end[stride - 1:span:stride].tolist()
        first_atom_line = line(2)
        del line_start, line_end, head_start, head_end
        block = b"\n".join([data[a:b] for a, b in zip(atoms_from, atoms_to)])
        del atoms_from, atoms_to
        n_lines = n_full * n
        meta = parse_comments(comments, self.comment_format)
        del comments
        props = meta.properties
        first_props = None
        if props is not None:
            differ = np.flatnonzero(props.codes != props.codes[0])
            if differ.size:
                k = int(differ[0])
                raise TrajectoryFileError(
                    path, f"frame {k + 1 + sum(p.n_frames for p in self.parts)} declares different per-atom columns "
                    "(Properties=) than frame 1; this reader needs the same columns in every frame",
                    base + k * stride + 2)
            first_props = props[0]
        if self.parts and first_props != self.parts[0].props:
            raise TrajectoryFileError(
                path, f"frame {sum(p.n_frames for p in self.parts) + 1} declares different per-atom columns "
                "(Properties=) than frame 1; this reader needs the same columns in every frame", base + 2)
        if self.cols is None:
            cols = _layout(first_props, path, base + 2)
            if first_props is None:
                n_first = len(first_atom_line.split())
                if n_first < 4:
                    raise TrajectoryFileError(path, f"this atom line has {n_first} values; an atom line needs an "
                                              "element and three coordinates", where.line_of(0))
                if n_first > 4:
                    cols = cols + [_Column(f"_col{i + 1}", "R", 1, i) for i in range(4, n_first)]  # parsed, not kept
            self.cols = cols
        cols = self.cols

        parsed = None
        if self.fixed_width:
            try:
                parsed = _parse_fixed(block, n_lines, cols)
            except _Slow:
                parsed = None
        if parsed is None:
            parsed = _parse_tokens(block, n_lines, cols, where)
        del block

        pos_name = "pos" if "pos" in parsed else "positions"
        positions = parsed.pop(pos_name)
        if positions.shape[1] != 3:
            raise TrajectoryFileError(path, "the pos column must have 3 components (x, y, z)", base + 2)
        finite = np.isfinite(positions)
        if not finite.all():
            i, axis = (int(x) for x in np.argwhere(~finite)[0])
            raise TrajectoryFileError(
                path, f"the {_AXES[axis]} coordinate is {positions[i, axis]} (not a finite number); the run "
                "probably blew up here — cut the file before this frame or exclude the run", where.line_of(i))
        del finite
        positions = positions.reshape(n_full, n, 3).astype(self.dtype, copy=False)
        if "species" in parsed:
            numbers = _numbers(parsed.pop("species"), n_full, n, where)
        else:
            z = parsed.pop("Z").reshape(n_full, n)
            numbers = _numbers(np.char.encode(z.astype(np.int64).astype(str)).ravel(), n_full, n, where)
        if self.parts and not np.array_equal(numbers, self.parts[0].numbers):
            a = int(np.flatnonzero(numbers != self.parts[0].numbers)[0])
            z0, z1 = int(self.parts[0].numbers[a]), int(numbers[a])
            raise TrajectoryFileError(
                path, f"the element order changes: atom {a + 1} is {chemical_symbols[z0]} in frame 1 but "
                f"{chemical_symbols[z1]} in frame {sum(p.n_frames for p in self.parts) + 1}; every frame must list "
                "the same atoms in the same order", base + 3 + a)
        arrays = {}
        for c in cols:
            if c.name in parsed and not c.name.startswith("_col"):
                a = parsed[c.name]
                if c.kind == "I":
                    a = a.astype(np.int64)
                elif c.kind == "S":
                    a = np.char.strip(np.char.decode(a, "utf-8", "replace"))
                if a.ndim == 2 and a.shape[1] == 1:
                    a = a[:, 0]
                arrays[c.name] = a.reshape((n_full, n) + a.shape[1:])
        self.parts.append(_Part(base + 1, n_full, positions, numbers, meta, arrays, first_props))

    def block(self, sha256: str, warnings: list[str]) -> FrameBlock:
        """All parts joined into one FrameBlock (each part's arrays let go as soon as they are copied)."""
        parts, path = self.parts, self.path
        warnings = list(warnings) + self.warnings
        stride = self.n + 2
        frame_lines = np.concatenate([p.first_line + np.arange(p.n_frames, dtype=np.int64) * stride for p in parts])
        meta = merge_comments([p.meta for p in parts])
        _comment_warnings(meta, path, lambda k: int(frame_lines[k]) + 1, warnings, self.comment_format)
        numbers = parts[0].numbers
        if len(parts) == 1:
            positions, arrays = parts[0].positions, parts[0].arrays
        else:
            total = sum(p.n_frames for p in parts)
            positions = np.empty((total,) + parts[0].positions.shape[1:], dtype=parts[0].positions.dtype)
            arrays = {k: np.empty((total,) + v.shape[1:], dtype=v.dtype) for k, v in parts[0].arrays.items()
                      if v.dtype.kind != "U"}
            strings = {k: [] for k, v in parts[0].arrays.items() if v.dtype.kind == "U"}
            at = 0
            for p in parts:
                positions[at:at + p.n_frames] = p.positions
                for k, v in p.arrays.items():
                    if k in strings:
                        strings[k].append(v)
                    else:
                        arrays[k][at:at + p.n_frames] = v
                at += p.n_frames
                p.positions, p.arrays = None, {}
            for k, v in strings.items():
                arrays[k] = np.concatenate(v)
        self.parts = []
        return FrameBlock(path=path, numbers=numbers, positions=positions, info=meta.info, text_info=dict(meta.text),
                          vectors=meta.vectors, arrays=arrays, frame_lines=frame_lines, sha256=sha256,
                          warnings=warnings)


def _size(n_bytes: int) -> str:
    for unit in ("bytes", "kB", "MB", "GB", "TB"):
        if n_bytes < 1000 or unit == "TB":
            return f"{n_bytes:.0f} {unit}" if unit == "bytes" else f"{n_bytes:.1f} {unit}"
        n_bytes /= 1000
    return ""


def _out_of_memory(path: Path, stored: int, text: int) -> TrajectoryFileError:
    extra = f", {_size(text)} of text decompressed so far" if text and text != stored else ""
    return TrajectoryFileError(
        path, f"there is not enough memory to read this file ({_size(stored)} on disk{extra}); close other "
        "programs, read the set on a machine with more memory, or split the file into shorter runs")


def parse_xyz(data: bytes, path: str | Path, *, sha256: str = "", dtype=np.float32,
              warnings: list[str] | None = None, fixed_width: bool = True,
              chunk_bytes: int = CHUNK_BYTES, comment_format=None) -> FrameBlock:
    """Parse the (decompressed) bytes of an XYZ / extended-XYZ file; see :func:`read_xyz`.

    ``fixed_width=False`` forces the general numeric path, and ``chunk_bytes`` sets how much text is
    parsed at a time (both for tests).
    """
    path = Path(path)
    try:
        reader = _FrameReader(path, dtype, fixed_width, chunk_bytes, comment_format)
        view = memoryview(data)
        reader.read(bytes(view[i:i + chunk_bytes]) for i in range(0, len(data), chunk_bytes))
        return reader.block(sha256, list(warnings or []))
    except MemoryError:
        raise _out_of_memory(path, len(data), len(data)) from None


def read_xyz(path: str | Path, *, dtype=np.float32, chunk_bytes: int = CHUNK_BYTES,
             comment_format=None) -> FrameBlock:
    """Read an XYZ or extended-XYZ file (optionally gzip/bzip2/xz-compressed) into a FrameBlock.

    ``comment_format`` (a :class:`~basinmark.core.io.free_form.CommentFormat`) reads numbers out of
    free-form comment lines.

    The file is streamed: decompressed and parsed piece by piece, so that memory holds the results
    and one piece of text at a time, never the whole text.
    """
    path = as_path(path)
    stream = ByteStream(path, min(RAW_PIECE, chunk_bytes))
    try:
        reader = _FrameReader(path, dtype, True, chunk_bytes, comment_format)
        reader.read(iter(stream))
        block = reader.block(stream.sha256, stream.warnings)
        block.content_sha256 = stream.content_sha256
        return block
    except MemoryError:
        raise _out_of_memory(path, stream.size, stream.produced) from None
