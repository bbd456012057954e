"""A full disk at every point of a labeling, classifying and importing run: nothing lost, nothing
half-written live, no traceback, no lock or temporary file left behind, and the same command works
once there is space again."""

from __future__ import annotations

import shutil

import pytest

from basinmark.cli import main
from basinmark.core.journal import LabelJournal
from basinmark.core.sets import CACHE_NAME
from fault_injection import Faults, inject
from test_faults import JOURNAL, build_set, end_of_process, labels, leftovers


@pytest.fixture(scope="module")
def template(tmp_path_factory):
    return build_set(tmp_path_factory.mktemp("tpl-full") / "twinpath")


def _count_ops(monkeypatch, argv) -> int:
    probe = Faults("*", at=10 ** 9, ops=("open", "write", "fsync", "replace"))
    with inject(monkeypatch, probe):
        assert main(argv) == 0
    return probe.count


def _scenario(root, tmp_path, which):
    """The command line of one scenario, after preparing the set copy for it."""
    if which == "label":
        return ["label", root, "t04", "ambiguous", "--reason", "stays near the ridge", "--as", "ines"]
    if which == "classify":
        (root / JOURNAL).unlink()  # nothing classified yet: classify writes a header and a whole batch
        (root / f"{JOURNAL}.head").unlink()
        return ["classify", root]
    csv = tmp_path / "in.csv"
    csv.write_text("run,label,labeler,reason\nt00,beta,ana,=looked twice\nt05,alpha,ana,\nt06,ambiguous,ana,\n")
    return ["import-labels", root, csv]


@pytest.mark.parametrize("which", ["label", "classify", "import"])
def test_a_full_disk_at_every_write(template, tmp_path, monkeypatch, capsys, which):
    work = tmp_path / "probe"
    shutil.copytree(template, work)
    argv = [str(a) for a in _scenario(work, tmp_path, which)]
    total = _count_ops(monkeypatch, argv)
    expected = labels(work)
    assert 3 <= total < 60, total  # lock, journal, head at the least
    capsys.readouterr()
    for n in range(1, total + 1):
        root = tmp_path / f"n{n}"
        shutil.copytree(template, root)
        argv = [str(a) for a in _scenario(root, tmp_path, which)]
        before = labels(root) if (root / JOURNAL).exists() else {}
        with inject(monkeypatch, Faults("*", at=n, ops=("open", "write", "fsync", "replace"))) as f:
            code = main(argv)
        out, err = capsys.readouterr()
        where = f"{which}, disk full at operation {n} of {total} ({sorted(set(f.paths.values()))[-1:]})"
        assert "Traceback" not in err, where
        if code != 0:
            last = err.splitlines()[-1]
            assert code == 2 and last.startswith("basinmark: error: ") and str(tmp_path) in last, (where, err)
            assert "free some space" in last, (where, err)  # what to do
        assert leftovers(root, lock=False) == [], where
        end_of_process(root)  # a lock is kept only when the head file lags (see end_of_process)
        cache = root / CACHE_NAME
        assert not cache.exists() or not [p for p in cache.iterdir() if ".tmp" in p.name], where
        now = labels(root) if (root / JOURNAL).exists() else {}
        # whole or absent: the labels are those from before, or all of those the command makes
        assert now in (before, expected), where
        # nothing lost and no lasting harm: with space again, the same command completes
        assert main(argv) == 0, (where, capsys.readouterr().err)
        capsys.readouterr()
        assert labels(root) == expected, where
        assert leftovers(root) == [], where
        with LabelJournal.open(root / JOURNAL, readonly=True) as j:
            assert not [w for w in j.warnings if "not a valid" in w or "hash does not" in w], where
