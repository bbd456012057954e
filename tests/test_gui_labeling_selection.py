"""One current run: whatever filter or sort is active, a label lands on the run the table selects
and the label panel names (driven with real clicks and keys, offscreen)."""

from __future__ import annotations

import random

import pytest
from PySide6.QtCore import Qt
from PySide6.QtTest import QTest

from labeling_helpers import JournalTail, click_filter, click_header, click_row, journal_events, make_root, open_window

pytestmark = pytest.mark.gui


@pytest.fixture
def root(tmp_path):
    return make_root(tmp_path)


@pytest.fixture
def win(qtbot, tmp_path, root):
    w = open_window(qtbot, tmp_path, root)
    yield w
    w.close()


def press_label_key(win, key: Qt.Key) -> None:
    """A number key in the run table; when the key starts a pending label, Enter in the Reason field saves it."""
    view = win.run_table.view
    view.setFocus()
    QTest.keyClick(view, key)
    if getattr(win.label_panel, "pending", None):
        QTest.keyClick(win.label_panel.reason, Qt.Key.Key_Return)


def shown_everywhere(win) -> set[str]:
    """The run each part of the window shows: state, molecule, label panel, status bar, table selection."""
    rows = win.run_table.view.selectionModel().selectedRows()
    selected = rows[0].data() if rows else ""
    traj = win.molecule.trajectory
    panel = getattr(win.label_panel, "shown_run", None) or win.label_panel.current.text()
    traced = win.traces._traj
    names = {win.state.run_id, traj.run_id if traj is not None else "", selected,
             traced.run_id if traced is not None else ""}
    assert win.state.run_id in panel, (panel, win.state.run_id)
    assert f"run {win.state.run_id}" in win.status_where.text()
    return names


def test_flagged_filter_then_click_labels_the_clicked_run(win, root):
    assert win.state.run_id == "toy-001"
    click_filter(win, "flagged")
    clicked = click_row(win, 0)
    assert clicked == "toy-005"
    assert shown_everywhere(win) == {"toy-005"}
    press_label_key(win, Qt.Key.Key_2)
    events = journal_events(root)
    assert [(e["run"], e["label"]) for e in events] == [("toy-005", "right")]


def test_random_sort_filter_click_sequences_keep_one_current_run(win, root):
    rng = random.Random(20261202)
    # drawing the traces is slow and not under test; the run they were given is checked below
    win.traces.redraw = lambda keep_view=False: None
    journal_events = JournalTail(root)
    filters = list(win.run_table.filter_buttons)
    labels = 0
    for step in range(300):
        what = rng.random()
        if what < 0.25:
            click_filter(win, rng.choice(filters))
        elif what < 0.4:
            click_header(win, rng.randrange(win.run_table.view.model().columnCount()))
        elif what < 0.85:
            n = win.run_table.view.model().rowCount()
            if n:
                click_row(win, rng.randrange(n), rng.randrange(3))
        else:
            before = len(journal_events())
            shown = win.state.run_id
            press_label_key(win, rng.choice([Qt.Key.Key_1, Qt.Key.Key_2]))
            new = journal_events()[before:]
            if shown:
                assert [e["run"] for e in new] == [shown], f"step {step}"
                labels += 1
            else:
                assert new == []
        names = shown_everywhere(win)
        if win.state.run_id:
            assert names == {win.state.run_id}, f"step {step}: {names}"
    assert labels > 10
