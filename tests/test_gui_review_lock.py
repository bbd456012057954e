"""Journal locks from the window: a lock whose program is gone is offered to break (recorded in the journal
as the command line's unlock records it); a live holder is named and the journal stays read-only; a lock
from another host is broken only on a second, explicit choice."""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys

import pytest
from PySide6.QtCore import QSettings

import basinmark.gui.lock_dialog as lock_dialog
from basinmark.core.journal import LabelJournal
from basinmark.core.journal_lock import lock_path
from basinmark.core.sets import journal_path
from basinmark.gui.main_window import MainWindow

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "left", "recrossing"]


@pytest.fixture(autouse=True)
def _labeler_settled(monkeypatch):
    """Where the window asks once who is labeling, answer with the name already set."""
    try:
        import basinmark.gui.labeler as labeler
    except ImportError:
        return
    monkeypatch.setattr(labeler, "ask_labeler", lambda parent, current, login, **kw: current)


def _dead_pid() -> int:
    """The pid of a process that has ended (reaped), so nothing on this host runs under it now."""
    p = subprocess.Popen([sys.executable, "-c", "pass"])
    p.wait()
    return p.pid


def _write_lock(journal, *, host: str, pid: int) -> dict:
    holder = {"owner": "dana", "host": host, "pid": pid, "time": "2026-01-01T00:00:00Z", "token": "0123456789abcdef"}
    lock_path(journal).write_text(json.dumps(holder) + "\n")
    return holder


def _events(path) -> list[dict]:
    return [json.loads(x) for x in path.read_text().splitlines() if x.strip()]


@pytest.fixture
def locked_set(tmp_path):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    with LabelJournal.open(journal_path(root), labeler="dana") as j:
        j.record("toy-001", "left", content_hash="")
    return root


def _window(qtbot, tmp_path) -> MainWindow:
    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    lock_dialog.install_unlock_action(win)
    win.show()
    qtbot.waitExposed(win)
    return win


def _open(qtbot, win, root) -> None:
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)


def test_a_stale_lock_is_offered_to_break_and_the_journal_records_it(qtbot, tmp_path, locked_set, monkeypatch):
    root = locked_set
    pid = _dead_pid()
    _write_lock(journal_path(root), host=socket.gethostname(), pid=pid)
    asked = []
    monkeypatch.setattr(lock_dialog, "ask", lambda _p, title, text, accept: asked.append(text) or True)
    monkeypatch.setattr(lock_dialog, "tell", lambda *a: pytest.fail("nothing to tell: the lock is stale"))
    win = _window(qtbot, tmp_path)
    win.label_panel.set_labeler("erin")
    _open(qtbot, win, root)
    # the window labels (the lock is gone and this window holds the new one)
    assert not win.state.readonly
    held = json.loads(lock_path(journal_path(root)).read_text())
    assert held["pid"] == os.getpid()
    broken = [e for e in _events(journal_path(root)) if e.get("kind") == "lock_broken"]
    assert len(broken) == 1 and broken[0]["old_lock"]["pid"] == pid and broken[0]["old_lock"]["owner"] == "dana"
    assert broken[0]["stale"] is True
    # asked at most once, naming the holder (the core may also break a dead holder's lock on its own)
    assert len(asked) <= 1 and all("dana" in t and str(pid) in t for t in asked)
    win.state.set_run("toy-002")
    assert win.label_panel.apply_label("right")
    assert _events(journal_path(root))[-1]["run"] == "toy-002"
    win.close()


