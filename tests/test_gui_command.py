"""``basinmark open``: argument parsing and errors, without starting the event loop."""

from __future__ import annotations

import pytest

from basinmark.cli import build_parser, main
from basinmark.gui.app import bundled_sample_set


def test_open_parses_set_rules_and_labeler(tmp_path):
    args = build_parser().parse_args(["open", str(tmp_path), "--rules", "r.toml", "--labeler", "ada"])
    assert args.set == str(tmp_path) and args.rules == "r.toml" and args.labeler == "ada"
    assert callable(args.func)


def test_open_without_set_means_bundled_sample():
    args = build_parser().parse_args(["open"])
    assert args.set is None
    assert bundled_sample_set().parts[-2:] == ("sample_sets", "ringfork")


def test_open_missing_folder_is_a_clear_error(tmp_path, capsys):
    assert main(["open", str(tmp_path / "nope")]) == 2
    err = capsys.readouterr().err
    assert "no such folder" in err and "nope" in err


def test_open_missing_rules_file_is_a_clear_error(tmp_path, capsys):
    assert main(["open", str(tmp_path), "--rules", str(tmp_path / "none.toml")]) == 2
    assert "no such rules file" in capsys.readouterr().err


def test_run_opens_the_window_on_a_set_and_returns(qapp, tmp_path):
    from PySide6.QtCore import QSettings, QTimer
    from PySide6.QtWidgets import QApplication

    from basinmark.gui.app import run
    from basinmark.gui.main_window import MainWindow

    from gui_fixtures import make_toy_set

    # a temporary settings location: the test must not touch the user's own settings
    for fmt in (QSettings.Format.NativeFormat, QSettings.Format.IniFormat):
        QSettings.setPath(fmt, QSettings.Scope.UserScope, str(tmp_path / "settings"))
    root = make_toy_set(tmp_path / "set", ["left", "right"])
    seen = {}

    def check_and_quit():
        wins = [w for w in QApplication.topLevelWidgets() if isinstance(w, MainWindow) and w.isVisible()]
        if wins and wins[-1].state.tset is not None and len(wins[-1].state.tset) == 2 and not wins[-1].busy:
            seen["runs"] = len(wins[-1].state.tset)
            seen["labeler"] = wins[-1].label_panel.labeler_name
            wins[-1].close()
            qapp.quit()
        else:
            QTimer.singleShot(50, check_and_quit)

    QTimer.singleShot(50, check_and_quit)
    QTimer.singleShot(20000, qapp.quit)  # never hang the suite
    assert run(root, labeler="cli-name") == 0
    assert seen == {"runs": 2, "labeler": "cli-name"}
    assert (tmp_path / "settings").exists()


def test_open_without_a_display_says_what_to_do(tmp_path, monkeypatch, capsys):
    import sys

    if not sys.platform.startswith("linux"):
        pytest.skip("the display check is for Linux")
    for var in ("DISPLAY", "WAYLAND_DISPLAY", "QT_QPA_PLATFORM"):
        monkeypatch.delenv(var, raising=False)
    assert main(["open", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert "no display" in err and "headless" in err
