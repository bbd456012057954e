"""Views that belonged to one set are cleared when another set opens (nothing of the first is shown
as if it were the second's)."""

from __future__ import annotations

import pytest
from PySide6.QtCore import QSettings

from basinmark.gui.main_window import MainWindow
from basinmark.gui.summary_view import install_summary_dock
from basinmark.gui.sweep_view import install_sweep_dock

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui
OUTCOMES = ["left", "right", "left", "right", "left", "recrossing"]


def test_tst_and_sweep_do_not_carry_over(qtbot, tmp_path):
    first = make_toy_set(tmp_path / "first", OUTCOMES)
    (first / "basinmark-set.toml").write_text('[tst]\nmajor = "left"\nminor = "right"\nddg = 0.5\n')
    second = make_toy_set(tmp_path / "second", OUTCOMES)
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    install_summary_dock(w)
    install_sweep_dock(w)
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(first, use_cache=False)
    assert w.summary_panel.tst_box.isChecked() and w.summary_panel.ddg.value() == pytest.approx(0.5)
    view = w.sweep_view
    view.run()
    view.worker.wait()
    qtbot.waitUntil(lambda: view.table is not None, timeout=20000)
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(second, use_cache=False)
    assert not w.summary_panel.tst_box.isChecked()
    assert w.summary_panel.summary is None or w.summary_panel.summary.tst_ratio is None
    assert view.table is None
    w.close()


def test_a_label_key_while_loading_says_it_was_not_saved(qtbot, tmp_path):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(root, use_cache=False)
    journal, w.state.journal = w.state.journal, None  # as between the first run shown and the journal opened
    w.state.loading = True
    assert not w.label_panel.apply_label("left")
    assert "still loading" in w.label_panel.feedback.text()
    w.state.journal, w.state.loading = journal, False
    w.close()
