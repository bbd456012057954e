"""The data behind the map of all runs (no Qt): which monitors can be axes, the two monitors measured over
every frame of every run, paths thinned for drawing, nearest-path picking at full resolution, and the basin
regions on the plane.  :mod:`basinmark.gui.map_view` draws them.
"""

from __future__ import annotations

import math
import threading
import warnings
from dataclasses import dataclass
from typing import Any, Mapping, Sequence

import numpy as np

from basinmark.core.geometry import measure
from basinmark.core.rules import MONITOR_KINDS
from basinmark.gui.give_way import give_way

#: runs measured between two offers to give way to the window's thread (~5 ms of work at 12 atoms x 800 frames)
GIVE_WAY_RUNS = 64

NO_LABEL = "no label"
MAX_DRAW_POINTS = 160  # points drawn per run (picking always uses every frame); our own choice, measured in bench
#: points drawn for the whole map: with many runs each is thinned further (never below MIN_DRAW_POINTS), so that
#: drawing stays a short turn of the window's event loop (our own budget, measured in bench/bench_window_scale.py)
DRAW_BUDGET = 400_000
MIN_DRAW_POINTS = 24
PICK_RADIUS_PX = 8.0
_UNIT = {"distance": "Å", "angle": "°", "dihedral": "°"}
_FAR = 1.0e4  # an open side of a basin region is drawn this far out (Å or degrees), never in the auto-range


# --- data ------------------------------------------------------------------------------------

@dataclass(frozen=True)
class MapAxis:
    """One monitor that can go on an axis."""

    key: str               # rules monitor name, or e.g. "d(1-2)" for an added one
    atoms: tuple[int, ...]  # 1-based
    from_rules: bool = True

    @property
    def kind(self) -> str:
        return MONITOR_KINDS[len(self.atoms)]

    @property
    def unit(self) -> str:
        return _UNIT[self.kind]

    @property
    def title(self) -> str:
        return f"{self.key} ({'-'.join(map(str, self.atoms))})" if self.from_rules else self.key


def added_monitor_name(atoms: Sequence[int]) -> str:
    """Name of a monitor a person added, e.g. ``d(1-2)``, ``∠(1-2-3)``, ``φ(1-2-3-4)``."""
    prefix = {2: "d", 3: "∠", 4: "φ"}[len(atoms)]
    return f"{prefix}({'-'.join(map(str, atoms))})"


def map_axes(rules: Any = None, user_monitors: Sequence[Sequence[int]] = ()) -> list[MapAxis]:
    """The monitors of the rules (file order), then the added ones not already among them."""
    out: list[MapAxis] = []
    seen: set[tuple[int, ...]] = set()
    if rules is not None:
        for name, mon in rules.monitors.items():
            out.append(MapAxis(name, tuple(mon.atoms), True))
            seen.update({tuple(mon.atoms), tuple(mon.atoms)[::-1]})
    for atoms in user_monitors:
        atoms = tuple(int(a) for a in atoms)
        if atoms not in seen and 2 <= len(atoms) <= 4:
            out.append(MapAxis(added_monitor_name(atoms), atoms, False))
            seen.update({atoms, atoms[::-1]})
    return out


def _measure_all(trajs: list, axes: Sequence[MapAxis], cache: dict | None) -> list[np.ndarray]:
    """Each axis' monitor over every frame of every run, stacked end to end (cached per atom tuple).

    One :func:`measure` call per run and monitor (gathering all runs' atoms first and measuring once
    was no faster on 1,000 x 1,000 frames: the copy costs what the calls save).  Runs with too few
    atoms give NaN.
    """
    out = []
    for a in axes:
        key = ("map", a.atoms)
        if cache is not None and key in cache:
            out.append(cache[key])
            continue
        idx = [i - 1 for i in a.atoms]
        parts = []
        for i, t in enumerate(trajs):
            if i % GIVE_WAY_RUNS == 0:
                give_way()   # a person acting in the window goes first (see gui/give_way.py)
            parts.append(measure(t.positions, idx) if max(idx) < t.n_atoms else np.full(t.n_frames, np.nan))
        values = np.concatenate(parts).astype(np.float64, copy=False) if parts else np.zeros(0)
        if cache is not None:
            cache[key] = values
        out.append(values)
    return out


