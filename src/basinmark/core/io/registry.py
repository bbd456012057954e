"""What every reader returns (:class:`FrameBlock`), file bytes with decompression, and the suffix registry.

A file name's compression suffix (``.gz``, ``.bz2``, ``.xz``) is stripped before
its format suffix is looked up; ``.xyz`` and ``.extxyz`` go to our own reader,
anything else to ase.  Compressed content is recognised by its magic bytes as
well, so a gzip file named ``run.xyz`` still reads.
"""

from __future__ import annotations

import bz2
import hashlib
import importlib
import lzma
import os
import warnings as _warnings
import zlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Sequence

import numpy as np

from basinmark.core.errors import PartialReadWarning, TrajectoryFileError

try:  # ISA-L's inflate: the same bytes as zlib gives, in half the time (measured on the scale benchmark's gzipped
    # halves: 0.41 against 0.87 ms per file, decompression being a quarter of a cold open); zlib where it is missing
    from isal import isal_zlib as _inflate
except ImportError:  # pragma: no cover (a platform without its wheels)
    _inflate = zlib
#: what a damaged gzip stream raises, whichever inflates it
_INFLATE_ERRORS = (zlib.error,) if _inflate is zlib else (zlib.error, _inflate.error)


@dataclass
class FrameBlock:
    """All frames of one trajectory file, as arrays.

    ``info`` holds the comment-line keys whose values are all numbers (float64,
    NaN in frames that lack the key); lists of numbers of one shape (``dipole=[0.1,
    0.2, 0.3]``) go to ``vectors`` as ``(frames, ...)`` float64; other keys go to
    ``text_info`` as sequences of strings, one per frame, stored compactly
    ("" where missing; a bare word is a flag "T"; booleans stay "T"/"F"; a
    comment line without any ``key=value`` is kept whole under ``"comment"``,
    unless it changes on nearly every frame, which is said in ``warnings``).
    ``Properties``, ``Lattice`` and ``pbc`` are not repeated in either.
    ``arrays`` holds the per-atom columns of ``Properties=`` other than species
    and pos (R as float64, I as int64, L as bool, S as str).
    """

    path: Path
    numbers: np.ndarray  # (n_atoms,) int16 atomic numbers
    positions: np.ndarray  # (n_frames, n_atoms, 3) Å
    info: dict[str, np.ndarray] = field(default_factory=dict)  # per-frame numeric keys, float64, NaN if missing
    text_info: dict[str, Sequence[str]] = field(default_factory=dict)  # per-frame non-numeric keys ("" if missing)
    arrays: dict[str, np.ndarray] = field(default_factory=dict)  # extra per-atom columns, (F, N) or (F, N, k)
    vectors: dict[str, np.ndarray] = field(default_factory=dict)  # per-frame lists of numbers, (F, ...), NaN if missing
    frame_lines: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))  # 1-based start line per frame
    sha256: str = ""  # SHA-256 of the file's bytes as stored on disk
    warnings: list[str] = field(default_factory=list)
    content_sha256: str = ""  # SHA-256 of the decompressed content, when the reader streamed it ("" if not)

    @property
    def n_frames(self) -> int:
        return int(self.positions.shape[0])

    @property
    def n_atoms(self) -> int:
        return int(self.positions.shape[1])


#: compression suffix -> name
COMPRESSION_SUFFIXES = {".gz": "gzip", ".bz2": "bzip2", ".xz": "xz"}
_MAGIC = ((b"\x1f\x8b", "gzip"), (b"BZh", "bzip2"), (b"\xfd7zXZ\x00", "xz"))
_LONGEST_MAGIC = max(len(magic) for magic, _ in _MAGIC)

#: format suffix -> "module:function" (resolved lazily, so readers may import this module)
READERS: dict[str, str] = {
    ".xyz": "basinmark.core.io.xyz:read_xyz",
    ".extxyz": "basinmark.core.io.xyz:read_xyz",
}
FALLBACK = "basinmark.core.io.via_ase:read_ase"


def as_path(path) -> Path:
    """``path`` as a Path, without building a new one when it is one already (five were built per file read:
    23 ms of a 0.86 s profile of 200 runs)."""
    return path if isinstance(path, Path) else Path(path)


def split_suffix(path: str | Path) -> tuple[str, str | None]:
    """``(format suffix, compression or None)`` of a file name, e.g. ``('.xyz', 'gzip')`` for ``a.fwd.xyz.gz``."""
    suffixes = [s.lower() for s in as_path(path).suffixes]
    compression = None
    if suffixes and suffixes[-1] in COMPRESSION_SUFFIXES:
        compression = COMPRESSION_SUFFIXES[suffixes.pop()]
    return (suffixes[-1] if suffixes else ""), compression


