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


def test_run_opens_the_window_on_a_set_and_returns(tmp_path):
    # in a child process: once an application's exec() has returned, Qt ends every later event
    # loop at once, which would break the other GUI tests of this process
    import os
    import subprocess
    import sys
    import textwrap
    from pathlib import Path

    from gui_fixtures import make_toy_set

    root = make_toy_set(tmp_path / "set", ["left", "right"])
    code = textwrap.dedent(f"""
        from PySide6.QtCore import QTimer
        from PySide6.QtWidgets import QApplication
        from basinmark.gui.app import make_app, run
        from basinmark.gui.main_window import MainWindow
        app = make_app()
        def check():
            wins = [w for w in QApplication.topLevelWidgets() if isinstance(w, MainWindow) and w.isVisible()]
            w = wins[-1] if wins else None
            if w is not None and w.state.tset is not None and len(w.state.tset) == 2 and not w.busy:
                print("RUNS", len(w.state.tset), "LABELER", w.label_panel.labeler_name, flush=True)
                w.close()
                app.quit()
            else:
                QTimer.singleShot(50, check)
        QTimer.singleShot(50, check)
        QTimer.singleShot(30000, app.quit)
        print("RC", run({str(root)!r}, labeler="cli-name"), flush=True)
    """)
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", HOME=str(tmp_path / "home"),
               XDG_CONFIG_HOME=str(tmp_path / "home" / ".config"))
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, timeout=120)
    assert "RUNS 2 LABELER cli-name" in out.stdout, out.stderr
    assert "RC 0" in out.stdout
    # settings went to the temporary home, not the user's own
    assert (Path(env["XDG_CONFIG_HOME"]) / "basinmark").is_dir()


def test_open_without_a_display_says_what_to_do(tmp_path, monkeypatch, capsys):
    import sys

    if not sys.platform.startswith("linux"):
        pytest.skip("the display check is for Linux")
    for var in ("DISPLAY", "WAYLAND_DISPLAY", "QT_QPA_PLATFORM"):
        monkeypatch.delenv(var, raising=False)
    assert main(["open", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert "no display" in err and "headless" in err
