"""Parameter sweep: the orbit diagram of one observed quantity over a range of one parameter, optionally
with the largest Lyapunov exponent below it. Clicking the diagram sets the parameter there.

All values run together as one ensemble in the core (``core.sweep``) on a worker thread, with progress
and a Cancel button.
"""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QColor
from PySide6.QtWidgets import QLabel, QSpinBox, QStackedWidget, QWidget


from orbitdesk.app.views import muted_colour, series_colour, style_plot
from orbitdesk.app.plots.plot_style import JobStrip, NumberBox, number_text
from orbitdesk.app.views.method_step import MethodStep
from orbitdesk.app.views.common import (SessionView, apply_numbers, check_box, clicked_point, combo_box,
                     control_row, direction_combo, fill_combo, follow_forcing_period, is_number,
                     push_button,
                     put_through_orbit, quiet, range_for_parameter, row_widget, select_text, status_label,
                     status_row)

PLANE, STROBE, MAXIMA, ITERATE = "plane", "strobe", "maxima", "iterate"
FLOW_MODES = (MAXIMA, STROBE, PLANE)
MODE_LABELS = {MAXIMA: "its maxima", STROBE: "once every period", PLANE: "plane crossings", ITERATE: "every iterate"}
DIRECTIONS = (1, -1, 0)
MAX_VALUES = 5000
PIECES, MIN_PIECE = 12, 8   # a sweep runs in up to 12 pieces of at least 8 values, drawn as they arrive


def join_sweeps(parts):
    """One SweepResult from pieces over consecutive values (samples padded with NaN to the widest)."""
    from orbitdesk.analyses.sweep import SweepResult

    if len(parts) == 1:
        return parts[0]
    width = max(p.samples.shape[1] for p in parts)

    def padded(a):
        return np.pad(a, ((0, 0), (0, width - a.shape[1])), constant_values=np.nan)

    first = parts[0]
    return SweepResult(
        parameter=first.parameter, values=np.concatenate([p.values for p in parts]),
        samples=np.vstack([padded(p.samples) for p in parts]), observed=first.observed, mode=first.mode,
        lyapunov=None if first.lyapunov is None else np.concatenate([p.lyapunov for p in parts]),
        status=np.concatenate([p.status for p in parts]),
        times=None if first.times is None else np.vstack([padded(p.times) for p in parts]),
        lyapunov_error=None if first.lyapunov_error is None else np.concatenate([p.lyapunov_error for p in parts]),
        method=first.method, notes=list(dict.fromkeys(n for p in parts for n in p.notes)))
MAX_SAMPLES = 5000


def diagram_points(result):
    """The orbit diagram as points: parameter value and observed value of every finite sample."""
    K = result.samples.shape[1]
    y = result.samples.ravel()
    ok = np.isfinite(y)
    return np.repeat(result.values, K)[ok], y[ok], ok


