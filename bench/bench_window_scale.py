"""The window on a large generated set, offscreen: how soon rows and a run show, and whether it ever freezes.

Generates N gzipped half-pair runs (default 2,000; 12 atoms x 400 frames per half, the generator of
bench/bench_scale.py) with rules of our own over them, then drives the real window (with every panel
installed) in this process's event loop while a 2 ms heartbeat timer records the gaps between its turns:

* cold open (no cache): first rows listed, first run on screen, fully loaded and classified, and the
  longest gap between event-loop turns from the click until 1 s after loading ends;
* the map of every run brought to the front once the data is ready: time until its paths are drawn,
  and the longest gap meanwhile; then a click on a path at once (answered when the pick index is ready), a zoom,
  a pan and a resize of the window, each until the map shows the new view, with the longest gap meanwhile;
* one hand label (the number key on the table, no reason asked) and its undo: the time of that turn;
* open from the cache (written by an open in between, its files recorded by a full check in a child
  process, as the window's own background check does after any open): first rows, first run on screen,
  the longest gap, and the background check of the files ending.

References (named, measured in the same run): the core's own ``open_set`` of the same set in a child
process, without and with the cache, against "fully loaded"; the targets of issue 14 (gap <= 100 ms,
first rows <= 1 s, from the cache first run <= 0.5 s, map <= 300 ms after the data is ready) against the
rest.  The machine's load average is printed: on a shared machine the numbers move with it.

``--why`` samples the window thread's Python stack every 4 ms and prints, for each gap longer than 100 ms, the
functions seen most in it (callers included); ``--no-reference`` skips the core's own opens (minutes at 10,000 runs).

    QT_QPA_PLATFORM=offscreen .venv/bin/python bench/bench_window_scale.py [--runs 2000] [--keep DIR] [--why]
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
import threading
import time
from collections import Counter
from pathlib import Path

import numpy as np

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_scale import _child, generate, load  # noqa: E402

TARGET_GAP_MS = 100.0
TARGET_FIRST_ROWS_S = 1.0
TARGET_CACHED_FIRST_RUN_S = 0.5
TARGET_MAP_MS = 300.0

# rules of our own over the generated 12-atom framework (its atoms wander in a random walk, so the
# outcomes are whatever the walk gives; what matters here is that every run is classified and mapped)
RULES = """\
name = "scale"
reactant = "reactant"
dwell_fs = 5.0

[monitors]
d_one = [1, 2]
d_two = [3, 4]
d_three = [5, 6]

[basins.reactant]
d_one = { above = 3.0 }

[basins.near]
d_one = { below = 3.0 }
d_two = { below = 2.5 }

