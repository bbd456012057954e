"""A set's existing label journal is opened (read, checked, replayed) by the loader's thread, not the window's.

At 10,000 runs with two people's labels on every run (20,000 events) opening it took 254-282 ms, in the turn that
ends the load: the window's longest freeze.  The loader opens it when it exists and opens without a question; the
window takes it only if it is the journal it would open itself, and otherwise closes it and opens its own (lock
offers, read-only fallbacks, a journal kept elsewhere stay the window's).  No lock may be left behind."""

from __future__ import annotations

import threading
from pathlib import Path

import pytest
from PySide6.QtCore import QSettings

from basinmark.core.journal import LabelJournal
from basinmark.core.journal_lock import read_lock
from basinmark.core.sets import journal_path, open_set

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing", "unfinished", "left", "right"]


def _window(qtbot, tmp_path: Path):
    from basinmark.gui.main_window import MainWindow

    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    return win


def _labelled_set(tmp_path: Path) -> Path:
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    hashes = dict(open_set(root, use_cache=False).content_hashes())
    with LabelJournal.open(journal_path(root), labeler="ana") as j:
        j.record("toy-002", "left", content_hash=hashes["toy-002"], reason="looked twice")
    return root


@pytest.fixture
def opens(monkeypatch):
    """Which thread opened a journal for writing, per call."""
    seen = []
    real = LabelJournal.open.__func__

    def spy(cls, path, *args, **kw):
        if not kw.get("readonly"):
            seen.append(threading.current_thread() is threading.main_thread())
        return real(cls, path, *args, **kw)

    monkeypatch.setattr(LabelJournal, "open", classmethod(spy))
    return seen


def test_an_existing_journal_is_opened_by_the_loader(qtbot, tmp_path, opens):
    root = _labelled_set(tmp_path)
    opens.clear()
    win = _window(qtbot, tmp_path)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
    assert opens == [False], "the journal was opened on the window's thread"
    j = win.state.journal
    assert j is not None and not j.readonly
    assert win.state.label_row("toy-002")["hand_label"] == "left"
    # labels are saved as before, and the journal is this window's alone
    j.record("toy-003", "left", content_hash=win.state.tset["toy-003"].content_hash)
    assert read_lock(j.path) is not None
    win.close()


def test_a_set_without_a_journal_gets_one_from_the_window(qtbot, tmp_path, opens):
    root = make_toy_set(tmp_path / "fresh", OUTCOMES)
    win = _window(qtbot, tmp_path)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
    assert opens == [True] and win.state.journal is not None and not win.state.journal.readonly
    win.close()


def test_a_journal_in_use_elsewhere_is_left_to_the_window(qtbot, tmp_path, opens):
    root = _labelled_set(tmp_path)
    other = LabelJournal.open(journal_path(root), labeler="bo")   # another program holds the lock
    opens.clear()
    try:
        win = _window(qtbot, tmp_path)
        with qtbot.waitSignal(win.set_loaded, timeout=20000):
            win.open_set(root, use_cache=False)
        assert win.state.journal is not None and win.state.journal.readonly
        assert "Read-only" in win.state.journal_message
        assert opens == [False, True]   # tried by the loader, then by the window (which says why it cannot)
        win.close()
    finally:
        other.close()


def test_a_journal_opened_for_a_load_that_is_replaced_is_closed(qtbot, tmp_path):
    first = _labelled_set(tmp_path / "a")
    second = _labelled_set(tmp_path / "b")
    win = _window(qtbot, tmp_path)
    win.open_set(first, use_cache=False)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(second, use_cache=False)
    qtbot.wait(200)
    assert win.state.tset.root == second
    assert read_lock(journal_path(first)) is None, "the replaced load's journal is still locked"
    win.close()
    assert read_lock(journal_path(second)) is None


def test_a_journal_opened_for_a_failed_load_is_closed(qtbot, tmp_path, monkeypatch):
    from basinmark.gui import loader

    root = _labelled_set(tmp_path)

    def broken(*_a, **_k):
        raise RuntimeError("classification broke")

    monkeypatch.setattr(loader, "classify_with_rules", broken)
    win = _window(qtbot, tmp_path)
    with qtbot.waitSignal(win.load_failed, timeout=20000):
        win.open_set(root, use_cache=False)
    qtbot.wait(100)
    assert read_lock(journal_path(root)) is None
    win.close()


