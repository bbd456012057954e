"""Opening a folder that is not a set (no run files) writes nothing into it, in the window and with every
command that opens a set, and each says plainly that the folder is not a set."""

from __future__ import annotations

import os
from pathlib import Path

import pytest
from PySide6.QtCore import QSettings

from basinmark.cli import main as cli_main
from basinmark.core.not_a_set import NotASetError, require_set

from gui_fixtures import TOY_RULES


def _folder(tmp_path: Path) -> Path:
    """A folder a chemist might open by mistake: notes, a spreadsheet and a rules file, but no runs."""
    root = tmp_path / "not-a-set"
    (root / "old").mkdir(parents=True)
    (root / "readme.txt").write_text("notes of the week\n")
    (root / "energies.csv").write_text("a,b\n1,2\n")
    (root / "basins.toml").write_text(TOY_RULES)
    (root / "old" / "draft.txt").write_text("draft\n")
    past = 1_600_000_000_000_000_000  # every mtime set to a fixed past time: a write would change it
    for p in [root, *root.rglob("*")]:
        os.utime(p, ns=(past, past))
    return root


def _snapshot(root: Path) -> dict:
    """Every entry below ``root`` (and ``root`` itself) with its kind, size and modification time."""
    out = {}
    for p in [root, *sorted(root.rglob("*"))]:
        st = p.stat()
        out[str(p.relative_to(root))] = (p.is_dir(), st.st_size if p.is_file() else None, st.st_mtime_ns)
    return out


def test_require_set_refuses_a_folder_without_runs(tmp_path):
    root = _folder(tmp_path)
    with pytest.raises(NotASetError, match="is not a set: no run files were found in it"):
        require_set(root)


#: every command that opens a set (the folder as SET), with arguments that would write if it went ahead
COMMANDS = [
    ["classify", "{set}"],
    ["sweep", "{set}", "--basin", "left", "--monitor", "d_left", "--bound", "below", "--from", "1.5", "--to", "2"],
    ["map", "{set}", "-o", "{out}/map.png"],
    ["export-summary", "{set}", "-o", "{out}/summary.md"],
    ["export-run", "{set}", "toy-001", "-o", "{out}/run.xyz"],
    ["info", "{set}"],
    ["label", "{set}", "toy-001", "left"],
    ["note", "{set}", "toy-001", "check the distance again"],
    ["undo", "{set}", "toy-001"],
    ["history", "{set}", "toy-001"],
    ["verify", "{set}"],
    ["recover", "{set}"],
    ["receipt", "{set}"],
    ["export-labels", "{set}", "-o", "{out}/labels.csv"],
    ["import-labels", "{set}", "{out}/in.csv"],
    ["unlock", "{set}"],
    ["movie", "{set}", "toy-001", "-o", "{out}/run.gif"],
    ["summary", "{set}"],
]


@pytest.mark.parametrize("command", COMMANDS, ids=[c[0] for c in COMMANDS])
def test_commands_write_nothing_into_a_folder_that_is_not_a_set(tmp_path, capsys, command):
    root = _folder(tmp_path)
    out = tmp_path / "out"
    out.mkdir()
    (out / "in.csv").write_text("run,label\ntoy-001,left\n")
    before = _snapshot(root)
    rc = cli_main([a.format(set=root, out=out) for a in command])
    err = capsys.readouterr().err
    assert _snapshot(root) == before, f"{command[0]} changed the folder"
    assert rc == 2 and f"{root} is not a set" in err, err
    assert sorted(p.name for p in out.iterdir()) == ["in.csv"]


@pytest.mark.gui
def test_window_writes_nothing_into_a_folder_that_is_not_a_set(qtbot, tmp_path):
    from basinmark.gui.main_window import MainWindow

    root = _folder(tmp_path)
    before = _snapshot(root)
    w = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    w.show()
    with qtbot.waitSignal(w.load_failed, timeout=20000) as blocker:
        w.open_set(root)
    assert "is not a set" in blocker.args[0]
    assert "is not a set" in w.banner.text() and not w.banner.isHidden()
    assert w.state.journal is None
    assert str(root.resolve()) not in w.recent_sets()
    w.close()
    assert _snapshot(root) == before
