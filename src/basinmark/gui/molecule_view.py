"""Ball-and-stick view of one frame, drawn with QPainter (no OpenGL).

Orthographic projection, depth-sorted back to front in a few depth slabs;
within a slab the bonds are drawn with one ``drawLines`` call per colour and
width, the atoms as pre-rendered sprites.  Left-drag rotates (trackball),
the wheel zooms, right- or middle-drag pans.  Clicking atoms picks them:
a plain click on a second atom asks for a distance monitor; Shift-click
keeps picking, so Shift-click two atoms and click a third for an angle, or
Shift-click three and click a fourth for a dihedral.  Click empty space
to clear the picks.
"""

from __future__ import annotations

from typing import Iterable, Sequence

import numpy as np
from PySide6.QtCore import QLineF, QPointF, QRectF, QSize, Qt, Signal
from PySide6.QtGui import QColor, QFont, QImage, QPainter, QPalette, QPen
from PySide6.QtWidgets import QSizePolicy, QWidget

from basinmark.core.geometry import bonds_in_frame, measure
from basinmark.core.model import Trajectory
from basinmark.gui.palette import ball_radius, element_colour
from basinmark.gui.sprites import SpriteCache

_N_SLABS = 6
_CLICK_SLOP_PX = 4


def _rotation(axis: np.ndarray, angle: float) -> np.ndarray:
    """Rotation matrix about a unit ``axis`` by ``angle`` radians (Rodrigues' formula)."""
    x, y, z = axis
    c, s = np.cos(angle), np.sin(angle)
    k = np.array([[0, -z, y], [z, 0, -x], [-y, x, 0]])
    return np.eye(3) * c + s * k + (1 - c) * np.outer(axis, axis)


def perceive_bonds(positions: np.ndarray, numbers: np.ndarray) -> np.ndarray:
    """Bonded atom pairs (k, 2) of one frame, 0-based, from the core's bond perception."""
    return np.asarray(bonds_in_frame(numbers, positions), dtype=np.intp).reshape(-1, 2)


#: molecules up to this many atoms get antialiased bonds (see MoleculeView._paint_bonds)
ANTIALIAS_BONDS_UP_TO = 150


