"""The molecule view: offscreen painting (no OpenGL), bonds per frame, picking, trackball."""

from __future__ import annotations

import numpy as np
import pytest
from ase.build import molecule
from PySide6.QtCore import QPoint, Qt
from PySide6.QtGui import QColor

from basinmark.core.model import Trajectory
from basinmark.gui.molecule_view import MoleculeView, perceive_bonds
from basinmark.gui.palette import ball_radius, element_colour
from basinmark.gui.sprites import SpriteCache

from gui_fixtures import stretched_ethylene

pytestmark = pytest.mark.gui


@pytest.fixture
def view(qtbot):
    v = MoleculeView()
    v.resize(400, 400)
    qtbot.addWidget(v)
    v.set_trajectory(stretched_ethylene())
    return v


def test_paints_atoms_into_qimage_without_opengl(view):
    img = view.render_image(400, 400)
    bg = view.background_colour().rgb()
    xy, _ = view.project(400, 400)
    for x, y in xy:  # the centre pixel of every atom differs from the background
        assert img.pixel(int(round(x)), int(round(y))) != bg
    corner = img.pixel(2, 2)
    assert corner == bg


def test_empty_view_paints_background_only(qtbot):
    v = MoleculeView()
    qtbot.addWidget(v)
    img = v.render_image(100, 100)
    assert img.pixel(1, 1) == v.background_colour().rgb()


def test_bonds_follow_the_frame_so_a_bond_breaks(view):
    # ase's G2 ethylene: 5 bonds (1 C=C, 4 C-H) at the start; the stretched hydrogen has left at the end
    view.set_frame(0)
    assert len(view.bonds()) == 5
    view.set_frame(view.trajectory.n_frames - 1)
    assert len(view.bonds()) == 4


def test_bond_perception_matches_covalent_radius_rule():
    # Cordero covalent radii via ase.data.covalent_radii, tolerance 1.2 (common practice, no source)
    from ase.data import covalent_radii
    atoms = molecule("CH3CH2OH")
    pairs = {tuple(p) for p in perceive_bonds(atoms.positions, atoms.numbers).tolist()}
    d = atoms.get_all_distances()
    r = covalent_radii[atoms.numbers]
    expected = {(i, j) for i in range(len(atoms)) for j in range(i + 1, len(atoms))
                if d[i, j] < 1.2 * (r[i] + r[j])}
    assert pairs == expected
    assert len(pairs) == 8  # ethanol: C-C, C-O, O-H and 5 C-H


def test_click_two_atoms_requests_distance_monitor(view, qtbot):
    xy, _ = view.project()
    got = []
    view.monitor_requested.connect(got.append)
    qtbot.mouseClick(view, Qt.MouseButton.LeftButton, pos=QPoint(*np.round(xy[0]).astype(int)))
    assert view.picked == [1]
    qtbot.mouseClick(view, Qt.MouseButton.LeftButton, pos=QPoint(*np.round(xy[1]).astype(int)))
    assert got == [(1, 2)]
    assert view.picked == []


def test_shift_click_builds_angle_and_dihedral(view, qtbot):
    xy, _ = view.project()
    got = []
    view.monitor_requested.connect(got.append)
    # ase ethylene atom order: C, C, H, H, H, H; pick 3, 1, 2 for an H-C-C angle
    for k, mod in ((2, Qt.KeyboardModifier.ShiftModifier), (0, Qt.KeyboardModifier.ShiftModifier),
                   (1, Qt.KeyboardModifier.NoModifier)):
        view.click_at(*xy[k], extend=mod == Qt.KeyboardModifier.ShiftModifier)
    assert got == [(3, 1, 2)]
    for k in (2, 0, 1):
        view.click_at(*xy[k], extend=True)
    view.click_at(*xy[4], extend=False)
    assert got[-1] == (3, 1, 2, 5)


def test_click_on_empty_space_clears_picks(view):
    xy, _ = view.project()
    view.click_at(*xy[0])
    assert view.picked == [1]
    view.click_at(1, 1)
    assert view.picked == []


