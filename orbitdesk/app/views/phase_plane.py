"""Phase plane: any two coordinates against each other, with direction arrows, nullclines, trajectories
started by clicking, a marker at the time cursor and equilibria markers."""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, QTimer
from PySide6.QtGui import QColor
from PySide6.QtWidgets import QLabel, QToolButton

from orbitdesk.language.angles import angle_states, break_at_wraps, wrap

from orbitdesk.app.views import empty_hint, muted_colour, series_colour, style_plot
from orbitdesk.app.plots.data_overlay import DataOverlay
from orbitdesk.app.plots.event_marks import EventMarks, through_events
from orbitdesk.app.plots.plot_style import ScreenCurve
from orbitdesk.app.views.common import (SessionView, check_box, clicked_point, combo_box, control_row, coordinate_names,
                     cut_at_escape, cycle_columns, equilibrium_coordinates, quiet, equilibrium_fields, fill_combo, runs_job, status_label,
                     values_at_time)

FIELD_POINTS = 21          # arrows along the longer side of the view
MAX_SEEDS = 40
MAX_DRAWN_POINTS = 200_000  # a run longer than this is thinned evenly before its screen-resolution path
SEED_SAMPLES = 3000


def _thin(x, y):
    step = max(1, int(np.ceil(x.size / MAX_DRAWN_POINTS)))
    return (x[::step], y[::step]) if step > 1 else (x, y)


def arrow_segments(X, Y, U, V, cell_w, cell_h, length=0.42, head=0.32):
    """Line segments (pairs of points) for unit arrows scaled to the grid cell, with a small head.

    Arrows are normalised in cell units so they look the same length whatever the axes' scales.
    """
    un, vn = U / cell_w, V / cell_h
    norm = np.hypot(un, vn)
    ok = np.isfinite(norm) & (norm > 0)
    x0, y0, un, vn, norm = X[ok], Y[ok], un[ok], vn[ok], norm[ok]
    dx, dy = un / norm * length, vn / norm * length
    # tail at (x0 - dx/2), tip at (x0 + dx/2), in cell units
    tx, ty = x0 / cell_w + dx / 2, y0 / cell_h + dy / 2
    bx, by = x0 / cell_w - dx / 2, y0 / cell_h - dy / 2
    c, s = np.cos(np.pi * 0.82), np.sin(np.pi * 0.82)
    h1x, h1y = tx + head * (c * dx - s * dy), ty + head * (s * dx + c * dy)
    h2x, h2y = tx + head * (c * dx + s * dy), ty + head * (-s * dx + c * dy)
    xs = np.stack([bx, tx, tx, h1x, tx, h2x], axis=1).ravel() * cell_w
    ys = np.stack([by, ty, ty, h1y, ty, h2y], axis=1).ravel() * cell_h
    return xs, ys