def test_declining_keeps_the_journal_read_only_and_the_lock_in_place(qtbot, tmp_path, locked_set, monkeypatch):
    root = locked_set
    _write_lock(journal_path(root), host="far-away-host", pid=4242)
    asked = []
    monkeypatch.setattr(lock_dialog, "ask", lambda _p, title, text, accept: asked.append((text, accept)) or False)
    win = _window(qtbot, tmp_path)
    _open(qtbot, win, root)
    assert win.state.readonly and len(asked) == 1
    text, accept = asked[0]
    assert "far-away-host" in text and "4242" in text and accept == "Break Lock Anyway"
    assert "far-away-host" in win.state.journal_message
    assert json.loads(lock_path(journal_path(root)).read_text())["host"] == "far-away-host"
    assert not any(e.get("kind") == "lock_broken" for e in _events(journal_path(root)))
    assert win.state.label_row("toy-001")["hand_label"] == "left"  # the labels are shown, read-only
    # later, from the menu, the person says the other program is gone: broken (forced) and recorded
    monkeypatch.setattr(lock_dialog, "ask", lambda *a: True)
    win.unlock_action.trigger()
    assert not win.state.readonly
    broken = [e for e in _events(journal_path(root)) if e.get("kind") == "lock_broken"]
    assert len(broken) == 1 and broken[0]["old_lock"]["host"] == "far-away-host" and broken[0]["stale"] is False
    win.close()


def test_a_live_holder_is_named_and_never_broken(qtbot, tmp_path, locked_set, monkeypatch):
    root = locked_set
    child = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
    try:
        _write_lock(journal_path(root), host=socket.gethostname(), pid=child.pid)
        monkeypatch.setattr(lock_dialog, "ask", lambda *a: pytest.fail("a running holder's lock is not offered"))
        told = []
        monkeypatch.setattr(lock_dialog, "tell", lambda _p, title, text: told.append(text))
        win = _window(qtbot, tmp_path)
        _open(qtbot, win, root)
        assert win.state.readonly and "dana" in win.state.journal_message
        assert "Unlock Label Journal" in win.state.journal_message
        win.unlock_action.trigger()
        assert win.state.readonly and told and str(child.pid) in told[-1] and "still running" in told[-1]
        assert json.loads(lock_path(journal_path(root)).read_text())["pid"] == child.pid
        # that program then stops without closing the journal: the menu offers to break its lock
        child.kill()
        child.wait()
        asked = []
        monkeypatch.setattr(lock_dialog, "ask", lambda _p, title, text, accept: asked.append((text, accept)) or True)
        win.unlock_action.trigger()
        assert len(asked) == 1 and "no longer running" in asked[0][0] and asked[0][1] == "Break Lock and Label"
        assert not win.state.readonly
        broken = [e for e in _events(journal_path(root)) if e.get("kind") == "lock_broken"]
        assert len(broken) == 1 and broken[0]["old_lock"]["pid"] == child.pid and broken[0]["stale"] is True
        win.close()
    finally:
        child.kill()
        child.wait()


def test_holder_situations():
    here = socket.gethostname()
    assert lock_dialog.holder_situation(None) == "none"
    assert lock_dialog.holder_situation({}) == "unknown"  # a lock file that cannot be read
    assert lock_dialog.holder_situation({"host": here, "pid": os.getpid()}) == "ours"
    assert lock_dialog.holder_situation({"host": here, "pid": _dead_pid()}) == "gone"
    assert lock_dialog.holder_situation({"host": "far-away-host", "pid": os.getpid()}) == "elsewhere"
    assert lock_dialog.holder_situation({"host": here, "pid": "x"}) == "unknown"


def test_an_unreadable_lock_is_read_again_before_anything_is_offered(tmp_path, monkeypatch):
    journal = tmp_path / "j.jsonl"
    lock_path(journal).write_text("")  # as if another program had just created it
    reads = []
    real = lock_dialog.read_lock

    def slow_writer(path):
        reads.append(path)
        if len(reads) == 2:  # the other program finishes writing its lock
            _write_lock(journal, host="far-away-host", pid=7)
        return real(path)

    monkeypatch.setattr(lock_dialog, "read_lock", slow_writer)
    assert lock_dialog._settled_holder(journal, pause_s=0.0)["host"] == "far-away-host"
