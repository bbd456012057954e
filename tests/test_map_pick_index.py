"""Picking on the map through the boxes of path pieces (map_data.PathIndex) gives what a brute-force numpy search over every
segment gives (map_data.nearest_on_paths, itself checked against a plain loop in test_gui_map.py), for random
walks with gaps, single-frame runs, long jumps and axes of very different scales."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from basinmark.gui.map_data import MapAxis, MapData, PathIndex, nearest_on_paths


def _walks(rng: np.random.Generator, n_runs: int, aspect: float) -> MapData:
    lengths = rng.integers(1, 120, size=n_runs)
    lengths[rng.random(n_runs) < 0.05] = 1          # some runs of one frame
    ends = np.cumsum(lengths)
    n = int(ends[-1])
    steps = rng.normal(scale=0.05, size=(n, 2))
    jumps = rng.random(n) < 0.003                    # a few long jumps (as a dihedral wrapping round)
    steps[jumps] *= 200.0
    xy = np.cumsum(steps, axis=0)
    xy[:, 1] *= aspect
    xy[rng.random(n) < 0.01] = np.nan               # frames whose monitor could not be measured
    return MapData([f"r{i}" for i in range(n_runs)], xy[:, 0].copy(), xy[:, 1].copy(), ends - lengths, ends,
                   MapAxis("a", (1, 2)), MapAxis("b", (1, 3)))


@settings(max_examples=25, deadline=None)
@given(st.integers(0, 10_000), st.sampled_from([1.0, 0.01, 50.0]), st.floats(0.3, 30.0), st.sampled_from([1, 3, 32]))
def test_index_finds_what_every_segment_search_finds(seed, aspect, zoom, chunk):
    rng = np.random.default_rng(seed)
    data = _walks(rng, 60, aspect)
    index = PathIndex(data) if chunk == PathIndex.CHUNK else type("Sized", (PathIndex,), {"CHUNK": chunk})(data)
    fx, fy = np.isfinite(data.x), np.isfinite(data.y)
    span_x = np.ptp(data.x[fx]) or 1.0
    span_y = np.ptp(data.y[fy]) or 1.0
    sx, sy = span_x / (800 * zoom), span_y / (600 * zoom * rng.uniform(0.2, 5.0))  # any aspect on screen
    radius = 8.0
    for _ in range(40):
        if rng.random() < 0.5:   # on or near a path, else anywhere
            k = int(rng.choice(np.flatnonzero(fx & fy)))
            px, py = data.x[k] + rng.normal(scale=6 * sx), data.y[k] + rng.normal(scale=6 * sy)
        else:
            px = rng.uniform(np.nanmin(data.x), np.nanmax(data.x))
            py = rng.uniform(np.nanmin(data.y), np.nanmax(data.y))
        brute = nearest_on_paths(data, px, py, sx, sy)
        got = index.nearest(px, py, sx, sy, radius)
        if brute is None or brute[2] > radius:
            assert got is None
            continue
        assert got is not None
        assert got[2] == pytest.approx(brute[2], rel=1e-9, abs=1e-9)
        if (got[0], got[1]) != (brute[0], brute[1]):   # only a tie may pick another frame
            frame = data.starts[got[0]] + got[1]
            d = np.hypot((data.x[frame] - px) / sx, (data.y[frame] - py) / sy)
            assert d <= radius + 1.0


def test_index_of_paths_without_any_finite_point_picks_nothing():
    data = MapData(["r0"], np.full(5, np.nan), np.full(5, np.nan), np.array([0]), np.array([5]),
                   MapAxis("a", (1, 2)), MapAxis("b", (1, 3)))
    assert PathIndex(data).nearest(0.0, 0.0, 0.01, 0.01) is None


def test_index_is_built_once_per_data():
    data = _walks(np.random.default_rng(1), 10, 1.0)
    assert data.pick_index(build=False) is None
    first = data.pick_index()
    assert data.pick_index() is first and data.pick_index(build=False) is first


@pytest.mark.parametrize("piece,chunk", [(1, 32), (2, 4), (7, 3), (64, 32), (100, 1)])
def test_index_built_in_small_pieces_is_the_same(piece, chunk, monkeypatch):
    """Built a few points per numpy call (as large maps are, to keep the window's thread free): the same
    segments, boxes and answers as built whole."""
    data = _walks(np.random.default_rng(5), 30, 1.0)
    monkeypatch.setattr(PathIndex, "CHUNK", chunk)
    whole = PathIndex(data)
    monkeypatch.setattr(PathIndex, "PIECE", piece)
    pieces = PathIndex(data)
    assert np.array_equal(pieces.seg_ok, whole.seg_ok)
    np.testing.assert_array_equal(pieces.boxes, whole.boxes)
    rng = np.random.default_rng(6)
    for _ in range(30):
        k = int(rng.integers(0, data.x.size))
        px, py = data.x[k] + rng.normal(scale=0.03), data.y[k] + rng.normal(scale=0.03)
        if np.isfinite(px) and np.isfinite(py):
            assert pieces.nearest(px, py, 0.005, 0.005) == whole.nearest(px, py, 0.005, 0.005)


def _crowd(n_runs: int, seed: int = 3, exact_copies: bool = False) -> MapData:
    """Many runs along nearly the same path (some exactly the same: ties): the middle of a dense map."""
    rng = np.random.default_rng(seed)
    base = np.cumsum(rng.normal(scale=0.05, size=(200, 2)), axis=0)
    offsets = rng.uniform(-0.1, 0.1, size=(n_runs, 1, 2))
    wiggle = rng.normal(scale=0.002, size=(n_runs, 200, 2))
    if exact_copies:
        offsets[::3] = 0.0
        wiggle[::3] = 0.0
    xy = (base[None] + offsets + wiggle).reshape(-1, 2)
    ends = np.arange(1, n_runs + 1) * 200
    return MapData([f"c{i}" for i in range(n_runs)], xy[:, 0].copy(), xy[:, 1].copy(), ends - 200, ends,
                   MapAxis("a", (1, 2)), MapAxis("b", (1, 3)))


def test_a_click_on_a_crowded_map_works_in_small_blocks():
    """Where thousands of paths pass near a click, the pieces near it are measured a block at a time: every array of
    the search stays small (measured at 10,000 runs: 9,900 page faults, ~40 MB of fresh memory, per click when the
    whole candidate set was measured at once)."""
    import tracemalloc

    data = _crowd(2000)
    index = PathIndex(data)
    sx = sy = 0.01
    px, py = data.x[100] + 0.003, data.y[100]
    brute = nearest_on_paths(data, px, py, sx, sy)
    tracemalloc.start()
    try:
        got = index.nearest(px, py, sx, sy, 8.0)
        _now, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert got is not None and got[:2] == brute[:2] and got[2] == pytest.approx(brute[2], rel=1e-12)
    hx, hy = 8 * sx, 8 * sy
    b = index.boxes
    near = np.count_nonzero((b[:, 0] - hx <= px) & (px <= b[:, 1] + hx) & (b[:, 2] - hy <= py) & (py <= b[:, 3] + hy))
    assert near * (PathIndex.CHUNK + 1) > 100_000   # a crowded click: many candidates
    assert peak < 6_000_000, peak


@settings(max_examples=25, deadline=None)
@given(st.integers(0, 10_000), st.floats(0.2, 20.0), st.sampled_from([1, 3, 64]))
def test_blocked_picks_are_the_same_as_one_block(seed, zoom, block):
    """The same run, frame and distance block by block as all at once, ties included (identical paths)."""
    rng = np.random.default_rng(seed)
    data = _crowd(60, seed, exact_copies=True) if seed % 2 else _walks(rng, 60, 1.0)
    index = PathIndex(data)
    fx = np.isfinite(data.x) & np.isfinite(data.y)
    sx = sy = (np.ptp(data.x[fx]) or 1.0) / (800 * zoom)
    for _ in range(20):
        k = int(rng.choice(np.flatnonzero(fx)))
        px, py = data.x[k] + rng.normal(scale=4 * sx), data.y[k] + rng.normal(scale=4 * sy)
        with pytest.MonkeyPatch.context() as m:
            m.setattr(PathIndex, "BLOCK_BOXES", 10 ** 9)
            whole = index.nearest(px, py, sx, sy, 8.0)
        with pytest.MonkeyPatch.context() as m:
            m.setattr(PathIndex, "BLOCK_BOXES", block)
            blocked = index.nearest(px, py, sx, sy, 8.0)
        assert blocked == whole
