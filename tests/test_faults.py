"""File-system faults end in a sentence: which file, what to do, a non-zero exit, no traceback.

Tests run as root, where chmod does not stop a write, so a read-only place, a refused permission and a
full disk are injected (tests/fault_injection.py); tests/test_faults_mounted.py repeats the main cases
on real read-only and full file systems where the machine lets a test mount one.
"""

from __future__ import annotations

import errno
import json
import os
import shutil
import socket
import subprocess
import sys

import pytest

from basinmark.cli import main
from basinmark.core.journal import LabelJournal
from basinmark.core.sets import CACHE_NAME
from fault_injection import Faults, inject
from test_labels_cli import ENDS, PLAN, RULES, ramp, write_half

JOURNAL = "basinmark-labels.jsonl"


def build_set(root):
    root.mkdir()
    for i, outcome in enumerate(PLAN):
        write_half(root / f"t{i:02d}.bwd.xyz", ramp(2.0, 3.0), ramp(2.0, 3.0))
        fa, fb = ENDS[outcome]
        write_half(root / f"t{i:02d}.fwd.xyz", ramp(2.0, fa), ramp(2.0, fb))
    (root / "basins.toml").write_text(RULES)
    assert main(["classify", str(root)]) == 0
    assert main(["label", str(root), "t01", "beta", "--reason", "second bond wins", "--as", "ines"]) == 0
    return root


@pytest.fixture(scope="module")
def template(tmp_path_factory):
    return build_set(tmp_path_factory.mktemp("tpl") / "twinpath")


@pytest.fixture
def tset(template, tmp_path):
    return shutil.copytree(template, tmp_path / "twinpath")


def run(argv, capsys):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def labels(root, journal=None):
    with LabelJournal.open(journal or root / JOURNAL, readonly=True) as j:
        return j.state().set_index("run")[["final_label", "hand_label", "labeler", "reason"]].to_dict("index")


def leftovers(folder, lock=True):
    """Lock files, temporary and set-aside files that a failed write must not leave behind."""
    return sorted(p.name for p in folder.iterdir() if (lock and p.name.endswith(".lock")) or ".tmp" in p.name
                  or ".torn-" in p.name)


def _dead_pid() -> int:
    done = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
    return int(done.stdout)


def end_of_process(root) -> bool:
    """What the next command finds once the failed one has ended.

    When the head file could not be brought up to date, the journal keeps its lock on purpose (the
    files then look like a crash's leftovers, which the next writer accepts once the lock's process is
    gone, breaking the lock and recording that).  The commands here ran inside the test's process, so
    the lock names a live pid; it is pointed at a finished process, as the next real run would find it.
    Returns whether there was such a lock.
    """
    lock = root / f"{JOURNAL}.lock"
    if not lock.exists():
        return False
    info = json.loads(lock.read_text())
    assert info["pid"] == os.getpid() and info["host"] == socket.gethostname()  # ours, nobody else's
    info["pid"] = _dead_pid()
    lock.write_text(json.dumps(info))
    return True


def assert_sentence(code, err, *names):
    """A non-zero exit, one line of error, naming each of ``names`` (words compared without regard to case;
    the journal's own files give the system's words, e.g. "No space left on device", other files ours)."""
    assert code != 0
    assert "Traceback" not in err and err.startswith("basinmark: error: ") and err.count("\n") == 1, err
    for name in names:
        if name == FULL:
            assert "disk is full" in err or "No space left on device" in err, err
        else:
            assert str(name).lower() in err.lower(), err


FULL = object()  # "the disk is full" in our words or the system's


# --- the journal's lock, the journal itself, its head and its torn tail --------------------------

def test_lock_in_a_read_only_folder_says_which_file_and_where_labels_can_go(tset, monkeypatch, capsys):
    before = labels(tset)
    with inject(monkeypatch, Faults(str(tset / "*"), code=errno.EROFS, ops=("open",))):
        code, out, err = run(["label", tset, "t02", "alpha", "--no-cache"], capsys)
    assert_sentence(code, err, tset / f"{JOURNAL}.lock", "read-only", "--journal PATH")
    assert labels(tset) == before and leftovers(tset) == []


def test_read_only_journal_file(tset, monkeypatch, capsys):
    with inject(monkeypatch, Faults(str(tset / JOURNAL), code=errno.EACCES, ops=("open",))):
        code, out, err = run(["label", tset, "t02", "alpha", "--no-cache"], capsys)
    assert_sentence(code, err, tset / JOURNAL, "permission denied", "--journal PATH")
    assert leftovers(tset) == []  # the lock taken before the journal was refused is released