def test_a_journal_opened_for_another_labeler_is_closed_and_opened_again(qtbot, tmp_path, opens):
    """The labeler changed while the set loaded: the loader's journal (opened for the old name) is not taken."""
    root = _labelled_set(tmp_path)
    opens.clear()
    win = _window(qtbot, tmp_path)
    win.label_panel.labeler_name = "ana"
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
        win.label_panel.labeler_name = "cy"
    assert opens == [False, True]
    j = win.state.journal
    assert j is not None and not j.readonly and j.labeler == "cy"
    win.close()
    assert read_lock(journal_path(root)) is None


def test_each_persons_labels_are_built_by_the_loader(qtbot, tmp_path, monkeypatch):
    """The review compares people; building one person's labels from 20,000 events took ~20 ms of the comparing turn.
    The loader builds them beside opening the journal, and they are kept until the next event."""
    from basinmark.core.journal_replay import Replay

    root = _labelled_set(tmp_path)
    with LabelJournal.open(journal_path(root), labeler="bo") as j:
        j.record("toy-004", "right", content_hash=dict(open_set(root, use_cache=False).content_hashes())["toy-004"])
    built = []
    real = Replay._build_side

    def spy(self, which):
        built.append((which, threading.current_thread() is threading.main_thread()))
        return real(self, which)

    monkeypatch.setattr(Replay, "_build_side", spy)
    win = _window(qtbot, tmp_path)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
    assert {w for w, main in built if not main} >= {"ana", "bo"}
    built.clear()
    win.state.journal.labels("ana"), win.state.journal.labels("bo")
    assert built == []
    win.close()


def test_the_label_table_is_built_by_the_loader_and_equals_the_windows_own(qtbot, tmp_path, monkeypatch):
    """At 10,000 runs with 20,000 journal events, building the label table (the journal's state of every run, then
    the table) was the longest turn that ends a load: 86-108 ms.  The loader builds it beside opening the journal;
    the window takes it if it stands on the same journal, classification, rules and set."""
    import basinmark.gui.state as state_mod

    root = _labelled_set(tmp_path)
    real = state_mod.whole_label_table
    on_main = []

    def spy(tset, journal, *args, **kw):
        if journal is not None and tset is not None and len(tset):   # (an empty table as the open starts is free)
            on_main.append(threading.current_thread() is threading.main_thread())
        return real(tset, journal, *args, **kw)

    monkeypatch.setattr(state_mod, "whole_label_table", spy)
    win = _window(qtbot, tmp_path)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
    qtbot.waitUntil(lambda: not win.busy, timeout=20000)
    assert on_main == [False], on_main   # built once, off the window's thread
    st = win.state
    own, outside = real(st.tset, st.journal, st.classification)
    assert st.labels.equals(own) and st.labels_outside == outside
    assert st.label_row("toy-002")["hand_label"] == "left"
    # a label afterwards is the window's own work, as always
    st.journal.record("toy-003", "right", content_hash=st.tset["toy-003"].content_hash, reason="late")
    st.refresh_labels()
    assert st.label_row("toy-003")["hand_label"] == "right"
    win.close()


def test_a_table_built_for_other_rules_is_not_taken(qtbot, tmp_path):
    from basinmark.gui.state import AppState, LabelsAhead

    root = _labelled_set(tmp_path)
    win = _window(qtbot, tmp_path)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
    qtbot.waitUntil(lambda: not win.busy, timeout=20000)
    st: AppState = win.state
    stale = LabelsAhead(st.tset, st.journal, None, None)   # as if built before the rules were read
    st.offer_labels(stale)
    st.prepare_labels()
    st.refresh_labels(whole=True)
    assert st.labels is not stale.table
    assert st.label_row("toy-001")["auto_label"]  # the classification's labels, not the stale table's
    win.close()