[basins.far]
d_one = { below = 3.0 }
d_two = { above = 2.5 }
"""

FULL_CHECK = r"""
import sys, time
from basinmark.core.quick_open import full_check
t0 = time.perf_counter()
found = full_check(sys.argv[1])
print(time.perf_counter() - t0, int(found.recorded))
"""

CORE_OPEN = r"""
import sys, time
from basinmark.core.sets import open_set
t0 = time.perf_counter()
tset = open_set(sys.argv[1], use_cache=sys.argv[2] == "1")
print(time.perf_counter() - t0, len(tset))
"""


def _core_open(root: Path, cache: bool) -> float:
    return float(_child(CORE_OPEN, str(root), "1" if cache else "0")[0])


class GcPauses:
    """The longest garbage collection (the app collects on a GUI-thread timer, gui/gc_guard.py): a gap the
    heartbeat sees that no code of ours makes."""

    def __init__(self) -> None:
        import gc

        self.start = 0.0
        self.longest = 0.0
        gc.callbacks.append(self._cb)

    def reset(self) -> None:
        self.longest = 0.0

    def _cb(self, phase: str, _info: dict) -> None:
        now = time.perf_counter()
        if phase == "start":
            self.start = now
        else:
            self.longest = max(self.longest, now - self.start)


GC = GcPauses()


class Sampler(threading.Thread):
    """``--why``: samples the GUI thread's Python stack every few ms, so that each long gap can be put down to the
    code that ran in it (the samples that fall inside the gap, counted per function, callers included)."""

    def __init__(self, every_s: float = 0.004) -> None:
        super().__init__(daemon=True)
        self.main = threading.main_thread().ident
        self.every = every_s
        self.samples: list[tuple[float, tuple[str, ...]]] = []
        self.stop = threading.Event()

    def run(self) -> None:
        while not self.stop.wait(self.every):
            frame = sys._current_frames().get(self.main)
            stack = []
            while frame is not None:
                code = frame.f_code
                stack.append(f"{Path(code.co_filename).name}:{code.co_name}")
                frame = frame.f_back
            self.samples.append((time.perf_counter(), tuple(stack)))

    def report(self, gaps: list[tuple[float, float]], t0: float, longer_than_s: float = 0.1, top: int = 12) -> None:
        """For each gap longer than ``longer_than_s``: the functions seen most in it (inclusive counts)."""
        for gap, when in sorted(gaps, reverse=True)[:6]:
            if gap <= longer_than_s:
                break
            end = t0 + when
            inside = [st for t, st in self.samples if end - gap <= t <= end]
            counts: Counter = Counter()
            for st in inside:
                counts.update(set(st))
            print(f"    gap of {gap * 1000:.0f} ms ending at {when:.2f} s, {len(inside)} samples:")
            for name, n in counts.most_common(60)[:top * 3]:
                if "bench_window_scale" in name or name.endswith(":run_until") or "<module>" in name:
                    continue
                print(f"      {n:4d}  {name}")


SAMPLER: Sampler | None = None


class Watch:
    """A 2 ms heartbeat on the GUI thread: the gaps between its ticks are the window's event-loop turns."""

    def __init__(self, app) -> None:
        from PySide6.QtCore import QTimer

        self.app = app
        self.timer = QTimer()
        self.timer.setInterval(2)
        self.timer.timeout.connect(self._tick)
        self.last = time.perf_counter()
        self.gaps: list[tuple[float, float]] = []   # (gap in s, when, relative to start)
        self.t0 = self.last
        self.until = None
        self.loop = None

    def _tick(self) -> None:
        now = time.perf_counter()
        self.gaps.append((now - self.last, now - self.t0))
        self.last = now
        if self.until is not None and self.until():
            self.loop.quit()

    def run_until(self, cond, timeout_s: float = 600.0) -> float:
        """Run the event loop until ``cond()`` holds; the time it took (s)."""
        from PySide6.QtCore import QEventLoop

        start = time.perf_counter()
        self.until = lambda: cond() or time.perf_counter() - start > timeout_s
        self.loop = QEventLoop()
        self.last = time.perf_counter()
        self.timer.start()
        self.loop.exec()
        self.timer.stop()
        self.until = None
        return time.perf_counter() - start

    def reset(self) -> None:
        self.gaps = []
        self.t0 = time.perf_counter()

    def longest(self) -> tuple[float, float]:
        return max(self.gaps) if self.gaps else (0.0, 0.0)


def _window(settings_dir: Path):
    from PySide6.QtCore import QSettings

    from basinmark.gui.app import install_extras
    from basinmark.gui.main_window import MainWindow

    win = MainWindow(QSettings(str(settings_dir / "settings.ini"), QSettings.Format.IniFormat))
    install_extras(win)
    win.resize(1400, 900)
    win.show()
    return win


def _rows(win) -> int:
    return win.run_table.proxy.rowCount()


def _fmt(label: str, value_s: float, ref_s: float, ref_name: str) -> str:
    return f"  {label:<34} {value_s * 1000:8.0f} ms = {value_s / ref_s:5.2f} x {ref_name}"


