"""Playback of the current run: a QTimer-driven controller and the bar with slider, time and speed."""

from __future__ import annotations

from PySide6.QtCore import QObject, QSignalBlocker, Qt, QTimer, Signal
from PySide6.QtGui import QAction
from PySide6.QtWidgets import QComboBox, QHBoxLayout, QLabel, QSlider, QToolButton, QVBoxLayout, QWidget

from basinmark.core.classify import signed_commit_time
from basinmark.gui.flow_layout import flow_row
from basinmark.gui.icons import icon
from basinmark.gui.state import AppState

SPEEDS = (0.25, 0.5, 1.0, 2.0, 4.0, 8.0)
BASE_FPS = 25.0          # frames per second at 1x
_MIN_INTERVAL_MS = 20    # at high speeds several frames are advanced per tick instead


class PlaybackController(QObject):
    """Advances ``state.frame`` on a timer; speed 0.25x–8x; optional loop."""

    playing_changed = Signal(bool)
    speed_changed = Signal(float)

    def __init__(self, state: AppState, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self.state = state
        self.speed = 1.0
        self.loop = False
        self._carry = 0.0
        self.timer = QTimer(self)
        self.timer.setTimerType(Qt.TimerType.PreciseTimer)
        self.timer.timeout.connect(self._tick)
        self._apply_interval()
        state.run_changed.connect(lambda _rid: self.pause())

    @property
    def playing(self) -> bool:
        return self.timer.isActive()

    def _apply_interval(self) -> None:
        self.timer.setInterval(max(_MIN_INTERVAL_MS, int(round(1000.0 / (BASE_FPS * self.speed)))))

    def frames_per_tick(self) -> float:
        return self.speed * BASE_FPS * self.timer.interval() / 1000.0

    def set_speed(self, speed: float) -> None:
        speed = float(min(SPEEDS[-1], max(SPEEDS[0], speed)))
        if speed != self.speed:
            self.speed = speed
            self._apply_interval()
            self.speed_changed.emit(speed)

    def faster(self) -> None:
        self.set_speed(self.speed * 2)

    def slower(self) -> None:
        self.set_speed(self.speed / 2)

    def set_loop(self, on: bool) -> None:
        self.loop = bool(on)

    def play(self) -> None:
        traj = self.state.traj
        if traj is None or self.playing:
            return
        if self.state.frame >= traj.n_frames - 1:
            self.state.set_frame(0)
        self._carry = 0.0
        self.timer.start()
        self.playing_changed.emit(True)

    def pause(self) -> None:
        if self.playing:
            self.timer.stop()
            self.playing_changed.emit(False)

    def toggle(self) -> None:
        self.pause() if self.playing else self.play()

    def step(self, n: int) -> None:
        self.pause()
        self.state.set_frame(self.state.frame + int(n))

    def jump_start(self) -> None:
        self.state.set_frame(0)

    def jump_end(self) -> None:
        traj = self.state.traj
        if traj is not None:
            self.state.set_frame(traj.n_frames - 1)

    def jump_ts(self) -> None:
        traj = self.state.traj
        if traj is not None:
            self.state.set_frame(traj.ts_index)

    def jump_commit(self) -> bool:
        """Go to the product-side commit (final entry), at whichever end the product is; False when the run
        has no product end."""
        row = self.state.label_row()
        t = None if row is None else signed_commit_time(row.get("product_end"), row.get("product_final_entry_fs"))
        if t is None:
            return False
        self.state.set_time(t)
        return True

    def _tick(self) -> None:
        traj = self.state.traj
        if traj is None:
            self.pause()
            return
        self._carry += self.frames_per_tick()
        n = int(self._carry)
        if n < 1:
            return
        self._carry -= n
        frame = self.state.frame + n
        last = traj.n_frames - 1
        if frame > last:
            frame = frame % traj.n_frames if self.loop else last
        self.state.set_frame(frame)
        if frame == last and not self.loop:
            self.pause()


class PlaybackBar(QWidget):
    """Buttons (bound to the window's actions), frame slider, time in fs, speed choice."""

    def __init__(self, state: AppState, controller: PlaybackController, actions: dict[str, QAction],
                 parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.state, self.controller = state, controller
        outer = QVBoxLayout(self)
        outer.setContentsMargins(4, 2, 4, 2)
        outer.setSpacing(0)
        self.slider = QSlider(Qt.Orientation.Horizontal, self)
        self.slider.setMinimum(0)
        self.slider.setMaximum(0)
        self.slider.setToolTip("Frame (drag to scrub)")
        # dragging the slider leaves the focus in the viewer, where the number keys label the run shown
        self.slider.setFocusPolicy(Qt.FocusPolicy.NoFocus)
        outer.addWidget(self.slider)
        # three groups (moving, jumping to marks, time and speed) that wrap onto two rows when the centre is
        # narrow: one row of them once set the window's smallest width past a laptop screen's
        self.buttons: dict[str, QToolButton] = {}
        groups = []
        for names in (("jump_start", "skip_back", "step_back", "play_pause", "step_forward", "skip_forward",
                       "jump_end"), ("jump_ts", "jump_commit", "loop")):
            group = QWidget(self)
            gl = QHBoxLayout(group)
            gl.setContentsMargins(0, 0, 0, 0)
            gl.setSpacing(0)
            for name in names:
                if name in actions:
                    b = QToolButton(group)
                    b.setDefaultAction(actions[name])
                    b.setAutoRaise(True)
                    gl.addWidget(b)
                    self.buttons[name] = b
            groups.append(group)
        when = QWidget(self)
        wl = QHBoxLayout(when)
        wl.setContentsMargins(0, 0, 0, 0)
        wl.addStretch(1)
        self.time_label = QLabel("–", when)
        self.time_label.setMinimumWidth(120)
        self.time_label.setAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        wl.addWidget(self.time_label)
        self.speed_box = QComboBox(when)
        for s in SPEEDS:
            self.speed_box.addItem(f"{s:g}×", s)
        self.speed_box.setCurrentIndex(SPEEDS.index(1.0))
        self.speed_box.setToolTip("Playback speed ([ slower, ] faster)")
        self.speed_box.setFocusPolicy(Qt.FocusPolicy.NoFocus)
        wl.addWidget(self.speed_box)
        self.controls = flow_row(self, [*groups, (when, True)], h_spacing=8, v_spacing=0)
        outer.addWidget(self.controls)
        self.slider.valueChanged.connect(state.set_frame)
        self.speed_box.currentIndexChanged.connect(lambda i: controller.set_speed(self.speed_box.itemData(i)))
        controller.speed_changed.connect(self._on_speed)
        controller.playing_changed.connect(self._on_playing)
        state.run_changed.connect(self._on_run)
        state.frame_changed.connect(self._on_frame)
        self._play_action = actions.get("play_pause")

    def _on_speed(self, speed: float) -> None:
        with QSignalBlocker(self.speed_box):
            self.speed_box.setCurrentIndex(SPEEDS.index(speed) if speed in SPEEDS else 2)

    def _on_playing(self, playing: bool) -> None:
        if self._play_action is not None:
            self._play_action.setIcon(icon("pause" if playing else "play"))

    def _on_run(self, _run_id: str) -> None:
        traj = self.state.traj
        with QSignalBlocker(self.slider):
            self.slider.setMaximum(0 if traj is None else traj.n_frames - 1)
            self.slider.setValue(self.state.frame)
        self._on_frame(self.state.frame)

    def _on_frame(self, frame: int) -> None:
        traj = self.state.traj
        with QSignalBlocker(self.slider):
            self.slider.setValue(frame)
        if traj is None:
            self.time_label.setText("–")
        else:
            self.time_label.setText(f"{traj.times[frame]:+.1f} fs · {frame + 1}/{traj.n_frames}")
            self.time_label.setToolTip(f"time t = {traj.times[frame]:+.1f} fs (t = 0 at the transition state), "
                                       f"frame {frame + 1} of {traj.n_frames}")
