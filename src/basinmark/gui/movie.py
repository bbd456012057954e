"""Movie export: the molecule (in the window's current orientation) beside the traces with a moving
time cursor, written as an animated GIF (Pillow) or, when an encoder is importable, an MP4.

Widgets are painted into QImages (``MoleculeView.render_image`` and ``QWidget.render``), so this works
on Qt's offscreen platform; nothing uses OpenGL.  The traces are painted once per movie and the time
cursor is drawn on top of each frame: re-painting four plots per frame was measured at roughly ten
times the cost of everything else, and the plots do not change while the run plays.
"""

from __future__ import annotations

import importlib.util
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QImage, QPainter, QPalette, QPen

from basinmark.core.errors import BasinmarkError
from basinmark.gui.colours import cursor_colour

MAX_SIDE = 4096          # pixels; larger movies are refused (memory), our own limit
MAX_FPS = 100.0          # GIF frame delays are whole hundredths of a second


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
    """Paints frames of one run: molecule left, traces right, caption and cursor per frame."""

    def __init__(self, traj, *, result=None, rules=None, size: tuple[int, int] = (640, 480), source_view=None,
                 energy_unit: str = "kcal/mol", palette: QPalette | None = None) -> None:
        from basinmark.gui.molecule_view import MoleculeView
        from basinmark.gui.traces import TracesView

        check_size(size)
        self.traj = traj
        self.size = (int(size[0]), int(size[1]))
        w, h = self.size
        self.mol_w = w // 2
        self.tr_w = w - self.mol_w
        self.molecule = MoleculeView()
        self.traces = TracesView()
        for widget in (self.molecule, self.traces):
            if palette is not None:
                widget.setPalette(palette)
            widget.setAttribute(Qt.WidgetAttribute.WA_DontShowOnScreen, True)
        self.molecule.setMinimumSize(1, 1)
        self.molecule.resize(self.mol_w, h)
        self.traces.setMinimumSize(1, 1)
        self.traces.resize(self.tr_w, h)
        self.traces.show()
        self.molecule.show()
        self.molecule.set_trajectory(traj)
        if source_view is not None and source_view.trajectory is not None:
            sw, sh = max(source_view.width(), 1), max(source_view.height(), 1)
            copy_view(source_view, self.molecule, min(self.mol_w, h) / min(sw, sh))
        self.traces.thresholds_editable = False
        self.traces.set_energy_unit(energy_unit)
        self.traces.set_run(traj, result, rules)
        for c in self.traces.cursors:
            c.setVisible(False)
        # a movie panel is narrow: keep the threshold lines (coloured by basin) but drop their text,
        # which would cover the curves; the TS and commit marks keep theirs
        marks = set(map(id, self.traces.marks.values()))
        for line in self.traces.threshold_lines:
            label = getattr(line, "label", None)
            if label is not None and id(line) not in marks:
                label.setVisible(False)
        from PySide6.QtWidgets import QApplication

        QApplication.processEvents()
        self.background = QImage(self.tr_w, h, QImage.Format.Format_ARGB32_Premultiplied)
        self.background.fill(self.traces.palette().color(QPalette.ColorRole.Base))
        self.traces.render(self.background)
        self._x_of_time = self._time_mapping()

    def _time_mapping(self) -> tuple[float, float, float, float]:
        """(x at t0, x per fs, top y, bottom y) of the plots inside the traces image."""
        tr = self.traces
        top_plot, bottom_plot = tr.p_dist, tr.p_energy
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
        return a.x(), (b.x() - a.x()) / (t1 - t0), float(top), float(bottom)

    def cursor_x(self, t: float) -> float:
        x0, per_fs, _top, _bottom = self._x_of_time
        return x0 + (t - float(self.traj.time_span[0])) * per_fs

    def render(self, frame: int) -> QImage:
        w, h = self.size
        traj = self.traj
        self.molecule.set_frame(frame)
        img = QImage(w, h, QImage.Format.Format_ARGB32_Premultiplied)
        pal = self.traces.palette()
        img.fill(pal.color(QPalette.ColorRole.Base))
        p = QPainter(img)
        p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
        mol = self.molecule.render_image(self.mol_w, h)
        p.drawImage(0, 0, mol)
        p.drawImage(self.mol_w, 0, self.background)
        t = float(traj.times[frame])
        x = self.mol_w + self.cursor_x(t)
        _x0, _k, top, bottom = self._x_of_time
        p.setPen(QPen(cursor_colour(), 2))
        p.drawLine(QPointF(x, top), QPointF(x, bottom))
        p.setPen(QPen(pal.color(QPalette.ColorRole.Mid), 1))
        p.drawLine(QPointF(self.mol_w - 0.5, 0), QPointF(self.mol_w - 0.5, h))
        p.setPen(pal.color(QPalette.ColorRole.Text))
        font = p.font()
        font.setPixelSize(max(10, h // 36))
        p.setFont(font)
        # the changing parts first, so a narrow movie still shows them
        caption = f"t = {t:+.1f} fs   frame {frame + 1}/{traj.n_frames}   {traj.run_id}"
        p.drawText(QRectF(6, 4, self.mol_w - 12, font.pixelSize() * 1.6),
                   Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter, caption)
        # a thin strip along the bottom of the molecule panel: where this frame sits in the run
        frac = (frame + 1) / traj.n_frames
        p.fillRect(QRectF(0, h - 3, self.mol_w * frac, 3), pal.color(QPalette.ColorRole.Highlight))
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
                 cancel: Callable[[], bool] | None = None) -> MovieResult:
    """Write a movie of ``traj`` (``frames``: 0-based range, default all) to ``path`` (.gif or .mp4).

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
                             energy_unit=energy_unit, palette=palette)
    try:
        if fmt == "gif":
            return _write_gif(path, renderer, frames, fps, progress, cancel)
        return _write_mp4(path, renderer, frames, fps, progress, cancel)
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
        default = Path(window.state.tset.root) / f"{traj.run_id}.gif" if traj is not None else Path("run.gif")
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
                               palette=win.molecule.palette(), progress=on_progress, cancel=prog.wasCanceled)
        finally:
            prog.close()
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
