"""Render the main window on a set to PNG, offscreen (``make screenshots``).

The set is copied to a temporary folder first, so the screenshot never
writes a journal or a cache into the source tree.  Usage::

    QT_QPA_PLATFORM=offscreen python scripts/screenshots.py [--set FOLDER] [--out DIR] [--size 1400x900]
"""

from __future__ import annotations

import os
import shutil
import sys
import tempfile
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from _shots import parse_args  # noqa: E402  (scripts/ is on sys.path when run)


def dark_palette():
    """A plain dark palette (only to check that nothing breaks in dark mode)."""
    from PySide6.QtGui import QColor, QPalette

    pal = QPalette()
    roles = {
        QPalette.ColorRole.Window: "#2b2d30", QPalette.ColorRole.WindowText: "#e6e6e6",
        QPalette.ColorRole.Base: "#1f2022", QPalette.ColorRole.AlternateBase: "#292b2e",
        QPalette.ColorRole.Text: "#e6e6e6", QPalette.ColorRole.Button: "#35373b",
        QPalette.ColorRole.ButtonText: "#e6e6e6", QPalette.ColorRole.Highlight: "#3d7bd9",
        QPalette.ColorRole.HighlightedText: "#ffffff", QPalette.ColorRole.ToolTipBase: "#35373b",
        QPalette.ColorRole.ToolTipText: "#e6e6e6", QPalette.ColorRole.PlaceholderText: "#8a8d91",
        QPalette.ColorRole.Mid: "#55585c",
    }
    for role, colour in roles.items():
        pal.setColor(role, QColor(colour))
    pal.setColor(QPalette.ColorGroup.Disabled, QPalette.ColorRole.ButtonText, QColor("#6d7074"))
    pal.setColor(QPalette.ColorGroup.Disabled, QPalette.ColorRole.Text, QColor("#6d7074"))
    return pal


def render(set_path: Path, out: Path, size: tuple[int, int], dark: bool = False) -> Path:
    from PySide6.QtCore import QEventLoop, QSettings, QTimer

    from basinmark.gui.app import make_app

    app = make_app()
    if dark:
        app.setStyle("Fusion")
        app.setPalette(dark_palette())
    from basinmark.gui.main_window import MainWindow

    with tempfile.TemporaryDirectory(prefix="basinmark-shot-") as tmp:
        work = Path(tmp) / set_path.name
        shutil.copytree(set_path, work, ignore=shutil.ignore_patterns(".basinmark-cache", "basinmark-labels.*"))
        settings = QSettings(str(Path(tmp) / "settings.ini"), QSettings.Format.IniFormat)
        win = MainWindow(settings)
        from basinmark.gui.app import install_extras

        install_extras(win)
        win.label_panel.set_labeler("demo")
        win.resize(*size)
        win.show()
        loop = QEventLoop()
        win.set_loaded.connect(loop.quit)
        QTimer.singleShot(120_000, loop.quit)
        win.open_set(work)
        loop.exec()
        if win.failure_dialog is not None:
            win.failure_dialog.close()
        # show a flagged run at its forward commit, the way a person triages
        win.run_table.next_matching("flagged")
        win.jump_commit()
        win.actions_["atom_numbers"].setChecked(True)
        for _ in range(5):
            app.processEvents()
        out.parent.mkdir(parents=True, exist_ok=True)
        win.grab().save(str(out))
        win.close()
    return out


def main(argv: list[str] | None = None) -> int:
    args = parse_args(__doc__, argv, size="1400x900")
    w, h = args.size_px
    if not args.set.is_dir():
        print(f"screenshots: {args.set}: no such set folder", file=sys.stderr)
        return 2
    for name, dark in (("main-window.png", False), ("main-window-dark.png", True)):
        print(render(args.set, args.out / name, (w, h), dark=dark))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
