"""A movie's caption, legend and commit marks are laid out without overlap (the exporter's own rectangles),
drawn where the rectangles say (frames read back with Pillow), the traces the chemist added are in it, and
the window's movie dialog proposes the last export folder, never the data set's folder."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pytest
from PIL import Image
from PySide6.QtCore import QRectF, QSettings

from basinmark.core.classify import classify_run
from basinmark.core.rules import parse_rules
from basinmark.gui.movie import MovieRenderer, export_movie

from gui_fixtures import TOY_RULES, make_toy_set, toy_trajectory

pytestmark = pytest.mark.gui

ADDED = (2, 3)           # the distance the chemist picked: atoms 2 and 3 (1-based)
ADDED_NAME = "d(2-3)"


@pytest.fixture
def crowded(qapp):
    """A run whose TS, product commit, reactant commit and first arrival fall within a few fs of each other:
    their labels would print on top of each other if placed at their lines."""
    traj = toy_trajectory("toy-001", "left")
    rules = parse_rules(TOY_RULES)
    res = classify_run(traj, rules)
    assert res.product_end == "forward" and res.reactant_end == "backward"
    res = dataclasses.replace(res, product_final_entry_fs=2.0, product_first_arrival_fs=1.0,
                              reactant_final_entry_fs=2.0, reactant_first_arrival_fs=1.0)
    return traj, rules, res


def _rects(layout: dict) -> list[tuple[str, QRectF]]:
    return sorted(layout.items())


def _assert_no_overlap_inside(layout: dict, size: tuple[int, int]) -> None:
    frame = QRectF(0, 0, *size)
    for name, rect in _rects(layout):
        assert rect.width() > 0 and rect.height() > 0, name
        assert frame.contains(rect), f"{name} {rect} is not inside the {size} frame"
    items = _rects(layout)
    for i, (a, ra) in enumerate(items):
        for b, rb in items[i + 1:]:
            inter = ra.intersected(rb)
            assert inter.width() <= 0 or inter.height() <= 0, f"{a} {ra} overlaps {b} {rb}"


def _ink(img: Image.Image, rect: QRectF, background: tuple[int, int, int]) -> int:
    """Pixels inside ``rect`` that differ clearly from the background."""
    x0, y0 = int(rect.left()), int(rect.top())
    x1, y1 = int(np.ceil(rect.right())), int(np.ceil(rect.bottom()))
    a = np.asarray(img.convert("RGB"), dtype=int)[y0:y1, x0:x1]
    return int((np.abs(a - np.array(background)).sum(axis=2) > 120).sum())


@pytest.mark.parametrize("size", [(640, 480), (320, 240)])
def test_caption_legend_and_marks_never_overlap(crowded, size):
    traj, rules, res = crowded
    r = MovieRenderer(traj, result=res, rules=rules, size=size, user_monitors=[ADDED])
    try:
        layout = r.layout
        marks = {k for k in layout if k.startswith("mark:")}
        assert {"caption", "molecule", "traces"} <= set(layout)
        assert {"mark:ts", "mark:commit", "mark:reactant_commit"} <= marks
        assert {f"legend:{n}" for n in ("d_left", "d_right", ADDED_NAME, "E_total")} <= set(layout)
        _assert_no_overlap_inside(layout, size)
        # the pyqtgraph labels of the marks are not drawn as well (they would print over each other)
        assert not any(line.label.isVisible() for line in r.traces.marks.values())
    finally:
        r.close()


def test_frames_read_back_show_text_where_the_layout_says(crowded, tmp_path):
    traj, rules, res = crowded
    out = tmp_path / "m.gif"
    result = export_movie(out, traj, result=res, rules=rules, size=(640, 480), frames=range(38, 42),
                          user_monitors=[ADDED])
    layout = result.layout
    _assert_no_overlap_inside(layout, (640, 480))
    with Image.open(out) as im:
        im.seek(1)
        frame = im.convert("RGB")
    bg = frame.getpixel((int(layout["caption"].right()) - 2, int(layout["caption"].bottom()) - 2))
    for name, rect in layout.items():
        if name.startswith(("mark:", "legend:")) or name == "caption":
            assert _ink(frame, rect, bg) >= 15, f"nothing drawn in {name} {rect}"
    # the molecule view's own caption is not drawn under the movie's: its corner is empty
    mol = layout["molecule"]
    corner = QRectF(mol.left(), mol.top(), mol.width() * 0.5, 22)
    assert _ink(frame, corner, bg) == 0


def test_added_trace_is_in_the_movie(crowded, tmp_path):
    traj, rules, res = crowded
    r = MovieRenderer(traj, result=res, rules=rules, size=(640, 480), user_monitors=[ADDED])
    try:
        assert ADDED_NAME in r.traces.curves
        colour = r.traces.curves[ADDED_NAME].opts["pen"].color()
        img = r.render(40)
        from basinmark.gui.movie import qimage_to_pil

        pil = qimage_to_pil(img)
        want = np.array([colour.red(), colour.green(), colour.blue()])
        a = np.asarray(pil, dtype=int)
        plots = r.layout["traces"]
        sel = a[int(plots.top()):int(plots.bottom()), int(plots.left()):int(plots.right())]
        near = (np.abs(sel - want).sum(axis=2) < 40).sum()
        assert near > 30, f"the added trace's colour {colour.name()} is hardly drawn ({near} pixels)"
        # and its legend entry carries the same colour
        entry = r.layout[f"legend:{ADDED_NAME}"]
        sel = a[int(entry.top()):int(entry.bottom()), int(entry.left()):int(entry.right())]
        assert (np.abs(sel - want).sum(axis=2) < 40).sum() > 5
        # the added distance is also written on the molecule with its value
        assert any(text.startswith(ADDED_NAME) or "Å" in text for text, _v, _at in r.molecule.measure_labels(
            int(r.layout["molecule"].width()), int(r.layout["molecule"].height())))
    finally:
        r.close()


def test_movie_dialog_proposes_the_last_export_folder_outside_the_set(qtbot, tmp_path):
    from basinmark.gui.main_window import MainWindow
    from basinmark.gui.movie import install_movie_action

    root = make_toy_set(tmp_path / "toyset", ["left", "right"])
    settings = QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat)
    win = MainWindow(settings)
    qtbot.addWidget(win)
    win.show()
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
    win.state.add_monitor(ADDED)
    act = install_movie_action(win)

    act.trigger()  # no export yet: a folder outside the set
    first = Path(win.movie_dialog.file.text())
    assert root.resolve() not in first.resolve().parents and first.suffix == ".gif"
    win.movie_dialog.dialog.reject()

    exports = tmp_path / "exports"
    exports.mkdir()
    act.trigger()
    dlg = win.movie_dialog
    dlg.file.setText(str(exports / "mine.gif"))
    dlg.width.setValue(320)
    dlg.height.setValue(240)
    dlg.first.setValue(1)
    dlg.last.setValue(3)
    dlg._accept()
    assert dlg.error.text() == ""
    assert dlg.result is not None and f"legend:{ADDED_NAME}" in dlg.result.layout  # the added trace is in it

    act.trigger()  # the next movie is proposed in the last export folder
    nxt = Path(win.movie_dialog.file.text())
    assert nxt.parent == exports and nxt.name == f"{win.state.run_id}.gif"
    win.movie_dialog.dialog.reject()

    # a remembered folder inside the set (an older version's default) is not proposed
    settings.setValue("export/last_folder", str(root))
    act.trigger()
    again = Path(win.movie_dialog.file.text())
    assert root.resolve() not in again.resolve().parents
    win.movie_dialog.dialog.reject()
    win.close()


def test_movie_command_traces_the_measures_asked_for(tmp_path, qapp, capsys):
    from basinmark.cli import main as cli_main

    root = make_toy_set(tmp_path / "toyset", ["left", "right"])
    out = tmp_path / "m.gif"
    assert cli_main(["movie", str(root), "toy-001", "-o", str(out), "--size", "320x240", "--frames", "1:3",
                     "--measure", "2-3", "--no-cache"]) == 0
    # the frame written has ink in the legend entry of the added distance (same size, same layout)
    traj = toy_trajectory("toy-001", "left")
    rules = parse_rules(TOY_RULES)
    r = MovieRenderer(traj, result=classify_run(traj, rules), rules=rules, size=(320, 240), user_monitors=[ADDED])
    try:
        entry = r.layout[f"legend:{ADDED_NAME}"]
        colour = r.traces.curves[ADDED_NAME].opts["pen"].color()
    finally:
        r.close()
    with Image.open(out) as im:
        a = np.asarray(im.convert("RGB"), dtype=int)
    sel = a[int(entry.top()):int(entry.bottom()), int(entry.left()):int(entry.right())]
    assert (np.abs(sel - [colour.red(), colour.green(), colour.blue()]).sum(axis=2) < 40).sum() > 5
    capsys.readouterr()
    assert cli_main(["movie", str(root), "toy-001", "-o", str(out), "--measure", "2-9"]) == 2
    assert "numbered 1 to 3" in capsys.readouterr().err
