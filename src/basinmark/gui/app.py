"""Start the desktop application: ``basinmark open [SET]`` and ``make demo`` end up here."""

from __future__ import annotations

import sys
from pathlib import Path

from basinmark import __version__


def bundled_sample_set() -> Path:
    """The sample set shipped in the source tree (sample_sets/ringfork)."""
    return Path(__file__).resolve().parents[3] / "sample_sets" / "ringfork"


def make_app(argv: list[str] | None = None):
    """The QApplication (created once), named so QSettings finds the right place; pyqtgraph antialiased."""
    from PySide6.QtWidgets import QApplication

    app = QApplication.instance()
    if app is None:
        app = QApplication(argv if argv is not None else sys.argv[:1])
    app.setOrganizationName("basinmark")
    app.setApplicationName("basinmark")
    app.setApplicationVersion(__version__)
    import pyqtgraph as pg

    pg.setConfigOptions(antialias=True)
    from basinmark.gui.gc_guard import install_gc_guard

    install_gc_guard()
    return app


#: optional panels that attach themselves to the window: (module, function taking the window)
EXTRAS = (
    ("basinmark.gui.map_view", "install_map_dock"),
    ("basinmark.gui.summary_view", "install_summary_dock"),
    ("basinmark.gui.review_view", "install_review_dock"),
    ("basinmark.gui.sweep_view", "install_sweep_dock"),
    ("basinmark.gui.origins_view", "install_origins_dock"),
    ("basinmark.gui.rules_editor", "install_rules_editor"),
    ("basinmark.gui.exports", "install_export_menu"),
    ("basinmark.gui.movie", "install_movie_action"),
    ("basinmark.gui.lock_dialog", "install_unlock_action"),
)


def install_extras(win) -> list[str]:
    """Attach the optional analysis panels that are installed; returns the ones added."""
    import importlib

    added = []
    for module, func in EXTRAS:
        try:
            mod = importlib.import_module(module)
        except ImportError as exc:  # said, not hidden: a panel that cannot import is a bug to fix
            print(f"basinmark: the panel {module} could not be loaded: {exc}", file=sys.stderr)
            continue
        installer = getattr(mod, func, None)
        if installer is None:
            continue
        try:
            installer(win)
        except Exception as exc:  # a broken optional panel must not keep the window from opening
            print(f"basinmark: the panel {module} could not be added: {type(exc).__name__}: {exc}", file=sys.stderr)
            continue
        added.append(module)
    docks = getattr(win, "docks", {})
    if "traces" in docks:
        docks["traces"].raise_()  # the traces stay in front unless the saved layout says otherwise
    win.restore_layout()
    return added


def run(set_path: str | Path | None = None, rules: str | Path | None = None, labeler: str | None = None) -> int:
    """Open the window (on ``set_path`` if given) and run the event loop; returns the exit code."""
    app = make_app()
    from basinmark.gui.main_window import MainWindow

    win = MainWindow()
    install_extras(win)
    if labeler:
        win.label_panel.set_labeler(labeler)
    win.show()
    if set_path is not None:
        win.open_set(set_path, rules)
    return int(app.exec())
