"""Reader memory benchmark: peak memory of reading one long file against the float32 size of its coordinates.

Run: ``.venv/bin/python bench/bench_reader_memory.py``.  Writes a gzip-compressed
XYZ file of 200,000 frames × 3 atoms whose comment lines carry a word that
changes every frame (``frame 17 time=8.5``), reads it with our reader under
``tracemalloc`` (which counts numpy's arrays as well as Python objects) and
prints the peak against the float32 size of the coordinates.  Target: peak
below 3 × that size plus a fixed overhead of 16 MB (the working memory of one
2 MB piece of text; common practice, no source).  Before the reader kept
words and text compactly, this file took 24 GB.  Also prints the read time
without tracemalloc (which slows every allocation).  Takes about a minute.
"""

from __future__ import annotations

import gzip
import sys
import tempfile
import time
import tracemalloc
import warnings
from pathlib import Path

import numpy as np

from basinmark.core.io.xyz import CHUNK_BYTES, read_xyz

N_FRAMES = 200_000
FIXED_OVERHEAD = 16e6


def write_file(path: Path, n_frames: int = N_FRAMES) -> None:
    """A made-up bent triatomic (one O, two H) with a changing word on every comment line."""
    rng = np.random.default_rng(11)
    base = np.array([[0.0, 0.0, 0.0], [0.0, 0.76, 0.59], [0.0, -0.76, 0.59]])
    xyz = (base[None] + rng.normal(scale=0.03, size=(n_frames, 3, 3))).reshape(n_frames, 9)
    rows = ["3\nframe %d time=%.1f\nO %12.6f %12.6f %12.6f\nH %12.6f %12.6f %12.6f\nH %12.6f %12.6f %12.6f\n"
            % ((i, 0.5 * i) + tuple(xyz[i])) for i in range(n_frames)]
    path.write_bytes(gzip.compress("".join(rows).encode(), compresslevel=6))


def main() -> int:
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "long.xyz.gz"
        write_file(path)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            t0 = time.perf_counter()
            read_xyz(path)
            wall = time.perf_counter() - t0
            tracemalloc.start()
            block = read_xyz(path)
            _, peak = tracemalloc.get_traced_memory()
            tracemalloc.stop()
        f32 = block.positions.size * 4
        bound = 3 * f32 + FIXED_OVERHEAD
        print(f"{path.name}: {path.stat().st_size / 1e6:.1f} MB on disk, {block.n_frames} frames x "
              f"{block.n_atoms} atoms; pieces of {CHUNK_BYTES / 1e6:.1f} MB of text")
        print(f"  float32 coordinates     {f32 / 1e6:8.1f} MB")
        print(f"  peak while reading      {peak / 1e6:8.1f} MB  = {peak / f32:.2f} x the float32 coordinates")
        print(f"  bound 3 x coords + {FIXED_OVERHEAD / 1e6:.0f} MB {bound / 1e6:8.1f} MB  "
              f"({'within' if peak < bound else 'ABOVE THE BOUND'})")
        print(f"  read time (no tracemalloc) {wall:.2f} s")
        print(f"  notes: {block.warnings}")
    return 0 if peak < bound else 1


if __name__ == "__main__":
    sys.exit(main())
