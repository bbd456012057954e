"""Movie export: the molecule (in the window's current orientation) beside the traces with a moving
time cursor, written as an animated GIF (Pillow) or, when an encoder is importable, an MP4.

Widgets are painted into QImages (``MoleculeView.render_image`` and ``QWidget.render``), so this works
on Qt's offscreen platform; nothing uses OpenGL.  The traces are painted once per movie and the time
cursor is drawn on top of each frame: re-painting four plots per frame was measured at roughly ten
times the cost of everything else, and the plots do not change while the run plays.
"""

from __future__ import annotations

import importlib.util
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Sequence

import numpy as np
from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QFont, QFontMetricsF, QImage, QPainter, QPalette, QPen

from basinmark.core.errors import BasinmarkError
from basinmark.gui.colours import cursor_colour
from basinmark.gui.export_folder import default_export_folder, remember_export_folder

MAX_SIDE = 4096          # pixels; larger movies are refused (memory), our own limit
MAX_FPS = 100.0          # GIF frame delays are whole hundredths of a second
PROGRESS_H = 3           # pixels: the strip under the molecule showing where the frame sits in the run
SWATCH_W = 16            # pixels: the line before each legend name
UNITS_ENTRY = "units"    # the legend entry that names the energy unit


class MovieError(BasinmarkError):
    """A movie cannot be made as asked (bad size, range, format or missing encoder)."""


@dataclass
class MovieResult:
    path: Path
    n_frames: int
    size: tuple[int, int]
    fps: float
    format: str          # "gif" | "mp4"
    cancelled: bool = False
    note: str = ""       # plain sentence, e.g. the frame delay GIF could actually store
    layout: dict = field(default_factory=dict)  # name -> QRectF of every caption, legend entry, mark and panel


def parse_size(text: str) -> tuple[int, int]:
    """``"640x480"`` -> (640, 480); MovieError on anything else."""
    parts = str(text).lower().replace("×", "x").split("x")
    try:
        w, h = (int(p) for p in parts)
    except ValueError:
        raise MovieError(f"size {text!r} is not WIDTHxHEIGHT in pixels, e.g. 640x480") from None
    check_size((w, h))
    return w, h


def check_size(size: tuple[int, int]) -> None:
    w, h = size
    if w < 64 or h < 64 or w > MAX_SIDE or h > MAX_SIDE:
        raise MovieError(f"size {w}x{h} is outside 64 to {MAX_SIDE} pixels per side")


def parse_frames(text: str | None, n_frames: int) -> range:
    """Frames ``"A:B"`` (1-based, both ends included, either may be empty) -> 0-based range."""
    if text is None or str(text).strip() in ("", ":"):
        return range(n_frames)
    a, sep, b = str(text).partition(":")
    try:
        first = int(a) if a.strip() else 1
        last = int(b) if b.strip() else n_frames
        if not sep:
            last = first
    except ValueError:
        raise MovieError(f"frames {text!r} is not A:B (1-based frame numbers, e.g. 1:300)") from None
    return frame_range(first, last, n_frames)


def frame_range(first: int, last: int, n_frames: int) -> range:
    """1-based inclusive ``first..last`` checked against ``n_frames`` -> 0-based range."""
    if not 1 <= first <= last <= n_frames:
        raise MovieError(f"frames {first}:{last} are not within 1:{n_frames} (first <= last, numbered from 1)")
    return range(first - 1, last)


def mp4_available() -> bool:
    """True when an MP4 encoder (imageio-ffmpeg) can be imported."""
    return importlib.util.find_spec("imageio_ffmpeg") is not None


def movie_format(path: str | Path) -> str:
    suffix = Path(path).suffix.lower()
    if suffix == ".gif":
        return "gif"
    if suffix == ".mp4":
        if not mp4_available():
            raise MovieError("MP4 needs the imageio-ffmpeg package, which is not installed here; "
                             "write a .gif instead")
        return "mp4"
    raise MovieError(f"{path}: a movie file must end in .gif" + (" or .mp4" if mp4_available() else ""))