def test_trackball_drag_rotates_and_reset_restores(view, qtbot):
    before, _ = view.project()
    qtbot.mousePress(view, Qt.MouseButton.LeftButton, pos=QPoint(100, 200))
    for x in range(110, 220, 10):
        qtbot.mouseMove(view, QPoint(x, 200))
    qtbot.mouseRelease(view, Qt.MouseButton.LeftButton, pos=QPoint(220, 200))
    after, _ = view.project()
    assert not np.allclose(before, after)
    # a horizontal drag rotates about the screen's vertical axis: screen y of every atom is unchanged
    np.testing.assert_allclose(before[:, 1], after[:, 1], atol=1e-6)
    view.reset_view()
    np.testing.assert_allclose(view.project()[0], before, atol=1e-6)


def test_wheel_zoom_changes_scale(view, qtbot):
    xy0, _ = view.project()
    spread0 = np.ptp(xy0[:, 0])
    view.zoom(2.0)
    assert np.ptp(view.project()[0][:, 0]) == pytest.approx(2 * spread0)


def test_atom_numbers_are_one_based_and_toggle(view):
    view.set_show_numbers(True)
    assert view.show_numbers
    img_on = view.render_image(400, 400)
    view.set_show_numbers(False)
    img_off = view.render_image(400, 400)
    assert img_on != img_off


def test_sprites_cached_per_colour_size_and_dpr(qapp):  # pixmaps need the application
    cache = SpriteCache()
    a = cache.ball((10, 20, 30), 20, 1.0)
    assert cache.ball((10, 20, 30), 20, 1.0) is a
    b = cache.ball((10, 20, 30), 20, 2.0)
    assert b.width() == 40 and b.devicePixelRatio() == 2.0
    assert len(cache) == 2


def test_palette_conventions():
    # the trade's usual colour conventions (carbon grey, oxygen red, nitrogen blue, hydrogen white)
    c, o, n, h = (QColor(*element_colour(z)) for z in (6, 8, 7, 1))
    assert c.saturation() < 40 and c.value() < 128
    assert o.hue() < 15 or o.hue() > 345
    assert 200 < n.hue() < 250
    assert h.value() > 220 and h.saturation() < 20
    assert element_colour(118) == element_colour(117)  # unlisted elements share the default
    # radii proportional to ase.data.covalent_radii (Cordero 2008): C larger than H
    assert ball_radius(6) > ball_radius(1)


def test_pixel_under_atom_has_element_hue(qtbot):
    t = Trajectory("o", [8], np.zeros((1, 1, 3)), [0.0])
    v = MoleculeView()
    qtbot.addWidget(v)
    v.resize(200, 200)
    v.set_trajectory(t)
    img = v.render_image(200, 200)
    col = QColor(img.pixel(100, 100))
    assert col.red() > 2 * col.blue() and col.red() > 2 * col.green()


def test_high_dpi_render_doubles_pixels_and_keeps_atoms_in_place(view):
    img = view.render_image(200, 200, dpr=2.0)
    assert (img.width(), img.height()) == (400, 400) and img.devicePixelRatio() == 2.0
    xy, _ = view.project(200, 200)
    bg = view.background_colour().rgb()
    for x, y in xy:
        assert img.pixel(int(round(2 * x)), int(round(2 * y))) != bg


def test_wheel_zooms_and_right_drag_pans(view, qtbot):
    from PySide6.QtCore import QPointF
    from PySide6.QtGui import QWheelEvent

    xy0, _ = view.project()
    ev = QWheelEvent(QPointF(200, 200), view.mapToGlobal(QPointF(200, 200)), QPoint(0, 0), QPoint(0, 240),
                     Qt.MouseButton.NoButton, Qt.KeyboardModifier.NoModifier, Qt.ScrollPhase.NoScrollPhase, False)
    view.wheelEvent(ev)
    xy1, _ = view.project()
    # two wheel steps zoom by 1.15**2 about the centre of the widget
    np.testing.assert_allclose(xy1 - 200, (xy0 - 200) * 1.15 ** 2, atol=1e-6)
    qtbot.mousePress(view, Qt.MouseButton.RightButton, pos=QPoint(100, 100))
    qtbot.mouseMove(view, QPoint(130, 110))
    qtbot.mouseMove(view, QPoint(140, 120))
    qtbot.mouseRelease(view, Qt.MouseButton.RightButton, pos=QPoint(140, 120))
    xy2, _ = view.project()
    np.testing.assert_allclose(xy2 - xy1, np.tile([40.0, 20.0], (len(xy1), 1)), atol=1e-6)
    assert view.picked == []  # a drag is not a click