class PhasePlaneView(SessionView):
    view_id = "phase_plane"
    title = "Phase plane"

    def __init__(self, session, parent=None):
        super().__init__(session, parent)
        self.trajectory = None
        self.seeds: list[dict] = []        # {"u0": [...], "both": bool}
        self.seed_runs: list[tuple] = []   # (forward Trajectory, backward Trajectory | None) per seed
        self._names: list[str] = []
        self._wanted_axes: tuple | None = None
        self._fitted = False
        self._refit_on_release = False

        self.x_combo = combo_box("Quantity on the horizontal axis (plotted against the vertical one)",
                                 slot=self._on_axes)
        self.y_combo = combo_box("Quantity on the vertical axis", slot=self._on_axes)
        self.arrows = check_box("Arrows", "Direction of the flow on a grid (two-state flows)", True,
                                self._update_field)
        self.nullclines_box = check_box("Nullclines", "Curves where one state's rate of change is zero "
                                        "(two-state flows)", False, self._request_nullclines)
        self.backward = check_box("Backward", "Clicked trajectories also run backward in time "
                                  "(Shift+click does this once)")
        self.clear_button = QToolButton(text="Clear")
        self.clear_button.setToolTip("Remove the trajectories started by clicking")
        self.clear_button.clicked.connect(self.clear_seeds)
        self.fit_button = QToolButton(text="Fit")
        self.fit_button.setToolTip("Zoom to the trajectory")
        self.fit_button.clicked.connect(self.fit_view)
        self.hint = status_label()  # a long hint wraps, neither cut off nor widening the window

        self.plot_widget = pg.PlotWidget()
        self.plot = self.plot_widget.getPlotItem()
        self.plot_widget.setToolTip("Click to start a trajectory there")
        self.field_item = pg.PlotDataItem(connect="pairs")
        self.plot.addItem(self.field_item, ignoreBounds=True)
        self.nullcline_items: list[pg.PlotDataItem] = []
        self.seed_items: list[pg.PlotDataItem] = []
        self.curve = ScreenCurve()
        self.plot.addItem(self.curve)
        self.cycle_item = pg.PlotDataItem()  # the limit cycle found in the cycle view, drawn bold
        self.cycle_item.setZValue(10)
        self.plot.addItem(self.cycle_item, ignoreBounds=True)
        self.start_marker = pg.ScatterPlotItem(size=7, symbol="o")
        self.plot.addItem(self.start_marker, ignoreBounds=True)
        self.cursor_marker = pg.ScatterPlotItem(size=11, symbol="o")
        self.plot.addItem(self.cursor_marker, ignoreBounds=True)
        self.eq_item = pg.ScatterPlotItem(size=11, hoverable=True, tip=self._eq_tip)
        self.plot.addItem(self.eq_item, ignoreBounds=True)
        self.eq_item.setZValue(20)
        self.cursor_marker.setZValue(15)
        self.event_marks = EventMarks(self.plot)
        self.empty_hint = empty_hint(self.plot, "The trajectory will be drawn here; click to start more")
        self.data_overlay = DataOverlay(session, self.plot, lambda: [(self.x_name, self.y_name, series_colour(1, self))])
        self.plot_widget.scene().sigMouseClicked.connect(self._on_click)
        self.plot.getViewBox().sigRangeChangedManually.connect(self._on_manual_range)
        self.plot.getViewBox().sigRangeChanged.connect(self._on_range_changed)

        self._field_timer = QTimer(self, singleShot=True, interval=60)
        self._field_timer.timeout.connect(self._update_field)
        self._nullcline_timer = QTimer(self, singleShot=True, interval=150)
        self._nullcline_timer.timeout.connect(self._request_nullclines)
        self._seed_timer = QTimer(self, singleShot=True, interval=0)
        self._seed_timer.timeout.connect(self._rerun_seeds)

        bar = control_row(self.x_combo, "against", self.y_combo, 8, self.arrows,
                          self.nullclines_box, self.backward, None, self.clear_button, self.fit_button,
                          spacing=6, stretch=False)
        layout = self.main_layout()
        layout.addLayout(bar)
        # the hint on a line of its own, across the view: squeezed between the controls of a narrow dock it
        # wrapped a word to a line and made the row of controls as tall as a third of the view
        layout.addWidget(self.hint)
        self.hint.hide()  # until there is something to say
        layout.addWidget(self.plot_widget, 1)

        self._restyle()
        session.equilibriaChanged.connect(lambda _items: self._draw_equilibria())
        session.cycleChanged.connect(lambda _c: self._draw_cycle())
        session.startsRequested.connect(self._on_starts_requested)
        session.heldChanged.connect(self._on_held)
        self.follow_session(values=self._on_values, trajectory=self._on_trajectory, cursor=self._update_cursor)

    # ------------------------------------------------------------ view protocol
    def view_settings(self) -> dict:
        d = {"x": self.x_combo.currentText(), "y": self.y_combo.currentText(),
             "arrows": self.arrows.isChecked(), "nullclines": self.nullclines_box.isChecked(),
             "backward": self.backward.isChecked(), "seeds": [dict(s) for s in self.seeds]}
        if self._fitted is False and self.trajectory is not None:
            (x0, x1), (y0, y1) = self.plot.getViewBox().viewRange()
            d["range"] = [[x0, x1], [y0, y1]]
        elif self._fitted is False and self.saved_view_settings().get("range"):
            d["range"] = self.saved_view_settings()["range"]  # the project's zoom, until the run is drawn
        return d

    def apply_view_settings(self, d: dict) -> None:
        if not isinstance(d, dict):
            return
        if isinstance(d.get("x"), str) and isinstance(d.get("y"), str):
            self._wanted_axes = (d["x"], d["y"])
            if self._names:
                self.set_axes(*self._wanted_axes)
        self.arrows.setChecked(bool(d.get("arrows", True)))
        self.nullclines_box.setChecked(bool(d.get("nullclines", False)))
        self.backward.setChecked(bool(d.get("backward", False)))
        seeds = d.get("seeds", [])
        if isinstance(seeds, list):
            wanted = [{"u0": [float(v) for v in s["u0"]], "both": bool(s.get("both", False))}
                      for s in seeds[:MAX_SEEDS]
                      if isinstance(s, dict) and isinstance(s.get("u0"), list)
                      and all(isinstance(v, (int, float)) for v in s["u0"])]
            if wanted != self.seeds:  # a walkthrough step's starts: run now, not only when the values change
                self.seeds, self.seed_runs = wanted, []
                self.session.cancel_job("phase_plane.seeds")
                self._draw_seeds()
                self._schedule_seeds()
        rng = d.get("range")
        if (isinstance(rng, list) and len(rng) == 2 and all(isinstance(r, list) and len(r) == 2 for r in rng)
                and all(isinstance(v, (int, float)) for r in rng for v in r)):
            self.plot.getViewBox().setRange(xRange=rng[0], yRange=rng[1], padding=0)
            self._fitted = False

    def export_data(self):
        traj = self.trajectory
        if traj is None:
            return None
        x, y = self._xy(traj)
        if x is None:
            return None
        return [self.x_name, self.y_name], np.column_stack([x, y])

    # ------------------------------------------------------------ public
    @property
    def x_name(self) -> str:
        return self.x_combo.currentText()

    @property
    def y_name(self) -> str:
        return self.y_combo.currentText()

    def set_axes(self, x: str, y: str) -> None:
        ix, iy = self.x_combo.findText(x), self.y_combo.findText(y)
        if ix >= 0 and iy >= 0:
            for combo, i in ((self.x_combo, ix), (self.y_combo, iy)):
                combo.blockSignals(True)
                combo.setCurrentIndex(i)
                combo.blockSignals(False)
            self._on_axes()
            self.settings_changed()

    def start_trajectory(self, x: float, y: float, both: bool | None = None) -> bool:
        """Start a trajectory at the point (x, y) of the plane (other states at their initial values)."""
        system = self.system
        if system is None or self.x_name not in system.states or self.y_name not in system.states:
            self.hint.setText("Pick two states as axes to start trajectories by clicking")
            self.hint.show()
            return False
        if len(self.seeds) >= MAX_SEEDS:
            self.seeds.pop(0)
            if self.seed_runs:
                self.seed_runs.pop(0)
        u0 = self.session.initial_vector()
        u0[system.states.index(self.x_name)] = x
        u0[system.states.index(self.y_name)] = y
        seed = {"u0": [float(v) for v in u0], "both": bool(self.backward.isChecked() if both is None else both)}
        self.seeds.append(seed)
        self.seed_runs.append((None, None))
        self.settings_changed()
        index = len(self.seeds) - 1
        self.session.run_job(f"phase_plane.seed.{id(seed)}", self._seed_job([seed]),
                             lambda runs: self._seed_done(index, seed, runs[0]))
        return True

    def _on_starts_requested(self, starts) -> None:
        """Full initial states from another view: taken when the plane is the model's two states."""
        s = self.system
        if s is None or s.n_states != 2 or {self.x_name, self.y_name} != set(s.states):
            return
        for st in starts:
            u = dict(zip(s.states, st["u0"]))
            self.start_trajectory(u[self.x_name], u[self.y_name], both=st["backward"])
        self.session.note_starts_taken(self.title)

    def clear_seeds(self) -> None:
        self.seeds, self.seed_runs = [], []
        self.settings_changed()
        self.session.cancel_job("phase_plane.seeds")
        self._draw_seeds()

    def fit_view(self) -> None:
        self._fitted = True
        items = [self.curve] if self.trajectory is not None else None
        self.plot.getViewBox().autoRange(items=items, padding=0.06)

    # ------------------------------------------------------------ system and data
    def _on_project_loaded(self) -> None:
        self.trajectory = None
        self.system = None
        self._names = []
        self.seeds, self.seed_runs = [], []
        self._fitted = False
        self.apply_view_settings(self.saved_view_settings())
        self._draw_seeds()
        self._draw_equilibria()

    def _on_system(self, system) -> None:
        old = self.system
        self.system = system
        names = coordinate_names(system)
        if old is not None and list(old.states) != list(system.states):
            self.seeds, self.seed_runs = [], []
        if names != self._names:
            want = self._wanted_axes or (self.x_name, self.y_name)
            self._names = names
            for combo in (self.x_combo, self.y_combo):
                fill_combo(combo, names)
            states = system.states
            default = (states[0], states[1]) if len(states) > 1 else (system.time_name, states[0])
            if want[0] in names and want[1] in names and want[0] != want[1]:
                default = want
            with quiet(self.x_combo, self.y_combo):  # no refit here: a zoom kept in the project stays
                self.x_combo.setCurrentIndex(names.index(default[0]))
                self.y_combo.setCurrentIndex(names.index(default[1]))
            self._wanted_axes = None
        self._on_axes(refit=False)
        self._schedule_seeds()

    def _on_values(self) -> None:
        self._draw_equilibria()  # found for other values: not drawn
        self._field_timer.start()
        self._nullcline_timer.start()
        self._schedule_seeds()

    def _plane_of_states(self) -> bool:
        s = self.system
        return (s is not None and s.kind == "flow" and s.n_states == 2
                and {self.x_name, self.y_name} == set(s.states))

    def _on_axes(self, _index=None, refit: bool = True) -> None:
        s = self.system
        if s is None:
            return
        self.plot.setLabel("bottom", self.x_name)
        self.plot.setLabel("left", self.y_name)
        flat = self._plane_of_states()
        for box in (self.arrows, self.nullclines_box):
            box.setEnabled(flat)
        self.arrows.setEnabled(flat and not s.delays)  # a delay model's direction depends on its past too
        self.arrows.setToolTip("A model with delays has no direction field: its direction depends on the past"
                               if s.delays else "Direction of the flow on a grid (two-state flows)")
        self.nullclines_box.setEnabled(flat and self._nullcline_function() is not None)
        clickable = self.x_name in s.states and self.y_name in s.states
        self.hint.setText("" if clickable else "Clicking starts trajectories when both axes are states")
        self.hint.setVisible(not clickable)
        self._draw_trajectory()
        self._draw_seeds()
        self._draw_equilibria()
        self._draw_cycle()
        self.data_overlay.refresh()
        if refit:
            self.fit_view()
        self._update_field()
        self._request_nullclines()

    def _on_trajectory(self, trajectory) -> None:
        first = self.trajectory is None
        self.trajectory = trajectory
        self._draw_trajectory()
        if first and (self._fitted or not self._user_range_set()):
            self.fit_view()
        elif self._fitted:
            self._refit_on_release = self.session.held  # a held slider: the range stays until let go
            if not self.session.held:
                self.fit_view()

    def _on_held(self, held: bool) -> None:
        if not held and self._refit_on_release and self._fitted:
            self.fit_view()
        self._refit_on_release = False

    def _draw_cycle(self) -> None:
        cols = cycle_columns(self.system, self.session.current_cycle(), self.session.param_vector())
        if self.x_name not in cols or self.y_name not in cols:
            self.cycle_item.setData([], [])
            return
        colour = series_colour(1, self)
        if self.system.kind == "map":
            self.cycle_item.setData(cols[self.x_name][:-1], cols[self.y_name][:-1], pen=None, symbol="o",
                                    symbolSize=10, symbolBrush=None, symbolPen=pg.mkPen(colour, width=2))
        else:
            self.cycle_item.setData(cols[self.x_name], cols[self.y_name], pen=pg.mkPen(colour, width=3), symbol=None)
        self.cycle_item.setToolTip("The limit cycle found in the cycle view")

    def _user_range_set(self) -> bool:
        return bool(self.saved_view_settings().get("range")) and not self._fitted

    def _xy(self, traj, x_name=None, y_name=None, wrapped=True):
        """The run's values on the two axes; a state the model declares an angle wrapped to (-pi, pi]."""
        x_name, y_name = x_name or self.x_name, y_name or self.y_name
        try:
            x, y = traj.series(x_name), traj.series(y_name)
        except KeyError:
            return None, None
        if wrapped:
            angles = angle_states(self.system) if self.system is not None else []
            x, y = (wrap(x) if x_name in angles else x), (wrap(y) if y_name in angles else y)
        return x, y

    def _drawn_xy(self, traj):
        """``_xy`` broken where a wrapped angle goes round (no line across the plane) and at the model's
        events (the curve reaches the boundary, the marks show the jump)."""
        x, y = self._xy(traj)
        if x is None or traj.kind == "map":
            return x, y
        angles = angle_states(self.system) if self.system is not None else []
        if self.x_name not in angles and self.y_name not in angles:  # (an event's values are not wrapped)
            x, y = through_events(traj, (self.x_name, self.y_name), (x, y))
        return break_at_wraps(x, y)

    def _draw_trajectory(self) -> None:
        traj = self.trajectory
        self.empty_hint.setVisible(traj is None)
        if traj is None or traj.time.size == 0:
            self.event_marks.clear()
            self.curve.setData([], [])
            self.start_marker.setData([], [])
            self.cursor_marker.setData([], [])
            return
        x, y = self._drawn_xy(traj)
        if x is None:
            return
        colour = series_colour(0, self)
        if traj.kind == "map":
            self.curve.setData(*_thin(x, y), pen=None, symbol="o", symbolSize=3, symbolPen=None,
                               symbolBrush=colour)
        else:
            self.curve.setData(*_thin(x, y), pen=pg.mkPen(colour, width=1.4), symbol=None, connect="finite")
        self.start_marker.setData([x[0]], [y[0]], brush=pg.mkBrush(colour), pen=pg.mkPen(self._base(), width=1))
        self.start_marker.setToolTip(f"Start: {self.x_name} = {x[0]:.4g}, {self.y_name} = {y[0]:.4g}")
        angles = angle_states(self.system) if self.system is not None else []
        wrapped = self.x_name in angles or self.y_name in angles  # (marks of wrapped angles: not drawn)
        self.event_marks.show(None if wrapped else traj, [(self.x_name, self.y_name, series_colour(1, self))])
        self._update_cursor(self.session.time_cursor)

    def _update_cursor(self, t: float) -> None:
        traj = self.trajectory
        if traj is None or traj.time.size == 0 or not np.isfinite(t):
            self.cursor_marker.setData([], [])
            return
        x, y = self._xy(traj, wrapped=False)
        if x is None:
            return
        px, py = values_at_time(traj.time, t, traj.kind == "map", x, y)
        angles = angle_states(self.system)
        px, py = (wrap(px) if self.x_name in angles else px), (wrap(py) if self.y_name in angles else py)
        accent = series_colour(1, self)
        self.cursor_marker.setData([px], [py], brush=pg.mkBrush(self._base()), pen=pg.mkPen(accent, width=2.5))

    # ------------------------------------------------------------ clicked trajectories
    def _seed_job(self, seeds):
        """A job giving (forward, backward or None) runs per seed; maps run forward only."""
        flow = self.system.kind == "flow"
        starts = []
        for seed in seeds:
            starts.append((seed["u0"], False))
            if seed["both"] and flow:
                starts.append((seed["u0"], True))
        job = runs_job(self.session, self.system, starts, SEED_SAMPLES)

        def paired(cancel, report):
            runs = iter(job(cancel, report))
            return [(next(runs), next(runs) if seed["both"] and flow else None) for seed in seeds]

        return paired

    def _seed_done(self, index, seed, run) -> None:
        if index < len(self.seeds) and self.seeds[index] is seed:
            self.seed_runs[index] = run
            self._draw_seeds()

    def _schedule_seeds(self) -> None:
        if self.seeds:
            self._seed_timer.start()

    def _rerun_seeds(self) -> None:
        if not self.seeds or self.system is None:
            return
        n = self.system.n_states
        self.seeds = [s for s in self.seeds if len(s["u0"]) == n]
        seeds = list(self.seeds)

        def done(runs):
            if self.seeds == seeds:
                self.seed_runs = list(runs)
                self._draw_seeds()

        self.session.run_job("phase_plane.seeds", self._seed_job(seeds), done)

    def _draw_seeds(self) -> None:
        colour = series_colour(2, self)
        curves = []
        for fwd, back in self.seed_runs:
            for run, style in ((fwd, Qt.PenStyle.SolidLine), (back, Qt.PenStyle.DashLine)):
                if run is None or run.time.size == 0:
                    continue
                x, y = self._drawn_xy(run)
                if x is not None:
                    x, y = cut_at_escape(x, y, self.plot.getViewBox().viewRange(), run.status)
                    curves.append((x, y, style, run.kind))
        while len(self.seed_items) < len(curves):
            item = ScreenCurve()
            self.plot.addItem(item, ignoreBounds=True)
            self.seed_items.append(item)
        for item, (x, y, style, kind) in zip(self.seed_items, curves):
            if kind == "map":
                item.setData(*_thin(x, y), pen=None, symbol="o", symbolSize=3, symbolPen=None, symbolBrush=colour)
            else:
                item.setData(*_thin(x, y), pen=pg.mkPen(colour, width=1.2, style=style), symbol=None,
                             connect="finite")
            item.setVisible(True)
        for item in self.seed_items[len(curves):]:
            item.setData([], [])
            item.setVisible(False)

    def _on_click(self, event) -> None:
        point = clicked_point(self.plot, event)
        if point is None:
            return
        both = True if event.modifiers() & Qt.KeyboardModifier.ShiftModifier else None
        if self.start_trajectory(point.x(), point.y(), both=both):
            self.session.note_clicked_start(self.seeds[-1]["u0"])
            event.accept()

    # ------------------------------------------------------------ direction field and nullclines
    def _on_range_changed(self, *_args) -> None:
        if any(run is not None and run.status != "ok" for pair in self.seed_runs for run in pair):
            self._draw_seeds()  # runs that blew up are cut at the new edges
        self._field_timer.start()
        self._nullcline_timer.start()

    def _on_manual_range(self, *_args) -> None:
        self._fitted = False

    def _view_box_range(self):
        (x0, x1), (y0, y1) = self.plot.getViewBox().viewRange()
        return (x0, x1), (y0, y1)

    def _update_field(self, *_args) -> None:
        if not (self.arrows.isChecked() and self._plane_of_states()) or self.system.delays:
            self.field_item.setData([], [])
            return
        from orbitdesk.analyses.field import direction_field

        system = self.system
        (x0, x1), (y0, y1) = self._view_box_range()
        w, h = max(self.plot.getViewBox().width(), 1.0), max(self.plot.getViewBox().height(), 1.0)
        nx = FIELD_POINTS if w >= h else max(5, int(round(FIELD_POINTS * w / h)))
        ny = FIELD_POINTS if h >= w else max(5, int(round(FIELD_POINTS * h / w)))
        cell_w, cell_h = (x1 - x0) / nx, (y1 - y0) / ny
        if not (cell_w > 0 and cell_h > 0):
            return
        axes = (system.states.index(self.x_name), system.states.index(self.y_name))
        t = self.session.time_cursor if np.isfinite(self.session.time_cursor) else self.session.solver.t_start
        X, Y, U, V = direction_field(system, self.session.param_vector(),
                                     (x0 + cell_w / 2, x1 - cell_w / 2), (y0 + cell_h / 2, y1 - cell_h / 2),
                                     (nx, ny), t=t, axes=axes, base=self.session.initial_vector())
        xs, ys = arrow_segments(X, Y, U, V, cell_w, cell_h)
        self.field_item.setData(xs, ys, connect="pairs", pen=pg.mkPen(muted_colour(self, 150), width=1))

    @staticmethod
    def _nullcline_function():
        try:
            from orbitdesk.analyses.nullclines import nullclines
        except ImportError:
            return None
        return nullclines

    def _request_nullclines(self, *_args) -> None:
        fn = self._nullcline_function()
        if not (self.nullclines_box.isChecked() and fn is not None and self._plane_of_states()):
            self._draw_nullclines([])
            return
        system, p = self.system, self.session.param_vector()
        x_range, y_range = self._view_box_range()
        swap = self.x_name != system.states[0]
        if swap:
            x_range, y_range = y_range, x_range

        def job(cancel, report):
            return fn(system, p, x_range, y_range)

        self.session.run_job("phase_plane.nullclines", job, lambda result: self._draw_nullclines(result, swap))

    def _draw_nullclines(self, result, swap: bool = False) -> None:
        curves = []  # (x, y, state index)
        for k, entry in enumerate(_nullcline_curves(result)):
            index, segments = entry
            for xs, ys in segments:
                curves.append((ys, xs, index) if swap else (xs, ys, index))
        while len(self.nullcline_items) < len(curves):
            item = pg.PlotDataItem()
            self.plot.addItem(item, ignoreBounds=True)
            self.nullcline_items.append(item)
        for item, (x, y, index) in zip(self.nullcline_items, curves):
            colour = series_colour(3 + index, self)
            name = self.system.states[index] if self.system is not None and index < self.system.n_states else ""
            item.setData(x, y, pen=pg.mkPen(colour, width=1.6, style=Qt.PenStyle.DashLine), connect="finite")
            item.setToolTip(f"{name}' = 0" if name else "nullcline")
            item.setVisible(True)
        for item in self.nullcline_items[len(curves):]:
            item.setData([], [])
            item.setVisible(False)

    # ------------------------------------------------------------ equilibria
    def _draw_equilibria(self) -> None:
        """The document's equilibria: each an Equilibrium (analyses/equilibria.py) or a dict with ``state``
        ({name: value}), ``stable`` (True / False / None) and ``kind`` (a saddle if 'saddle' is in it).
        Stable points are filled circles, unstable ones hollow circles, saddles crosses and points whose
        stability the linearisation does not decide hollow squares."""
        s = self.system
        if s is None or not self.equilibria:
            self.eq_item.setData([])
            return
        text = self._text()
        base = self._base()
        spots = []
        p = self.session.param_vector()
        for item in self.equilibria:
            _state, stable, kind = equilibrium_fields(item)
            found = equilibrium_coordinates(s, item, (self.x_name, self.y_name), p)
            if found is None:
                continue
            u, xy = found
            if "saddle" in kind:
                symbol, brush, pen = "x", pg.mkBrush(text), pg.mkPen(base, width=0.5)
            elif stable is True:
                symbol, brush, pen = "o", pg.mkBrush(text), pg.mkPen(base, width=1)
            elif stable is False:
                symbol, brush, pen = "o", pg.mkBrush(base), pg.mkPen(text, width=2)
            else:
                symbol, brush, pen = "s", pg.mkBrush(base), pg.mkPen(text, width=1.5)
            where = ", ".join(f"{n} = {v:.4g}" for n, v in zip(s.states, u))
            spots.append({"pos": tuple(xy), "symbol": symbol, "brush": brush,
                          "pen": pen, "data": f"{kind or 'equilibrium'}\n{where}"})
        self.eq_item.setData(spots)

    @staticmethod
    def _eq_tip(x, y, data):
        return str(data)

    # ------------------------------------------------------------ look
    def _base(self) -> QColor:
        return self.palette().color(self.palette().ColorRole.Base)

    def _text(self) -> QColor:
        return self.palette().color(self.palette().ColorRole.Text)

    def _restyle(self) -> None:
        style_plot(self.plot_widget, self)
        self._draw_trajectory()
        self._draw_seeds()
        self._draw_equilibria()
        self._update_field()


