"""Poincaré sections: where an orbit crosses a plane ``COORDINATE = VALUE`` (or where it is every forcing
period), drawn as points in two chosen coordinates, beside the return map x_k -> x_{k+1} of one coordinate.

Flows are sectioned by the core (``core.sections``) in the background; a map's orbit is already a
sequence of points, so for maps both panels show the iterates of the current run.
"""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtWidgets import QDockWidget, QSpinBox, QSplitter, QStackedWidget, QVBoxLayout, QWidget

from orbitdesk.language.angles import wrap_columns

from orbitdesk.app.views import muted_colour, series_colour, style_plot
from orbitdesk.app.plots.plot_style import JobStrip, NumberBox, hint_label, number_text
from orbitdesk.app.views.common import (SessionView, apply_numbers, auto_timer, check_box, combo_box, control_row,
                                        detected_period, direction_combo, fill_combo, follow_forcing_period,
                                        push_button, put_through_orbit, quiet, row_widget, select_text, set_quietly,
                                        status_label, status_row)

PLANE, STROBE = "plane", "strobe"
DIRECTIONS = ("up", "down", "both")
AUTO_DELAY_MS = 300
MAX_COUNT = 100_000


class SectionsView(SessionView):
    view_id = "sections"
    on_request = True
    title = "Poincaré section"
    stale_follows_solver = True
    result_kind = "sections"

    sectionChanged = Signal(object)  # the SectionResult shown (None when cleared)

    def __init__(self, session, parent=None):
        super().__init__(session, parent)
        self._columns: dict[str, np.ndarray] = {}   # name -> values at the section points
        self._names: list[str] = []
        self._wanted: dict | None = None
        self._user_value = False
        self._user_period = False
        self._computed_once = False
        self._pending = False         # an automatic computation waits for the closed dock to open again
        self._just_opened = True      # the next system is the first of an opened project

        # ---- what to section
        self.kind = combo_box("Section by a plane COORDINATE = VALUE, or sample the state once every forcing "
                              "period", ["Plane", "Every period"], self._on_kind)
        self.coordinate = combo_box("The coordinate that defines the plane (a state or a derived quantity)",
                                    slot=self._on_coordinate)
        self.value = NumberBox(0.0, -1e12, 1e12, step=0.1)
        self.value.setToolTip("Where the plane lies")
        self.value.valueChanged.connect(self._on_value_edited)
        self.direction = direction_combo("Count crossings with the coordinate rising, falling, or both",
                                         self._changed)
        self.period = NumberBox(2 * math.pi, 1e-9, 1e9, ratio=None, step=0.1)
        self.period.setToolTip("Sampling period: one point every this much time")
        self.period.valueChanged.connect(self._on_period_edited)
        self.period_note = hint_label()
        self.period_note.setWordWrap(False)
        self.phase = NumberBox(0.0, 0.0, 1e9, step=0.1)
        self.phase.setToolTip("Where in the period the samples are taken: at t0 + phase + k T")
        self.phase.valueChanged.connect(self._changed)

        self.kind_stack = QStackedWidget()
        self.kind_stack.addWidget(row_widget(self.coordinate, "=", self.value, "crossed", self.direction))
        self.kind_stack.addWidget(row_widget("period", self.period, "at phase", self.phase, self.period_note))

        self.count = QSpinBox()
        self.count.setRange(2, MAX_COUNT)
        self.count.setValue(500)
        self.count.setKeyboardTracking(False)
        self.count.setToolTip("How many section points to collect")
        self.count.valueChanged.connect(self._changed)
        self.transient = NumberBox(100.0, 0.0, 1e9, step=10.0)
        self.transient.setToolTip("Time to let the orbit settle before points are collected")
        self.transient.valueChanged.connect(self._changed)
        self.compute_button = push_button("Compute", "Collect the section points with the current values",
                                          self.compute)
        self.auto = check_box("Automatic", "Compute again when the model, its values or these settings change",
                              True)
        self.strip = JobStrip(session, "Collecting points")

        # ---- plots
        self.h_combo = combo_box("Horizontal coordinate of the section points", slot=lambda _i: self._draw())
        self.v_combo = combo_box("Vertical coordinate of the section points", slot=lambda _i: self._draw())
        self.r_combo = combo_box("Coordinate whose successive values make the return map",
                                 slot=lambda _i: self._draw())
        self.plot_widget = pg.PlotWidget()
        self.section_plot = self.plot_widget.getPlotItem()
        self.section_points = pg.ScatterPlotItem(size=3, pen=None)
        self.section_plot.addItem(self.section_points)
        self.return_widget = pg.PlotWidget()
        self.return_plot = self.return_widget.getPlotItem()
        self.diagonal = pg.PlotDataItem()
        self.return_plot.addItem(self.diagonal, ignoreBounds=True)
        self.return_points = pg.ScatterPlotItem(size=3, pen=None)
        self.return_plot.addItem(self.return_points)
        self.plot_widget.setToolTip("Section points")
        self.return_widget.setToolTip("Return map: each value against the next; the dashed line is x_{k+1} = x_k")
        self.info = status_label()

        left = QWidget()
        ll = QVBoxLayout(left)
        ll.setContentsMargins(0, 0, 0, 0)
        ll.setSpacing(2)
        ll.addLayout(control_row("Section points:", self.h_combo, "against", self.v_combo))
        ll.addWidget(self.plot_widget, 1)
        right = QWidget()
        rl = QVBoxLayout(right)
        rl.setContentsMargins(0, 0, 0, 0)
        rl.setSpacing(2)
        rl.addLayout(control_row("Return map of", self.r_combo))
        rl.addWidget(self.return_widget, 1)
        self.splitter = QSplitter(Qt.Orientation.Horizontal)
        self.splitter.addWidget(left)
        self.splitter.addWidget(right)
        self.splitter.setChildrenCollapsible(False)

        row1 = control_row(self.kind, spacing=6, stretch=False)
        row1.addWidget(self.kind_stack, 1)
        row2 = control_row("Points", self.count, 8, "after a transient of", self.transient, 8, self.compute_button,
                           self.auto)
        layout = self.main_layout()
        layout.addLayout(row1)
        layout.addLayout(row2)
        layout.addWidget(self.splitter, 1)
        layout.addLayout(status_row(self.info, self.strip))

        self._timer = auto_timer(self, AUTO_DELAY_MS, self.compute, self.auto.isChecked)
        self._restyle()
        self.follow_session(values=self._on_values, settings=self._on_values, trajectory=self._on_trajectory)

    # ------------------------------------------------------------ view protocol
    def view_settings(self) -> dict:
        return {"kind": self.section_kind(), "coordinate": self.coordinate.currentText(),
                "value": float(self.value.value()), "direction": DIRECTIONS[self.direction.currentIndex()],
                "period": float(self.period.value()), "phase": float(self.phase.value()), "count": self.count.value(),
                "transient": float(self.transient.value()), "auto": self.auto.isChecked(),
                "axes": [self.h_combo.currentText(), self.v_combo.currentText()],
                "return_of": self.r_combo.currentText()}

    def apply_view_settings(self, d: dict) -> None:
        if not isinstance(d, dict):
            return
        self._wanted = dict(d)
        apply_numbers(d, ((self.value, "value", float), (self.period, "period", float), (self.phase, "phase", float),
                          (self.count, "count", int),
                          (self.transient, "transient", float)))
        self._user_value = isinstance(d.get("value"), (int, float))
        self._user_period = isinstance(d.get("period"), (int, float))
        if d.get("direction") in DIRECTIONS:
            set_quietly(self.direction, DIRECTIONS.index(d["direction"]))
        if d.get("kind") in (PLANE, STROBE):
            set_quietly(self.kind, 0 if d["kind"] == PLANE else 1)
            self.kind_stack.setCurrentIndex(self.kind.currentIndex())
        self.auto.setChecked(bool(d.get("auto", True)))
        if self._names:
            self._apply_wanted_names()

    def export_data(self):
        """The section points at full precision: time and every state and derived quantity."""
        if not self._columns:
            return None
        names = list(self._columns)
        return names, np.column_stack([self._columns[n] for n in names])

    # ------------------------------------------------------------ public
    def section_kind(self) -> str:
        return PLANE if self.kind.currentIndex() == 0 else STROBE

    def set_plane(self, coordinate: str, value: float, direction: str = "up") -> None:
        with quiet(*self._settings_widgets()):
            select_text(self.coordinate, coordinate)
            self.value.setValue(float(value))
            self.direction.setCurrentIndex(DIRECTIONS.index(direction))
            self.kind.setCurrentIndex(0)
            self.kind_stack.setCurrentIndex(0)
        self._user_value = True

    def set_strobe(self, period: float, phase: float = 0.0) -> None:
        with quiet(*self._settings_widgets()):
            self.period.setValue(float(period))
            self.phase.setValue(float(phase))
            self.kind.setCurrentIndex(1)
            self.kind_stack.setCurrentIndex(1)
        self._user_period = True

    def set_view_axes(self, h: str, v: str, return_of: str | None = None) -> None:
        for combo, name in ((self.h_combo, h), (self.v_combo, v), (self.r_combo, return_of)):
            select_text(combo, name)

    def compute(self) -> None:
        """Collect the section points with the current system, values and settings (in the background)."""
        s = self.system
        if s is None:
            self.info.setText("No model yet")
            return
        if s.kind == "map":
            self._from_map_orbit()
            return
        from orbitdesk.analyses import sections

        p, u0 = self.session.param_vector(), self.session.initial_vector()
        settings = self.session.run_settings(transient=0.0)
        count, transient = self.count.value(), float(self.transient.value())
        self._computed_once = True
        self.begin_computing()
        if self.section_kind() == PLANE:
            coordinate, value = self.coordinate.currentText(), float(self.value.value())
            direction = DIRECTIONS[self.direction.currentIndex()]

            def job(cancel, report):
                return sections.plane_section(s, p, u0, coordinate, value, direction, count, transient,
                                              settings, cancel=cancel, progress=report)
            self.strip.what = f"Crossings of {coordinate} = {number_text(value)}"
        else:
            period = float(self.period.value())
            phase = float(self.phase.value()) % period

            def job(cancel, report):
                return sections.strobe_section(s, p, u0, period, count, transient, phase=phase, settings=settings,
                                               cancel=cancel, progress=report)
            self.strip.what = f"Every {number_text(period)} time units" + (
                f" at phase {number_text(phase)}" if phase else "")
        self.strip.run("sections", job, self._adopt, on_error=lambda m: self.info.setText(""))

    # ------------------------------------------------------------ session events
    def _on_project_loaded(self) -> None:
        self.system = None
        self._just_opened = True
        self._names, self._columns = [], {}
        self._computed_once = False
        self._user_value = self._user_period = False
        self.apply_view_settings(self.saved_view_settings())
        self._draw()

    def _on_system(self, system) -> None:
        self.system = system
        self._columns = {}
        is_map = system.kind == "map"
        plane_names = list(system.states) + list(system.derived_names)
        names = [system.time_name] + plane_names
        if names != self._names:
            keep = (self.coordinate.currentText(), self.h_combo.currentText(), self.v_combo.currentText(),
                    self.r_combo.currentText())
            self._names = names
            with quiet(*self._settings_widgets()):
                for combo, items in ((self.coordinate, plane_names), (self.h_combo, names), (self.v_combo, names),
                                     (self.r_combo, plane_names)):
                    fill_combo(combo, items)
                states = list(system.states)
                self.coordinate.setCurrentIndex(plane_names.index(keep[0]) if keep[0] in plane_names else 0)
                h = keep[1] if keep[1] in names and keep[1] != system.time_name else states[0]
                # the time only when nothing else is left: a time kept from a one-state model before is not a choice
                v = keep[2] if keep[2] in plane_names and keep[2] != h else (states[1] if len(states) > 1
                                                                             else system.time_name)
                self.h_combo.setCurrentIndex(names.index(h))
                self.v_combo.setCurrentIndex(names.index(v))
                self.r_combo.setCurrentIndex(plane_names.index(keep[3]) if keep[3] in plane_names else 0)
            self._apply_wanted_names()
        period = follow_forcing_period(self.period, system, self.session.param_vector(), self._user_period)
        if not (self._wanted and self._wanted.get("kind") in (PLANE, STROBE)):  # the project does not say
            if period is not None and not self._user_period:
                self.kind.setCurrentIndex(1)
            elif period is None:  # nothing drives it: a plane, not the strobe of the model before
                self.kind.setCurrentIndex(0)
        self._wanted = None
        self._update_period_note(period)
        for w in (self.kind, self.kind_stack, self.transient, self.compute_button):
            w.setEnabled(not is_map)
        self.count.setEnabled(not is_map)
        if is_map:
            self.info.setText("A map's orbit is a sequence of points already: both panels show the iterates "
                              "of the current run")
        self._default_plane_value()
        self._draw()
        kept = self.show_document_result() and self._just_opened  # the project's own section: shown as kept
        self._just_opened = False
        if not kept:
            self._schedule(force=True)

    def show_result(self, result) -> None:
        if self.system.kind == "map" or list(result.state_names) != list(self.system.states):
            raise ValueError("the kept section belongs to other states")
        self._show_section(result)
        self.sectionChanged.emit(result)

    def show_no_result(self) -> None:
        if (self.system is None or self.system.kind != "map") and self._columns:
            self._columns = {}
            self._draw()
            self.sectionChanged.emit(None)

    def _on_values(self) -> None:
        if self.system is not None and self.system.kind != "map":
            self._update_period_note(follow_forcing_period(self.period, self.system, self.session.param_vector(),
                                                           self._user_period))
        self._schedule()

    def _on_trajectory(self, trajectory) -> None:
        if self.system is not None and self.system.kind == "map":
            self._from_map_orbit()
        elif not self._user_value:
            self._default_plane_value()

    # ------------------------------------------------------------ settings changes
    def _settings_widgets(self) -> tuple:
        return (self.kind, self.coordinate, self.value, self.direction, self.period, self.phase, self.h_combo,
                self.v_combo,
                self.r_combo)

    def _apply_wanted_names(self) -> None:
        d = self._wanted or {}
        with quiet(*self._settings_widgets()):
            select_text(self.coordinate, d.get("coordinate"))
            select_text(self.r_combo, d.get("return_of"))
            axes = d.get("axes")
            if isinstance(axes, list) and len(axes) == 2:
                for combo, name in zip((self.h_combo, self.v_combo), axes):
                    select_text(combo, name)

    def _on_kind(self, index: int) -> None:
        self.kind_stack.setCurrentIndex(index)
        self._changed()

    def _on_coordinate(self, _index=None) -> None:
        self._user_value = False
        self._default_plane_value()
        self._changed()

    def _on_value_edited(self, _v=None) -> None:
        self._user_value = True
        self._changed()

    def _on_period_edited(self, _v=None) -> None:
        self._user_period = True
        self._update_period_note(detected_period(self.system, self.session.param_vector())
                                 if self.system is not None and self.system.kind != "map" else None)
        self._changed()

    def _changed(self, *_args) -> None:
        self._schedule(force=True)

    def _default_plane_value(self) -> None:
        put_through_orbit(self.value, self.session.trajectory, self.coordinate.currentText(), self._user_value)

    def _update_period_note(self, period) -> None:
        if period is None:
            self.period_note.setText("no forcing period found in the model: enter one")
        elif abs(period - self.period.value()) <= 1e-9 * period:
            self.period_note.setText("the forcing period of the model")
        else:
            self.period_note.setText(f"the model's forcing period is {number_text(period)}")

    def _schedule(self, force: bool = False) -> None:
        s = self.system
        if s is None or s.kind == "map" or not self.auto.isChecked():
            return
        if self._dock_closed():  # nobody looks: computed when the view is opened again
            self._pending = True
            return
        if force or self._computed_once:
            self._timer.start()

    def _dock_closed(self) -> bool:
        """Whether the view sits in a dock the user (or the project's layout) has closed. A closed view kept
        computing sections of every model opened after it: work nobody saw, and a section of the previous
        sample's kind in the next one's report."""
        dock = self.parentWidget()
        while dock is not None and not isinstance(dock, QDockWidget):
            dock = dock.parentWidget()
        return dock is not None and not dock.toggleViewAction().isChecked()

    def showEvent(self, event) -> None:  # noqa: N802 - Qt's name
        super().showEvent(event)
        if self._pending:  # once the dock counts as open again
            QTimer.singleShot(0, self, self._catch_up)

    def _catch_up(self) -> None:
        if self._pending and not self._dock_closed():
            self._pending = False
            self._schedule(force=True)

    # ------------------------------------------------------------ results
    def _adopt(self, result) -> None:
        self.keep_result(result)

    def _show_section(self, result) -> None:
        s = self.system
        cols = {s.time_name: np.asarray(result.times, dtype=float)}
        for i, name in enumerate(result.state_names):
            cols[name] = np.asarray(result.points[i], dtype=float)
        if s.derived_names and result.times.size:
            derived = s.derived_values(result.times, result.points, self.session.param_vector())
            cols.update({k: np.asarray(v, dtype=float) for k, v in derived.items()})
        self._columns = wrap_columns(s, cols)  # angles wrapped to (-pi, pi]
        n = result.times.size
        parts = [f"{n} point{'s' if n != 1 else ''}"]
        if result.message:
            parts.append(result.message)
        parts += list(result.warnings)
        self.info.setText("; ".join(parts))
        self.info.setToolTip("\n".join(parts))
        self._draw(refit=True)

    def _from_map_orbit(self) -> None:
        traj, s = self.session.trajectory, self.system
        if traj is None or s is None or traj.time.size == 0:
            self._columns = {}
            self._draw()
            return
        cols = {s.time_name: np.asarray(traj.time, dtype=float)}
        for name in list(s.states) + list(s.derived_names):
            try:
                cols[name] = np.asarray(traj.series(name), dtype=float)
            except KeyError:
                pass
        self._columns = wrap_columns(s, cols)
        self._draw(refit=True)

    def _draw(self, refit: bool = False) -> None:
        cols = self._columns
        h, v, r = self.h_combo.currentText(), self.v_combo.currentText(), self.r_combo.currentText()
        self.section_plot.setLabel("bottom", h)
        self.section_plot.setLabel("left", v)
        self.return_plot.setLabel("bottom", f"{r} (k)" if r else "")
        self.return_plot.setLabel("left", f"{r} (k+1)" if r else "")
        if not cols or h not in cols or v not in cols:
            self.section_points.setData([], [])
            self.return_points.setData([], [])
            self.diagonal.setData([], [])
            return
        c0, c1 = series_colour(0, self), series_colour(1, self)
        size = 3 if cols[h].size <= 20_000 else 2
        self.section_points.setData(cols[h], cols[v], brush=pg.mkBrush(c0), size=size)
        if r in cols and cols[r].size > 1:
            from orbitdesk.analyses.sections import return_map

            xk, xk1 = return_map(cols[r], slice(None))
            self.return_points.setData(xk, xk1, brush=pg.mkBrush(c1), size=size)
            finite = np.concatenate([xk[np.isfinite(xk)], xk1[np.isfinite(xk1)]])
            if finite.size:
                lo, hi = float(finite.min()), float(finite.max())
                pad = 0.05 * (hi - lo or 1.0)
                self.diagonal.setData([lo - pad, hi + pad], [lo - pad, hi + pad],
                                      pen=pg.mkPen(muted_colour(self), width=1, style=Qt.PenStyle.DashLine))
        else:
            self.return_points.setData([], [])
            self.diagonal.setData([], [])
        if refit:
            self.section_plot.autoRange(padding=0.06)
            self.return_plot.autoRange(padding=0.06)
            widen_to_scale(self.section_plot, self._run_extent(h), self._run_extent(v))
            widen_to_scale(self.return_plot, self._run_extent(r), self._run_extent(r))

    def _run_extent(self, name: str) -> float:
        """How far ``name`` ranges over the run (0: not known): the scale a section of it is shown at."""
        traj = self.session.trajectory
        try:
            values = np.asarray(traj.series(name), dtype=float) if traj is not None and name else np.empty(0)
        except KeyError:
            return 0.0
        values = values[np.isfinite(values)]
        return float(values.max() - values.min()) if values.size else 0.0

    def _restyle(self) -> None:
        style_plot(self.plot_widget, self)
        style_plot(self.return_widget, self)
        self._draw()


VIEW = SectionsView

MIN_SHARE = 0.05  # a section's axis spans at least this share of the run's range in that coordinate


def widen_to_scale(plot, x_extent: float, y_extent: float) -> None:
    """Widen a fitted plot whose points all but coincide to a span set by the run (``MIN_SHARE`` of its
    range in each coordinate; lacking one, a thousandth of the value): a period-1 section is a dot, not a
    line of round-off magnified to fill the plot (with tick labels like 2.1872e-1)."""
    vb = plot.getViewBox()
    for (lo, hi), extent, set_range in zip(vb.viewRange(), (x_extent, y_extent), (vb.setXRange, vb.setYRange)):
        centre = 0.5 * (lo + hi)
        floor = MIN_SHARE * extent if extent > 0 else 1e-3 * max(1.0, abs(centre))
        if hi - lo < floor:
            set_range(centre - floor / 2, centre + floor / 2, padding=0)
