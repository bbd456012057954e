"""The hash a run's labels are bound to: SHA-256 of each file's decompressed content, and of how it was read.

* :func:`content_sha256` hashes what a file holds, not how it is stored: gzip, bzip2 and xz are undone
  first (as :func:`basinmark.core.io.registry.load_bytes` undoes them for reading, members one after
  the other included), so re-compressing a file, or storing it plain, keeps its labels valid.
* :func:`reading_digest` hashes the settings that decide which numbers were read from the files: unit
  factors, the comment key used for each value, the time step when the files carry no times, and the time
  convention of backward halves.  It is folded into :attr:`Trajectory.content_hash`, so a manifest change
  that reads the same files differently marks their labels as "data changed", while an edit that reads the
  same values (another candidate key the files lack, a new name, a TST estimate) changes nothing.

Streaming rather than one-shot decompression keeps memory flat for large files (the reader has its
own copy of the decompressed bytes at the time this runs).
"""

from __future__ import annotations

import bz2
import hashlib
import json
import lzma
import zlib
from pathlib import Path

from basinmark.core.io.registry import sniff_compression

CHUNK = 1 << 20


def _decompressor(kind: str):
    if kind == "gzip":
        return zlib.decompressobj(wbits=31)
    if kind == "bzip2":
        return bz2.BZ2Decompressor()
    return lzma.LZMADecompressor()


def content_sha256(path: str | Path) -> str:
    """SHA-256 of the file's content after decompression (of the bytes themselves when not compressed).

    A stream cut short hashes the part that decompressed (what the reader reads); trailing bytes after the
    last complete member that do not start another member are ignored, as the reader ignores them.
    """
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        pending = fh.read(CHUNK)
        kind = sniff_compression(pending)
        if kind is None:
            while pending:
                h.update(pending)
                pending = fh.read(CHUNK)
            return h.hexdigest()
        d = _decompressor(kind)
        while pending:
            try:
                h.update(d.decompress(pending))
            except (zlib.error, OSError, EOFError, lzma.LZMAError, ValueError):
                break  # damaged data: the reader reports it; the hash covers what decoded
            if d.eof:
                rest = d.unused_data
                if kind == "gzip":
                    rest = rest.lstrip(b"\x00")  # padding after a gzip member is allowed
                while len(rest) < 6:
                    more = fh.read(CHUNK)
                    if not more:
                        break
                    rest += more.lstrip(b"\x00") if kind == "gzip" and not rest else more
                if not rest or sniff_compression(rest) != kind:
                    break  # the end, or trailing bytes that are not another member
                d = _decompressor(kind)
                pending = rest
                continue
            pending = fh.read(CHUNK)
    return h.hexdigest()


def reading_digest(recipe: dict) -> str:
    """Short stable hash of a reading recipe (a JSON-able dict of the settings that decided the values read)."""
    text = json.dumps(recipe, sort_keys=True, separators=(",", ":"), default=repr)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:16]