@dataclass
class MapData:
    """Two monitors over every frame of every run, stacked end to end (full resolution)."""

    run_ids: list[str]
    x: np.ndarray        # (T,)
    y: np.ndarray        # (T,)
    starts: np.ndarray   # (R,) first index of each run
    ends: np.ndarray     # (R,) one past the last
    x_axis: MapAxis
    y_axis: MapAxis

    @classmethod
    def build(cls, tset, x_axis: MapAxis, y_axis: MapAxis, cache: dict | None = None) -> "MapData":
        """Measure both monitors for every run of ``tset`` (values cached per atom tuple in ``cache``)."""
        trajs = list(tset)
        lengths = np.array([t.n_frames for t in trajs], dtype=np.intp)
        ends = np.cumsum(lengths)
        x, y = _measure_all(trajs, [x_axis, y_axis], cache)
        return cls([t.run_id for t in trajs], x, y, ends - lengths, ends, x_axis, y_axis)

    def finite_range(self) -> tuple[float, float, float, float] | None:
        """(x min, x max, y min, y max) over finite values (computed once), or None when there are none."""
        got = getattr(self, "_range", False)
        if got is False:
            got = None
            if self.x.size and self.y.size:
                # NaN-skipping minimum and maximum read the arrays once (copying the finite values out took ~0.4 s
                # of the map's worker at 10,000 runs); an infinity or no value at all falls back to that copy
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore", RuntimeWarning)   # all NaN: said by the fallback (None)
                    quick = (np.nanmin(self.x), np.nanmax(self.x), np.nanmin(self.y), np.nanmax(self.y))
                if np.isfinite(quick).all():
                    got = tuple(float(v) for v in quick)
                else:
                    fx, fy = self.x[np.isfinite(self.x)], self.y[np.isfinite(self.y)]
                    if fx.size and fy.size:
                        got = (float(fx.min()), float(fx.max()), float(fy.min()), float(fy.max()))
            self._range = got
        return got

    def prepare(self, max_points: int) -> None:
        """Work done once per data (and thinning), in whichever thread builds it: ranges, thinned indices."""
        self.finite_range()
        self.thinned(max_points)

    def thinned(self, max_points: int) -> tuple[np.ndarray, np.ndarray]:
        """(indices kept for drawing, the run of each), computed once per ``max_points``."""
        memo = self.__dict__.setdefault("_thinned", {})
        if max_points not in memo:
            memo[max_points] = decimated_indices(self.starts, self.ends, max_points, with_runs=True)
        return memo[max_points]

    def pick_index(self, build: bool = True) -> "PathIndex | None":
        """The :class:`PathIndex` of these paths (built on the first call with ``build``; None before that).

        Built once even when two threads ask at the same time (the map's worker and a click): the second waits."""
        got = self.__dict__.get("_pick_index")
        if got is None and build:
            with self.__dict__.setdefault("_index_lock", threading.Lock()):
                got = self.__dict__.get("_pick_index")
                if got is None:
                    got = self.__dict__["_pick_index"] = PathIndex(self)
        return got

    @property
    def n_runs(self) -> int:
        return len(self.run_ids)

    def index(self, run_id: str) -> int | None:
        try:
            return self.run_ids.index(run_id)
        except ValueError:
            return None

    def run_xy(self, run_id: str) -> tuple[np.ndarray, np.ndarray] | None:
        r = self.index(run_id)
        if r is None:
            return None
        s = slice(int(self.starts[r]), int(self.ends[r]))
        return self.x[s], self.y[s]


