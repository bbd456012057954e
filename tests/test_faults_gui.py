"""The window on a set whose folder cannot be written: it says so, and Labels ▸ Save Labels Elsewhere…
keeps the labels in a journal of the person's choosing, bound to the same runs, remembered per set."""

from __future__ import annotations

import errno

import pytest
from PySide6.QtCore import QSettings

from basinmark.core.journal import LabelJournal
from basinmark.core.sets import journal_path, open_set
from basinmark.gui import journal_elsewhere
from basinmark.gui.main_window import MainWindow
from fault_injection import Faults, inject
from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui


def _window(qtbot, settings, root):
    win = MainWindow(settings)
    qtbot.addWidget(win)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
    return win


def test_save_labels_elsewhere_for_a_read_only_set(qtbot, tmp_path, monkeypatch):
    root = make_toy_set(tmp_path / "toyset", ["left", "right", "recrossing"])
    settings = QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat)
    mine = tmp_path / "mine" / "toyset-labels.jsonl"
    mine.parent.mkdir()
    with inject(monkeypatch, Faults(str(root / "*"), code=errno.EROFS, ops=("open", "write"))):
        win = _window(qtbot, settings, root)
        assert win.state.readonly
        text = win.banner.text()
        assert str(journal_path(root)) in text and "read-only" in text.lower() and "Save Labels Elsewhere" in text
        assert journal_elsewhere.action(win) in win.labels_menu.actions()
        assert journal_elsewhere.save_labels_elsewhere(win, mine)
        assert not win.state.readonly and str(mine) in win.banner.text()
        run = win.state.run_ids[1]
        win.state.set_run(run)
        win.label_panel.set_labeler("ines")
        assert win.label_panel.apply_label("left")
        win.close()
    assert not journal_path(root).exists()
    hashes = dict(open_set(root, use_cache=False).content_hashes())
    with LabelJournal.open(mine, readonly=True) as j:
        ev = j.events[-1]
        assert (ev["run"], ev["label"], ev["labeler"]) == (run, "left", "ines")
        assert ev["content_hash"] == hashes[run] and j.header["set_id"] == "toyset"
    # remembered for this set: the next window writes there too, and says so
    win2 = _window(qtbot, settings, root)
    assert not win2.state.readonly and str(mine) in win2.banner.text()
    assert win2.state.journal.path == mine and win2.state.journal.final_label(run) == "left"
    # choosing the set's own journal goes back to it
    assert journal_elsewhere.save_labels_elsewhere(win2, journal_path(root))
    assert win2.state.journal.path == journal_path(root) and str(mine) not in win2.banner.text()
    assert journal_elsewhere.remembered(settings, root) is None
    win2.close()


def test_the_labeler_dialog_refuses_reserved_names_and_control_characters(qtbot):
    from basinmark.gui.labeler import LabelerDialog

    dlg = LabelerDialog("ines", "ines", first_label=False)
    qtbot.addWidget(dlg)
    for bad, words in (("Rule:1a2b", "reserved"), ("auto", "reserved"), ("eve\x1b[8m", "U+001B")):
        dlg.name.setText(bad)
        dlg._accept()
        assert dlg.result() != dlg.DialogCode.Accepted and words in dlg.hint.text()
        assert "\x1b" not in dlg.hint.text()
    dlg.name.setText("ana")
    dlg._accept()
    assert dlg.result() == dlg.DialogCode.Accepted and dlg.chosen() == "ana"
