"""Movie export (GIF read back with Pillow), its argument parsing, the window action, and the
``movie`` and ``review`` commands."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from PIL import Image
from PySide6.QtGui import QColor, QPalette
from PySide6.QtCore import QSettings

from basinmark.cli import main as cli_main
from basinmark.core.classify import classify_run
from basinmark.core.journal import LabelJournal
from basinmark.core.rules import parse_rules
from basinmark.gui.movie import (MovieError, MovieRenderer, export_movie, frame_range, install_movie_action,
                                 parse_frames, parse_size)

from gui_fixtures import TOY_RULES, make_toy_set, toy_trajectory

pytestmark = pytest.mark.gui


@pytest.fixture
def toy(qapp):
    traj = toy_trajectory("toy-001", "left")
    rules = parse_rules(TOY_RULES)
    return traj, rules, classify_run(traj, rules)


def _gif_frames(path: Path) -> tuple[int, tuple[int, int], list[int]]:
    with Image.open(path) as im:
        durations = []
        for i in range(im.n_frames):
            im.seek(i)
            durations.append(im.info.get("duration"))
        return im.n_frames, im.size, durations


def test_gif_has_requested_frames_and_size(tmp_path, toy):
    traj, rules, res = toy
    out = tmp_path / "run.gif"
    seen = []
    r = export_movie(out, traj, result=res, rules=rules, fps=25, size=(320, 200), frames=range(5, 35),
                     progress=lambda d, t: seen.append((d, t)))
    n, size, durations = _gif_frames(out)
    assert (n, size) == (30, (320, 200)) == (r.n_frames, r.size)
    assert durations == [40] * 30          # 25 frames/s = 40 ms, exact in GIF's 10 ms steps
    assert seen[-1] == (30, 30) and len(seen) == 30
    assert r.note == ""


def test_gif_delay_rounding_is_reported(tmp_path, toy):
    traj, rules, res = toy
    r = export_movie(tmp_path / "r.gif", traj, fps=30, size=(128, 96), frames=range(3))
    assert "30 ms" in r.note and "hundredths" in r.note
    assert _gif_frames(tmp_path / "r.gif")[2] == [30, 30, 30]


def test_cancel_writes_nothing(tmp_path, toy):
    traj, rules, res = toy
    calls = {"n": 0}

    def cancel() -> bool:
        calls["n"] += 1
        return calls["n"] > 3

    r = export_movie(tmp_path / "c.gif", traj, fps=20, size=(128, 96), cancel=cancel)
    assert r.cancelled and r.n_frames == 0
    assert not (tmp_path / "c.gif").exists() and not list(tmp_path.glob("*.part"))


def test_cursor_is_drawn_where_the_time_is(toy):
    traj, rules, res = toy
    r = MovieRenderer(traj, result=res, rules=rules, size=(400, 300))
    from basinmark.gui.colours import cursor_colour

    hl = cursor_colour()  # the cursor has a colour of its own
    try:
        xs = []
        for frame in (0, traj.ts_index, traj.n_frames - 1):
            img = r.render(frame)
            x = int(round(r.mol_w + r.cursor_x(float(traj.times[frame]))))
            _x0, _k, top, bottom = r._x_of_time
            y = int((top + bottom) / 2)
            near = [QColor(img.pixel(xx, y)) for xx in range(x - 1, x + 2)]
            assert any(abs(c.red() - hl.red()) + abs(c.green() - hl.green()) + abs(c.blue() - hl.blue()) < 40
                       for c in near), f"no cursor at x={x} for frame {frame}"
            xs.append(x)
        assert xs[0] < xs[1] < xs[2] and xs[0] >= r.mol_w
    finally:
        r.close()


def test_bad_arguments_are_refused(tmp_path, toy):
    traj, _rules, _res = toy
    with pytest.raises(MovieError, match="must end in .gif"):
        export_movie(tmp_path / "x.avi", traj)
    with pytest.raises(MovieError, match="frame rate"):
        export_movie(tmp_path / "x.gif", traj, fps=0)
    with pytest.raises(MovieError, match="outside"):
        export_movie(tmp_path / "x.gif", traj, size=(10, 10))
    with pytest.raises(MovieError):
        parse_size("640 by 480")
    with pytest.raises(MovieError, match="within 1:81"):
        parse_frames("0:3", 81)
    with pytest.raises(MovieError):
        parse_frames("5:2", 81)


@given(st.integers(1, 500), st.data())
def test_parse_frames_is_one_based_inclusive(n, data):
    first = data.draw(st.integers(1, n))
    last = data.draw(st.integers(first, n))
    r = parse_frames(f"{first}:{last}", n)
    assert list(r) == list(range(first - 1, last)) == list(frame_range(first, last, n))
    assert parse_frames(f"{first}:", n) == range(first - 1, n)
    assert parse_frames(f":{last}", n) == range(0, last)
    assert parse_frames(None, n) == range(n)


def test_parse_size():
    assert parse_size("640x480") == (640, 480)
    assert parse_size("800X600") == (800, 600)


def test_window_action_exports_current_run(qtbot, tmp_path):
    from basinmark.gui.main_window import MainWindow

    root = make_toy_set(tmp_path / "toyset", ["left", "right", "left"])
    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    qtbot.waitExposed(win)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
    act = install_movie_action(win)
    menus = [a.menu().objectName() for a in win.menu_bar.actions() if a.menu() is not None]
    assert "menu_export" in menus and act.shortcut().toString() == "Ctrl+Shift+G"
    act.trigger()
    dlg = win.movie_dialog
    out = tmp_path / "w.gif"
    dlg.file.setText(str(out))
    dlg.width.setValue(200)
    dlg.height.setValue(150)
    dlg.first.setValue(2)
    dlg.last.setValue(11)
    dlg._accept()
    assert dlg.error.text() == ""
    assert _gif_frames(out)[:2] == (10, (200, 150))
    assert "Movie written" in win.statusBar().currentMessage()
    win.close()


def test_movie_command_writes_gif(tmp_path, qapp, capsys):
    root = make_toy_set(tmp_path / "toyset", ["left", "right"], drift_runs=[1])
    out = tmp_path / "run.gif"
    rc = cli_main(["movie", str(root), "toy-002", "-o", str(out), "--size", "240x160", "--frames", "1:12",
                   "--no-cache"])
    text = capsys.readouterr().out
    assert rc == 0 and _gif_frames(out)[:2] == (12, (240, 160))
    assert "failed the energy check" in text
    assert cli_main(["movie", str(root), "toy-009", "-o", str(out)]) == 2
    assert "no run 'toy-009'" in capsys.readouterr().err


def test_review_command_writes_markdown(tmp_path, capsys):
    from sklearn.metrics import cohen_kappa_score

    labels_a = ["left", "left", "right", "right", "left", "recrossing", "right", "left"]
    labels_b = ["left", "right", "right", "right", "left", "left", "right", "left"]
    paths = []
    for name, labs, who in (("a.jsonl", labels_a, "ann"), ("b.jsonl", labels_b, "bo")):
        p = tmp_path / name
        with LabelJournal.open(p, labeler=who) as j:
            for i, lab in enumerate(labs):
                j.record(f"r{i}", lab, content_hash="h")
        paths.append(p)
    out = tmp_path / "review.md"
    assert cli_main(["review", str(paths[0]), str(paths[1]), "-o", str(out), "--format", "json"]) == 0
    data = json.loads(capsys.readouterr().out)
    # reference library: scikit-learn's Cohen's kappa over the same pairs
    assert data["kappa"] == pytest.approx(cohen_kappa_score(labels_a, labels_b), abs=1e-6)
    text = out.read_text()
    assert text.startswith("# Review") and "| r1 |" in text and "| r5 |" in text and "| r0 |" not in text
    assert f"{data['kappa']:.3f}" in text
    assert cli_main(["review", str(paths[0]), "-o", str(tmp_path / "nofolder" / "r.md")]) == 2


def test_mp4_goes_through_the_encoder_protocol(tmp_path, toy, monkeypatch):
    """imageio-ffmpeg is not installed here: a stand-in records what the encoder would receive."""
    import sys
    import types

    import basinmark.gui.movie as movie

    got = {}

    def write_frames(path, size, **kw):
        # the protocol as imageio-ffmpeg documents it (from memory): send(None) primes, then one send per frame
        got.update(path=path, size=size, kw=kw, frames=[])
        try:
            while True:
                frame = yield
                got["frames"].append(len(frame))
        except GeneratorExit:
            Path(path).write_bytes(b"fake mp4")

    monkeypatch.setitem(sys.modules, "imageio_ffmpeg", types.SimpleNamespace(write_frames=write_frames))
    monkeypatch.setattr(movie, "mp4_available", lambda: True)
    traj, rules, res = toy
    r = export_movie(tmp_path / "run.mp4", traj, fps=24, size=(160, 120), frames=range(8))
    assert r.format == "mp4" and r.n_frames == 8 and (tmp_path / "run.mp4").read_bytes() == b"fake mp4"
    assert got["size"] == (160, 120) and got["kw"]["fps"] == 24
    assert got["frames"] == [160 * 120 * 3] * 8          # rgb24, one byte per channel
    with pytest.raises(MovieError, match="even width"):
        export_movie(tmp_path / "odd.mp4", traj, size=(161, 120), frames=range(2))


def test_mp4_without_encoder_says_so(tmp_path, toy, monkeypatch):
    import basinmark.gui.movie as movie

    monkeypatch.setattr(movie, "mp4_available", lambda: False)
    with pytest.raises(MovieError, match="imageio-ffmpeg"):
        export_movie(tmp_path / "run.mp4", toy[0])


def test_headless_platform_is_chosen(monkeypatch):
    from basinmark.commands.media import ensure_gui_platform

    monkeypatch.delenv("QT_QPA_PLATFORM", raising=False)
    monkeypatch.delenv("DISPLAY", raising=False)
    monkeypatch.delenv("WAYLAND_DISPLAY", raising=False)
    monkeypatch.setattr("sys.platform", "linux")
    ensure_gui_platform()
    import os

    assert os.environ["QT_QPA_PLATFORM"] == "offscreen"
    monkeypatch.setenv("QT_QPA_PLATFORM", "xcb")
    ensure_gui_platform()
    assert os.environ["QT_QPA_PLATFORM"] == "xcb"


def test_movie_keeps_the_view_orientation(qtbot, toy):
    from basinmark.gui.molecule_view import MoleculeView

    traj, rules, res = toy
    src = MoleculeView()
    qtbot.addWidget(src)
    src.resize(500, 400)
    src.set_trajectory(traj)
    src.rotate((0.3, 1.0, 0.2), 0.9)
    src.zoom(1.3)
    src.set_frame(10)
    r = MovieRenderer(traj, size=(400, 300), source_view=src)
    try:
        r.molecule.set_frame(10)
        ratio = min(r.mol_w, 300) / min(500, 400)
        xy_src, depth_src = src.project(500, 400)
        xy_mov, depth_mov = r.molecule.project(r.mol_w, 300)
        expected = (xy_src - np.array([250, 200])) * ratio + np.array([r.mol_w / 2, 150])
        np.testing.assert_allclose(xy_mov, expected, atol=1e-9)
        np.testing.assert_allclose(depth_mov, depth_src, atol=1e-12)
    finally:
        r.close()


def test_mp4_with_the_real_encoder(tmp_path, toy):
    """With imageio-ffmpeg installed (a test extra), an MP4 is written and read back with the same
    encoder library's reader (frame count, size, rate)."""
    imageio_ffmpeg = pytest.importorskip("imageio_ffmpeg")
    traj = toy[0]
    r = export_movie(tmp_path / "run.mp4", traj, fps=10, size=(160, 120), frames=range(12))
    assert r.format == "mp4" and r.n_frames == 12
    reader = imageio_ffmpeg.read_frames(str(tmp_path / "run.mp4"))
    meta = next(reader)
    assert tuple(meta["size"]) == (160, 120) and meta["fps"] == pytest.approx(10)
    assert sum(1 for _ in reader) == 12