def plain_ticks(axis) -> None:
    """Tick numbers as they are, without pyqtgraph's scale note ("(x0.001)") after a short axis title.

    pyqtgraph 0.14 keeps the last scale when the automatic prefix is switched off (ticks x1000 with nothing
    left to say so), so the scale is put back to 1 as well."""
    axis.enableAutoSIPrefix(False)
    axis.autoSIPrefixScale = 1.0
    axis.labelUnitPrefix = ""
    axis.picture = None


def set_axis_title(axis, text: str) -> None:
    """Set a title and centre it again (pyqtgraph places a rotated title only when the axis is resized)."""
    axis.setLabel(text)
    axis.resizeEvent()


def copy_view(source, target, scale_ratio: float) -> None:
    """Give ``target`` (a MoleculeView) the orientation, centre, pan, zoom and marks of ``source``."""
    target.set_view_state(source.view_state(), scale_ratio)


def qimage_to_pil(img: QImage):
    """A QImage as an RGB Pillow image (copies the pixels)."""
    from PIL import Image

    rgba = img.convertToFormat(QImage.Format.Format_RGBA8888)
    w, h = rgba.width(), rgba.height()
    buf = bytes(rgba.constBits())
    return Image.frombuffer("RGBA", (w, h), buf, "raw", "RGBA", rgba.bytesPerLine(), 1).convert("RGB")


