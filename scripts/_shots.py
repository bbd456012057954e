"""What the screenshot scripts share: the repository root, their command line, and a window opened on a
copy of the set at a laptop's 1366×768."""

from __future__ import annotations

import argparse
import os
import shutil
import sys

# a screenshot script closes windows whose rules it changed: answer the unsaved-rules question with
# Discard instead of waiting for a person
os.environ.setdefault("BASINMARK_UNSAVED_RULES", "discard")
os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]

#: every screenshot is of the whole window at a common laptop screen's size
SIZE = "1366x768"


def parse_args(doc: str, argv: list[str] | None, size: str | None = SIZE) -> argparse.Namespace:
    """``--set`` (default: the bundled sample set), ``--out`` and, when ``size`` is given, ``--size WxH``
    (returned as ``args.size_px``)."""
    sys.path.insert(0, str(REPO / "src"))
    from basinmark.gui.app import bundled_sample_set

    ap = argparse.ArgumentParser(description=doc.splitlines()[0])
    ap.add_argument("--set", type=Path, default=bundled_sample_set(), help="set folder (default: bundled sample)")
    ap.add_argument("--out", type=Path, default=REPO / "docs" / "screenshots", help="output folder")
    if size is not None:
        ap.add_argument("--size", default=size, help=f"window size WxH in pixels (default: {size})")
    args = ap.parse_args(argv)
    if size is not None:
        args.size_px = tuple(int(x) for x in args.size.lower().split("x"))
    return args


def copy_set(set_path: Path, tmp: Path) -> Path:
    """The set copied into ``tmp`` without its cache and labels: a screenshot never writes into the source tree."""
    work = Path(tmp) / set_path.name
    shutil.copytree(set_path, work, ignore=shutil.ignore_patterns(".basinmark-cache", "basinmark-labels.*"))
    return work


def settle(app, rounds: int = 8) -> None:
    """Let layouts, deferred paints and timers of the window run."""
    import time

    for _ in range(rounds):
        app.processEvents()
        time.sleep(0.02)


def open_window(work: Path, tmp: Path, size: tuple[int, int], labeler: str = "demo"):
    """``(app, window)``: the window with every panel, ``size`` pixels, the set at ``work`` loaded."""
    from PySide6.QtCore import QEventLoop, QSettings, QTimer

    from basinmark.gui.app import install_extras, make_app
    from basinmark.gui.main_window import MainWindow

    app = make_app()
    win = MainWindow(QSettings(str(Path(tmp) / "settings.ini"), QSettings.Format.IniFormat))
    install_extras(win)
    win.label_panel.set_labeler(labeler)
    win.resize(*size)
    win.show()
    loop = QEventLoop()
    win.set_loaded.connect(loop.quit)
    QTimer.singleShot(120_000, loop.quit)
    win.open_set(work)
    loop.exec()
    if win.failure_dialog is not None:
        win.failure_dialog.close()
    if win.init_offer is not None and hasattr(win.init_offer, "close"):
        win.init_offer.close()
    win.resize(*size)
    settle(app)
    return app, win


def show_view(app, win, key: str, width: int = 640) -> None:
    """Open one analysis view (``win.docks[key]``) in front, as a person does from the menus, and drag the
    divider so that the view has about ``width`` pixels (the molecule keeps what is left)."""
    from PySide6.QtCore import Qt

    dock = win.docks[key]
    dock.show()
    dock.raise_()
    settle(app)
    win.resizeDocks([dock], [width], Qt.Orientation.Horizontal)
    settle(app)


def save(win, path: Path) -> Path:
    """The whole window as a PNG at ``path``."""
    path.parent.mkdir(parents=True, exist_ok=True)
    win.grab().save(str(path))
    print(path)
    return path


def close(app, win) -> None:
    """Close the window and destroy it while the application still runs (a window left to the interpreter's
    exit is torn down after Qt and crashed the script at exit)."""
    import gc

    win.close()
    win.deleteLater()
    settle(app, 3)
    gc.collect()