@pytest.mark.parametrize("ops", [("write",), ("fsync",), ("open",)])
def test_full_disk_while_creating_the_lock_leaves_no_lock(tset, monkeypatch, capsys, ops):
    with inject(monkeypatch, Faults("*.lock", ops=ops)):
        code, out, err = run(["label", tset, "t02", "alpha", "--no-cache"], capsys)
    assert_sentence(code, err, tset / f"{JOURNAL}.lock", FULL, "free some space")
    assert leftovers(tset) == []
    # the next writer is not blocked by a half-made lock
    assert run(["label", tset, "t02", "alpha", "--no-cache"], capsys)[0] == 0


def test_full_disk_while_updating_the_head_keeps_the_label_and_says_so(tset, monkeypatch, capsys):
    with inject(monkeypatch, Faults("*.head.tmp-*")):
        code, out, err = run(["label", tset, "t02", "alpha", "--no-cache"], capsys)
    assert code == 0 and "Traceback" not in err
    assert f"head file of {tset / JOURNAL}" in err and "No space left on device" in err, err
    assert "tried again at the next write" in err
    assert labels(tset)["t02"]["hand_label"] == "alpha" and leftovers(tset, lock=False) == []
    # the next writer (after this process) brings the head up to date and goes on
    end_of_process(tset)
    code, out, err = run(["label", tset, "t03", "beta", "--no-cache"], capsys)
    assert code == 0, err
    assert labels(tset)["t02"]["hand_label"] == "alpha" and leftovers(tset) == []


def test_full_disk_while_setting_aside_a_torn_tail(tset, monkeypatch, capsys):
    jp = tset / JOURNAL
    with open(jp, "ab") as fh:
        fh.write(b'{"kind":"label","run":"t0')  # a crash mid-line
    size = jp.stat().st_size
    with inject(monkeypatch, Faults("*.torn-*")):
        code, out, err = run(["label", tset, "t02", "alpha", "--no-cache"], capsys)
    assert_sentence(code, err, jp, "incomplete last line", FULL, "the journal was not changed",
                    "free some space")
    assert jp.stat().st_size == size and leftovers(tset) == []  # nothing cut, no half copy, no lock
    code, out, err = run(["label", tset, "t02", "alpha", "--no-cache"], capsys)
    assert code == 0 and "moved to" in err and labels(tset)["t02"]["hand_label"] == "alpha"


def test_full_disk_while_writing_a_label_records_nothing(tset, monkeypatch, capsys):
    before = labels(tset)
    size = (tset / JOURNAL).stat().st_size
    with inject(monkeypatch, Faults(str(tset / JOURNAL))):  # half the line reaches the disk, then it is full
        code, out, err = run(["label", tset, "t02", "alpha", "--no-cache"], capsys)
    assert_sentence(code, err, tset / JOURNAL, "No space left on device", "nothing of this change was recorded",
                    "free some space")
    assert (tset / JOURNAL).stat().st_size == size  # the half line was cut again
    assert labels(tset) == before and leftovers(tset) == []


# --- exports -------------------------------------------------------------------------------------

def test_export_into_a_missing_folder(tset, tmp_path, capsys):
    target = tmp_path / "no" / "such" / "labels.csv"
    code, out, err = run(["export-labels", tset, "-o", target, "--no-data"], capsys)
    assert_sentence(code, err, target, f"the folder {target.parent} does not exist", "create it first")


@pytest.mark.parametrize("code_, words", [(errno.EROFS, "read-only"), (errno.EACCES, "permission denied"),
                                          (errno.ENOSPC, FULL)])
def test_export_into_an_unwritable_place(tset, tmp_path, monkeypatch, capsys, code_, words):
    target = tmp_path / "out" / "labels.csv"
    target.parent.mkdir()
    target.write_text("the previous export\n")
    with inject(monkeypatch, Faults(str(target.parent / "*"), code=code_, ops=("open", "write"))):
        code, out, err = run(["export-labels", tset, "-o", target, "--no-data"], capsys)
    assert_sentence(code, err, target, words)
    # the earlier file is untouched and no temporary file is left
    assert target.read_text() == "the previous export\n" and sorted(p.name for p in target.parent.iterdir()) == [
        "labels.csv"]


def test_other_outputs_end_in_a_sentence(tset, tmp_path, capsys):
    missing = tmp_path / "nowhere"
    for argv in (["export-summary", tset, "-o", missing / "s.md"],
                 ["compare", tset, "--labelers", "auto", "hand", "-o", missing / "r.md"],
                 ["export-run", tset, "t00", "-o", missing / "r.xyz"]):
        code, out, err = run(argv, capsys)
        assert_sentence(code, err, missing)


