"""The main file-system faults on real file systems: a read-only mount and a tiny full tmpfs.

Needs root and a kernel that lets the test mount (skipped otherwise); tests/test_faults.py covers the
same cases everywhere by injecting the errors.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import uuid

import pytest

from basinmark.cli import main
from test_faults import JOURNAL, assert_sentence, build_set, end_of_process, labels, leftovers


def _mount(*args) -> bool:
    return subprocess.run(["mount", *map(str, args)], capture_output=True).returncode == 0


def _umount(path) -> None:
    subprocess.run(["umount", "-l", str(path)], capture_output=True)


def _can_mount(tmp_path_factory) -> bool:
    if os.name != "posix" or os.geteuid() != 0 or shutil.which("mount") is None:
        return False
    probe = tmp_path_factory.mktemp("probe")
    ok = _mount("-t", "tmpfs", "-o", "size=64k", "tmpfs", probe)
    if ok:
        _umount(probe)
    return ok


@pytest.fixture(scope="module")
def template(tmp_path_factory):
    if not _can_mount(tmp_path_factory):
        pytest.skip("mounting a file system is not allowed here")
    return build_set(tmp_path_factory.mktemp("tpl-mnt") / "twinpath")


@pytest.fixture
def tiny_fs(tmp_path):
    where = tmp_path / f"fs-{uuid.uuid4().hex[:6]}"
    where.mkdir()
    assert _mount("-t", "tmpfs", "-o", "size=1m", "tmpfs", where)
    yield where
    _umount(where)


def test_read_only_mount(template, tmp_path, capsys):
    root = shutil.copytree(template, tmp_path / "twinpath")
    assert _mount("--bind", root, root) and _mount("-o", "remount,bind,ro", root, root)
    try:
        before = labels(root)
        code = main(["label", str(root), "t02", "alpha"])
        assert_sentence(code, capsys.readouterr().err, root / f"{JOURNAL}.lock", "read-only file system",
                        "--journal PATH")
        elsewhere = tmp_path / "mine.jsonl"
        assert main(["label", str(root), "t02", "alpha", "--journal", str(elsewhere)]) == 0
        code = main(["export-labels", str(root), "-o", str(root / "labels.csv"), "--no-data"])
        assert_sentence(code, capsys.readouterr().err, root / "labels.csv", "read-only")
        assert labels(root) == before and labels(root, elsewhere)["t02"]["hand_label"] == "alpha"
    finally:
        _umount(root)


def _fill(fs, keep_pages: int) -> None:
    """Fill the file system, then free ``keep_pages`` pages of 4 KiB."""
    filler = fs / "filler"
    with open(filler, "wb", buffering=0) as fh:
        try:
            while fh.write(b"\0" * 4096):
                pass
        except OSError:
            pass
    size = filler.stat().st_size
    os.truncate(filler, max(0, size - keep_pages * 4096))


@pytest.mark.parametrize("which", ["label", "classify", "import"])
@pytest.mark.parametrize("free", [0, 1, 2, 3])
def test_a_really_full_disk(template, tiny_fs, tmp_path, capsys, which, free):
    root = shutil.copytree(template, tiny_fs / "twinpath")
    if which == "label":
        argv = ["label", root, "t04", "ambiguous", "--reason", "stays near the ridge"]
    elif which == "classify":
        (root / JOURNAL).unlink()
        (root / f"{JOURNAL}.head").unlink()
        argv = ["classify", root]
    else:
        csv = tmp_path / "in.csv"
        csv.write_text("run,label,labeler,reason\nt00,beta,ana,looked twice\nt05,alpha,ana,\n")
        argv = ["import-labels", root, csv]
    argv = [str(a) for a in argv]
    before = labels(root) if (root / JOURNAL).exists() else {}
    _fill(tiny_fs, free)
    code = main(argv)
    out, err = capsys.readouterr()
    assert "Traceback" not in err
    assert code != 0 or free > 0  # a disk with no room at all refuses even the lock
    if code != 0:
        last = err.splitlines()[-1]
        assert code == 2 and last.startswith("basinmark: error: ") and str(root) in last, err
        assert "disk is full" in last or "No space left on device" in last, err
        assert (labels(root) if (root / JOURNAL).exists() else {}) == before  # nothing half-written live
    assert leftovers(root, lock=False) == []
    end_of_process(root)  # a lock is kept only when the head file lags (see test_faults.end_of_process)
    (tiny_fs / "filler").unlink()  # space again: the same command completes
    if code != 0:
        assert main(argv) == 0, capsys.readouterr().err
    # no lasting harm: the next label goes in, and the journal verifies
    assert main(["label", str(root), "t06", "recrossing", "--as", "ines"]) == 0, capsys.readouterr().err
    assert main(["verify", str(root), "--no-data"]) == 0, capsys.readouterr()
    assert leftovers(root) == []
    after = labels(root)
    assert all(after.get(run) == row for run, row in before.items() if run not in ("t00", "t04", "t05", "t06"))
