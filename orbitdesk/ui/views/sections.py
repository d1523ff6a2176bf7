"""Poincaré sections: where an orbit crosses a plane ``COORDINATE = VALUE`` (or where it is every forcing
period), drawn as points in two chosen coordinates, beside the return map x_k -> x_{k+1} of one coordinate.

Flows are sectioned by the core (``core.sections``) in the background; a map's orbit is already a
sequence of points, so for maps both panels show the iterates of the current run.
"""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QEvent, Qt, QTimer, Signal
from PySide6.QtWidgets import (QCheckBox, QComboBox, QHBoxLayout, QLabel, QPushButton, QSizePolicy, QSpinBox,
                               QSplitter, QStackedWidget, QVBoxLayout, QWidget)

from . import muted_colour, series_colour, style_plot
from ..plot_style import JobStrip, NumberBox, hint_label, number_text, orbit_middle, plain_axes

PLANE, STROBE = "plane", "strobe"
DIRECTIONS = ("up", "down", "both")
DIRECTION_LABELS = ("upward", "downward", "both ways")
AUTO_DELAY_MS = 300
MAX_COUNT = 100_000


def detected_period(system, p):
    """The forcing period the core reads off the model (cos/sin of omega*t), or None."""
    try:
        from orbitdesk.core.cycles import detect_forcing_period
    except ImportError:
        return None
    try:
        return detect_forcing_period(system, p)
    except (TypeError, ValueError, ArithmeticError):
        return None