def test_cli_safety_net_turns_any_oserror_into_a_sentence(monkeypatch, capsys):
    import basinmark.commands.labels as labels_cmd

    def boom(args):
        raise OSError(errno.ENOSPC, "No space left on device", "/some/where/file.bin")

    monkeypatch.setattr(labels_cmd, "cmd_history", boom)
    code, out, err = run(["history", "x", "y"], capsys)
    assert_sentence(code, err, "/some/where/file.bin", FULL, "free some space")


# --- the cache -----------------------------------------------------------------------------------

def _signed(entry, obj) -> None:
    """Write a segment index with a valid checksum line, so that the deeper checks are the ones exercised."""
    import hashlib

    body = json.dumps(obj)
    (entry / "index.json").write_text(f"sha256 {hashlib.sha256(body.encode()).hexdigest()}\n{body}")


@pytest.mark.parametrize("damage", ["truncated", "edited", "not an object", "missing key", "outside the arrays",
                                    "wrong atoms"])
def test_a_damaged_cache_index_is_ignored_rebuilt_and_noted(tset, capsys, damage):
    assert run(["info", tset], capsys)[0] == 0  # makes sure the cache holds the set
    entry = sorted((tset / CACHE_NAME).glob("seg-*"))[0]
    index = entry / "index.json"
    text = index.read_text()
    obj = json.loads(text.split("\n", 1)[1])
    if damage == "truncated":
        index.write_text(text[:100])
    elif damage == "edited":  # changed by hand, checksum line left as it was
        index.write_text(text.replace('"problems": [', '"problems": ["edited", ', 1))
    elif damage == "not an object":
        _signed(entry, [1, 2])
    elif damage == "missing key":
        del obj["runs"]
        _signed(entry, obj)
    elif damage == "outside the arrays":
        obj["runs"][0]["rows"] = [0, 10 ** 6]
        _signed(entry, obj)
    else:
        obj["runs"][0]["numbers"] = [7]
        _signed(entry, obj)
    code, out, err = run(["info", tset], capsys)
    assert code == 0 and "Traceback" not in err
    said = out + err  # info lists the set's warnings with its table
    assert f"the cache entry {entry} was damaged" in said and "rebuilt" in said, said
    assert "t07" in out
    # rebuilt: the next open uses a sound entry and says nothing
    assert entry.is_dir() and json.loads(index.read_text().split("\n", 1)[1])["runs"][0]["rows"][1] < 10 ** 6
    code, out, err = run(["info", tset], capsys)
    assert code == 0 and "damaged" not in out + err
    for argv in (["label", tset, "t03", "beta"], ["export-labels", tset], ["summary", tset]):
        assert run(argv, capsys)[0] == 0


# --- labels for a set that cannot be written go to a journal elsewhere ---------------------------

def test_a_read_only_set_is_labeled_in_a_journal_elsewhere(tset, tmp_path, monkeypatch, capsys):
    elsewhere = tmp_path / "mine" / "twinpath-labels.jsonl"
    elsewhere.parent.mkdir()
    with inject(monkeypatch, Faults(str(tset / "*"), code=errno.EROFS, ops=("open", "write"))):
        code, out, err = run(["label", tset, "t02", "alpha", "--journal", elsewhere, "--as", "ines",
                              "--no-cache"], capsys)
        assert code == 0, err
        code, out, err = run(["classify", tset, "--journal", elsewhere, "--no-cache"], capsys)
        assert code == 0, err
    with LabelJournal.open(elsewhere, readonly=True) as j:
        assert j.final_label("t02") == "alpha" and j.header["set_id"] == "twinpath"
        bound = {ev["run"]: ev["content_hash"] for ev in j.events if ev.get("kind") == "label"}
    with LabelJournal.open(tset / JOURNAL, readonly=True) as own:
        assert {ev["run"]: ev["content_hash"] for ev in own.events if ev.get("kind") == "label"} == bound
    code, out, err = run(["verify", tset, "--journal", elsewhere], capsys)
    assert code == 0 and "intact" in out, out + err


def test_saving_rules_into_a_read_only_folder_names_the_file(tset, tmp_path, monkeypatch):
    from basinmark.core.fs_errors import FileSystemError
    from basinmark.core.rules import load_rules

    rules = load_rules(tset / "basins.toml")
    target = tmp_path / "shared" / "basins.toml"
    target.parent.mkdir()
    with inject(monkeypatch, Faults(str(target.parent / "*"), code=errno.EROFS, ops=("open",))):
        with pytest.raises(FileSystemError) as err:
            rules.save(target)
    assert f"cannot write the rules file {target} (the file system is read-only)" in str(err.value)
    assert list(target.parent.iterdir()) == []
    assert rules.save(target).products == rules.products  # with the folder writable again it is saved
