"""Re-classification of a whole set after one threshold change, as the rules editor does it.

The editor keeps the monitor arrays of every run (``core.classify.prepare``) and re-runs only the
basin and commitment pass (``classify_prepared``) when a threshold moves.  Reference: a full
``classify_set`` of the same set with the same rules (monitors computed again), in the same process.
Target: a threshold change re-classifies the bundled sample set in at most 200 ms; printed as
measured / target (below 1 meets it).  Without the sample set a synthetic set of 200 runs is used
(and the output says so).

    .venv/bin/python bench/bench_reclassify.py [SET]
"""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

ROOT = Path(__file__).resolve().parents[1]
DEFAULT_SET = ROOT / "sample_sets" / "ringfork"
TARGET_MS = 200.0


def synthetic_set(n_runs: int = 200):
    sys.path.insert(0, str(ROOT / "tests"))
    from gui_fixtures import TOY_RULES, toy_trajectory  # our own toy scenario

    from basinmark.core.model import TrajectorySet
    from basinmark.core.rules import parse_rules

    kinds = ("left", "right", "recrossing", "unfinished")
    runs = {f"toy-{i:04d}": toy_trajectory(f"toy-{i:04d}", kinds[i % 4], n_half=501, dt=1.0)
            for i in range(n_runs)}
    rules = parse_rules(TOY_RULES)
    return TrajectorySet(ROOT, runs, metadata={"name": "synthetic"}), rules, ("left", "d_left", "below")


def main() -> None:
    from basinmark.core.classify import classify_set
    from basinmark.gui.rules_editor import Reclassifier

    src = Path(sys.argv[1]) if len(sys.argv) > 1 else DEFAULT_SET
    if (src / "basins.toml").is_file():
        from basinmark.core.rules import load_rules
        from basinmark.core.sets import open_set

        tset = open_set(src)
        rules = load_rules(src / "basins.toml", n_atoms=tset.n_atoms)
        products = rules.products
        target = (products[0], next(c.monitor for c in rules.basins[products[0]].conditions
                                    if c.kind in ("below", "between")), "below")
        print(f"set: {src.name}, {len(tset)} runs, {sum(t.n_frames for t in tset)} frames")
    else:
        print(f"the sample set is missing at {src}: using a synthetic set of 200 runs instead")
        tset, rules, target = synthetic_set()
        print(f"set: synthetic, {len(tset)} runs, {sum(t.n_frames for t in tset)} frames")
    basin, monitor, bound = target
    cond = rules.basins[basin].condition(monitor)
    old = cond.hi
    worker = Reclassifier()
    worker.run_sync(tset, rules)              # the editor's state after the set opened
    times, full = [], []
    for k in range(7):
        new = rules.with_threshold(basin, monitor, bound, old + 0.01 * (k + 1))
        t0 = time.perf_counter()
        table = worker.run_sync(tset, new)
        times.append(time.perf_counter() - t0)
    for _ in range(3):
        t0 = time.perf_counter()
        ref = classify_set(tset, new)
        full.append(time.perf_counter() - t0)
    assert table.equals(ref), "re-classification differs from classify_set"
    best, med = min(times) * 1000, sorted(times)[len(times) // 2] * 1000
    print(f"threshold change: {basin}.{monitor} {bound} {old:g} -> {old + 0.07:g}")
    print(f"re-classify after a threshold change: {med:8.1f} ms median, {best:.1f} ms best (7 changes)")
    print(f"full classify_set (reference):        {min(full) * 1000:8.1f} ms best of 3")
    print(f"speed-up over the reference:          {min(full) * 1000 / med:8.1f}x")
    print(f"ratio to target:                      {med / TARGET_MS:8.2f}  (target {TARGET_MS:g} ms; below 1 meets it)")
    if (src / "basins.toml").is_file():
        window_round_trip(src, basin, monitor, bound, old)


def window_round_trip(src: Path, basin: str, monitor: str, bound: str, old: float) -> None:
    """The same change through the window: threshold dragged -> counts shown (thread, state, run table)."""
    import shutil
    import tempfile

    from PySide6.QtCore import QEventLoop, QSettings, QTimer

    from basinmark.gui.app import make_app
    from basinmark.gui.main_window import MainWindow
    from basinmark.gui.rules_editor import install_rules_editor

    app = make_app(sys.argv[:1])
    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp) / src.name
        shutil.copytree(src, work, ignore=shutil.ignore_patterns("basinmark-labels.*"))
        win = MainWindow(QSettings(str(Path(tmp) / "s.ini"), QSettings.Format.IniFormat))
        install_rules_editor(win)
        loop = QEventLoop()
        win.set_loaded.connect(loop.quit)
        win.open_set(work)
        loop.exec()
        ed = win.rules_editor
        ed.worker.run_sync(win.state.tset, win.state.rules)  # monitors prepared, as after the first edit
        spent = []
        for k in range(5):
            loop = QEventLoop()
            ed.reclassified.connect(loop.quit)
            QTimer.singleShot(10_000, loop.quit)
            t0 = time.perf_counter()
            win.traces.threshold_moved.emit([(basin, monitor, bound)], old + 0.01 * (k + 1))
            loop.exec()
            spent.append(time.perf_counter() - t0)
            ed.reclassified.disconnect(loop.quit)
        med = sorted(spent)[len(spent) // 2] * 1000
        print(f"window round trip (drag -> counts):   {med:8.1f} ms median of 5 "
              f"(ratio to target {med / TARGET_MS:.2f})")
        win.close()
        app.processEvents()


if __name__ == "__main__":
    main()
