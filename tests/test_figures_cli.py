"""`basinmark map`, `export-summary`, `export-run`: files of the asked size and format, plain errors."""

from __future__ import annotations

import os
import subprocess
import sys
import xml.etree.ElementTree as ET

import ase.io
import numpy as np
import pandas as pd
import pytest
from PIL import Image

from basinmark.cli import main
from basinmark.core.sets import open_set

from gui_fixtures import make_toy_set

OUTCOMES = ["left", "right", "recrossing", "unfinished", "left", "left"]


@pytest.fixture(scope="module")
def toy_root(tmp_path_factory):
    return make_toy_set(tmp_path_factory.mktemp("figcli") / "toyset", OUTCOMES)


def test_map_png_of_requested_size(toy_root, tmp_path, capsys):
    out = tmp_path / "map.png"
    assert main(["map", str(toy_root), "-o", str(out), "--size", "640x480", "-q", "--no-cache"]) == 0
    with Image.open(out) as im:  # reference reader: Pillow
        assert im.format == "PNG" and im.size == (640, 480)
        pixels = np.asarray(im.convert("RGB"))
    assert len(np.unique(pixels.reshape(-1, 3), axis=0)) > 20  # something was drawn, not a blank image
    captured = capsys.readouterr()
    assert "map of 6 runs" in captured.out
    assert "not yet classified" in captured.err  # labels came from an in-memory classification: said so


def test_map_svg_is_valid_xml_and_axes_chosen(toy_root, tmp_path):
    out = tmp_path / "map.svg"
    assert main(["map", str(toy_root), "-o", str(out), "--x", "d_right", "--y", "d_left", "-q", "--no-cache"]) == 0
    root = ET.parse(out).getroot()  # reference parser: xml.etree (W3C SVG namespace)
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    text = out.read_text()
    assert "d_right (1-3)" in text and "d_left (1-2)" in text  # axis titles stay text in the vector file


def test_map_errors_are_plain(toy_root, tmp_path, capsys):
    assert main(["map", str(toy_root), "-o", str(tmp_path / "m.png"), "--x", "nope", "-q", "--no-cache"]) == 2
    assert "no monitor 'nope'" in capsys.readouterr().err
    assert main(["map", str(toy_root), "-o", str(tmp_path / "m.gif"), "-q", "--no-cache"]) == 2
    assert ".png or .svg" in capsys.readouterr().err
    assert main(["map", str(toy_root), "-o", str(tmp_path / "m.png"), "--size", "big", "-q"]) == 2
    assert "WIDTHxHEIGHT" in capsys.readouterr().err


def test_export_summary_md_and_csv(toy_root, tmp_path, capsys):
    md = tmp_path / "s.md"
    assert main(["export-summary", str(toy_root), "-o", str(md), "-q", "--no-cache", "--ddg", "left", "right", "1.0"]) == 0
    text = md.read_text(encoding="utf-8")
    assert text.startswith("## Summary") and "| left | 3 |" in text and "TST with" in text
    assert "### Warnings" in text  # 4 reactive runs are far too few: the file says so
    csv = tmp_path / "s.csv"
    assert main(["export-summary", str(toy_root), "-o", str(csv), "-q", "--no-cache"]) == 0
    table = pd.read_csv(csv)
    frac = table[table["quantity"] == "fraction"].set_index("label")
    assert frac.loc["left", "count"] == 3 and frac.loc["left", "value"] == pytest.approx(0.5)
    assert "rough guide" in capsys.readouterr().err  # warnings printed for the CSV form


def test_export_run_and_frame(toy_root, tmp_path):
    tset = open_set(toy_root, use_cache=False)
    traj = tset["toy-002"]
    out = tmp_path / "run.xyz"
    assert main(["export-run", str(toy_root), "toy-002", "-o", str(out), "-q", "--no-cache"]) == 0
    frames = ase.io.read(out, index=":")  # reference reader: ase.io
    np.testing.assert_allclose(np.stack([a.positions for a in frames]), traj.positions, atol=1e-4)
    one = tmp_path / "last.xyz"
    assert main(["export-run", str(toy_root), "toy-002", "-o", str(one), "--frame", "-1", "-q", "--no-cache"]) == 0
    np.testing.assert_allclose(ase.io.read(one).positions, traj.positions[-1], atol=1e-4)
    assert main(["export-run", str(toy_root), "toy-999", "-o", str(one), "-q", "--no-cache"]) == 2
    assert main(["export-run", str(toy_root), "toy-002", "-o", str(one), "--frame", "0", "-q", "--no-cache"]) == 2


def test_map_runs_without_a_display(toy_root, tmp_path):
    """The command itself chooses the offscreen platform when there is no display."""
    env = {k: v for k, v in os.environ.items() if k not in ("DISPLAY", "WAYLAND_DISPLAY", "QT_QPA_PLATFORM")}
    out = tmp_path / "headless.png"
    proc = subprocess.run([sys.executable, "-m", "basinmark", "map", str(toy_root), "-o", str(out), "--size",
                           "300x200", "-q", "--no-cache"], env=env, capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    with Image.open(out) as im:
        assert im.size == (300, 200)


def test_map_labels_come_from_the_journal_when_it_has_them(tmp_path):
    from basinmark.commands.figures import map_labels
    from basinmark.core.journal import LabelJournal
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import journal_path

    root = make_toy_set(tmp_path / "labeled", ["left", "right", "left"])
    tset = open_set(root, use_cache=False)
    rules = load_rules(root / "basins.toml", n_atoms=tset.n_atoms)
    labels, notes = map_labels(tset, rules, journal_path(root))
    assert labels == {"toy-001": "left", "toy-002": "right", "toy-003": "left"}
    assert any("not yet classified" in n for n in notes)
    with LabelJournal.open(journal_path(root), set_id="labeled", labeler="tester") as j:
        j.record("toy-002", "excluded", content_hash=tset["toy-002"].content_hash, reason="bad start")
    labels, notes = map_labels(tset, rules, journal_path(root))
    assert labels == {"toy-002": "excluded"}
    assert any("2 run(s) have no label" in n for n in notes)
