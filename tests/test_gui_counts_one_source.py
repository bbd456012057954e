"""Every count of runs per outcome the window shows (the run table's counts, the map's legend, the summary plots'
legends) is the same number for the same labels: they come from one function, on the sample set and a toy set."""

from __future__ import annotations

import re
import shutil

import pandas as pd
import pytest
from PySide6.QtCore import QSettings, Qt
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QApplication

from basinmark.gui.app import bundled_sample_set, install_extras
from basinmark.gui.label_table import final_label_counts
from basinmark.gui.main_window import MainWindow

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

SAMPLE = bundled_sample_set()
ENTRY = re.compile(r"^(?P<label>.+?) \((?:(?P<part>\d+) of )?(?P<n>\d+)(?P<rest>[^)]*)\)$")


def _settle(qtbot) -> None:
    for _ in range(3):
        QApplication.processEvents()
        qtbot.wait(10)


def _legend(plot_item) -> dict[str, int]:
    """{label: the number of runs with that label} read from a plot legend's entries ("left (5)",
    "unfinished (2 of 7)": 7 runs, 2 of them drawn)."""
    out = {}
    for _sample, text in plot_item.legend.items:
        m = ENTRY.match(text.text)
        if m and m["label"] not in ("observed", "TST"):
            out[m["label"]] = int(m["n"])
    return out


def _open(qtbot, tmp_path, root) -> MainWindow:
    win = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    install_extras(win)
    win.resize(1600, 1000)
    win.show()
    qtbot.waitExposed(win)
    with qtbot.waitSignal(win.set_loaded, timeout=60000):
        win.open_set(root, use_cache=False)
    win.set_labeler("kim")
    win.actions_["ask_reason"].setChecked(False)
    return win


def _all_counts(win, qtbot) -> tuple[dict, dict, dict]:
    for name in ("map", "summary"):
        win.docks[name].show()
        win.docks[name].raise_()
        _settle(qtbot)
    table = {k: v for k, v in win.run_table.outcome_counts().items() if v}
    map_legend = _legend(win.map_panel.canvas.plot_item)
    commit_legend = _legend(win.summary_panel.p_commit)
    return table, map_legend, commit_legend


def _check(win, qtbot) -> dict:
    table, map_legend, commit_legend = _all_counts(win, qtbot)
    assert map_legend == table
    assert commit_legend, "the commit-time plot should have a legend"
    for label, n in commit_legend.items():
        assert n == table[label], (label, commit_legend, table)
    assert sum(table.values()) == len(win.state.labels)
    return table


def test_counts_agree_on_a_toy_set_also_after_labels(qtbot, tmp_path):
    outcomes = ["left", "right", "unfinished", "unfinished", "recrossing", "left", "unfinished", "right"]
    win = _open(qtbot, tmp_path, make_toy_set(tmp_path / "toyset", outcomes))
    table = _check(win, qtbot)
    assert table == pd.Series(outcomes).value_counts().to_dict()
    # hand labels move runs between outcomes: every count follows
    win.state.set_run("toy-003")
    win.run_table.view.setFocus()
    QTest.keyClick(win.run_table.view, Qt.Key.Key_1)   # unfinished -> left
    table = _check(win, qtbot)
    assert table["left"] == 3 and table["unfinished"] == 2
    win.close()


@pytest.mark.skipif(not SAMPLE.is_dir(), reason="the bundled sample set is not in this checkout")
def test_counts_agree_on_the_sample_set(qtbot, tmp_path):
    work = tmp_path / "ringfork"
    shutil.copytree(SAMPLE, work, ignore=shutil.ignore_patterns(".basinmark-cache", "basinmark-labels.*"))
    win = _open(qtbot, tmp_path, work)
    table = _check(win, qtbot)
    assert table == final_label_counts(win.state.labels["final_label"], win.state.rules.products)
    win.close()


def test_final_label_counts_orders_products_then_fixed_labels():
    got = final_label_counts(["b", "", "unfinished", "a", "b", "zeta", "recrossing"], ["a", "b", "c"])
    # products first (a product with no run is listed with 0), then the fixed labels, then others
    assert list(got.items()) == [("a", 1), ("b", 2), ("c", 0), ("recrossing", 1), ("unfinished", 1),
                                 ("unclassified", 1), ("zeta", 1)]
