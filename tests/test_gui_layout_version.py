"""A window layout saved by an older version (before the 1366×768 layout) is ignored once; a layout saved by
this version comes back as it was left."""

from __future__ import annotations

import pytest
from PySide6.QtCore import QSettings, Qt

from basinmark.gui.app import install_extras
from basinmark.gui.main_window import LAYOUT_VERSION, MainWindow

pytestmark = pytest.mark.gui


def _window(qtbot, ini):
    w = MainWindow(QSettings(str(ini), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    install_extras(w)
    w.show()
    qtbot.waitExposed(w)
    return w


def _scrambled(w) -> None:
    """What an old layout looked like: the run table hidden, the traces moved to the left, the Summary open."""
    w.docks["runs"].hide()
    w.addDockWidget(Qt.DockWidgetArea.LeftDockWidgetArea, w.docks["traces"])
    w.docks["summary"].show()


def test_old_saved_layout_is_ignored_once(qtbot, tmp_path):
    ini = tmp_path / "settings.ini"
    old = _window(qtbot, ini)
    _scrambled(old)
    # an older version saved its state without a version number and wrote no layout-version key
    settings = old.settings
    settings.setValue("window/geometry", old.saveGeometry())
    settings.setValue("window/state", old.saveState())
    settings.sync()
    old.settings = QSettings(str(tmp_path / "elsewhere.ini"), QSettings.Format.IniFormat)  # its close saves elsewhere
    old.close()

    w = _window(qtbot, ini)
    assert w.docks["runs"].isVisible(), "the old layout (run table hidden) came back"
    assert w.dockWidgetArea(w.docks["traces"]) == Qt.DockWidgetArea.RightDockWidgetArea
    assert not w.docks["summary"].isVisible()
    assert "older version" in w.statusBar().currentMessage()
    w.close()  # saves this version's layout with its version
    assert int(QSettings(str(ini), QSettings.Format.IniFormat).value("window/layout_version")) == LAYOUT_VERSION

    # a layout saved by this version is kept: hide the label panel, close, open again
    w2 = _window(qtbot, ini)
    assert w2.docks["runs"].isVisible()
    w2.docks["label"].hide()
    w2.close()
    w3 = _window(qtbot, ini)
    assert not w3.docks["label"].isVisible() and w3.docks["runs"].isVisible()
    w3.close()


def test_reset_layout_still_works_with_versioned_state(qtbot, tmp_path):
    w = _window(qtbot, tmp_path / "s.ini")
    _scrambled(w)
    w.reset_layout()
    assert w.docks["runs"].isVisible() and not w.docks["summary"].isVisible()
    assert w.dockWidgetArea(w.docks["traces"]) == Qt.DockWidgetArea.RightDockWidgetArea
    w.close()
