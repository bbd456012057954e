"""A damaged journal is reported by every command and by the window, at its line; nothing is written
to it until recover (issue 12, item 1).  One case per kind of damage, on a small real set."""

from __future__ import annotations

import json

import pytest

from basinmark.cli import DAMAGED_EXIT, main
from basinmark.core.journal_format import head_path, seal, write_head
from basinmark.core.sets import journal_path

from gui_fixtures import make_toy_set

OUTCOMES = ["left", "right", "left", "right", "left", "left"]


def run(argv, capsys):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def labeled(tmp_path_factory):
    """A classified toy set with three hand labels; returns (root, pristine journal lines, head bytes)."""
    root = make_toy_set(tmp_path_factory.mktemp("cli") / "toyset", OUTCOMES)
    assert main(["classify", str(root), "-q"]) == 0
    for run_id, label in (("toy-001", "right"), ("toy-002", "left"), ("toy-003", "right")):
        assert main(["label", str(root), run_id, label, "--reason", f"looked at {run_id}", "--as", "mira"]) == 0
    jp = journal_path(root)
    return root, jp.read_bytes().splitlines(keepends=True), head_path(jp).read_bytes()


def tampered(lines, kind):
    """(journal bytes, head action, 1-based line where the damage must be reported)."""
    n = len(lines)
    if kind == "duplicate_undo_like":
        return b"".join(lines[: n - 1] + [lines[n - 2]] + lines[n - 1:]), "keep", n
    if kind == "forged_last_label":  # a careful forger: right seq, right link, own hash recomputed
        ev = json.loads(lines[-1])
        ev.update(seq=ev["seq"] + 1, prev=ev["hash"], run="toy-004", label="left", reason="forged")
        return b"".join(lines) + seal(ev).encode("ascii"), "keep", n + 1
    if kind == "byte_changed":  # a hand label's run changed by one character, hash left as it was
        return b"".join(lines[: n - 2] + [lines[n - 2].replace(b'"toy-002"', b'"toy-005"')] + lines[n - 1:]), \
            "keep", n - 1
    if kind == "deleted":
        return b"".join(lines[: n - 3] + lines[n - 2:]), "keep", n - 2
    if kind == "cut_three_head_kept":
        return b"".join(lines[: n - 3]), "keep", n - 2
    if kind == "swapped":
        return b"".join(lines[: n - 2] + [lines[n - 1], lines[n - 2]]), "keep", n - 1
    if kind == "cut_three_head_deleted":
        return b"".join(lines[: n - 3]), "delete", n - 2
    if kind == "rollback_journal_and_head":
        return b"".join(lines[: n - 2]), "copy_last", n - 1
    raise AssertionError(kind)


@pytest.fixture
def damaged(labeled, request, tmp_path):
    import shutil

    root, lines, head = labeled
    work = tmp_path / "toyset"
    shutil.copytree(root, work)
    jp = journal_path(work)
    # the witness for this copy, as its own labeling would have left it
    from basinmark.core import journal_witness
    last = json.loads(lines[-1])
    journal_witness.write(jp, json.loads(lines[0])["hash"], last["seq"], last["hash"])
    data, head_action, line = tampered(lines, request.param)
    jp.write_bytes(data)
    if head_action == "delete":
        head_path(jp).unlink()
    elif head_action == "copy_last":
        ev = json.loads(data.splitlines()[-1])
        write_head(jp, ev["seq"], ev["hash"])
    return work, line, request.param


KINDS = ["byte_changed", "deleted", "duplicate_undo_like", "forged_last_label", "swapped", "cut_three_head_kept",
         "cut_three_head_deleted", "rollback_journal_and_head"]


@pytest.mark.parametrize("damaged", KINDS, indirect=True)
def test_every_command_reports_the_damage_and_no_writer_proceeds(damaged, capsys):
    root, line, kind = damaged
    jp = journal_path(root)
    before = jp.read_bytes()
    code, out, err = run(["verify", root, "--no-data", "--format", "csv"], capsys)
    import io

    import pandas as pd
    table = pd.read_csv(io.StringIO(out))
    assert code == 1 and table["line"].min() == line, (kind, out)
    for argv in (["summary", root, "-q"], ["export-labels", root, "--no-data", "--format", "csv"],
                 ["history", root, "toy-002"], ["compare", root, "--labelers", "auto", "hand"]):
        code, out, err = run(argv, capsys)
        assert code == DAMAGED_EXIT, (argv, code, err)
        assert "DAMAGED LABEL JOURNAL" in err and f"line {line}" in err, (argv, err)
    code, out, err = run(["export-labels", root, "--no-data", "--format", "csv"], capsys)
    assert "forged" not in out  # never a label from beyond the last good event
    code, out, err = run(["label", root, "toy-005", "right", "--as", "mira"], capsys)
    assert code == 2 and "damaged" in err and "recover" in err
    code, out, err = run(["classify", root, "-q"], capsys)
    assert code == 2 and "damaged" in err
    assert jp.read_bytes() == before  # nothing written
    code, out, err = run(["recover", root, "--reason", "test", "--as", "chief"], capsys)
    assert code == 0 and "settled" in out
    code, out, err = run(["verify", root, "--no-data"], capsys)
    assert code == 0 and "intact" in out
    code, out, err = run(["label", root, "toy-005", "right", "--as", "mira"], capsys)
    assert code == 0


def test_receipt_and_verify_expect(labeled, tmp_path, capsys):
    import shutil

    root = tmp_path / "toyset"
    shutil.copytree(labeled[0], root)
    code, out, err = run(["receipt", root], capsys)
    assert code == 0 and out.startswith("basinmark-receipt id=")
    receipt = out.strip()
    code, out, err = run(["verify", root, "--no-data", "--expect", receipt], capsys)
    assert code == 0 and "against the receipt" in out
    jp = journal_path(root)
    lines = jp.read_bytes().splitlines(keepends=True)
    jp.write_bytes(b"".join(lines[:-1]))
    ev = json.loads(lines[-2])
    write_head(jp, ev["seq"], ev["hash"])
    code, out, err = run(["verify", root, "--no-data", "--expect", receipt], capsys)
    assert code == 1 and "witness" in out
    code, out, err = run(["verify", root, "--no-data", "--expect", "nonsense"], capsys)
    assert code == 2 and "not a basinmark receipt" in err


@pytest.mark.gui
@pytest.mark.parametrize("damaged", ["forged_last_label", "cut_three_head_deleted"], indirect=True)
def test_window_shows_the_damage_and_opens_read_only(damaged, qtbot, tmp_path):
    from PySide6.QtCore import QSettings

    from basinmark.gui.main_window import MainWindow

    root, line, kind = damaged
    before = journal_path(root).read_bytes()
    win = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
    text = win.banner.text()
    assert "damaged" in text and f"line {line}" in text and "recover" in text, text
    journal = win.state.journal
    assert journal is not None and journal.readonly and journal.problems
    assert journal.final_label("toy-004") == "right"  # the automatic label; the forged hand label never counts
    win.close()
    assert journal_path(root).read_bytes() == before
