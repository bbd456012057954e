"""Trajectory readers: our vectorised XYZ / extended-XYZ reader and an ase fallback, behind one call.

>>> block = read_frames("run001.fwd.xyz.gz")      # doctest: +SKIP
>>> block.positions.shape, block.info["time"][:3]  # doctest: +SKIP
"""

from basinmark.core.io.registry import FrameBlock, load_bytes, read_frames, reader_for, split_suffix

__all__ = ["FrameBlock", "read_frames", "reader_for", "load_bytes", "split_suffix"]
