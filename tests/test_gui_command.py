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