def _nullcline_curves(result):
    """Normalise what core.nullclines returns into [(state index, [(xs, ys), ...]), ...].

    Accepted: a list/tuple with one entry per state (each a list of (xs, ys) segments or an (N, 2) array
    or a pair of arrays with NaN breaks), or a dict {state index or name: same}.
    """
    if result is None:
        return []
    if hasattr(result, "curves"):
        result = result.curves
    if isinstance(result, dict):
        entries = list(result.items())
    else:
        entries = list(enumerate(result))
    out = []
    for key, value in entries:
        index = key if isinstance(key, int) else len(out)
        value = getattr(value, "segments", value)  # core.nullclines.Nullcline: polylines, each (2, K)
        segments = []
        if isinstance(value, np.ndarray) and value.ndim == 2 and value.shape[1] == 2:
            segments.append((value[:, 0], value[:, 1]))
        elif (isinstance(value, (tuple, list)) and len(value) == 2
              and all(isinstance(v, np.ndarray) and v.ndim == 1 for v in value)):
            segments.append((np.asarray(value[0]), np.asarray(value[1])))
        else:
            for seg in value or []:
                seg = np.asarray(seg, dtype=float)
                if seg.ndim == 2 and seg.shape[1] == 2:
                    segments.append((seg[:, 0], seg[:, 1]))
                elif seg.ndim == 2 and seg.shape[0] == 2:
                    segments.append((seg[0], seg[1]))
        out.append((index, segments))
    return out


VIEW = PhasePlaneView