class MovieRenderer:
    """Paints frames of one run: a caption strip on top, the molecule left, the traces right (with their
    legend and the names of the TS and commit marks above the plots) and the time cursor per frame.

    Every piece of text has a rectangle in :attr:`layout` (frame pixels), computed before the first frame:
    the caption, one ``legend:<trace>`` per trace, one ``mark:<key>`` per mark name, and the ``molecule``
    and ``traces`` panels.  No two overlap and all lie inside the frame: mark names that would print over
    each other (a commit a few fs from the TS) go to another row of the strip above the plots.
    """

    def __init__(self, traj, *, result=None, rules=None, size: tuple[int, int] = (640, 480), source_view=None,
                 energy_unit: str = "kcal/mol", palette: QPalette | None = None,
                 user_monitors: Sequence[Sequence[int]] = ()) -> None:
        from PySide6.QtWidgets import QApplication

        from basinmark.gui.molecule_view import MoleculeView
        from basinmark.gui.traces import TracesView

        check_size(size)
        self.traj = traj
        self.size = (int(size[0]), int(size[1]))
        w, h = self.size
        self.mol_w = w // 2
        self.tr_w = w - self.mol_w
        self.user_monitors = [tuple(int(a) for a in m) for m in user_monitors if 2 <= len(m) <= 4]
        self.molecule = MoleculeView()
        self.molecule.show_caption = False  # the movie's own caption, above the molecule
        self.traces = TracesView()
        for widget in (self.molecule, self.traces):
            if palette is not None:
                widget.setPalette(palette)
            widget.setAttribute(Qt.WidgetAttribute.WA_DontShowOnScreen, True)
        self.font = QFont(self.traces.font())
        self.font.setPixelSize(max(10, h // 36))
        fm = QFontMetricsF(self.font)
        self.line_h = float(np.ceil(fm.height() * 1.35))
        self.caption_rect = QRectF(6, 0, w - 12, self.line_h)
        top = self.line_h
        self.mol_rect = QRectF(0, top, self.mol_w, h - top - PROGRESS_H)
        self.molecule.setMinimumSize(1, 1)
        self.molecule.resize(int(self.mol_rect.width()), int(self.mol_rect.height()))
        self.molecule.show()
        self.molecule.set_trajectory(traj)
        self.molecule.set_measures(self.user_monitors)  # each added measure's value on the molecule
        if source_view is not None and source_view.trajectory is not None:
            sw, sh = max(source_view.width(), 1), max(source_view.height(), 1)
            ratio = min(self.mol_rect.width(), self.mol_rect.height()) / min(sw, sh)
            copy_view(source_view, self.molecule, ratio)
        tr = self.traces
        tr.thresholds_editable = False
        tr.set_energy_unit(energy_unit)
        tr.set_run(traj, result, rules, self.user_monitors)
        for c in tr.cursors:
            c.setVisible(False)
        # the movie draws the legend and the mark names itself (laid out so that nothing overlaps); the
        # threshold lines keep their colour but drop their text, which would cover the curves
        tr.legend.setVisible(False)
        # the mark names too: hidden here, by the caller, so that the traces' own label layout leaves them hidden
        # (it re-places only labels it hid itself)
        for line in [*tr.threshold_lines, *tr.marks.values()]:
            label = getattr(line, "label", None)
            if label is not None:
                label.setVisible(False)
                label.hidden_by_layout = False
        self.legend = self._legend_entries(fm)
        legend_bottom = max([r.bottom() for _n, r, _p in self.legend], default=top) + 2
        # the strip of mark names: rows are counted with a first layout of the plots (the time axis
        # depends on the width only), then the plots take what is left of the height
        tr.setMinimumSize(1, 1)
        tr.resize(self.tr_w, max(1, int(h - legend_bottom)))
        tr.show()
        QApplication.processEvents()
        self._x_of_time = self._time_mapping(0.0)
        rows = max(1, self._place_marks(fm, 0.0)[1])
        self.traces_rect = QRectF(self.mol_w, legend_bottom + rows * self.line_h, self.tr_w,
                                  h - legend_bottom - rows * self.line_h)
        tr.resize(self.tr_w, max(1, int(self.traces_rect.height())))
        self._short_axis_labels()
        QApplication.processEvents()
        self._x_of_time = self._time_mapping(self.traces_rect.top())
        self.marks, _rows = self._place_marks(fm, legend_bottom)
        self.background = QImage(self.tr_w, int(self.traces_rect.height()), QImage.Format.Format_ARGB32_Premultiplied)
        self.background.fill(tr.palette().color(QPalette.ColorRole.Base))
        tr.render(self.background)
        self.layout: dict[str, QRectF] = {"caption": QRectF(self.caption_rect), "molecule": QRectF(self.mol_rect),
                                          "traces": QRectF(self.traces_rect)}
        self.layout.update({f"legend:{name}": QRectF(rect) for name, rect, _pen in self.legend})
        self.layout.update({f"mark:{key}": QRectF(rect) for key, rect, _x, _t in self.marks})

    # --- layout ---------------------------------------------------------------------------------
    def _legend_entries(self, fm: QFontMetricsF) -> list[tuple[str, QRectF, QPen]]:
        """One entry per trace (a short line in its pen, then its name), flowing in rows above the plots."""
        x0, x1 = self.mol_w + 6.0, self.size[0] - 4.0
        x, y = x0, self.line_h + 1.0
        out = []
        for name, item in self.traces.curves.items():
            if name in self.traces.hidden:
                continue
            width = SWATCH_W + 4 + fm.horizontalAdvance(name) + 2
            if x > x0 and x + width > x1:
                x, y = x0, y + self.line_h
            width = min(width, x1 - x)  # a name wider than the panel is cut at its edge (elided when drawn)
            out.append((name, QRectF(x, y, width, self.line_h - 2), QPen(item.opts["pen"])))
            x += width + 10
        if any(n.startswith("E_") for n, _r, _p in out):  # the energies' unit, once (short axes drop it)
            name = f"ΔE in {self.traces.energy_unit}"
            width = min(fm.horizontalAdvance(name) + 2, x1 - x0)
            if x + width > x1:
                x, y = x0, y + self.line_h
            out.append((UNITS_ENTRY, QRectF(x, y, width, self.line_h - 2), QPen(Qt.PenStyle.NoPen)))
        return out

    def _place_marks(self, fm: QFontMetricsF, strip_top: float) -> tuple[list[tuple[str, QRectF, float, str]], int]:
        """Names of the TS and commit marks in rows of a strip above the plots: each centred on its line
        where there is room, else moved to the next row down; returns ``(key, rect, x of the line, text)``
        and the number of rows."""
        lo, hi = self.mol_w + 2.0, self.size[0] - 2.0
        rows: list[list[QRectF]] = []
        out = []
        entries = []
        for key, line in self.traces.marks.items():
            label = getattr(line, "label", None)
            text = getattr(label, "format", None) if label is not None else None
            if not text:
                continue
            t = float(line.value())
            entries.append((self.mol_w + self.cursor_x(t), key, str(text), t))
        for x, key, text, t in sorted(entries):
            width = min(fm.horizontalAdvance(text) + 8, hi - lo)
            # a mark before the TS is named to the left of its line, one after it to the right, the TS
            # centred; where that is taken, the other two places, then the next row
            ending, centred, starting = x - width, x - width / 2, x
            lefts = (centred, ending, starting) if abs(t) < 1e-9 else (
                (ending, centred, starting) if t < 0 else (starting, centred, ending))
            placed = None
            for k in range(len(rows) + 1):
                if k == len(rows):
                    rows.append([])
                for left in lefts:
                    left = min(max(left, lo), hi - width)
                    rect = QRectF(left, strip_top + k * self.line_h + 1, width, self.line_h - 2)
                    if not any(rect.adjusted(-3, 0, 3, 0).intersects(r) for r in rows[k]):
                        placed = rect
                        break
                if placed is not None:
                    rows[k].append(placed)
                    out.append((key, placed, x, text))
                    break
        return out, len(rows)

    def _short_axis_labels(self) -> None:
        """Axis titles that fit the movie's short plots (a rotated title longer than its plot prints over
        the next plot's); the energy unit is in the legend, so the energy axes can do without it."""
        tr = self.traces
        unit = tr.energy_unit
        for plot, words in ((tr.p_energy, (f"ΔE / {unit}", "ΔE")), (tr.p_drift, (f"drift / {unit}", "drift")),
                            (tr.p_dist, ("distance / Å", "d / Å")), (tr.p_angle, ("angle / °", "°"))):
            axis = plot.getAxis("left")
            plain_ticks(axis)  # no "(x0.001)" after a title that has to be short: the ticks carry the numbers
            fm = QFontMetricsF(axis.label.font())
            room = plot.vb.sceneBoundingRect().height() if plot.isVisible() else 0
            text = next((t for t in words if fm.horizontalAdvance(t) + 6 <= room), words[-1])
            set_axis_title(axis, text)

    def _time_mapping(self, y_offset: float) -> tuple[float, float, float, float]:
        """(x at t0 in the traces panel, x per fs, top y, bottom y in the frame) of the plots."""
        tr = self.traces
        top_plot, bottom_plot = tr.p_dist, tr.p_drift if tr.p_drift.isVisible() else tr.p_energy
        glw = tr.glw

        def to_widget(plot, x: float, y: float) -> QPointF:
            scene = plot.vb.mapViewToScene(QPointF(x, y))
            vp = glw.mapFromScene(scene)
            return QPointF(glw.viewport().mapTo(tr, vp))

        t0, t1 = (float(v) for v in self.traj.time_span)
        if t1 <= t0:
            t1 = t0 + 1.0
        a, b = to_widget(bottom_plot, t0, 0.0), to_widget(bottom_plot, t1, 0.0)
        top = glw.viewport().mapTo(tr, glw.mapFromScene(top_plot.vb.sceneBoundingRect().topLeft())).y()
        bottom = glw.viewport().mapTo(tr, glw.mapFromScene(bottom_plot.vb.sceneBoundingRect().bottomLeft())).y()
        return a.x(), (b.x() - a.x()) / (t1 - t0), float(top) + y_offset, float(bottom) + y_offset

    def cursor_x(self, t: float) -> float:
        """x of time ``t`` inside the traces panel (add ``mol_w`` for the frame)."""
        x0, per_fs, _top, _bottom = self._x_of_time
        return x0 + (t - float(self.traj.time_span[0])) * per_fs

    # --- painting -------------------------------------------------------------------------------
    def render(self, frame: int) -> QImage:
        w, h = self.size
        traj = self.traj
        self.molecule.set_frame(frame)
        img = QImage(w, h, QImage.Format.Format_ARGB32_Premultiplied)
        pal = self.traces.palette()
        text_colour = pal.color(QPalette.ColorRole.Text)
        img.fill(pal.color(QPalette.ColorRole.Base))
        p = QPainter(img)
        p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
        mol = self.molecule.render_image(int(self.mol_rect.width()), int(self.mol_rect.height()))
        p.drawImage(self.mol_rect.topLeft(), mol)
        p.drawImage(self.traces_rect.topLeft(), self.background)
        _x0, _k, top, bottom = self._x_of_time
        p.setFont(self.font)
        fm = p.fontMetrics()
        # legend: each trace's pen beside its name
        for name, rect, pen in self.legend:
            room = rect
            if name == UNITS_ENTRY:
                name = f"ΔE in {self.traces.energy_unit}"
            else:
                y = rect.center().y()
                swatch = QPen(pen)
                swatch.setWidthF(max(2.0, pen.widthF()))
                p.setPen(swatch)
                p.drawLine(QPointF(rect.left(), y), QPointF(rect.left() + SWATCH_W, y))
                room = rect.adjusted(SWATCH_W + 4, 0, 0, 0)
            p.setPen(text_colour)
            p.drawText(room, Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter,
                       fm.elidedText(name, Qt.TextElideMode.ElideRight, int(room.width())))
        # mark names in their rows, each joined to its line by a dotted lead
        for _key, rect, x, text in self.marks:
            p.setPen(QPen(text_colour, 1, Qt.PenStyle.DotLine))
            p.drawLine(QPointF(x, rect.bottom()), QPointF(x, top))
        for _key, rect, _x, text in self.marks:
            p.fillRect(rect, pal.color(QPalette.ColorRole.Base))
            p.setPen(text_colour)
            p.drawText(rect, Qt.AlignmentFlag.AlignCenter,
                       fm.elidedText(text, Qt.TextElideMode.ElideRight, int(rect.width())))
        t = float(traj.times[frame])
        x = self.mol_w + self.cursor_x(t)
        p.setPen(QPen(cursor_colour(), 2))
        p.drawLine(QPointF(x, top), QPointF(x, bottom))
        p.setPen(QPen(pal.color(QPalette.ColorRole.Mid), 1))
        p.drawLine(QPointF(self.mol_w - 0.5, self.mol_rect.top()), QPointF(self.mol_w - 0.5, h))
        # one caption across the top, the changing parts first so that a narrow movie still shows them
        p.setPen(text_colour)
        caption = f"t = {t:+.1f} fs   frame {frame + 1}/{traj.n_frames}   run {traj.run_id}"
        p.drawText(self.caption_rect, Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter,
                   fm.elidedText(caption, Qt.TextElideMode.ElideRight, int(self.caption_rect.width())))
        # a thin strip along the bottom of the molecule panel: where this frame sits in the run
        frac = (frame + 1) / traj.n_frames
        p.fillRect(QRectF(0, h - PROGRESS_H, self.mol_w * frac, PROGRESS_H), pal.color(QPalette.ColorRole.Highlight))
        p.end()
        return img

    def close(self) -> None:
        for widget in (self.molecule, self.traces):
            widget.hide()
            widget.deleteLater()


def _gif_delay_note(fps: float) -> tuple[int, str]:
    """GIF stores delays in hundredths of a second: the delay used (ms) and a note when it differs."""
    ms = 1000.0 / fps
    stored = max(10, int(round(ms / 10.0)) * 10)
    note = ""
    if abs(stored - ms) > 0.5:
        note = (f"GIF stores frame delays in hundredths of a second: {fps:g} frames/s is written as "
                f"{stored} ms per frame ({1000.0 / stored:.3g} frames/s)")
    return stored, note


def export_movie(path: str | Path, traj, *, result=None, rules=None, fps: float = 20.0,
                 size: tuple[int, int] = (640, 480), frames: range | None = None, source_view=None,
                 energy_unit: str = "kcal/mol", palette: QPalette | None = None,
                 progress: Callable[[int, int], None] | None = None,
                 cancel: Callable[[], bool] | None = None,
                 user_monitors: Sequence[Sequence[int]] = ()) -> MovieResult:
    """Write a movie of ``traj`` (``frames``: 0-based range, default all) to ``path`` (.gif or .mp4).

    ``user_monitors``: the distances, angles and dihedrals the chemist added (1-based atoms), drawn as traces
    beside the rules' monitors and written on the molecule.  The result's ``layout`` holds the rectangles
    of every caption, legend entry, mark name and panel in the frames.

    ``progress(done, total)`` is called after each frame; when ``cancel()`` returns True the export
    stops and nothing is written (``cancelled`` is set in the result).  Needs a QApplication.
    """
    path = Path(path)
    fmt = movie_format(path)
    if not 0 < fps <= MAX_FPS:
        raise MovieError(f"frame rate {fps:g} is outside 0 to {MAX_FPS:g} frames/s")
    check_size(size)
    frames = range(traj.n_frames) if frames is None else frames
    if len(frames) == 0 or frames.start < 0 or frames[-1] >= traj.n_frames:
        raise MovieError(f"the frame range is empty or outside the run's {traj.n_frames} frames")
    if not path.parent.is_dir():
        raise MovieError(f"cannot write {path}: the folder does not exist")
    renderer = MovieRenderer(traj, result=result, rules=rules, size=size, source_view=source_view,
                             energy_unit=energy_unit, palette=palette, user_monitors=user_monitors)
    try:
        write = _write_gif if fmt == "gif" else _write_mp4
        res = write(path, renderer, frames, fps, progress, cancel)
        res.layout = dict(renderer.layout)
        return res
    finally:
        renderer.close()


def _write_gif(path, renderer, frames, fps, progress, cancel) -> MovieResult:
    from PIL import Image

    delay, note = _gif_delay_note(fps)
    images = []
    palette_img = None
    for i, f in enumerate(frames):
        if cancel is not None and cancel():
            return MovieResult(path, 0, renderer.size, fps, "gif", cancelled=True)
        rgb = qimage_to_pil(renderer.render(f))
        if palette_img is None:
            # one palette for the whole movie (from the first frame): no colour flicker between frames,
            # and mapping to a fixed palette is much faster than a new median cut per frame
            palette_img = rgb.quantize(colors=255, method=Image.Quantize.MEDIANCUT)
            images.append(palette_img)
        else:
            images.append(rgb.quantize(palette=palette_img, dither=Image.Dither.NONE))
        if progress is not None:
            progress(i + 1, len(frames))
    tmp = path.with_name(path.name + ".part")
    images[0].save(tmp, format="GIF", save_all=True, append_images=images[1:], duration=delay, loop=0,
                   optimize=True, disposal=1)
    tmp.replace(path)
    with Image.open(path) as im:
        stored = im.n_frames
    if stored != len(images):
        merged = (f"{len(images) - stored} frames identical to the one before were merged into longer "
                  "frames (timing unchanged)")
        note = f"{note}; {merged}" if note else merged
    return MovieResult(path, stored, renderer.size, fps, "gif", note=note)


def _write_mp4(path, renderer, frames, fps, progress, cancel) -> MovieResult:
    import imageio_ffmpeg

    w, h = renderer.size
    tmp = path.with_name(path.name + ".part.mp4")
    # yuv420p needs even sides; the encoder is told the exact size and pads nothing
    if w % 2 or h % 2:
        raise MovieError(f"MP4 needs an even width and height, got {w}x{h}")
    writer = imageio_ffmpeg.write_frames(str(tmp), (w, h), fps=fps, codec="libx264", pix_fmt_out="yuv420p",
                                         macro_block_size=1)
    writer.send(None)
    n = 0
    try:
        for i, f in enumerate(frames):
            if cancel is not None and cancel():
                writer.close()
                tmp.unlink(missing_ok=True)
                return MovieResult(path, 0, renderer.size, fps, "mp4", cancelled=True)
            writer.send(qimage_to_pil(renderer.render(f)).tobytes())
            n += 1
            if progress is not None:
                progress(i + 1, len(frames))
    finally:
        writer.close()
    tmp.replace(path)
    return MovieResult(path, n, renderer.size, fps, "mp4")


# --- the window's part -----------------------------------------------------------------------------

def find_menu(window, object_name: str, title: str):
    """The menu with ``object_name`` (or titled ``title``) in the window's menu bar, created before Help if missing."""
    from PySide6.QtWidgets import QMenu

    bar = getattr(window, "menu_bar", None) or window.menuBar()
    plain = title.replace("&", "")
    for act in bar.actions():  # by object name, or by title (other panels may have made it first)
        menu = act.menu()
        if menu is not None and (menu.objectName() == object_name or act.text().replace("&", "") == plain):
            return menu
    menu = QMenu(title, window)
    menu.setObjectName(object_name)
    help_act = next((a for a in bar.actions() if a.menu() is not None and a.text().replace("&", "") == "Help"), None)
    if help_act is not None:
        bar.insertMenu(help_act, menu)
    else:
        bar.addMenu(menu)
    return menu


class MovieDialog:
    """Asks for file, frame rate, size and frame range, then exports with a cancellable progress dialog."""

    def __init__(self, window) -> None:
        from PySide6.QtWidgets import (QDialog, QDialogButtonBox, QDoubleSpinBox, QFormLayout, QHBoxLayout,
                                       QLabel, QLineEdit, QPushButton, QSpinBox)

        self.window = window
        traj = window.state.traj
        n = traj.n_frames if traj is not None else 1
        d = QDialog(window)
        d.setWindowTitle("Export movie")
        form = QFormLayout(d)
        self.file = QLineEdit(d)
        tset = window.state.tset
        # the last export folder, never the set's own folder: a movie is not part of the data
        folder = default_export_folder(window.settings, tset.root if tset is not None else None)
        default = folder / (f"{traj.run_id}.gif" if traj is not None else "run.gif")
        self.file.setText(str(default))
        browse = QPushButton("Browse…", d)
        browse.clicked.connect(self._browse)
        row = QHBoxLayout()
        row.addWidget(self.file, 1)
        row.addWidget(browse)
        form.addRow("File", row)
        self.fps = QDoubleSpinBox(d)
        self.fps.setRange(1, MAX_FPS)
        self.fps.setValue(20)
        self.fps.setSuffix(" frames/s")
        form.addRow("Frame rate", self.fps)
        self.width, self.height = QSpinBox(d), QSpinBox(d)
        for s, v in ((self.width, 640), (self.height, 480)):
            s.setRange(64, MAX_SIDE)
            s.setValue(v)
            s.setSuffix(" px")
        size = QHBoxLayout()
        size.addWidget(self.width)
        size.addWidget(QLabel("×", d))
        size.addWidget(self.height)
        form.addRow("Size", size)
        self.first, self.last = QSpinBox(d), QSpinBox(d)
        for s, v in ((self.first, 1), (self.last, n)):
            s.setRange(1, n)
            s.setValue(v)
        rng = QHBoxLayout()
        rng.addWidget(self.first)
        rng.addWidget(QLabel("to", d))
        rng.addWidget(self.last)
        form.addRow("Frames (from 1)", rng)
        fmt = "GIF" + (" or MP4 (by the file's ending)" if mp4_available() else " (MP4 needs imageio-ffmpeg)")
        form.addRow("", QLabel(f"Format: {fmt}. The molecule keeps its current orientation.", d))
        self.error = QLabel(d)
        self.error.setWordWrap(True)
        form.addRow("", self.error)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel, d)
        buttons.accepted.connect(self._accept)
        buttons.rejected.connect(d.reject)
        form.addRow(buttons)
        self.dialog = d
        self.result: MovieResult | None = None

    def _browse(self) -> None:
        from PySide6.QtWidgets import QFileDialog

        filt = "GIF (*.gif)" + (";;MP4 (*.mp4)" if mp4_available() else "")
        path, _ = QFileDialog.getSaveFileName(self.dialog, "Export movie", self.file.text(), filt)
        if path:
            self.file.setText(path)

    def _accept(self) -> None:
        self.result = None
        try:
            self.result = self.export()
        except (BasinmarkError, OSError) as exc:
            self.error.setText(f"Not exported: {exc}")
            return
        if self.result is not None and not self.result.cancelled:
            self.dialog.accept()

    def export(self) -> MovieResult | None:
        """Run the export with the dialog's values and a progress dialog (GUI thread)."""
        from PySide6.QtWidgets import QApplication, QProgressDialog

        win = self.window
        traj = win.state.traj
        if traj is None:
            raise MovieError("no run is open")
        frames = frame_range(self.first.value(), self.last.value(), traj.n_frames)
        prog = QProgressDialog("Rendering frames…", "Cancel", 0, len(frames), win)
        prog.setWindowTitle("Export movie")
        prog.setWindowModality(Qt.WindowModality.WindowModal)
        prog.setMinimumDuration(300)

        def on_progress(done: int, total: int) -> None:
            prog.setValue(done)
            QApplication.processEvents()

        try:
            res = export_movie(self.file.text().strip(), traj, result=win.state.run_result(), rules=win.state.rules,
                               fps=self.fps.value(), size=(self.width.value(), self.height.value()),
                               frames=frames, source_view=win.molecule, energy_unit=win.traces.energy_unit,
                               palette=win.molecule.palette(), progress=on_progress, cancel=prog.wasCanceled,
                               user_monitors=list(win.state.user_monitors))
        finally:
            prog.close()
        if not res.cancelled:
            remember_export_folder(win.settings, res.path)
        msg = ("Movie export cancelled; nothing was written." if res.cancelled
               else f"Movie written: {res.path} ({res.n_frames} frames, {res.size[0]}x{res.size[1]})")
        if res.note:
            msg += f". {res.note}"
        win.statusBar().showMessage(msg, 10000)
        return res


def install_movie_action(window):
    """Add Export ▸ Export Movie… (Ctrl+Shift+G) to the window; returns the QAction."""
    from PySide6.QtGui import QAction, QKeySequence

    menu = find_menu(window, "menu_export", "&Export")
    act = QAction("Export &Movie…", window)
    act.setObjectName("action_export_movie")
    act.setShortcut(QKeySequence("Ctrl+Shift+G"))
    act.setToolTip("Write the current run as an animated GIF: molecule beside the traces (Ctrl+Shift+G)")
    act.setStatusTip("Write the current run as an animated GIF: molecule beside the traces")

    def run() -> None:
        if window.state.traj is None:
            window.statusBar().showMessage("Open a run first; the movie shows the current run.", 6000)
            return
        dlg = MovieDialog(window)
        window.movie_dialog = dlg
        dlg.dialog.open()

    act.triggered.connect(run)
    window.addAction(act)
    menu.addAction(act)
    return act