def window_open(app, root: Path, tmp: Path, use_cache: bool, with_map: bool) -> dict:
    watch = Watch(app)
    win = _window(tmp)
    watch.run_until(lambda: True)
    out: dict = {}
    watch.reset()
    GC.reset()
    t0 = time.perf_counter()
    win.open_set(root, use_cache=use_cache)

    def first_rows() -> bool:
        if "rows" not in out and _rows(win) > 0:
            out["rows"] = time.perf_counter() - t0
            out["rows_n"] = _rows(win)
            out["rows_busy"] = win.busy
        if "run" not in out and win.state.traj is not None:
            win.molecule.repaint()
            out["run"] = time.perf_counter() - t0
        return "rows" in out and "run" in out or not win.busy

    watch.run_until(first_rows)
    watch.run_until(lambda: not win.busy)
    out["loaded"] = time.perf_counter() - t0
    out["n"] = len(win.state.tset) if win.state.tset is not None else 0
    checking = getattr(win, "files_checking", None)
    if checking is not None:
        watch.run_until(lambda: not win.files_checking)
        out["checked"] = time.perf_counter() - t0
    watch.run_until(lambda: time.perf_counter() - t0 > out["loaded"] + 1.0)  # a second of calm after
    out["gap"] = watch.longest()
    if SAMPLER is not None:
        print(f"  ({'cache' if use_cache else 'cold'} open) what the window's thread did in its longest gaps:")
        SAMPLER.report(watch.gaps, watch.t0)
    if with_map:
        from PySide6.QtCore import Qt as _Qt

        panel = win.map_panel
        ready: list[float] = []   # when the worker's measured map is handed over (its thread, at the emit)
        panel.computed.connect(lambda _r: ready.append(time.perf_counter()), _Qt.ConnectionType.DirectConnection)
        watch.reset()
        t1 = time.perf_counter()
        win.findChild(type(win.actions()[0]), "action_show_map").trigger()

        def drawn() -> bool:
            return panel.canvas.data is not None and panel.canvas.drawn() and not getattr(panel, "busy", False)

        watch.run_until(drawn)
        win.map_panel.canvas.repaint()
        done = time.perf_counter()
        # the map is measured when it is first shown (not behind another tab): the target counts from the data ready
        out["map_measured"] = (ready[-1] - t1) if ready else 0.0
        out["map"] = done - (ready[-1] if ready else t1)
        out["map_runs"] = panel.canvas.data.n_runs if panel.canvas.data is not None else 0
        out["map_note"] = panel.note.text()
        watch.run_until(lambda: time.perf_counter() - t1 > out["map"] + 0.5)
        out["map_gap"] = watch.longest()
        if SAMPLER is not None:
            print("  (map) what the window's thread did in its longest gaps:")
            SAMPLER.report(watch.gaps, watch.t0)
        out.update(map_moves(win, watch))
        out.update(hand_label(win, watch))
    out["gc"] = GC.longest
    win.close()
    win.deleteLater()
    watch.run_until(lambda: True)
    import gc

    gc.unfreeze()   # the window and its set are gone: collected here, between the measured opens (as on quitting)
    gc.collect()
    return out