class SweepView(SessionView):
    view_id = "sweep"
    on_request = True
    title = "Parameter sweep"
    result_kind = "sweep"

    sweepChanged = Signal(object)  # the SweepResult shown (None when cleared)

    def __init__(self, session, parent=None):
        super().__init__(session, parent)
        self._wanted: dict | None = None
        self._user_period = False
        self._user_plane_value = False
        self._range_for: str | None = None  # parameter whose range the from/to fields hold

        # ---- what to sweep
        self.parameter = combo_box("The parameter to sweep", slot=self._on_parameter)
        self.lo = NumberBox(0.0, -1e12, 1e12, step=0.1)
        self.lo.setToolTip("First value of the parameter")
        self.hi = NumberBox(1.0, -1e12, 1e12, step=0.1)
        self.hi.setToolTip("Last value of the parameter")
        self.lo.valueChanged.connect(self._show_range)
        self.hi.valueChanged.connect(self._show_range)
        self.count = QSpinBox()
        self.count.setRange(2, MAX_VALUES)
        self.count.setValue(300)
        self.count.setToolTip("How many parameter values, evenly spaced")
        self.observe = combo_box("The quantity plotted for each parameter value", slot=self._on_observe)

        # ---- how to sample
        self.mode = combo_box("Which points of each orbit are plotted: local maxima of the observed state, the "
                              "state once every forcing period, or crossings of a plane; a map plots its iterates",
                              slot=self._on_mode)
        self.plane_state = combo_box("The state that defines the plane", slot=self._on_plane_state)
        self.plane_value = NumberBox(0.0, -1e12, 1e12, step=0.1)
        self.plane_value.setToolTip("Where the plane lies")
        self.plane_value.valueChanged.connect(lambda _v: setattr(self, "_user_plane_value", True))
        self.direction = direction_combo("Crossings with the state rising, falling, or both")
        self.period = NumberBox(2 * math.pi, 1e-9, 1e9, step=0.1)
        self.period.setToolTip("Sampling period")
        self.period.valueChanged.connect(lambda _v: setattr(self, "_user_period", True))
        self.mode_stack = QStackedWidget()
        self.mode_stack.addWidget(QWidget())
        self.mode_stack.addWidget(row_widget("period", self.period))
        self.mode_stack.addWidget(row_widget("of", self.plane_state, "=", self.plane_value, self.direction))

        self.transient = NumberBox(200.0, 0.0, 1e9, step=10.0)
        self.transient.setToolTip("Time (iterations for maps) each orbit settles before it is sampled")
        self.samples = QSpinBox()
        self.samples.setRange(1, MAX_SAMPLES)
        self.samples.setValue(80)
        self.samples.setToolTip("Points kept for each parameter value")
        self.integration = MethodStep("How each orbit is integrated: Automatic takes Dormand–Prince 8(5,3), or "
                                      "the stiff method when a trial run shows the system stiff; the fixed-step "
                                      "Runge–Kutta method uses the step beside it",
                                      "Fixed time step of the sweep's Runge-Kutta integration")
        self.method, self.dt = self.integration.method, self.integration.dt
        self.duration = NumberBox(400.0, 1e-3, 1e9, step=50.0)
        self.duration.setToolTip("Longest time spent collecting the points of one value (maxima and planes)")
        self.lyapunov = check_box("Lyapunov exponent", "Also estimate the largest Lyapunov exponent at every value "
                                  "(slower)")
        self.run_button = push_button("Run", "Compute the orbit diagram", self.run)
        self.strip = JobStrip(session, "Sweeping")
        self.strip.finished.connect(self._on_strip_finished)
        self._parts, self._parts_shown, self._parts_total = [], 0, 0
        self.info = status_label()

        # ---- plots
        self.plot_widget = pg.PlotWidget()
        self.plot = self.plot_widget.getPlotItem()
        self.plot_widget.setToolTip("Click to set the parameter to that value")
        self.points = pg.ScatterPlotItem(size=2, pen=None)
        self.plot.addItem(self.points)
        self.marker = pg.InfiniteLine(angle=90, movable=True)
        self.marker.setToolTip("The parameter's current value: drag it, or click the diagram")
        self.marker.sigPositionChangeFinished.connect(self._on_marker_dragged)
        self.plot.addItem(self.marker, ignoreBounds=True)
        self.plot_widget.scene().sigMouseClicked.connect(self._on_click)
        self.lyap_widget = pg.PlotWidget()
        self.lyap_plot = self.lyap_widget.getPlotItem()
        self.lyap_curve = pg.PlotDataItem()
        self.lyap_plot.addItem(self.lyap_curve)
        self.lyap_zero = pg.InfiniteLine(pos=0.0, angle=0, movable=False)
        self.lyap_plot.addItem(self.lyap_zero, ignoreBounds=True)
        self.lyap_marker = pg.InfiniteLine(angle=90, movable=False)
        self.lyap_plot.addItem(self.lyap_marker, ignoreBounds=True)
        self.lyap_plot.setXLink(self.plot)
        self.lyap_widget.setToolTip("Largest Lyapunov exponent: above zero, nearby orbits separate (chaos)")
        self.lyap_widget.setMaximumHeight(170)
        self.lyap_widget.hide()

        row1 = control_row("Sweep", self.parameter, "from", self.lo, "to", self.hi, "in", self.count, "steps", None,
                           self.run_button, stretch=False)
        row2 = control_row("Plot", self.observe, "at", self.mode, self.mode_stack, None, self.lyapunov,
                           stretch=False)
        self.transient_label = QLabel("Settle for")
        self.duration_label = QLabel("collect for at most")
        self.points_label = QLabel("points,")
        row3 = control_row(self.transient_label, self.transient, "keep", self.samples, self.points_label,
                           *self.integration.widgets(), self.duration_label, self.duration)
        layout = self.main_layout()
        layout.addLayout(row1)
        layout.addLayout(row2)
        layout.addLayout(row3)
        layout.addWidget(self.plot_widget, 3)
        layout.addWidget(self.lyap_widget, 1)
        layout.addLayout(status_row(self.info, self.strip))

        self._restyle()
        self.follow_session(values=self._on_values)

    # ------------------------------------------------------------ view protocol
    def view_settings(self) -> dict:
        return {"parameter": self.parameter.currentText(), "from": float(self.lo.value()),
                "to": float(self.hi.value()), "count": self.count.value(), "observe": self.observe.currentText(),
                "mode": self.sampling_mode(),
                "plane": {"state": self.plane_state.currentText(), "value": float(self.plane_value.value()),
                          "direction": DIRECTIONS[self.direction.currentIndex()]},
                "period": float(self.period.value()), "transient": float(self.transient.value()),
                "samples": self.samples.value(), "duration": float(self.duration.value()),
                "lyapunov": self.lyapunov.isChecked(), **self.integration.settings()}

    def apply_view_settings(self, d: dict) -> None:
        if not isinstance(d, dict):
            return
        self._wanted = dict(d)
        apply_numbers(d, ((self.count, "count", int), (self.period, "period", float),
                          (self.transient, "transient", float), (self.samples, "samples", int),
                          (self.duration, "duration", float)))
        self._user_period = isinstance(d.get("period"), (int, float))
        self.lyapunov.setChecked(bool(d.get("lyapunov", False)))
        self.integration.apply(d)
        if self.system is not None:
            self._apply_wanted()

    def export_data(self):
        """Every point of the diagram: parameter value, observed value (and the exponent at that value)."""
        r = self.result
        if r is None:
            return None
        x, y, ok = diagram_points(r)
        header, cols = [r.parameter, r.observed], [x, y]
        if r.lyapunov is not None:
            header.append("largest Lyapunov exponent")
            cols.append(np.repeat(r.lyapunov, r.samples.shape[1])[ok])
        return header, np.column_stack(cols)

    # ------------------------------------------------------------ public
    def sampling_mode(self) -> str:
        if self.system is not None and self.system.kind == "map":
            return ITERATE
        i = self.mode.currentIndex()
        return FLOW_MODES[i] if 0 <= i < len(FLOW_MODES) else MAXIMA

    def settings(self):
        """The core SweepSettings for the controls."""
        from orbitdesk.analyses.sweep import SweepSettings

        mode = self.sampling_mode()
        s = SweepSettings(mode=mode, observe=self.observe.currentText() or None,
                          transient=float(self.transient.value()), samples=self.samples.value(),
                          dt=self.integration.step(), method=self.integration.method_name(),
                          rtol=float(self.session.solver.rtol), atol=float(self.session.solver.atol),
                          duration=float(self.duration.value()),
                          lyapunov=self.lyapunov.isChecked(), t_start=float(self.session.solver.t_start))
        if mode == PLANE:
            s.plane = (self.plane_state.currentText(), float(self.plane_value.value()))
            s.direction = DIRECTIONS[self.direction.currentIndex()]
        elif mode == STROBE:
            s.period = float(self.period.value())
        return s

    def set_range(self, parameter: str, lo: float, hi: float, count: int | None = None) -> None:
        select_text(self.parameter, parameter)
        self.lo.setValue(float(lo))
        self.hi.setValue(float(hi))
        if count is not None:
            self.count.setValue(int(count))

    def set_sampling(self, mode: str, observe: str | None = None, **kw) -> None:
        select_text(self.observe, observe)
        if mode in FLOW_MODES and self.system is not None and self.system.kind != "map":
            self.mode.setCurrentIndex(FLOW_MODES.index(mode))
        if "period" in kw:
            self.period.setValue(float(kw["period"]))
        if "plane" in kw:
            state, value = kw["plane"]
            select_text(self.plane_state, state)
            self.plane_value.setValue(float(value))
        if "direction" in kw:
            self.direction.setCurrentIndex(DIRECTIONS.index(kw["direction"]))

    def compute(self) -> None:
        self.run()

    def run(self) -> None:
        s = self.system
        if s is None or not s.parameters:
            self.info.setText("The model has no parameter to sweep" if s is not None else "No model yet")
            return
        from orbitdesk.analyses.sweep import sweep

        name = self.parameter.currentText()
        lo, hi, count = float(self.lo.value()), float(self.hi.value()), self.count.value()
        if not lo < hi:
            self.info.setText("The first value must be below the last")
            return
        try:
            settings = self.settings().checked(s)
        except ValueError as e:
            self.info.setText(str(e)[:1].upper() + str(e)[1:])
            return
        values = np.linspace(lo, hi, count)
        u0, p = self.session.initial_vector(), self.session.param_vector()
        self.begin_computing(skip=name)
        # in pieces, from left to right: the diagram grows as they arrive, and a cancelled sweep keeps them
        pieces = np.array_split(values, max(1, min(PIECES, count // MIN_PIECE)))
        parts: list = []  # appended by the worker, read on the GUI thread
        self._parts, self._parts_shown, self._parts_total = parts, 0, count
        self._parts_range = (lo, hi)

        def job(cancel, report):
            for k, piece in enumerate(pieces):
                parts.append(sweep(s, name, piece, settings, u0=u0, p=p, cancel=cancel,
                                   progress=report.part(k / len(pieces), 1 / len(pieces))))
            return join_sweeps(parts)

        self.info.setText("")
        self.strip.what = f"Sweeping {name} over {count} values"
        self.strip.run("sweep", job, self._adopt, on_error=lambda m: None, on_progress=self._show_parts)

    def cancel(self) -> None:
        self.strip.cancel()

    def _show_parts(self, _fraction=None) -> None:
        """Draw the pieces computed so far (the job goes on)."""
        parts = list(self._parts)
        if len(parts) > self._parts_shown:
            self._parts_shown = len(parts)
            partial = join_sweeps(parts)  # drawn as it grows; the document gets the whole (or a cancelled) sweep
            self._draw(partial, refit=True)
            self.plot.setXRange(*self._parts_range, padding=0.01)  # the whole sweep's range, filling in
            done = partial.values.size
            self.info.setText(f"{done} of {self._parts_total} values so far")

    def _on_strip_finished(self, state: str) -> None:
        if state == "cancelled" and self._parts:
            self.keep_result(join_sweeps(list(self._parts)))
            done = self.result.values.size
            self.info.setText(f"Cancelled: the diagram holds the first {done} of {self._parts_total} values")

    # ------------------------------------------------------------ session events
    def _on_project_loaded(self) -> None:
        self._range_for = None
        self._user_period = self._user_plane_value = False
        super()._on_project_loaded()

    def _on_system(self, system) -> None:
        old = self.system
        self.system = system
        is_map = system.kind == "map"
        keep = (self.parameter.currentText(), self.observe.currentText(), self.plane_state.currentText(),
                self.sampling_mode() if old is not None else None)
        with quiet(self.parameter, self.observe, self.plane_state, self.mode):
            fill_combo(self.parameter, system.parameters)
            fill_combo(self.observe, self.observe_names())
            fill_combo(self.plane_state, system.states)
            fill_combo(self.mode, [MODE_LABELS[ITERATE]] if is_map else [MODE_LABELS[m] for m in FLOW_MODES])
            ranged = [n for n in system.parameters if None not in self.session.param_range(n)]
            if ranged and not (keep[0] and self.parameter.findText(keep[0]) >= 0):
                select_text(self.parameter, ranged[0])  # one the model gives a range
            for combo, name in ((self.parameter, keep[0]), (self.observe, keep[1]), (self.plane_state, keep[2])):
                select_text(combo, name)
            period = follow_forcing_period(self.period, system, self.session.param_vector(), self._user_period)
            if not is_map:
                if keep[3] in FLOW_MODES:
                    self.mode.setCurrentIndex(FLOW_MODES.index(keep[3]))
                else:
                    self.mode.setCurrentIndex(FLOW_MODES.index(STROBE if period is not None else MAXIMA))
        self.integration.set_hidden(is_map)
        for w in (self.duration, self.duration_label):
            w.setVisible(not is_map)
        self.transient_label.setText("Skip the first" if is_map else "Settle for")
        self.points_label.setText("points" if is_map else "points,")  # a map has no step to follow
        if self.parameter.currentText() != self._range_for:
            self._range_for = None
        self._apply_wanted()
        self._on_parameter()
        self._on_mode()
        self._default_plane_value()
        self.run_button.setEnabled(bool(system.parameters))
        if not system.parameters:
            self.info.setText("The model has no parameter to sweep")
        elif self.result is None:
            self.info.setText("Run draws the orbit diagram: the plotted points of each orbit against the parameter")
        self.show_document_result()

    def show_result(self, result) -> None:
        if result.parameter not in self.system.parameters or result.observed not in self.observe_names():
            raise ValueError("the kept diagram sweeps a parameter or plots a quantity the model no longer has")
        self._draw(refit=True)
        self.sweepChanged.emit(result)

    def observe_names(self) -> list[str]:
        return list(self.system.states) + list(self.system.derived_names) if self.system is not None else []

    def _apply_wanted(self) -> None:
        d, self._wanted = self._wanted, None
        if not d or self.system is None:
            return
        with quiet(self.parameter):
            select_text(self.parameter, d.get("parameter"))
        if is_number(d.get("from")) and is_number(d.get("to")):
            self.lo.setValue(float(d["from"]))
            self.hi.setValue(float(d["to"]))
            self._range_for = self.parameter.currentText()
        select_text(self.observe, d.get("observe"))
        if d.get("mode") in FLOW_MODES and self.system.kind != "map":
            self.mode.setCurrentIndex(FLOW_MODES.index(d["mode"]))
        plane = d.get("plane")
        if isinstance(plane, dict):
            select_text(self.plane_state, plane.get("state"))
            if is_number(plane.get("value")):
                self.plane_value.setValue(float(plane["value"]))
            if plane.get("direction") in DIRECTIONS:
                self.direction.setCurrentIndex(DIRECTIONS.index(plane["direction"]))

    def _on_values(self) -> None:
        self._update_marker()
        if not self._user_period:
            follow_forcing_period(self.period, self.system, self.session.param_vector(), False)

    # ------------------------------------------------------------ controls
    def _on_parameter(self, _index=None) -> None:
        name = range_for_parameter(self, self.parameter, self.lo, self.hi)
        if not name:
            return
        self.plot.setLabel("bottom", name)
        self.lyap_plot.setLabel("bottom", name)
        self._show_range()
        self._update_marker()

    def _show_range(self, *_args) -> None:
        """Before a diagram exists, the axis spans the chosen range (so the current value's line shows)."""
        lo, hi = float(self.lo.value()), float(self.hi.value())
        if self.result is None and lo < hi:
            self.plot.setXRange(lo, hi, padding=0.01)

    def _on_observe(self, _index=None) -> None:
        self.plot.setLabel("left", self.observe.currentText())

    def _on_mode(self, _index=None) -> None:
        mode = self.sampling_mode()
        self.mode_stack.setCurrentIndex({STROBE: 1, PLANE: 2}.get(mode, 0))
        for w in (self.duration, self.duration_label):
            w.setVisible(mode in (PLANE, MAXIMA))
        self._on_observe()

    def _on_plane_state(self, _index=None) -> None:
        self._user_plane_value = False
        self._default_plane_value()

    def _default_plane_value(self) -> None:
        put_through_orbit(self.plane_value, self.session.trajectory, self.plane_state.currentText(),
                          self._user_plane_value)

    # ------------------------------------------------------------ the diagram
    def show_no_result(self) -> None:
        self.points.setData([], [])
        self.lyap_curve.setData([], [])
        self.lyap_widget.hide()
        self.info.setText("")
        self.sweepChanged.emit(None)

    def _adopt(self, result) -> None:
        self.keep_result(result)

    def _draw(self, result=None, refit: bool = False) -> None:
        result = result if result is not None else self.result
        if result is None:
            return
        M, K = result.samples.shape
        x, y, _ok = diagram_points(result)
        colour = QColor(series_colour(0, self))
        colour.setAlpha(170)
        size = 2.0 if x.size > 20_000 else 2.5
        self.points.setData(x, y, brush=pg.mkBrush(colour), size=size, pen=None)
        self.plot.setLabel("left", result.observed)
        self.plot.setLabel("bottom", result.parameter)
        if result.lyapunov is not None:
            self.lyap_curve.setData(result.values, result.lyapunov, connect="finite",
                                    pen=pg.mkPen(series_colour(4, self), width=1.4))
            self.lyap_plot.setLabel("left", "λ max")
            self.lyap_widget.show()
        else:
            self.lyap_curve.setData([], [])
            self.lyap_widget.hide()
        if refit:
            self.plot.enableAutoRange()
            self.plot.autoRange(padding=0.02)
            self.plot.setXRange(float(result.values[0]), float(result.values[-1]), padding=0.01)
        failed = int(np.sum(np.asarray(result.status) != "ok"))
        empty = int(np.sum(~np.isfinite(result.samples).any(axis=1)))
        parts = [f"{M} values × up to {K} points ({MODE_LABELS.get(result.mode, result.mode)} of {result.observed})"]
        if failed:
            parts.append(f"{failed} value{'s' if failed != 1 else ''} blew up or failed")
        if empty:
            parts.append(f"{empty} value{'s' if empty != 1 else ''} gave no points")
        parts += list(result.notes)
        self.info.setText("; ".join(parts))
        self._update_marker()

    def _update_marker(self) -> None:
        name = self.parameter.currentText()
        value = self.session.params.get(name)
        show = value is not None and math.isfinite(value)
        for line in (self.marker, self.lyap_marker):
            line.setVisible(show)
            if show:
                line.blockSignals(True)
                line.setValue(value)
                line.blockSignals(False)
        if show:
            self.marker.setToolTip(f"{name} = {number_text(value)}: drag the line, or click the diagram")

    def _set_parameter(self, x: float) -> None:
        name = self.result.parameter if self.result is not None else self.parameter.currentText()
        if name and self.system is not None and name in self.system.parameters:
            self.session.set_param(name, float(x))

    def _on_click(self, event) -> None:
        point = clicked_point(self.plot, event)
        if point is not None:
            self._set_parameter(point.x())
            event.accept()

    def _on_marker_dragged(self, line) -> None:
        self._set_parameter(line.value())

    # ------------------------------------------------------------ look
    def _restyle(self) -> None:
        for w in (self.plot_widget, self.lyap_widget):
            style_plot(w, self)
        accent = series_colour(1, self)
        self.marker.setPen(pg.mkPen(accent, width=1.5))
        self.marker.setHoverPen(pg.mkPen(accent, width=3))
        self.lyap_marker.setPen(pg.mkPen(accent, width=1))
        self.lyap_zero.setPen(pg.mkPen(muted_colour(self), width=1, style=Qt.PenStyle.DashLine))
        self._draw()


VIEW = SweepView
