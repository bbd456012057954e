"""Every export dialog starts in the last export folder, never inside the set's folder.

The dialog itself is replaced (``export_folder.save_file_dialog``: a modal dialog blocks offscreen); the test
records the path each dialog was started with, answers with a file in a folder of its own and checks that the
next dialog, of any kind, starts there.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from PySide6.QtCore import QSettings

from basinmark.gui import export_folder
from basinmark.gui.app import install_extras
from basinmark.gui.main_window import MainWindow

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui


@pytest.fixture
def win(qtbot, tmp_path):
    root = make_toy_set(tmp_path / "toyset", ["left", "right", "left", "recrossing"])
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    install_extras(w)
    w.show()
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(root, use_cache=False)
    w.state.set_run(w.state.labels["run"].iloc[0])
    yield w
    w.close()


class Dialog:
    """Stands in for the save dialog: records where it started and answers ``answer / <proposed name>``."""

    def __init__(self) -> None:
        self.starts: list[Path] = []
        self.answer: Path | None = None

    def __call__(self, parent, title, start, filters):
        self.starts.append(Path(start))
        if self.answer is None:
            return "", ""
        return str(self.answer / Path(start).name), filters.split(";;")[0]


def _export_actions(win) -> list:
    """Every entry of the Export menu that asks for a file (the review report's included: a review is compared
    first); the label table's first.  The movie has a dialog of its own (tests/test_movie_layout.py)."""
    win.review_panel.compare()
    assert win.review_panel.review is not None
    acts = [a for a in win.export_menu.actions() if not a.isSeparator() and a.text() and a.isEnabled()
            and a.objectName() != "action_export_movie"]
    return sorted(acts, key=lambda a: not a.text().replace("&", "").startswith("Label Table"))


def test_every_export_dialog_starts_outside_the_set_and_in_the_last_export_folder(win, qtbot, tmp_path, monkeypatch):
    dialog = Dialog()
    monkeypatch.setattr(export_folder, "save_file_dialog", dialog)
    root = Path(win.state.tset.root).resolve()
    acts = _export_actions(win)
    names = [a.text().replace("&", "") for a in acts]
    assert len(acts) >= 8, names   # label table, summary ×2, figures ×3, run data, frame, run (+ review report)

    # nothing exported yet: every dialog proposes a folder outside the set (cancelled: nothing written)
    for act in acts:
        act.trigger()
    assert len(dialog.starts) == len(acts), f"some exports did not ask through save_file_dialog: {names}"
    for name, start in zip(names, dialog.starts):
        assert root != start.parent.resolve() and root not in start.resolve().parents, f"{name} starts in the set"
    assert not list(root.glob("*.csv")) and not list(root.glob("*.png"))

    # one export written to a folder of the person's choosing...
    out = tmp_path / "my-exports"
    out.mkdir()
    dialog.answer = out
    acts[0].trigger()
    assert list(out.iterdir()), "the label table was not written"
    # ...and every export after it starts there, and writes there
    dialog.starts.clear()
    for act in acts[1:]:
        act.trigger()
    for name, start in zip(names[1:], dialog.starts):
        assert start.parent == out, f"{name} starts in {start.parent}, not the last export folder"
    written = {p.suffix for p in out.iterdir()}
    assert {".csv", ".md", ".png", ".xyz"} <= written, written

    # a remembered folder inside the set (older versions started there) is passed over
    win.settings.setValue(export_folder.LAST_FOLDER, str(root))
    dialog.starts.clear()
    dialog.answer = None
    for act in acts:
        act.trigger()
    for name, start in zip(names, dialog.starts):
        assert root not in start.resolve().parents and start.parent.resolve() != root, f"{name} starts in the set"