class MoleculeView(QWidget):
    """Draws one frame of a :class:`Trajectory`; emits picks and monitor requests (1-based atoms)."""

    picks_changed = Signal(list)        # 1-based atom numbers currently picked
    monitor_requested = Signal(tuple)   # 2, 3 or 4 1-based atom numbers
    show_caption = True                 # run and time at the top left (a movie draws its own instead)

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Expanding)
        self.setMinimumSize(200, 200)
        self.setFocusPolicy(Qt.FocusPolicy.ClickFocus)
        self.setMouseTracking(False)
        self._sprites = SpriteCache()
        self._traj: Trajectory | None = None
        self._frame = 0
        self._rot = np.eye(3)
        self._centre = np.zeros(3)
        self._scale = 40.0        # pixels per Å
        self._pan = np.zeros(2)   # pixels
        self._show_numbers = False
        self._picked: list[int] = []          # 0-based
        self._highlight: set[tuple[int, int]] = set()
        self._measure: set[tuple[int, int]] = set()
        self._values_of: list[tuple[int, ...]] = []  # 0-based atoms of measures whose value is written on the view
        self._bond_cache: dict[int, np.ndarray] = {}
        self._press: QPointF | None = None
        self._last: QPointF | None = None
        self._dragged = False
        self._button = Qt.MouseButton.NoButton
        self._radii = np.zeros(0)
        self.user_moved = False  # set once a person rotates, zooms or pans
        self._colours: list[tuple[int, int, int]] = []
        self._colour_table: list[tuple[int, int, int]] = []   # distinct colours of the run's atoms
        self._colour_codes = np.zeros(0, dtype=np.intp)       # per atom: index into _colour_table

    # --- data ---------------------------------------------------------------------------
    def sizeHint(self) -> QSize:
        return QSize(560, 480)

    @property
    def trajectory(self) -> Trajectory | None:
        return self._traj

    @property
    def frame(self) -> int:
        return self._frame

    @property
    def picked(self) -> list[int]:
        """Picked atoms, 1-based."""
        return [i + 1 for i in self._picked]

    def set_trajectory(self, traj: Trajectory | None, *, keep_view: bool = False) -> None:
        same_atoms = (traj is not None and self._traj is not None
                      and np.array_equal(traj.numbers, self._traj.numbers))
        self._traj = traj
        self._bond_cache.clear()
        self._frame = 0 if traj is None else min(self._frame, traj.n_frames - 1)
        if traj is not None:
            self._radii = np.array([ball_radius(z) for z in traj.numbers])
            self._colours = [element_colour(z) for z in traj.numbers]
            self._colour_table = sorted(set(self._colours))
            self._colour_codes = np.array([self._colour_table.index(c) for c in self._colours], dtype=np.intp)
            if not same_atoms:
                self._picked = []
                self.picks_changed.emit([])
            if not (keep_view and same_atoms):
                self.reset_view()
        self.update()

    def set_frame(self, frame: int) -> None:
        if self._traj is None:
            return
        frame = int(np.clip(frame, 0, self._traj.n_frames - 1))
        if frame != self._frame:
            self._frame = frame
            self.update()

    def set_highlight_pairs(self, pairs: Iterable[Sequence[int]]) -> None:
        """Atom pairs (0-based) whose bonds are highlighted, and measured with a dashed line when unbonded."""
        self._highlight = {tuple(sorted((int(a), int(b)))) for a, b in pairs}
        self._measure = set(self._highlight)
        self.update()

    def set_measures(self, groups: Iterable[Sequence[int]]) -> None:
        """Measures (1-based atoms, 2 to 4 each) whose value at the shown frame is written on the molecule."""
        self._values_of = [tuple(int(a) - 1 for a in g) for g in groups if 2 <= len(g) <= 4]
        self.update()

    def measure_labels(self, w: float | None = None, h: float | None = None) -> list[tuple[str, float, QPointF]]:
        """``(text, value, anchor)`` of every measure written on the view at the shown frame: the added
        monitors, then the picked atoms (two or more).  Values come from core.geometry (Å, degrees)."""
        traj = self._traj
        if traj is None:
            return []
        xy, _depth = self.project(w, h)
        n = traj.n_atoms
        groups = list(self._values_of)
        if len(self._picked) >= 2 and tuple(self._picked) not in groups:
            groups.append(tuple(self._picked))
        out = []
        for g in groups:
            if max(g) >= n:
                continue
            value = float(measure(traj.positions[self._frame][None], list(g))[0])
            text = f"{value:.2f} Å" if len(g) == 2 else f"{value:.1f}°"
            # the middle of the measured bond, the vertex of an angle, the middle of a dihedral's axis
            at = xy[g[1]] if len(g) == 3 else 0.5 * (xy[g[0]] + xy[g[1]]) if len(g) == 2 else 0.5 * (xy[g[1]] + xy[g[2]])
            out.append((text, value, QPointF(float(at[0]), float(at[1]))))
        return out

    def set_show_numbers(self, on: bool) -> None:
        self._show_numbers = bool(on)
        self.update()

    @property
    def show_numbers(self) -> bool:
        return self._show_numbers

    def set_picks(self, atoms: list[int]) -> None:
        """Show these 1-based atoms as picked (from the app state; does not emit)."""
        idx = [int(a) - 1 for a in atoms if self._traj is not None and 0 < int(a) <= self._traj.n_atoms]
        if idx != self._picked:
            self._picked = idx
            self.update()

    def clear_picks(self) -> None:
        if self._picked:
            self._picked = []
            self.picks_changed.emit([])
            self.update()

    # --- view transform -----------------------------------------------------------------
    def view_state(self) -> dict:
        """The view transform and what is marked (for another view to copy, e.g. the movie renderer)."""
        return {"rotation": self._rot.copy(), "centre": np.array(self._centre, dtype=float),
                "pan": np.array(self._pan, dtype=float), "scale": float(self._scale),
                "show_numbers": self._show_numbers, "highlight": set(self._highlight),
                "measure": set(self._measure)}

    def set_view_state(self, state: dict, scale_ratio: float = 1.0) -> None:
        """Take a :meth:`view_state`; ``scale_ratio`` rescales zoom and pan for a view of another size."""
        self._rot = np.array(state["rotation"], dtype=float)
        self._centre = np.array(state["centre"], dtype=float)
        self._pan = np.array(state["pan"], dtype=float) * scale_ratio
        self._scale = float(state["scale"]) * scale_ratio
        self.set_show_numbers(state["show_numbers"])
        self._highlight = set(state["highlight"])
        self._measure = set(state["measure"])
        self.update()

    def reset_view(self) -> None:
        """Back to the initial orientation (widest spread across the screen), fitted to the molecule."""
        self._rot = self._principal_rotation()
        self.fit()

    def _principal_rotation(self) -> np.ndarray:
        """Rotation putting the frame's largest spread on screen x, the next on y, the least in depth."""
        if self._traj is None or self._traj.n_atoms < 2:
            return np.eye(3)
        pos = self._traj.positions[self._frame].astype(np.float64)
        _, _, vt = np.linalg.svd(pos - pos.mean(axis=0), full_matrices=True)
        if np.linalg.det(vt) < 0:
            vt[2] *= -1
        return vt

    def fit(self) -> None:
        """Centre on the current frame and zoom so every frame of the run fits."""
        if self._traj is None:
            return
        pos = self._traj.positions[self._frame].astype(np.float64)
        self._centre = pos.mean(axis=0)
        all_pos = self._traj.positions
        step = max(1, all_pos.shape[0] // 64)
        extent = np.linalg.norm(all_pos[::step] - self._centre, axis=2).max() + float(self._radii.max(initial=0.5))
        extent = max(extent, 1.0)
        w, h = max(self.width(), 50), max(self.height(), 50)
        self._scale = 0.46 * min(w, h) / extent
        self._pan = np.zeros(2)
        self.update()

    def rotate(self, axis: Sequence[float], angle: float) -> None:
        """Rotate the view about ``axis`` (view coordinates) by ``angle`` radians."""
        a = np.asarray(axis, float)
        n = np.linalg.norm(a)
        if n > 0:
            self._rot = _rotation(a / n, angle) @ self._rot
            self.update()

    def zoom(self, factor: float) -> None:
        self._scale = float(np.clip(self._scale * factor, 1.0, 5000.0))
        self.update()

    def project(self, w: float | None = None, h: float | None = None) -> tuple[np.ndarray, np.ndarray]:
        """Screen coordinates (n, 2) and depth (n,) of the current frame's atoms (larger depth = nearer)."""
        if self._traj is None:
            return np.zeros((0, 2)), np.zeros(0)
        w = self.width() if w is None else w
        h = self.height() if h is None else h
        v = (self._traj.positions[self._frame].astype(np.float64) - self._centre) @ self._rot.T
        xy = np.empty((v.shape[0], 2))
        xy[:, 0] = w / 2 + self._pan[0] + self._scale * v[:, 0]
        xy[:, 1] = h / 2 + self._pan[1] - self._scale * v[:, 1]
        return xy, v[:, 2]

    def atom_at(self, x: float, y: float) -> int | None:
        """0-based index of the frontmost atom under the point, or None."""
        xy, depth = self.project()
        if not len(depth):
            return None
        d = np.hypot(xy[:, 0] - x, xy[:, 1] - y)
        hit = np.nonzero(d <= np.maximum(self._radii * self._scale, 4.0))[0]
        if not hit.size:
            return None
        return int(hit[np.argmax(depth[hit])])

    def bonds(self) -> np.ndarray:
        """Bonded pairs (k, 2), 0-based, in the current frame (perceived per frame, cached)."""
        if self._traj is None:
            return np.zeros((0, 2), np.intp)
        b = self._bond_cache.get(self._frame)
        if b is None:
            if len(self._bond_cache) > 4096:
                self._bond_cache.clear()
            b = perceive_bonds(self._traj.positions[self._frame], self._traj.numbers)
            self._bond_cache[self._frame] = b
        return b

    def resizeEvent(self, event) -> None:  # noqa: N802
        old, new = event.oldSize(), event.size()
        if old.isValid() and min(old.width(), old.height()) > 0:
            self._scale *= min(new.width(), new.height()) / min(old.width(), old.height())
        super().resizeEvent(event)

    # --- painting -----------------------------------------------------------------------
    def paintEvent(self, event) -> None:  # noqa: N802 (Qt name)
        p = QPainter(self)
        self.paint_scene(p, self.width(), self.height(), self.devicePixelRatioF())
        p.end()

    def render_image(self, width: int, height: int, dpr: float = 1.0) -> QImage:
        """The scene painted into a new QImage (for tests, screenshots, exports)."""
        img = QImage(int(width * dpr), int(height * dpr), QImage.Format.Format_ARGB32_Premultiplied)
        img.setDevicePixelRatio(dpr)
        p = QPainter(img)
        self.paint_scene(p, width, height, dpr)
        p.end()
        return img

    def background_colour(self) -> QColor:
        return self.palette().color(QPalette.ColorRole.Base)

    def paint_scene(self, p: QPainter, w: int, h: int, dpr: float = 1.0) -> None:
        pal = self.palette()
        p.fillRect(QRectF(0, 0, w, h), self.background_colour())
        if self._traj is None:
            p.setPen(pal.color(QPalette.ColorRole.PlaceholderText))
            p.drawText(QRectF(0, 0, w, h), Qt.AlignmentFlag.AlignCenter, "No run open")
            return
        p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
        p.setRenderHint(QPainter.RenderHint.SmoothPixmapTransform, True)
        xy, depth = self.project(w, h)
        bonds = self.bonds()
        n = len(depth)
        # depth slabs, back to front, so near bonds cover far balls and vice versa
        lo, hi = float(depth.min()), float(depth.max())
        span = max(hi - lo, 1e-6)
        atom_slab = np.minimum(((depth - lo) / span * _N_SLABS).astype(int), _N_SLABS - 1)
        if len(bonds):
            bond_depth = 0.5 * (depth[bonds[:, 0]] + depth[bonds[:, 1]])
            bond_slab = np.minimum(((bond_depth - lo) / span * _N_SLABS).astype(int), _N_SLABS - 1)
        else:
            bond_slab = np.zeros(0, int)
        highlight = pal.color(QPalette.ColorRole.Highlight)
        bond_w = max(1.5, 0.16 * self._scale)
        diam = np.maximum(2, np.round(2 * self._radii * self._scale)).astype(int)
        order = np.argsort(depth, kind="stable")
        bg = self.background_colour()
        rim = QColor(150, 156, 164) if bg.lightness() < 110 else None  # dark theme: light outline
        # one sprite lookup per (colour, size) rather than per atom: large molecules have thousands of atoms
        # but a handful of distinct balls (measured, 3,000 atoms: 5.5 ms of per-atom lookups saved a frame)
        sprite_for: dict = {}
        pixes = []
        for key in zip(self._colours, diam.tolist()):
            pix = sprite_for.get(key)
            if pix is None:
                pix = sprite_for[key] = self._sprites.ball(key[0], key[1], dpr, rim)
            pixes.append(pix)
        corners = (xy - diam[:, None] / 2.0).tolist()
        self._paint_measures(p, xy, bonds, highlight)
        for s in range(_N_SLABS):
            sel = np.nonzero(bond_slab == s)[0]
            if sel.size:
                self._paint_bonds(p, xy, bonds[sel], bond_w, highlight)
                p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
            for i in order[atom_slab[order] == s].tolist():
                p.drawPixmap(QPointF(*corners[i]), pixes[i])
        self._paint_picks(p, xy, diam, highlight)
        self._paint_measure_values(p, xy, w, h, highlight)
        if self._show_numbers:
            self._paint_numbers(p, xy, diam, n)
        if self.show_caption:  # a movie writes its own caption above the molecule
            self._paint_caption(p, w, h)

    def _paint_caption(self, p: QPainter, w: int, h: int) -> None:
        """Run and time at the top left; while picking, what the next click does."""
        pal = self.palette()
        traj = self._traj
        p.setPen(pal.color(QPalette.ColorRole.Text))
        p.setFont(self.font())
        fm = p.fontMetrics()
        p.drawText(QRectF(8, 6, w - 16, fm.height() + 2), Qt.AlignmentFlag.AlignLeft,
                   f"{traj.run_id}    t = {traj.times[self._frame]:+.1f} fs")
        if self._picked:
            atoms = "-".join(str(i + 1) for i in self._picked)
            nxt = {1: "click a 2nd atom for a distance", 2: "click a 3rd for an angle",
                   3: "click a 4th for a dihedral"}.get(len(self._picked), "click to start again")
            hint = f"picked {atoms}: {nxt} (Shift-click keeps picking)"
            p.setPen(pal.color(QPalette.ColorRole.PlaceholderText))
            p.drawText(QRectF(8, h - fm.height() - 8, w - 16, fm.height() + 2), Qt.AlignmentFlag.AlignLeft, hint)

    def _paint_bonds(self, p: QPainter, xy: np.ndarray, pairs: np.ndarray, width: float, highlight: QColor) -> None:
        # antialiased wide lines dominate the frame time of large molecules (measured, 300 atoms: 9.4 of
        # 12.7 ms); past ANTIALIAS_BONDS_UP_TO atoms bonds are drawn aliased, where the eye no longer sees it
        p.setRenderHint(QPainter.RenderHint.Antialiasing, len(self._radii) <= ANTIALIAS_BONDS_UP_TO)
        a, b = pairs[:, 0], pairs[:, 1]
        mid = 0.5 * (xy[a] + xy[b])
        if self._highlight:
            hl = np.array([(min(i, j), max(i, j)) in self._highlight for i, j in pairs.tolist()], bool)
        else:
            hl = np.zeros(len(pairs), bool)
        # flat caps throughout: round caps cost 5-10x more in the raster engine (measured,
        # 700 lines: 13 ms vs 1.6 ms) and the ends are hidden under the balls anyway
        if hl.any():  # a halo under highlighted bonds, one call
            pen = QPen(highlight, width * 2.2)
            pen.setCapStyle(Qt.PenCapStyle.FlatCap)
            p.setPen(pen)
            p.drawLines([QLineF(*xy[i], *xy[j]) for i, j in pairs[hl]])
        # dark outline pass, then half-bonds grouped by colour: one drawLines call per group
        outline = QPen(QColor(20, 20, 24, 200), width + 1.6)
        outline.setCapStyle(Qt.PenCapStyle.FlatCap)
        p.setPen(outline)
        p.drawLines([QLineF(*row) for row in np.hstack([xy[a], xy[b]]).tolist()])
        # half-bonds grouped by the colour of their atom, with numpy rather than a loop per bond
        code = self._colour_codes
        for c in np.unique(np.concatenate([code[a], code[b]])).tolist():
            ma, mb = code[a] == c, code[b] == c
            seg = np.concatenate([np.hstack([xy[a[ma]], mid[ma]]), np.hstack([mid[mb], xy[b[mb]]])])
            pen = QPen(QColor(*self._colour_table[c]), width)
            pen.setCapStyle(Qt.PenCapStyle.FlatCap)
            p.setPen(pen)
            p.drawLines([QLineF(*row) for row in seg.tolist()])

    def _paint_measures(self, p: QPainter, xy: np.ndarray, bonds: np.ndarray, highlight: QColor) -> None:
        bonded = {(min(i, j), max(i, j)) for i, j in bonds.tolist()}
        n = len(xy)
        lines = [QLineF(*xy[i], *xy[j]) for i, j in self._measure if (i, j) not in bonded and i < n and j < n]
        if lines:
            pen = QPen(highlight, 1.5, Qt.PenStyle.DashLine)
            p.setPen(pen)
            p.drawLines(lines)

    def _paint_picks(self, p: QPainter, xy: np.ndarray, diam: np.ndarray, highlight: QColor) -> None:
        if not self._picked:
            return
        p.setBrush(Qt.BrushStyle.NoBrush)
        p.setPen(QPen(highlight, 2.5))
        for i in self._picked:
            if i < len(xy):
                r = diam[i] / 2 + 4
                p.drawEllipse(QPointF(*xy[i]), r, r)

    def _paint_measure_values(self, p: QPainter, xy: np.ndarray, w: int, h: int, highlight: QColor) -> None:
        labels = self.measure_labels(w, h)
        if not labels:
            return
        # the picked chain as a thin dashed path (added distances already have their dashed line)
        if len(self._picked) >= 2:
            pts = [xy[i] for i in self._picked if i < len(xy)]
            p.setPen(QPen(highlight, 1.2, Qt.PenStyle.DashLine))
            p.drawLines([QLineF(*a, *b) for a, b in zip(pts[:-1], pts[1:])])
        pal = self.palette()
        font = QFont(self.font())
        font.setBold(True)
        p.setFont(font)
        fm = p.fontMetrics()
        fg, bg = pal.color(QPalette.ColorRole.Text), QColor(pal.color(QPalette.ColorRole.Base))
        bg.setAlpha(215)
        taken: list[QRectF] = []
        for text, _v, at in labels:
            rect = QRectF(at.x() + 6, at.y() - fm.height() - 4, fm.horizontalAdvance(text) + 8, fm.height() + 2)
            while any(rect.intersects(r) for r in taken):  # two values never print over each other
                rect.translate(0, fm.height() + 3)
            taken.append(rect)
            p.fillRect(rect, bg)
            p.setPen(QPen(highlight, 1))
            p.drawRect(rect)
            p.setPen(fg)
            p.drawText(rect, Qt.AlignmentFlag.AlignCenter, text)

    def _paint_numbers(self, p: QPainter, xy: np.ndarray, diam: np.ndarray, n: int) -> None:
        pal = self.palette()
        font = QFont(self.font())
        font.setBold(True)
        p.setFont(font)
        fm = p.fontMetrics()
        fg, bg = pal.color(QPalette.ColorRole.Text), pal.color(QPalette.ColorRole.Base)
        bg.setAlpha(190)
        for i in range(n):
            text = str(i + 1)
            tw, th = fm.horizontalAdvance(text) + 4, fm.height()
            x, y = xy[i, 0] + diam[i] * 0.3, xy[i, 1] - diam[i] * 0.3 - th
            rect = QRectF(x, y, tw, th)
            p.fillRect(rect, bg)
            p.setPen(fg)
            p.drawText(rect, Qt.AlignmentFlag.AlignCenter, text)

    # --- mouse --------------------------------------------------------------------------
    def mousePressEvent(self, event) -> None:  # noqa: N802
        self._press = self._last = event.position()
        self._button = event.button()
        self._dragged = False
        event.accept()

    def mouseMoveEvent(self, event) -> None:  # noqa: N802
        if self._last is None:
            return
        pos = event.position()
        dx, dy = pos.x() - self._last.x(), pos.y() - self._last.y()
        if not self._dragged and self._press is not None:
            if abs(pos.x() - self._press.x()) + abs(pos.y() - self._press.y()) > _CLICK_SLOP_PX:
                self._dragged = True
        if self._dragged:
            self.user_moved = True
            if self._button == Qt.MouseButton.LeftButton:
                # trackball: rotate about the screen axis perpendicular to the drag
                self.rotate((dy, dx, 0.0), 0.01 * float(np.hypot(dx, dy)))
            elif self._button in (Qt.MouseButton.RightButton, Qt.MouseButton.MiddleButton):
                self._pan += (dx, dy)
                self.update()
        self._last = pos
        event.accept()

    def mouseReleaseEvent(self, event) -> None:  # noqa: N802
        if not self._dragged and self._button == Qt.MouseButton.LeftButton:
            pos = event.position()
            extend = bool(event.modifiers() & Qt.KeyboardModifier.ShiftModifier)
            self.click_at(pos.x(), pos.y(), extend=extend)
        self._press = self._last = None
        self._dragged = False
        event.accept()

    def wheelEvent(self, event) -> None:  # noqa: N802
        steps = event.angleDelta().y() / 120.0
        if steps:
            self.user_moved = True
            self.zoom(1.15 ** steps)
        event.accept()

    def click_at(self, x: float, y: float, *, extend: bool = False) -> None:
        """Pick logic for a click at widget coordinates (see the module docstring)."""
        atom = self.atom_at(x, y)
        if atom is None:
            self.clear_picks()
            return
        if atom in self._picked:
            self._picked.remove(atom)
        else:
            if len(self._picked) >= 4:
                self._picked = []
            self._picked.append(atom)
        self.picks_changed.emit(self.picked)
        self.update()
        if not extend and len(self._picked) >= 2:
            atoms = tuple(self.picked)
            self._picked = []
            self.picks_changed.emit([])
            self.monitor_requested.emit(atoms)
