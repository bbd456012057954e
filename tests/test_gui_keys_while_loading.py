"""Number keys keep one meaning: while a set loads they mean no label at all (never the fixed labels, never the
previous set's), and passing messages about the previous set go away when another set opens."""

from __future__ import annotations

import threading

import pytest
from PySide6.QtCore import QSettings, Qt
from PySide6.QtTest import QTest

import basinmark.core.sets as core_sets
from basinmark.gui.main_window import MainWindow

from gui_fixtures import TOY_RULES, make_toy_set
from labeling_helpers import journal_events

pytestmark = pytest.mark.gui


@pytest.fixture
def gate(monkeypatch):
    """Hold every set load after its runs are read, until the test opens the gate."""
    ev = threading.Event()
    real = core_sets.open_set

    def held(*args, **kwargs):
        tset = real(*args, **kwargs)
        ev.wait(30)
        return tset

    monkeypatch.setattr(core_sets, "open_set", held)
    yield ev
    ev.set()


def key_meanings(win) -> dict[str, str]:
    """{key: label} from the label actions and from the numbers written on the label buttons."""
    out = {a.shortcut().toString(): label for label, a in win.label_panel.label_actions.items()
           if not a.shortcut().isEmpty()}
    for label, b in win.label_panel.buttons.items():
        head = b.text().split()[0]
        if head.isdigit():
            assert out.get(head, label) == label
            out[head] = label
    return out


def _window(qtbot, tmp_path) -> MainWindow:
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    w.show()
    qtbot.waitExposed(w)
    w.set_labeler("kim")
    w.actions_["ask_reason"].setChecked(False)
    return w


def _press_while_loading(win, qtbot, root, gate) -> dict[str, str]:
    """Open ``root`` with the load held; press every number key in the run table; return the keys' meanings."""
    win.open_set(root, use_cache=False)
    qtbot.waitUntil(lambda: win.state.traj is not None, timeout=20000)  # runs are on screen, loading goes on
    assert win.state.loading
    during = key_meanings(win)
    win.run_table.view.setFocus()
    for key in (Qt.Key.Key_1, Qt.Key.Key_2, Qt.Key.Key_3):
        QTest.keyClick(win.run_table.view, key)
        assert "loading" in win.label_panel.feedback.text().lower()
    assert win.label_panel.pending is None
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        gate.set()
    return during


def test_number_keys_mean_no_other_label_while_the_first_set_loads(qtbot, tmp_path, gate):
    root = make_toy_set(tmp_path / "toyset", ["left", "right", "recrossing"])
    win = _window(qtbot, tmp_path)
    during = _press_while_loading(win, qtbot, root, gate)
    after = key_meanings(win)
    assert after["1"] == "left" and after["2"] == "right"
    assert all(after.get(k) == v for k, v in during.items()), (during, after)
    assert journal_events(root) == []
    QTest.keyClick(win.run_table.view, Qt.Key.Key_1)
    assert [e["label"] for e in journal_events(root)] == ["left"]
    win.close()


def test_number_keys_never_keep_the_previous_sets_labels_while_another_loads(qtbot, tmp_path, gate):
    first = make_toy_set(tmp_path / "first", ["left", "right"])
    second = make_toy_set(tmp_path / "second", ["left", "right"])
    (second / "basins.toml").write_text(TOY_RULES.replace("basins.left", "basins.west")
                                        .replace("basins.right", "basins.east"))
    win = _window(qtbot, tmp_path)
    gate.set()
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(first, use_cache=False)
    assert key_meanings(win)["1"] == "left"
    gate.clear()
    during = _press_while_loading(win, qtbot, second, gate)
    after = key_meanings(win)
    assert after["1"] == "west" and after["2"] == "east"
    assert all(after.get(k) == v for k, v in during.items()), (during, after)
    assert journal_events(second) == [] and journal_events(first) == []
    # the Labels menu lists the new labels only (no action left over from the first set or from loading)
    texts = [a.text() for a in win.labels_menu.actions() if a.text().startswith("Label '")]
    assert texts[:2] == ["Label 'west'", "Label 'east'"] and not any("left" in t for t in texts)
    win.close()


def test_an_undone_message_goes_away_when_another_set_opens(qtbot, tmp_path):
    first = make_toy_set(tmp_path / "first", ["left", "right"])
    second = make_toy_set(tmp_path / "second", ["right", "left"])
    win = _window(qtbot, tmp_path)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(first, use_cache=False)
    win.run_table.view.setFocus()
    QTest.keyClick(win.run_table.view, Qt.Key.Key_1)
    QTest.keyClick(win.run_table.view, Qt.Key.Key_Z, Qt.KeyboardModifier.ControlModifier)
    assert "Undone" in win.label_panel.feedback.text()
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(second, use_cache=False)
    assert "Undone" not in win.label_panel.feedback.text()
    assert "Undone" not in win.statusBar().currentMessage()
    win.close()