def sniff_compression(raw: bytes) -> str | None:
    """Compression recognised from the first bytes, or None."""
    for magic, name in _MAGIC:
        if raw.startswith(magic):
            return name
    return None


def _decompress(raw: bytes, kind: str) -> tuple[bytes, bool]:
    """Decompress as much as possible; returns (data, complete).

    Uses streaming decompressors rather than ``gzip.decompress`` so that a
    stream cut short (a run killed while writing) still yields its intact part.
    Concatenated members/streams are followed, as gzip/bzip2/xz tools do.
    """
    out: list[bytes] = []
    rest = raw
    while rest:
        if kind == "gzip":
            d = _inflate.decompressobj(wbits=31)
        elif kind == "bzip2":
            d = bz2.BZ2Decompressor()
        else:
            d = lzma.LZMADecompressor()
        out.append(d.decompress(rest))
        if not d.eof:
            return b"".join(out), False
        rest = d.unused_data
        if kind == "gzip":
            rest = rest.lstrip(b"\x00")  # padding after a gzip member is allowed
        if rest and sniff_compression(rest) != kind:
            break  # trailing garbage after the last member: keep what decoded
    return b"".join(out), True


def load_bytes(path: str | Path) -> tuple[bytes, str, list[str]]:
    """Read a file: ``(decompressed bytes, SHA-256 of the stored bytes, warnings)``.

    Raises :class:`TrajectoryFileError` when the file is missing or its
    compressed data is damaged beyond the first byte.
    """
    path = Path(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise TrajectoryFileError(path, "the file does not exist") from None
    except IsADirectoryError:
        raise TrajectoryFileError(path, "this is a folder, not a trajectory file") from None
    except OSError as exc:
        raise TrajectoryFileError(path, f"the file could not be read ({exc.strerror or exc})") from None
    sha = hashlib.sha256(raw).hexdigest()
    warnings: list[str] = []
    kind = sniff_compression(raw)
    named = split_suffix(path)[1]
    if kind is None:
        if named is not None and raw:
            warnings.append(f"{path.name} is named as {named}-compressed but is not; read it as plain text.")
        return raw, sha, warnings
    try:
        data, complete = _decompress(raw, kind)
    except (*_INFLATE_ERRORS, OSError, EOFError, lzma.LZMAError, ValueError) as exc:
        raise TrajectoryFileError(
            path, f"the {kind} data is damaged and cannot be decompressed ({exc}); recopy the file from its source"
        ) from None
    if not complete:
        message = (f"the {kind} data ends early (the file was cut short); read the {len(data)} bytes that "
                   "decompressed")
        warnings.append(message)
        _warnings.warn(f"{path}: {message}", PartialReadWarning, stacklevel=3)
    return data, sha, warnings


#: stored bytes read at a time, and the most decompressed bytes handed on at a time, when a file is streamed
RAW_PIECE = 1 << 20


def _decoder(kind: str):
    if kind == "gzip":
        return _inflate.decompressobj(wbits=31)
    if kind == "bzip2":
        return bz2.BZ2Decompressor()
    return lzma.LZMADecompressor()


class ByteStream:
    """A file's (decompressed) bytes in pieces of at most ``piece`` bytes, so that a reader never holds it whole.

    Iterate once; afterwards ``sha256`` is the SHA-256 of the stored bytes, ``content_sha256`` that of the
    decompressed bytes handed out (as :func:`basinmark.core.content_hash.content_sha256` computes it, so a
    set's loader need not decompress the file a second time to hash it), ``warnings`` holds what
    :func:`load_bytes` would warn (misnamed compression, data cut short) and ``size``/``produced`` the
    stored and decompressed sizes.  Opening errors and damaged data raise :class:`TrajectoryFileError`.
    """

    def __init__(self, path: str | Path, piece: int | None = None):
        self.path = as_path(path)
        self.piece = piece or RAW_PIECE
        self.sha256 = ""
        self.content_sha256 = ""
        self.warnings: list[str] = []
        self.produced = 0
        try:
            self._fh = open(self.path, "rb")
        except FileNotFoundError:
            raise TrajectoryFileError(self.path, "the file does not exist") from None
        except IsADirectoryError:
            raise TrajectoryFileError(self.path, "this is a folder, not a trajectory file") from None
        except OSError as exc:
            raise TrajectoryFileError(self.path, f"the file could not be read ({exc.strerror or exc})") from None
        try:
            self.size = os.fstat(self._fh.fileno()).st_size
        except OSError:
            self.size = 0
        self._hash = hashlib.sha256()

    def _read(self) -> bytes:
        try:
            chunk = self._fh.read(self.piece)
        except OSError as exc:
            raise TrajectoryFileError(self.path, f"the file could not be read ({exc.strerror or exc})") from None
        self._hash.update(chunk)
        return chunk

    def __iter__(self):
        content = hashlib.sha256()
        self._plain = False
        try:
            for piece in self._pieces():
                if not self._plain:  # a plain file's content is its stored bytes: hashed once, below
                    content.update(piece)
                yield piece
            while self._read():  # hash whatever was not decompressed (trailing bytes)
                pass
            self.sha256 = self._hash.hexdigest()
            self.content_sha256 = self.sha256 if self._plain else content.hexdigest()
        finally:
            self._fh.close()

    def _pieces(self):
        data = self._read()
        while len(data) < _LONGEST_MAGIC:  # a read smaller than a signature: sniff the whole signature
            more = self._read()
            if not more:
                break
            data += more
        kind = sniff_compression(data)
        named = split_suffix(self.path)[1]
        if kind is None:
            self._plain = True
            if named is not None and data:
                self.warnings.append(f"{self.path.name} is named as {named}-compressed but is not; read it as "
                                     "plain text.")
            while data:
                self.produced += len(data)
                yield data
                data = self._read()
            return
        try:
            yield from self._decompressed(data, kind)
        except (*_INFLATE_ERRORS, OSError, EOFError, lzma.LZMAError, ValueError) as exc:
            raise TrajectoryFileError(
                self.path, f"the {kind} data is damaged and cannot be decompressed ({exc}); recopy the file from "
                "its source") from None

    def _decompressed(self, data: bytes, kind: str):
        """Members/streams followed one after another, as gzip/bzip2/xz tools do; output bounded per step."""
        d = _decoder(kind)
        while True:
            out = d.decompress(data, self.piece)
            data = d.unconsumed_tail if kind == "gzip" else b""
            if out:
                self.produced += len(out)
                yield out
            if d.eof:
                # all input past the end of the member is in unused_data (zlib leaves a copy of it in
                # unconsumed_tail when the output was limited: adding both doubled bytes and broke the next member)
                rest = d.unused_data
                if kind == "gzip":
                    rest = rest.lstrip(b"\x00")  # padding after a gzip member is allowed
                # the next member's first bytes may straddle two reads: sniff only a whole signature (a member
                # starting a byte before the end of a read was taken for trailing garbage and dropped)
                while len(rest) < _LONGEST_MAGIC:
                    more = self._read()
                    if not more:
                        break
                    rest += more
                    if kind == "gzip":
                        rest = rest.lstrip(b"\x00")
                if not rest or sniff_compression(rest) != kind:
                    return  # the end, or trailing garbage after the last member: keep what decoded
                d, data = _decoder(kind), rest
                continue
            need_input = (not data and len(out) < self.piece) if kind == "gzip" else d.needs_input
            if need_input:
                data = self._read()
                if not data:
                    message = (f"the {kind} data ends early (the file was cut short); read the {self.produced} "
                               "bytes that decompressed")
                    self.warnings.append(message)
                    _warnings.warn(f"{self.path}: {message}", PartialReadWarning, stacklevel=4)
                    return


def _resolve(target: str) -> Callable[..., FrameBlock]:
    module, func = target.split(":")
    return getattr(importlib.import_module(module), func)


def reader_for(path: str | Path) -> Callable[..., FrameBlock]:
    """The reader function for a file name (our XYZ reader or the ase fallback)."""
    suffix, _ = split_suffix(path)
    return _resolve(READERS.get(suffix, FALLBACK))


def read_frames(path: str | Path, *, dtype=np.float32, comment_format=None) -> FrameBlock:
    """Read every frame of a trajectory file into a :class:`FrameBlock`.

    ``comment_format`` (a :class:`~basinmark.core.io.free_form.CommentFormat`, from a set's manifest)
    reads numbers out of free-form comment lines of XYZ files; other formats have no such lines.

    Raises :class:`~basinmark.core.errors.TrajectoryFileError` (file, line, plain
    sentence) when the file cannot be used; a truncated last frame is dropped
    with a :class:`~basinmark.core.errors.PartialReadWarning` instead.
    """
    reader = reader_for(path)
    if comment_format is not None and split_suffix(path)[0] in (".xyz", ".extxyz"):
        return reader(as_path(path), dtype=dtype, comment_format=comment_format)
    return reader(as_path(path), dtype=dtype)
