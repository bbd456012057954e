"""The label panel's Note field: saved to the journal as a note event, shown again for the run, never a label."""

from __future__ import annotations

import pytest
from PySide6.QtCore import QSettings

from basinmark.core.journal import LabelJournal
from basinmark.core.sets import journal_path
from basinmark.gui.main_window import MainWindow

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui


@pytest.fixture
def win(qtbot, tmp_path):
    root = make_toy_set(tmp_path / "toyset", ["left", "right"])
    w = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    w.show()
    qtbot.waitExposed(w)
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(root, use_cache=False)
    w.set_labeler("ines")
    w.state.set_run("toy-001")
    yield w
    w.close()


def test_note_field_saves_a_note_event_and_shows_it_again(win):
    panel, st = win.label_panel, win.state
    before = st.label_row("toy-001")
    panel.note.setText("check the forming bond again")
    panel.note.returnPressed.emit()
    root = st.tset.root
    with LabelJournal.open(journal_path(root), readonly=True) as j:
        assert j.run_note("toy-001") == "check the forming bond again"
        assert j.final_label("toy-001") == before["final_label"] or j.final_label("toy-001") is None
    assert st.label_row("toy-001")["hand_label"] == before["hand_label"]   # a note is not a label
    st.set_run("toy-002")
    assert panel.note.text() == ""
    st.set_run("toy-001")
    assert panel.note.text() == "check the forming bond again"
    assert "note: check the forming bond again" in panel.current.toolTip()
