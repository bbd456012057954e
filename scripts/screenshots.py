"""Render the main window on a set to PNG at 1366×768, offscreen, in the light and a dark palette
(``make screenshots``).

The set is copied to a temporary folder first, so the screenshot never writes a journal or a cache into
the source tree.  Usage::

    QT_QPA_PLATFORM=offscreen python scripts/screenshots.py [--set FOLDER] [--out DIR] [--size 1366x768]
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

from _shots import close, copy_set, open_window, parse_args, save, settle  # scripts/ is on sys.path when run


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
    from basinmark.gui.app import make_app

    app = make_app()
    if dark:
        app.setStyle("Fusion")
        app.setPalette(dark_palette())
    with tempfile.TemporaryDirectory(prefix="basinmark-shot-") as tmp:
        app, win = open_window(copy_set(set_path, Path(tmp)), Path(tmp), size)
        # a flagged run at its forward commit, the way a person triages, with a distance the chemist added
        win.run_table.next_matching("flagged")
        win.jump_commit()
        win.actions_["atom_numbers"].setChecked(True)
        win.state.add_monitor((1, 6))
        settle(app)
        save(win, out)
        close(app, win)
    return out


def main(argv: list[str] | None = None) -> int:
    args = parse_args(__doc__, argv)
    if not args.set.is_dir():
        print(f"screenshots: {args.set}: no such set folder", file=sys.stderr)
        return 2
    for name, dark in (("main-window.png", False), ("main-window-dark.png", True)):
        render(args.set, args.out / name, args.size_px, dark=dark)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
