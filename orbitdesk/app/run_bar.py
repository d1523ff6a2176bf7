"""The run bar under the main window's menus: the method, end time or steps, samples and Run, and the time
cursor shared by the views (play and scrub). Everything it sets goes through the session's document."""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import QSize, Qt, QTimer
from PySide6.QtWidgets import (QComboBox, QDoubleSpinBox, QLabel, QSizePolicy, QSlider, QSpinBox, QStyle, QToolBar,
                               QToolButton)

from orbitdesk.engine.methods import METHODS
from orbitdesk.engine.settings import SettingsError

from orbitdesk.app.panels.noise_controls import NoiseControls
from orbitdesk.app.plain_text import make_plain

SLIDER_STEPS = 1000
PLAY_SECONDS = 8.0
PLAY_INTERVAL_MS = 30


def _number_text(x: float) -> str:
    return f"{x:.6g}"


class RunBar(QToolBar):
    """Method, end time / steps, samples, Run, and the time cursor (play and scrub)."""

    def __init__(self, window: "MainWindow"):
        super().__init__("Run bar", window)
        self.setObjectName("run_bar")
        self.setMovable(False)
        self.setIconSize(QSize(18, 18))
        self.session = window.session
        self._syncing = False

        self.addAction(window.run_action)
        self.addSeparator()
        self.method = QComboBox()
        for entry in METHODS.values():
            self.method.addItem(entry.summary, entry.name)
        self.method.setToolTip("Integration method for flows")
        self.method.currentIndexChanged.connect(self._method_changed)
        self.t_end_label = QLabel(" until t = ")
        self.t_end = QDoubleSpinBox()
        self.t_end.setRange(-1e9, 1e9)
        self.t_end.setDecimals(3)
        self.t_end.setKeyboardTracking(False)
        self.t_end.setToolTip("End time of the run")
        self.t_end.setMaximumWidth(120)
        self.t_end.valueChanged.connect(lambda v: self._set(t_end=float(v)))
        self.steps = QSpinBox()
        self.steps.setRange(1, 10**8)
        self.steps.setKeyboardTracking(False)
        self.steps.setToolTip("Number of iterations of the map")
        self.steps.setMaximumWidth(120)
        self.steps.valueChanged.connect(lambda v: self._set(steps=int(v)))
        self.samples_label = QLabel("  samples ")
        self.samples = QSpinBox()
        self.samples.setRange(2, 10**7)
        self.samples.setSingleStep(1000)
        self.samples.setKeyboardTracking(False)
        self.samples.setToolTip("Number of evenly spaced output points of a run")
        self.samples.valueChanged.connect(lambda v: self._set(samples=int(v)))
        self.method_action = self.addWidget(self.method)
        self.noise = NoiseControls(lambda **changes: self._set(**changes))
        self.noise_action = self.addWidget(self.noise)  # instead of the method menu for a model with noise
        self.delay_note = make_plain(QLabel())  # delay models: the method of steps and the history used
        self.delay_note_action = self.addWidget(self.delay_note)
        self.addWidget(self.t_end_label)
        self.t_end_action = self.addWidget(self.t_end)
        self.steps_action = self.addWidget(self.steps)
        self.samples_label_action = self.addWidget(self.samples_label)
        self.samples_action = self.addWidget(self.samples)
        self.addSeparator()

        self.play = QToolButton()
        self.play.setCheckable(True)
        self.play.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextBesideIcon)
        self.play.setIcon(self.style().standardIcon(QStyle.StandardPixmap.SP_MediaPlay))
        self.play.setText("Play")
        self.play.setToolTip("Move the time cursor through the run (Space when the slider has focus)")
        self.play.toggled.connect(self._play_toggled)
        self.slider = QSlider(Qt.Orientation.Horizontal)
        self.slider.setRange(0, SLIDER_STEPS)
        self.slider.setValue(SLIDER_STEPS)
        self.slider.setMinimumWidth(180)
        self.slider.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Preferred)
        self.slider.setToolTip("Time cursor shared by the views: drag to scrub")
        self.slider.valueChanged.connect(self._slider_moved)
        self.time_label = QLabel()
        self.time_label.setMinimumWidth(110)
        self.time_label.setToolTip("Time at the cursor")
        self.addWidget(QLabel(" Time cursor "))
        self.addWidget(self.play)
        self.addWidget(self.slider)
        self.addWidget(self.time_label)
        self._timer = QTimer(self, interval=PLAY_INTERVAL_MS)
        self._timer.timeout.connect(self._tick)

        s = self.session
        s.settingsChanged.connect(self.sync)
        s.systemChanged.connect(self.sync)
        s.projectLoaded.connect(self.sync)
        s.timeCursorChanged.connect(self._cursor_changed)
        s.trajectoryChanged.connect(lambda _t: self._cursor_changed(s.time_cursor))
        self.sync()

    # ------------------------------------------------------------ settings
    def _set(self, **changes) -> None:
        if not self._syncing:
            try:
                self.session.set_solver(**changes)
            except SettingsError as problem:
                self.window().statusBar().showMessage(f"Not changed: {problem}", 8000)
                self.sync()

    def _method_changed(self, _index) -> None:
        self._set(method=self.method.currentData())

    def sync(self, *_args) -> None:
        s, solver = self.session, self.session.solver
        self._syncing = True
        try:
            self.method.setCurrentIndex(max(0, self.method.findData(solver.method)))
            self.t_end.setValue(solver.t_end)
            self.steps.setValue(solver.steps)
            self.samples.setValue(solver.samples)
            self.noise.show_settings(solver)
        finally:
            self._syncing = False
        is_map = s.system is not None and s.system.kind == "map"
        noisy = s.system is not None and s.system.stochastic
        delays = s.system is not None and s.system.has_delays
        self.method_action.setVisible(not is_map and not delays and not noisy)
        self.noise_action.setVisible(noisy)
        self.delay_note_action.setVisible(delays)
        if delays:
            from orbitdesk.engine.delay import METHOD_LABEL, uses_history

            history = uses_history(s.system)
            self.delay_note.setText(f" Delays: Dormand–Prince 5(4), method of steps · {history} ")
            self.delay_note.setToolTip(f"This model has delays: it runs with {METHOD_LABEL}; the method menu "
                                       f"does not apply.\nBefore the start: {history}.")
        self.t_end_label.setText(" steps " if is_map else " until t = ")
        self.t_end_action.setVisible(not is_map)
        self.steps_action.setVisible(is_map)
        self.samples_label_action.setVisible(not is_map)
        self.samples_action.setVisible(not is_map)

    # ------------------------------------------------------------ time cursor
    def time_span(self):
        traj = self.session.trajectory
        if traj is None or traj.time.size == 0:
            return None
        return float(traj.time[0]), float(traj.time[-1])

    def _slider_moved(self, value: int) -> None:
        if self._syncing:
            return
        span = self.time_span()
        if span is not None:
            t0, t1 = span
            self.session.set_time_cursor(t0 + (t1 - t0) * value / SLIDER_STEPS)

    def _cursor_changed(self, t: float) -> None:
        span = self.time_span()
        name = self.session.system.time_name if self.session.system is not None else "t"
        if span is None or not np.isfinite(t):
            self.time_label.setText("")
            return
        t0, t1 = span
        frac = 0.0 if t1 == t0 else (t - t0) / (t1 - t0)
        self._syncing = True
        try:
            self.slider.setValue(int(round(min(max(frac, 0.0), 1.0) * SLIDER_STEPS)))
        finally:
            self._syncing = False
        self.time_label.setText(f" {name} = {t:.0f}" if name == "n" else f" {name} = {_number_text(t)}")

    def _play_toggled(self, on: bool) -> None:
        self.play.setText("Pause" if on else "Play")
        self.play.setIcon(self.style().standardIcon(
            QStyle.StandardPixmap.SP_MediaPause if on else QStyle.StandardPixmap.SP_MediaPlay))
        span = self.time_span()
        if on and span is not None:
            t0, t1 = span
            if abs(self.session.time_cursor - t1) <= 1e-12 * max(1.0, abs(t1)):
                self.session.set_time_cursor(t0)
            self._timer.start()
        else:
            self._timer.stop()
            if on:
                self.play.setChecked(False)

    def _tick(self) -> None:
        span = self.time_span()
        if span is None:
            self.play.setChecked(False)
            return
        t0, t1 = span
        step = (t1 - t0) * PLAY_INTERVAL_MS / 1000.0 / PLAY_SECONDS
        t = self.session.time_cursor + step
        if (t - t1) * np.sign(t1 - t0) >= 0:
            t = t1
            self.play.setChecked(False)
        self.session.set_time_cursor(t)