class SectionsView(QWidget):
    view_id = "sections"
    title = "Poincaré section"

    sectionChanged = Signal(object)  # the SectionResult shown (None when cleared)

    def __init__(self, session, parent=None):
        super().__init__(parent)
        self.session = session
        self.system = None
        self.result = None            # SectionResult of the last computation (flows)
        self._columns: dict[str, np.ndarray] = {}   # name -> values at the section points
        self._names: list[str] = []
        self._wanted: dict | None = None
        self._user_value = False
        self._user_period = False
        self._computed_once = False

        # ---- what to section
        self.kind = QComboBox()
        self.kind.addItems(["Plane", "Every period"])
        self.kind.setToolTip("Section by a plane COORDINATE = VALUE, or sample the state once every forcing period")
        self.kind.currentIndexChanged.connect(self._on_kind)
        self.coordinate = QComboBox()
        self.coordinate.setToolTip("The coordinate that defines the plane (a state or a derived quantity)")
        self.coordinate.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToContents)
        self.coordinate.currentIndexChanged.connect(self._on_coordinate)
        self.value = NumberBox(0.0, -1e12, 1e12, step=0.1)
        self.value.setToolTip("Where the plane lies")
        self.value.valueChanged.connect(self._on_value_edited)
        self.direction = QComboBox()
        self.direction.addItems(DIRECTION_LABELS)
        self.direction.setToolTip("Count crossings with the coordinate rising, falling, or both")
        self.direction.currentIndexChanged.connect(self._changed)
        self.period = NumberBox(2 * math.pi, 1e-9, 1e9, ratio=None, step=0.1)
        self.period.setToolTip("Sampling period: one point every this much time")
        self.period.valueChanged.connect(self._on_period_edited)
        self.period_note = hint_label()
        self.period_note.setWordWrap(False)

        plane_row = QWidget()
        pl = QHBoxLayout(plane_row)
        pl.setContentsMargins(0, 0, 0, 0)
        pl.setSpacing(4)
        pl.addWidget(self.coordinate)
        pl.addWidget(QLabel("="))
        pl.addWidget(self.value)
        pl.addWidget(QLabel("crossed"))
        pl.addWidget(self.direction)
        pl.addStretch(1)
        strobe_row = QWidget()
        sl = QHBoxLayout(strobe_row)
        sl.setContentsMargins(0, 0, 0, 0)
        sl.setSpacing(4)
        sl.addWidget(QLabel("period"))
        sl.addWidget(self.period)
        sl.addWidget(self.period_note)
        sl.addStretch(1)
        self.kind_stack = QStackedWidget()
        self.kind_stack.addWidget(plane_row)
        self.kind_stack.addWidget(strobe_row)

        self.count = QSpinBox()
        self.count.setRange(2, MAX_COUNT)
        self.count.setValue(500)
        self.count.setKeyboardTracking(False)
        self.count.setToolTip("How many section points to collect")
        self.count.valueChanged.connect(self._changed)
        self.transient = NumberBox(100.0, 0.0, 1e9, step=10.0)
        self.transient.setToolTip("Time to let the orbit settle before points are collected")
        self.transient.valueChanged.connect(self._changed)
        self.compute_button = QPushButton("Compute")
        self.compute_button.setToolTip("Collect the section points with the current values")
        self.compute_button.clicked.connect(self.compute)
        self.auto = QCheckBox("Automatic")
        self.auto.setChecked(True)
        self.auto.setToolTip("Compute again when the model, its values or these settings change")
        self.strip = JobStrip(session, "Collecting points")

        # ---- plots
        self.h_combo, self.v_combo, self.r_combo = QComboBox(), QComboBox(), QComboBox()
        self.h_combo.setToolTip("Horizontal coordinate of the section points")
        self.v_combo.setToolTip("Vertical coordinate of the section points")
        self.r_combo.setToolTip("Coordinate whose successive values make the return map")
        for combo in (self.h_combo, self.v_combo, self.r_combo):
            combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToContents)
            combo.currentIndexChanged.connect(lambda _i: self._draw())
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
        self.info = hint_label()
        self.info.setWordWrap(False)
        self.info.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)

        left = QWidget()
        ll = QVBoxLayout(left)
        ll.setContentsMargins(0, 0, 0, 0)
        ll.setSpacing(2)
        lh = QHBoxLayout()
        lh.setSpacing(4)
        lh.addWidget(QLabel("Section points:"))
        lh.addWidget(self.h_combo)
        lh.addWidget(QLabel("against"))
        lh.addWidget(self.v_combo)
        lh.addStretch(1)
        ll.addLayout(lh)
        ll.addWidget(self.plot_widget, 1)
        right = QWidget()
        rl = QVBoxLayout(right)
        rl.setContentsMargins(0, 0, 0, 0)
        rl.setSpacing(2)
        rh = QHBoxLayout()
        rh.setSpacing(4)
        rh.addWidget(QLabel("Return map of"))
        rh.addWidget(self.r_combo)
        rh.addStretch(1)
        rl.addLayout(rh)
        rl.addWidget(self.return_widget, 1)
        self.splitter = QSplitter(Qt.Orientation.Horizontal)
        self.splitter.addWidget(left)
        self.splitter.addWidget(right)
        self.splitter.setChildrenCollapsible(False)

        row1 = QHBoxLayout()
        row1.setContentsMargins(0, 0, 0, 0)
        row1.setSpacing(6)
        row1.addWidget(self.kind)
        row1.addWidget(self.kind_stack, 1)
        row2 = QHBoxLayout()
        row2.setContentsMargins(0, 0, 0, 0)
        row2.setSpacing(4)
        row2.addWidget(QLabel("Points"))
        row2.addWidget(self.count)
        row2.addSpacing(8)
        row2.addWidget(QLabel("after a transient of"))
        row2.addWidget(self.transient)
        row2.addSpacing(8)
        row2.addWidget(self.compute_button)
        row2.addWidget(self.auto)
        row2.addStretch(1)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(6, 6, 6, 6)
        layout.setSpacing(4)
        layout.addLayout(row1)
        layout.addLayout(row2)
        layout.addWidget(self.splitter, 1)
        bottom = QHBoxLayout()
        bottom.setContentsMargins(0, 0, 0, 0)
        bottom.addWidget(self.info, 1)
        bottom.addWidget(self.strip, 1)
        layout.addLayout(bottom)

        self._timer = QTimer(self, singleShot=True, interval=AUTO_DELAY_MS)
        self._timer.timeout.connect(self._auto_compute)
        self._restyle()
        session.systemChanged.connect(self._on_system)
        session.valuesChanged.connect(self._on_values)
        session.settingsChanged.connect(self._on_values)
        session.trajectoryChanged.connect(self._on_trajectory)
        session.projectLoaded.connect(self._on_project_loaded)
        self._on_project_loaded()
        if session.system is not None:
            self._on_system(session.system)

    # ------------------------------------------------------------ view protocol
    def view_settings(self) -> dict:
        return {"kind": self.section_kind(), "coordinate": self.coordinate.currentText(),
                "value": float(self.value.value()), "direction": DIRECTIONS[self.direction.currentIndex()],
                "period": float(self.period.value()), "count": self.count.value(),
                "transient": float(self.transient.value()), "auto": self.auto.isChecked(),
                "axes": [self.h_combo.currentText(), self.v_combo.currentText()],
                "return_of": self.r_combo.currentText()}

    def apply_view_settings(self, d: dict) -> None:
        if not isinstance(d, dict):
            return
        self._wanted = dict(d)
        widgets = ((self.value, "value", float), (self.period, "period", float), (self.count, "count", int),
                   (self.transient, "transient", float))
        for widget, key, kind in widgets:
            v = d.get(key)
            if isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v):
                widget.blockSignals(True)
                widget.setValue(kind(v))
                widget.blockSignals(False)
        self._user_value = isinstance(d.get("value"), (int, float))
        self._user_period = isinstance(d.get("period"), (int, float))
        if d.get("direction") in DIRECTIONS:
            self.direction.blockSignals(True)
            self.direction.setCurrentIndex(DIRECTIONS.index(d["direction"]))
            self.direction.blockSignals(False)
        if d.get("kind") in (PLANE, STROBE):
            self.kind.blockSignals(True)
            self.kind.setCurrentIndex(0 if d["kind"] == PLANE else 1)
            self.kind.blockSignals(False)
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
        self._block_all(True)
        i = self.coordinate.findText(coordinate)
        if i >= 0:
            self.coordinate.setCurrentIndex(i)
        self.value.setValue(float(value))
        self.direction.setCurrentIndex(DIRECTIONS.index(direction))
        self.kind.setCurrentIndex(0)
        self.kind_stack.setCurrentIndex(0)
        self._block_all(False)
        self._user_value = True

    def set_strobe(self, period: float) -> None:
        self._block_all(True)
        self.period.setValue(float(period))
        self.kind.setCurrentIndex(1)
        self.kind_stack.setCurrentIndex(1)
        self._block_all(False)
        self._user_period = True

    def set_view_axes(self, h: str, v: str, return_of: str | None = None) -> None:
        for combo, name in ((self.h_combo, h), (self.v_combo, v), (self.r_combo, return_of)):
            if name is not None and combo.findText(name) >= 0:
                combo.setCurrentIndex(combo.findText(name))

    def compute(self) -> None:
        """Collect the section points with the current system, values and settings (in the background)."""
        s = self.system
        if s is None:
            self.info.setText("No model yet")
            return
        if s.kind == "map":
            self._from_map_orbit()
            return
        from orbitdesk.core import sections

        p, u0 = self.session.param_vector(), self.session.initial_vector()
        settings = self.session.run_settings(transient=0.0)
        count, transient = self.count.value(), float(self.transient.value())
        self._computed_once = True
        if self.section_kind() == PLANE:
            coordinate, value = self.coordinate.currentText(), float(self.value.value())
            direction = DIRECTIONS[self.direction.currentIndex()]

            def job(cancel, report):
                return sections.plane_section(s, p, u0, coordinate, value, direction, count, transient,
                                              settings, cancel=cancel, progress=report)
            self.strip.what = f"Crossings of {coordinate} = {number_text(value)}"
        else:
            period = float(self.period.value())

            def job(cancel, report):
                return sections.strobe_section(s, p, u0, period, count, transient, settings=settings,
                                               cancel=cancel, progress=report)
            self.strip.what = f"Every {number_text(period)} time units"
        self.strip.run("sections", job, self._adopt, on_error=lambda m: self.info.setText(""))

    # ------------------------------------------------------------ session events
    def _on_project_loaded(self) -> None:
        self.system, self.result = None, None
        self._names, self._columns = [], {}
        self._computed_once = False
        self._user_value = self._user_period = False
        self.apply_view_settings(self.session.project.views.get(self.view_id, {}))
        self._draw()

    def _on_system(self, system) -> None:
        self.system = system
        self.result = None
        self._columns = {}
        is_map = system.kind == "map"
        plane_names = list(system.states) + list(system.derived_names)
        names = [system.time_name] + plane_names
        if names != self._names:
            keep = (self.coordinate.currentText(), self.h_combo.currentText(), self.v_combo.currentText(),
                    self.r_combo.currentText())
            self._names = names
            self._block_all(True)
            for combo, items in ((self.coordinate, plane_names), (self.h_combo, names), (self.v_combo, names),
                                 (self.r_combo, plane_names)):
                combo.clear()
                combo.addItems(items)
            states = list(system.states)
            self.coordinate.setCurrentIndex(max(0, plane_names.index(keep[0]) if keep[0] in plane_names else 0))
            h = keep[1] if keep[1] in names and keep[1] != system.time_name else states[0]
            v = keep[2] if keep[2] in names and keep[2] != h else (states[1] if len(states) > 1 else system.time_name)
            self.h_combo.setCurrentIndex(names.index(h))
            self.v_combo.setCurrentIndex(names.index(v))
            self.r_combo.setCurrentIndex(plane_names.index(keep[3]) if keep[3] in plane_names else 0)
            self._block_all(False)
            self._apply_wanted_names()
        period = None if is_map else detected_period(system, self.session.param_vector())
        if period is not None and not self._user_period:
            self.period.blockSignals(True)
            self.period.setValue(period)
            self.period.blockSignals(False)
            if not (self._wanted and self._wanted.get("kind") in (PLANE, STROBE)):
                self.kind.setCurrentIndex(1)
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
        self._schedule(force=True)

    def _on_values(self) -> None:
        if self.system is not None and self.system.kind != "map":
            period = detected_period(self.system, self.session.param_vector())
            if period is not None and not self._user_period:
                self.period.blockSignals(True)
                self.period.setValue(period)
                self.period.blockSignals(False)
            self._update_period_note(period)
        self._schedule()

    def _on_trajectory(self, trajectory) -> None:
        if self.system is not None and self.system.kind == "map":
            self._from_map_orbit()
        elif not self._user_value:
            self._default_plane_value()

    # ------------------------------------------------------------ settings changes
    def _block_all(self, on: bool) -> None:
        for w in (self.kind, self.coordinate, self.value, self.direction, self.period, self.h_combo,
                  self.v_combo, self.r_combo):
            w.blockSignals(on)

    def _apply_wanted_names(self) -> None:
        d = self._wanted or {}
        self._block_all(True)
        for combo, key in ((self.coordinate, "coordinate"), (self.r_combo, "return_of")):
            if isinstance(d.get(key), str) and combo.findText(d[key]) >= 0:
                combo.setCurrentIndex(combo.findText(d[key]))
        axes = d.get("axes")
        if isinstance(axes, list) and len(axes) == 2:
            for combo, name in zip((self.h_combo, self.v_combo), axes):
                if isinstance(name, str) and combo.findText(name) >= 0:
                    combo.setCurrentIndex(combo.findText(name))
        self._block_all(False)

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
        """Put the plane through the middle of the current orbit (its mean), so that the orbit crosses it."""
        middle = orbit_middle(self.session.trajectory, self.coordinate.currentText())
        if not self._user_value and middle is not None:
            self.value.blockSignals(True)
            self.value.setValue(middle)
            self.value.blockSignals(False)

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
        if force or self._computed_once:
            self._timer.start()

    def _auto_compute(self) -> None:
        if self.auto.isChecked():
            self.compute()

    # ------------------------------------------------------------ results
    def _adopt(self, result) -> None:
        self.result = result
        s = self.system
        cols = {s.time_name: np.asarray(result.times, dtype=float)}
        for i, name in enumerate(result.state_names):
            cols[name] = np.asarray(result.points[i], dtype=float)
        if s.derived_names and result.times.size:
            derived = s.derived_values(result.times, result.points, self.session.param_vector())
            cols.update({k: np.asarray(v, dtype=float) for k, v in derived.items()})
        self._columns = cols
        n = result.times.size
        parts = [f"{n} point{'s' if n != 1 else ''}"]
        if result.message:
            parts.append(result.message)
        parts += list(result.warnings)
        self.info.setText("; ".join(parts))
        self.info.setToolTip("\n".join(parts))
        self._draw(refit=True)
        self.sectionChanged.emit(result)

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
        self._columns = cols
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
            from orbitdesk.core.sections import return_map

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

    def changeEvent(self, event) -> None:
        super().changeEvent(event)
        if event.type() == QEvent.Type.PaletteChange:
            self._restyle()

    def _restyle(self) -> None:
        style_plot(self.plot_widget, self)
        style_plot(self.return_widget, self)
        plain_axes(self.section_plot)
        plain_axes(self.return_plot)
        self._draw()


VIEW = SectionsView