def map_moves(win, watch: Watch) -> dict:
    """A click on a path, then zoom, pan and resize of the map: how long until each shows, the longest gap."""
    from PySide6.QtCore import QPoint, Qt
    from PySide6.QtTest import QTest

    canvas = win.map_panel.canvas
    out: dict = {}
    watch.reset()
    data = canvas.data
    want = data.run_ids[len(data.run_ids) // 2]
    x, y = data.run_xy(want)
    k = int(np.flatnonzero(np.isfinite(x) & np.isfinite(y))[len(x) // 2])
    picked: list = []
    canvas.run_picked.connect(lambda r, f: picked.append((r, f)))
    pos = canvas.mapFromScene(canvas.view_point(float(x[k]), float(y[k])))
    t0 = time.perf_counter()
    QTest.mouseClick(canvas.viewport(), Qt.MouseButton.LeftButton, pos=QPoint(pos.x(), pos.y()))
    watch.run_until(lambda: bool(picked), timeout_s=60)
    out["click_s"] = time.perf_counter() - t0
    out["click_hit"] = False
    if picked:  # where many paths cross, the nearest may be another run: it must pass within a pixel or two
        from basinmark.gui.map_data import MapData, nearest_on_paths

        px, py = canvas.plot_item.vb.mapSceneToView(canvas.mapToScene(pos)).toTuple()
        sx, sy = canvas.plot_item.vb.viewPixelSize()
        gx, gy = data.run_xy(picked[0][0])
        one = MapData([picked[0][0]], gx, gy, np.array([0]), np.array([gx.size]), data.x_axis, data.y_axis)
        hit = nearest_on_paths(one, px, py, sx, sy)
        out["click_hit"] = hit is not None and hit[2] <= 2.0
    vb = canvas.plot_item.vb
    steps = []
    for name, act in (("zoom", lambda: vb.scaleBy((0.5, 0.5))), ("pan", lambda: vb.translateBy(
            x=vb.viewRect().width() * 0.3)), ("resize", lambda: win.resize(win.width() - 200, win.height() - 120))):
        t0 = time.perf_counter()
        act()
        watch.run_until(lambda: time.perf_counter() - t0 > 0.02)   # the change reaches the view
        watch.run_until(canvas.drawn, timeout_s=60)
        steps.append((name, time.perf_counter() - t0))
    watch.run_until(lambda: time.perf_counter() - t0 > 0.3)
    out["moves"] = steps
    out["moves_gap"] = watch.longest()
    if SAMPLER is not None:
        print("  (map click, zoom, pan, resize) what the window's thread did in its longest gaps:")
        SAMPLER.report(watch.gaps, watch.t0)
    return out


def hand_label(win, watch: Watch) -> dict:
    """The number key 1 on the run table (the label saved at once), then undo: each turn's length."""
    from PySide6.QtCore import Qt
    from PySide6.QtTest import QTest

    out: dict = {}
    panel = win.label_panel
    getattr(win, "set_labeler", panel.set_labeler)("bench")
    act = getattr(win, "actions_", {}).get("ask_reason")
    if act is not None:
        act.setChecked(False)
    watch.run_until(lambda: True)
    view = win.run_table.view
    view.setFocus()
    run = win.state.run_id
    watch.reset()
    t0 = time.perf_counter()
    QTest.keyClick(view, Qt.Key.Key_1)
    out["label_s"] = time.perf_counter() - t0
    row = win.state.label_row(run) or {}
    out["label_saved"] = bool(row.get("hand_label"))
    watch.run_until(lambda: time.perf_counter() - t0 > 0.5)
    t0 = time.perf_counter()
    panel.undo()
    out["undo_s"] = time.perf_counter() - t0
    watch.run_until(lambda: time.perf_counter() - t0 > 0.5)
    out["label_gap"] = watch.longest()
    if SAMPLER is not None:
        print("  (hand label and undo) what the window's thread did in its longest gaps:")
        SAMPLER.report(watch.gaps, watch.t0)
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=2000)
    ap.add_argument("--frames", type=int, default=400)
    ap.add_argument("--atoms", type=int, default=12, help="atoms per frame (e.g. 1000 for a large molecule)")
    ap.add_argument("--keep", metavar="DIR", help="generate into DIR (kept) or reuse the set already there")
    ap.add_argument("--why", action="store_true",
                    help="sample the window thread's stack and print what ran in each gap longer than 100 ms")
    ap.add_argument("--no-reference", action="store_true",
                    help="skip the core's own opens in child processes (the references; minutes at 10,000 runs)")
    args = ap.parse_args()
    if args.why:
        global SAMPLER
        SAMPLER = Sampler()
        SAMPLER.start()
    tmp = Path(tempfile.mkdtemp(prefix="basinmark-window-"))
    root = Path(args.keep) if args.keep else tmp / "scale-set"
    try:
        if not (root / "runs").is_dir():
            t0 = time.perf_counter()
            size = generate(root, args.runs, args.frames, args.atoms)
            print(f"generated {args.runs} runs ({size / 1e6:.0f} MB) in {time.perf_counter() - t0:.1f} s")
        (root / "basins.toml").write_text(RULES, encoding="utf-8")
        for extra in (".basinmark-cache", "basinmark-labels.jsonl", "basinmark-labels.jsonl.head"):
            p = root / extra
            shutil.rmtree(p, ignore_errors=True) if p.is_dir() else p.unlink(missing_ok=True)
        print(f"load average at start: {load()}")
        core_cold = float("nan") if args.no_reference else _core_open(root, cache=False)
        print(f"reference: core open_set without cache {core_cold:.2f} s   load {load()}")

        from basinmark.gui.app import make_app

        app = make_app(["bench"])
        cold = window_open(app, root, tmp, use_cache=False, with_map=True)
        print(f"window, cold open of {cold['n']} runs (no cache)   load {load()}")
        print(_fmt("first rows listed", cold["rows"], TARGET_FIRST_ROWS_S, "target 1 s")
              + f"   ({cold['rows_n']} rows{', still loading' if cold['rows_busy'] else ', loading over'})")
        print(_fmt("first run on screen", cold["run"], TARGET_FIRST_ROWS_S, "target 1 s"))
        print(_fmt("fully loaded and classified", cold["loaded"], core_cold, "core open_set, no cache"))
        gap, when = cold["gap"]
        print(_fmt("longest event-loop gap", gap, TARGET_GAP_MS / 1000, "target 100 ms") + f"   (at {when:.1f} s)")
        gap, when = cold["map_gap"]
        print(f"  map of {cold['map_runs']} runs measured (in a worker, once shown) {cold['map_measured'] * 1000:7.0f} ms")
        print(_fmt(f"map of {cold['map_runs']} runs drawn after its data", cold["map"], TARGET_MAP_MS / 1000,
                   "target 300 ms") + (f"   ({cold['map_note']})" if cold["map_note"] else ""))
        print(_fmt("longest gap while the map is built", gap, TARGET_GAP_MS / 1000, "target 100 ms"))
        print(_fmt("click on a path answered", cold["click_s"], TARGET_MAP_MS / 1000, "target 300 ms")
              + ("" if cold["click_hit"] else "   (the run picked does NOT pass under the click)"))
        for name, took in cold["moves"]:
            print(_fmt(f"map {name}: new view drawn", took, TARGET_MAP_MS / 1000, "target 300 ms"))
        print(_fmt("longest gap in click, zoom, pan, resize", cold["moves_gap"][0], TARGET_GAP_MS / 1000,
                   "target 100 ms"))
        print(_fmt("one hand label (number key)", cold["label_s"], TARGET_GAP_MS / 1000, "target 100 ms")
              + ("" if cold["label_saved"] else "   (NOT saved)"))
        print(_fmt("its undo", cold["undo_s"], TARGET_GAP_MS / 1000, "target 100 ms"))
        print(_fmt("longest gap around label and undo", cold["label_gap"][0], TARGET_GAP_MS / 1000, "target 100 ms"))
        print(_fmt("longest garbage collection in this open", cold["gc"], TARGET_GAP_MS / 1000, "target 100 ms"))

        core_write = _core_open(root, cache=True)   # writes the cache (needed for the open from the cache)
        core_again = float("nan") if args.no_reference else _core_open(root, cache=True)   # reads it
        check_s, recorded = _child(FULL_CHECK, str(root))
        print(f"reference: core open_set first open {core_write:.2f} s (writes the cache), "
              f"reopen {core_again:.2f} s; full check of the files alone {float(check_s):.2f} s "
              f"(recorded: {recorded == '1'})   load {load()}")
        cached = window_open(app, root, tmp, use_cache=True, with_map=False)
        print(f"window, open of {cached['n']} runs from the cache   load {load()}")
        print(_fmt("first rows listed", cached["rows"], TARGET_FIRST_ROWS_S, "target 1 s"))
        print(_fmt("first run on screen", cached["run"], TARGET_CACHED_FIRST_RUN_S, "target 0.5 s"))
        print(_fmt("fully loaded and classified", cached["loaded"], core_again, "core reopen from the cache"))
        if "checked" in cached:
            print(_fmt("files checked in the background", cached["checked"], core_again, "core reopen from the cache"))
        gap, when = cached["gap"]
        print(_fmt("longest event-loop gap", gap, TARGET_GAP_MS / 1000, "target 100 ms") + f"   (at {when:.1f} s)")
        print(_fmt("longest garbage collection in this open", cached["gc"], TARGET_GAP_MS / 1000, "target 100 ms"))
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
