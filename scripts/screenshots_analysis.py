"""Render the map of all runs and the summary view of a set to PNG, offscreen.

The set is copied to a temporary folder first, so no journal or cache is written into the source
tree.  Usage::

    QT_QPA_PLATFORM=offscreen python scripts/screenshots_analysis.py [--set FOLDER] [--out DIR]
"""

from __future__ import annotations

import os
import shutil
import sys
import tempfile
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from _shots import parse_args  # noqa: E402  (scripts/ is on sys.path when run)


def render(set_path: Path, out_dir: Path, map_size=(1100, 820), summary_size=(1300, 940)) -> list[Path]:
    from PySide6.QtCore import QEventLoop, QSettings, QTimer

    from basinmark.gui.app import make_app

    app = make_app()
    from basinmark.gui.main_window import MainWindow
    from basinmark.gui.map_view import install_map_dock
    from basinmark.gui.summary_view import install_summary_dock

    out_dir.mkdir(parents=True, exist_ok=True)
    written = []
    with tempfile.TemporaryDirectory(prefix="basinmark-shot-") as tmp:
        work = Path(tmp) / set_path.name
        shutil.copytree(set_path, work, ignore=shutil.ignore_patterns(".basinmark-cache", "basinmark-labels.*"))
        win = MainWindow(QSettings(str(Path(tmp) / "settings.ini"), QSettings.Format.IniFormat))
        win.label_panel.set_labeler("demo")
        map_dock = getattr(win, "docks", {}).get("map") or install_map_dock(win)
        summary_dock = getattr(win, "docks", {}).get("summary") or install_summary_dock(win)
        win.show()
        loop = QEventLoop()
        win.set_loaded.connect(loop.quit)
        QTimer.singleShot(120_000, loop.quit)
        win.open_set(work)
        loop.exec()
        if win.failure_dialog is not None:
            win.failure_dialog.close()
        st = win.state
        # a beta run, part-way through its forward half, so the highlight and marker show
        beta = next((r for r, f in zip(st.labels["run"], st.labels["final_label"]) if f == "beta"), st.run_id)
        st.set_run(beta)
        traj = st.traj
        st.set_frame(min(traj.n_frames - 1, traj.ts_index + (traj.n_frames - traj.ts_index) // 3))
        # the TST comparison shown is the set's own ([tst] in basinmark-set.toml), taken when the set opened
        for dock, size, name in ((map_dock, map_size, "map.png"), (summary_dock, summary_size, "summary.png")):
            dock.setFloating(True)
            dock.show()
            dock.resize(*size)
            for _ in range(6):
                app.processEvents()
            path = out_dir / name
            dock.widget().grab().save(str(path))
            written.append(path)
            dock.setFloating(False)
        win.close()
    return written


def main(argv: list[str] | None = None) -> int:
    args = parse_args(__doc__, argv)
    if not args.set.is_dir():
        print(f"screenshots: {args.set}: no such set folder", file=sys.stderr)
        return 2
    for path in render(args.set, args.out):
        print(path)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