def draw_points(n_runs: int, max_points: int = MAX_DRAW_POINTS, budget: int = DRAW_BUDGET) -> int:
    """Points drawn per run: ``max_points``, fewer when the runs together would pass ``budget``."""
    if n_runs <= 0:
        return max_points
    return int(max(min(MIN_DRAW_POINTS, max_points), min(max_points, budget // n_runs)))


def thinning_note(data: "MapData", per_run: int) -> str:
    """A sentence saying that (and how much) the paths are thinned for drawing, or "" when none is."""
    if data is None or data.n_runs == 0:
        return ""
    longest = int((data.ends - data.starts).max())
    if longest <= per_run:
        return ""
    return (f"Paths are drawn thinned: at most {per_run} points of each run (the longest has {longest} frames), "
            "always with both ends; clicking picks on every frame.")


def decimated_indices(starts: np.ndarray, ends: np.ndarray, max_points: int = MAX_DRAW_POINTS,
                      with_runs: bool = False):
    """Indices into the stacked arrays that keep at most about ``max_points`` per run, always the first
    and last frame of each run (the ends are what the classification looks at).

    Every ``stride``-th frame of a run from its first, plus its last.  Built from the kept points only (the
    earlier form made a run number per frame: 0.5 s of the map's worker at 10,000 runs x 800 frames).
    With ``with_runs``: (indices, the run of each)."""
    starts, ends = np.asarray(starts, np.intp), np.asarray(ends, np.intp)
    lengths = ends - starts
    if not lengths.size or int(lengths.sum()) == 0:
        empty = np.zeros(0, dtype=np.intp)
        return (empty, empty) if with_runs else empty
    stride = np.maximum(1, np.ceil(lengths / max(1, max_points - 1))).astype(np.intp)
    on_stride = np.where(lengths > 0, (lengths + stride - 1) // stride, 0)   # 0, s, 2s, ... below the length
    last_extra = (lengths > 0) & ((lengths - 1) % stride != 0)              # the last frame, when not on a stride
    count = on_stride + last_extra
    run_of = np.repeat(np.arange(starts.size, dtype=np.intp), count)
    first = np.cumsum(count) - count
    local = np.arange(run_of.size, dtype=np.intp) - first[run_of]         # 0, 1, 2, ... within each run
    keep = starts[run_of] + local * stride[run_of]
    tail = first[last_extra] + count[last_extra] - 1
    keep[tail] = ends[last_extra] - 1
    return (keep, run_of) if with_runs else keep


def grouped_paths(data: MapData, labels: Mapping[str, str], max_points: int = MAX_DRAW_POINTS
                  ) -> dict[str, tuple[np.ndarray, np.ndarray, int]]:
    """Per label: (x, y, number of runs), the runs' thinned paths joined with a NaN between runs."""
    keep, run_of = data.thinned(max_points)
    if keep.size == 0:
        return {}
    run_label = np.array([labels.get(r) or NO_LABEL for r in data.run_ids], dtype=object)
    names, code = np.unique(run_label.astype(str), return_inverse=True)
    point_code = code[run_of]   # one comparison per label over the points (np.isin per label was slower)
    out: dict[str, tuple[np.ndarray, np.ndarray, int]] = {}
    last_of_run = np.append(run_of[1:] != run_of[:-1], True)
    for label in dict.fromkeys(run_label):
        k = int(np.searchsorted(names, str(label)))
        runs = np.flatnonzero(code == k)
        mask = point_code == k
        idx = keep[mask]
        # a NaN after each run's last point breaks the line between runs (connect="finite")
        breaks = np.flatnonzero(last_of_run[mask]) + 1
        x = np.insert(data.x[idx], breaks, np.nan)
        y = np.insert(data.y[idx], breaks, np.nan)
        out[str(label)] = (x, y, int(runs.size))
    return out


def nearest_on_paths(data: MapData, px: float, py: float, sx: float, sy: float,
                     runs: np.ndarray | None = None) -> tuple[int, int, float] | None:
    """The run nearest to the point (px, py) on its full-resolution path, measured in screen pixels.

    ``sx``/``sy`` are data units per pixel along x and y (the two axes have different units).  Returns
    (run index, frame index of the nearer segment end, distance in pixels), or None when there is no
    data.  ``runs``: a boolean mask (R,) of the runs to consider.  Vectorised over every segment.
    """
    n = data.x.size
    if n == 0:
        return None
    x = (data.x - px) / sx
    y = (data.y - py) / sy
    lengths = data.ends - data.starts
    run_of = np.repeat(np.arange(data.n_runs), lengths)
    ok_pt = np.isfinite(x) & np.isfinite(y)
    if runs is not None:
        ok_pt &= np.asarray(runs, bool)[run_of]
    if not ok_pt.any():
        return None
    # segments i -> i+1 inside one run
    ax, ay, bx, by = x[:-1], y[:-1], x[1:], y[1:]
    seg_ok = ok_pt[:-1] & ok_pt[1:] & (run_of[:-1] == run_of[1:])
    dx, dy = bx - ax, by - ay
    len2 = dx * dx + dy * dy
    with np.errstate(invalid="ignore", divide="ignore"):
        t = np.clip(-(ax * dx + ay * dy) / np.where(len2 > 0, len2, 1.0), 0.0, 1.0)
    cx, cy = ax + t * dx, ay + t * dy
    d2 = np.where(seg_ok, cx * cx + cy * cy, np.inf)
    pt_d2 = np.where(ok_pt, x * x + y * y, np.inf)  # single-frame runs have no segment
    i_seg = int(np.argmin(d2)) if d2.size else -1
    i_pt = int(np.argmin(pt_d2))
    if i_seg >= 0 and d2[i_seg] <= pt_d2[i_pt]:
        idx = i_seg + (1 if t[i_seg] > 0.5 else 0)
        dist = math.sqrt(float(d2[i_seg]))
    else:
        idx, dist = i_pt, math.sqrt(float(pt_d2[i_pt]))
    r = int(run_of[idx])
    return r, int(idx - data.starts[r]), dist


#: paths with fewer points than this are picked by :func:`nearest_on_paths` over every segment (a few ms); larger
#: ones through a :class:`PathIndex` (our own threshold: 2e5 points take ~10 ms vectorised on one core)
INDEX_FROM_POINTS = 200_000


class PathIndex:
    """Picking on every frame of many runs without looking at every frame: the paths cut into pieces of
    :data:`CHUNK` points, each with the box that holds its points and the first point of the next piece.

    A segment passing within ``radius_px`` of a click has its nearest point within ``radius_px`` pixels of the click
    along x and along y, and that point lies in its piece's box; so a click measures exactly (as
    :func:`nearest_on_paths` does) the segments and points of the pieces whose box, grown by ``radius_px`` pixels,
    holds the click, and no other can be nearer within that radius.  Boxes are NaN-blind (``fmin``/``fmax``): a
    frame that could not be measured does not hide its piece.  Measured at 10,000 runs x 800 frames: built in
    74 ms against 6.6 s for a k-d tree of the points (scipy's cKDTree, used before), a click answered in 5-20 ms
    against 16-48 ms, the same answers (``tests/test_map_pick_index.py`` checks them against every segment).
    """

    #: points per box: our own choice (boxes of a random walk of 32 steps are small; 8e6 points make 250,000 boxes)
    CHUNK = 32
    #: points per numpy call while building (a multiple of CHUNK is used): a call over all 8e6 points holds Python's
    #: lock for 50-100 ms (some numpy operations do not release it), which the window's thread then waits for
    PIECE = 1 << 19

    def __init__(self, data: "MapData") -> None:
        self.data = data
        x, y = data.x, data.y
        n = self.n = int(x.size)
        c = self.CHUNK
        ends = np.asarray(data.ends, dtype=np.intp)
        last = np.zeros(n, dtype=bool)   # the last frame of each run: no segment starts there
        last[ends[(ends > 0) & (ends <= n)] - 1] = True
        seg_parts, box_parts = [], []
        step = max(c, self.PIECE // c * c)
        for s in range(0, n, step):
            e = min(n, s + step)
            ee = min(n, e + 1)   # one point more: the segment across the piece's end
            ok = np.isfinite(x[s:ee]) & np.isfinite(y[s:ee])
            seg_parts.append((ok[:-1] & ok[1:] & ~last[s:ee - 1])[:e - s])
            cs = np.arange(0, e - s, c)
            after = np.minimum(s + cs + c, n - 1)   # each box holds the first point of the next piece too
            cols = []
            for arr in (x, y):
                part = arr[s:e]
                cols.append(np.fmin(np.fmin.reduceat(part, cs), arr[after]))
                cols.append(np.fmax(np.fmax.reduceat(part, cs), arr[after]))
            box_parts.append(np.column_stack(cols))
            give_way()
        self.seg_ok = np.concatenate(seg_parts)[:max(0, n - 1)] if seg_parts else np.zeros(0, dtype=bool)
        self.boxes = np.concatenate(box_parts) if box_parts else np.zeros((0, 4))   # x min, x max, y min, y max

    def nearest(self, px: float, py: float, sx: float, sy: float,
                radius_px: float = PICK_RADIUS_PX) -> tuple[int, int, float] | None:
        """(run index, frame index, distance in pixels) of the path nearest to (px, py) when it passes within
        ``radius_px``, else None; the same answer as :func:`nearest_on_paths` within that radius."""
        if self.n == 0 or not (sx > 0 and sy > 0) or not (math.isfinite(px) and math.isfinite(py)):
            return None
        hx, hy = radius_px * sx, radius_px * sy
        b = self.boxes
        with np.errstate(invalid="ignore"):
            near = np.flatnonzero((b[:, 0] - hx <= px) & (px <= b[:, 1] + hx)
                                  & (b[:, 2] - hy <= py) & (py <= b[:, 3] + hy))
        if near.size == 0:
            return None
        c = self.CHUNK
        data = self.data
        seg: tuple[float, int] | None = None   # (squared pixels, frame index) of the nearest segment so far
        point: tuple[float, int] | None = None   # ... and of the nearest point
        # the boxes a block at a time, in order: every array stays small (all at once, a click in the middle of a
        # 10,000-run map made ~40 MB of arrays, 9,900 page faults a click); strictly nearer replaces, so ties go to
        # the first, as they did all at once
        for b0 in range(0, near.size, self.BLOCK_BOXES):
            block = near[b0:b0 + self.BLOCK_BOXES]
            idx = (block[:, None] * c + np.arange(c + 1)).ravel()
            idx = idx[idx < self.n]
            points = idx[np.isfinite(data.x[idx]) & np.isfinite(data.y[idx])]
            segs = idx[idx < self.n - 1]
            s_hit, p_hit = _nearest_parts(data, segs[self.seg_ok[segs]], points, px, py, sx, sy)
            if s_hit is not None and (seg is None or s_hit[0] < seg[0]):
                seg = s_hit
            if p_hit is not None and (point is None or p_hit[0] < point[0]):
                point = p_hit
        hit = _nearest_of(data, seg, point)
        return hit if hit is not None and hit[2] <= radius_px else None

    #: boxes measured per block of a click's search (our own choice, measured at 10,000 runs: a click in the middle of
    #: the map took 41-62 ms with 512, 52-82 ms with 128, 45-72 ms with 2,048, 120-195 ms all at once)
    BLOCK_BOXES = 512


def _nearest_parts(data: "MapData", seg_starts: np.ndarray, points: np.ndarray, px: float, py: float,
                   sx: float, sy: float) -> tuple[tuple[float, int] | None, tuple[float, int] | None]:
    """The nearest of the given segments (i -> i + 1, by first index; the frame is the nearer end) and the nearest of
    the given points, each as (squared distance in screen pixels, frame index) or None; ties to the first given."""
    seg = point = None
    if seg_starts.size:
        ax, ay = (data.x[seg_starts] - px) / sx, (data.y[seg_starts] - py) / sy
        bx, by = (data.x[seg_starts + 1] - px) / sx, (data.y[seg_starts + 1] - py) / sy
        dx, dy = bx - ax, by - ay
        len2 = dx * dx + dy * dy
        with np.errstate(invalid="ignore", divide="ignore"):
            t = np.clip(-(ax * dx + ay * dy) / np.where(len2 > 0, len2, 1.0), 0.0, 1.0)
        cx, cy = ax + t * dx, ay + t * dy
        d2 = cx * cx + cy * cy
        k = int(np.argmin(d2))
        seg = (float(d2[k]), int(seg_starts[k]) + (1 if t[k] > 0.5 else 0))
    if points.size:
        x, y = (data.x[points] - px) / sx, (data.y[points] - py) / sy
        p2 = x * x + y * y
        k = int(np.argmin(p2))
        point = (float(p2[k]), int(points[k]))
    return seg, point


def _nearest_of(data: "MapData", seg: tuple[float, int] | None,
                point: tuple[float, int] | None) -> tuple[int, int, float] | None:
    """(run index, frame index, distance in pixels) of the nearer of a segment and a point (the rule of
    :func:`nearest_on_paths`: a segment wins a tie with a point)."""
    best = seg
    if point is not None and (best is None or point[0] < best[0]):
        best = point
    if best is None:
        return None
    idx = best[1]
    r = int(np.searchsorted(data.ends, idx, side="right"))
    return r, int(idx - data.starts[r]), math.sqrt(best[0])


@dataclass(frozen=True)
class BasinRegion:
    basin: str
    x0: float
    x1: float
    y0: float
    y1: float
    elsewhere: tuple[str, ...]  # conditions on other monitors (not visible on this plane)


def basin_regions(rules: Any, x_key: str, y_key: str) -> list[BasinRegion]:
    """Rectangles of the basins on the plane of two rules monitors (open sides at ±infinity).

    A basin with no condition on either monitor covers the whole plane and is left out.
    """
    if rules is None:
        return []
    out = []
    for name, basin in rules.basins.items():
        cx, cy = basin.condition(x_key), basin.condition(y_key)
        if cx is None and cy is None:
            continue
        everywhere = [(-math.inf, 0, math.inf, 0)]
        other = tuple(c.describe() for c in basin.conditions if c.monitor not in (x_key, y_key))
        other += tuple(n.describe() for n in getattr(basin, "nearest", ()))  # nearest-atom: not on this plane
        # a dihedral range across ±180° is two intervals, so its basin is two rectangles on the map
        for x0, _, x1, _ in (cx.intervals() if cx is not None else everywhere):
            for y0, _, y1, _ in (cy.intervals() if cy is not None else everywhere):
                out.append(BasinRegion(name, x0, x1, y0, y1, other))
    return out


# --- drawing ---------------------------------------------------------------------------------

def _finite(v: float) -> float:
    return max(-_FAR, min(_FAR, v))
