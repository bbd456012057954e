"""Reader benchmark: our XYZ reader against ``ase.io.read(path, index=":")`` on the same extended-XYZ file.

Run: ``.venv/bin/python bench/bench_reader.py``.  Writes (with ase.io.write)
5,000 frames of a 12-atom model system with time/epot/ekin comment keys into a
temporary folder, reads it with both readers in this process (best of 3 each)
and prints throughput in MB/s of file bytes and the ratio (target >= 20x).  The
runs of the two readers alternate, so a busy machine slows both alike.
The gzip-compressed comparison uses a 1,000-frame file and a single ase run:
``ase.io.read`` on a compressed file slows down faster than linearly with the
number of frames (measured: about 5 s for 1,000 frames, over a minute for
5,000), so the full file would not fit in the time budget.  Takes well under a
minute.
"""

from __future__ import annotations

import gzip
import sys
import tempfile
import time
from pathlib import Path

import ase.io
import numpy as np
from ase import Atoms

from basinmark.core.io import read_frames
from basinmark.core.io.registry import load_bytes
from basinmark.core.io.xyz import parse_xyz

N_FRAMES = 5000
N_FRAMES_GZIP = 1000
TARGET = 20.0


def make_frames(n_frames: int = N_FRAMES) -> list[Atoms]:
    """A made-up 12-atom system (C6H4ClO) jiggling around a fixed shape, with time and energies."""
    rng = np.random.default_rng(7)
    base = rng.normal(scale=1.5, size=(12, 3))
    frames = []
    for i in range(n_frames):
        a = Atoms("C6H4ClO", positions=base + rng.normal(scale=0.05, size=(12, 3)))
        a.info["time"] = 0.5 * i
        a.info["epot"] = -10.0 + 0.01 * np.sin(i / 50)
        a.info["ekin"] = 0.3 + 0.01 * np.cos(i / 50)
        frames.append(a)
    return frames


def best_of_interleaved(ours, ref, repeat: int = 3, ref_repeat: int = 3) -> tuple[float, float]:
    """Best wall time of each, the two runs taking turns so that both see the same machine load."""
    t_ours, t_ref = float("inf"), float("inf")
    for i in range(max(repeat, ref_repeat)):
        if i < repeat:
            t0 = time.perf_counter()
            ours()
            t_ours = min(t_ours, time.perf_counter() - t0)
        if i < ref_repeat:
            t0 = time.perf_counter()
            ref()
            t_ref = min(t_ref, time.perf_counter() - t0)
    return t_ours, t_ref


def compare(path: Path, label: str, ref_repeat: int = 3) -> float:
    size_mb = path.stat().st_size / 1e6
    ours, ref = best_of_interleaved(lambda: read_frames(path), lambda: ase.io.read(path, index=":"),
                                    ref_repeat=ref_repeat)
    block = read_frames(path)
    frames = ase.io.read(path, index=":")
    # the two readers must agree, else the timing means nothing
    assert block.positions.shape == (len(frames), 12, 3)
    assert np.allclose(block.positions, np.stack([f.positions for f in frames]), atol=1e-5)
    ratio = ref / ours
    print(f"{label}: {path.name}, {size_mb:.2f} MB on disk, {block.n_frames} frames x {block.n_atoms} atoms")
    print(f"  ours          {ours * 1e3:8.1f} ms  {size_mb / ours:8.1f} MB/s  (best of 3)")
    print(f"  ase.io.read   {ref * 1e3:8.1f} ms  {size_mb / ref:8.1f} MB/s  (best of {ref_repeat})")
    print(f"  ours / ase.io.read = {ratio:.1f}x (target >= {TARGET:g}x){'' if ratio >= TARGET else '  BELOW TARGET'}")
    if ref_repeat > 1:
        cpu_ours = min(_cpu(lambda: read_frames(path)) for _ in range(3))
        cpu_ref = min(_cpu(lambda: ase.io.read(path, index=":")) for _ in range(2))
        print(f"  for information: CPU time (less sensitive to other processes): ours {cpu_ours * 1e3:.1f} ms, "
              f"ase.io.read {cpu_ref * 1e3:.0f} ms, {cpu_ref / cpu_ours:.1f}x")
        data, _, _ = load_bytes(path)
        general = min(_timed(lambda: parse_xyz(data, path, fixed_width=False)) for _ in range(3))
        print(f"  for information: our general path (irregular spacing), parsing only: {general * 1e3:.1f} ms, "
              f"{ref / general:.1f}x ase.io.read")
    return ratio


def _cpu(fn) -> float:
    t0 = time.process_time()
    fn()
    return time.process_time() - t0


def _timed(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def main() -> int:
    with tempfile.TemporaryDirectory() as tmp:
        plain = Path(tmp) / "bench.extxyz"
        ase.io.write(plain, make_frames(), format="extxyz")
        small = Path(tmp) / "bench_small.extxyz"
        ase.io.write(small, make_frames(N_FRAMES_GZIP), format="extxyz")
        packed = Path(tmp) / "bench_small.extxyz.gz"
        packed.write_bytes(gzip.compress(small.read_bytes(), compresslevel=6))
        ratios = [compare(plain, "extended XYZ"),
                  compare(packed, "gzip-compressed extended XYZ (MB/s of compressed bytes)", ref_repeat=1)]
    return 0 if min(ratios) >= TARGET else 1


if __name__ == "__main__":
    sys.exit(main())
