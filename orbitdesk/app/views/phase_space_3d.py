"""Phase space in 3D: any three coordinates, trajectories coloured by time, a spread of nearby starts,
trajectories added from other views, equilibria and the time cursor; orbit, zoom and pan with the mouse.

The scene is drawn in box coordinates: each axis's data range is mapped onto the same length, so
coordinates of very different size share one readable cube; ticks show the data values.
"""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import QEvent, QTimer, Signal
from PySide6.QtGui import QColor, QFont, QImage, QPainter, QVector3D
from PySide6.QtWidgets import QSpinBox, QToolButton

from orbitdesk.app.views import SERIES_COLOURS
from orbitdesk.app.views.common import (SessionView, check_box, combo_box, control_row, coordinate_names, cycle_columns,
                     equilibrium_coordinates,
                     apply_numbers, fill_combo, is_number, run_time_name, runs_job, set_quietly, values_at_time)
from orbitdesk.app.plots.plot_style import (SCENE_BACKGROUND, SCENE_GRID, SCENE_MARKER, SCENE_TEXT, JobStrip, NumberBox,
                          rgba, time_colours)
from orbitdesk.app.plots.event_marks import through_events
from orbitdesk.app.plots.scene3d import (_gl_item_classes, _solid, _solid_rgba, box_frame, broken_line, data_box,
                                         thin_indices)
from orbitdesk.language.angles import angle_states, wrap

HALF = 5.0                  # the box spans [-HALF, HALF] on every axis
MAX_DRAWN_POINTS = 300_000  # the current trajectory is thinned evenly beyond this for drawing
MAX_EXTRA_POINTS = 20_000   # same for each added or nearby trajectory
MOVING_POINTS = 20_000      # the current trajectory while the camera moves (the full one on release)
EXTRA_SAMPLES = 4000        # output points of each added or nearby run
MAX_SPREAD = 64
MAX_ADDED = 40
DEFAULT_CAMERA = {"distance": 23.0, "elevation": 22.0, "azimuth": -58.0, "center": [0.0, 0.0, 0.0], "fov": 60.0}
COLOUR_MODES = ("time", "trajectory")
WIDE_ASPECT = 1.6  # width / height up to which the starting camera shows the whole box
FIGURE_MARGIN = 0.94  # a figure's box with its labels reaches this share of the half-width or half-height
FAR = 10.0  # an equilibrium farther than this many spans of the runs' box beyond it is left out (not drawn)


class PhaseSpace3DView(SessionView):
    view_id = "phase_space_3d"
    title = "Phase space 3D"

    fit_own_state = False  # leaving a walkthrough brings the user's own camera back as it was (no fit_view)

    spreadChanged = Signal()  # the nearby-starts runs arrived (or were cleared)
    addedChanged = Signal()   # added trajectories arrived (or were cleared)

    def __init__(self, session, parent=None):
        super().__init__(session, parent)
        import pyqtgraph.opengl as gl  # imported with this view only

        from orbitdesk.app.plots.gl_scene import SceneWidget

        self._gl = gl
        self._Line, self._Points = _gl_item_classes(gl)
        self.trajectory = None
        self.added: list[dict] = []       # {"u0": [...], "backward": bool}
        self.added_runs: list = []        # Trajectory per added start (None until it arrives)
        self.spread_runs: list = []
        self._names: list[str] = []
        self._wanted_axes: tuple | None = None
        self._box = [(-1.0, 1.0)] * 3
        self._default_camera = None

        # ---- controls
        self.axis_combos = [combo_box(f"Quantity on the {axis} axis", slot=self._on_axes) for axis in "XYZ"]
        self.colour_combo = combo_box("Colour lines along time (early blue, late ember) or one colour per line; "
                                      "nearby starts always get one colour each", ["by time", "by trajectory"],
                                      lambda _i: self._redraw_all())
        self.spread_box = check_box("Nearby starts", "Run trajectories from starts scattered in a small ball "
                                    "around the initial state, to see neighbouring orbits tangle and separate",
                                    False, self._on_spread_toggled)
        self.spread_count = QSpinBox()
        self.spread_count.setRange(2, MAX_SPREAD)
        self.spread_count.setValue(12)
        self.spread_count.setToolTip("How many nearby starts")
        self.spread_count.setKeyboardTracking(False)
        self.spread_count.valueChanged.connect(self._spread_params_changed)
        self.spread_radius = NumberBox(1e-3, 1e-12, 1e6, ratio=10 ** 0.5)
        self.spread_radius.setToolTip("Radius of the ball of starts around the initial state (state units)")
        self.spread_radius.valueChanged.connect(self._spread_params_changed)
        self.keep_button = QToolButton(text="Keep start")
        self.keep_button.setToolTip("Keep a trajectory from the current initial state, to compare it with runs "
                                    "from other initial values")
        self.keep_button.clicked.connect(self.keep_current_start)
        self.clear_button = QToolButton(text="Clear")
        self.clear_button.setToolTip("Remove the added trajectories and the nearby starts")
        self.clear_button.clicked.connect(self.clear_extra)
        self.fit_button = QToolButton(text="Reset view")
        self.fit_button.setToolTip("Turn the camera back to its starting place")
        self.fit_button.clicked.connect(self.reset_camera)
        self.strip = JobStrip(session, "Running")

        # ---- scene
        self.glview = SceneWidget(HALF)  # multisampled at rest, not while the camera moves; labels in one pass
        self.glview.setBackgroundColor(QColor(*SCENE_BACKGROUND))
        self.glview.setToolTip("Drag to turn, wheel to zoom, middle-drag (or Ctrl+drag) to move")
        self.glview.setMinimumSize(200, 160)
        self.plot_widget = self.glview  # image export grabs the scene
        self.grid_item = self._Line(mode="lines", antialias=False, glOptions="translucent")
        self.axes_item = self._Line(mode="lines", antialias=False, width=1.5, glOptions="translucent")
        self.main_item = self._Line(mode="line_strip", antialias=False, width=1.6, glOptions="translucent")
        self.main_points = self._Points(pxMode=True, size=3, glOptions="translucent")
        self.extra_items: list = []
        self.eq_item = self._Points(pxMode=True, size=9, glOptions="translucent")
        self.cycle_item = self._Line(mode="line_strip", antialias=False, width=3.0, glOptions="translucent")
        self.cursor_item = self._Points(pxMode=True, size=11, glOptions="translucent")
        for item in (self.grid_item, self.axes_item, self.main_item, self.main_points, self.eq_item, self.cycle_item,
                     self.cursor_item):
            self.glview.addItem(item)
        self.eq_item.setDepthValue(10)
        self.cursor_item.setDepthValue(20)

        axes = [part for axis, combo in zip("XYZ", self.axis_combos) for part in (axis, combo, 4)]
        bar = control_row(*axes, 6, "Colour", self.colour_combo, None, self.fit_button, stretch=False)
        spread_bar = control_row(self.spread_box, self.spread_count, 4, "within", self.spread_radius, 8,
                                 self.keep_button, self.clear_button, 8, stretch=False)
        spread_bar.addWidget(self.strip, 1)
        layout = self.main_layout()
        layout.addLayout(bar)
        layout.addLayout(spread_bar)
        layout.addWidget(self.glview, 1)

        self._rerun_timer = QTimer(self, singleShot=True, interval=0)
        self._moving, self._main_data = False, None  # camera in motion; (full, coarse) (pos, colour) of the run
        self._still_timer = QTimer(self, singleShot=True, interval=250)  # the wheel stopped turning
        self._still_timer.timeout.connect(lambda: self._set_moving(False))
        self.glview.installEventFilter(self)
        self._rerun_timer.timeout.connect(self._rerun_extra)
        self.reset_camera()
        session.equilibriaChanged.connect(lambda _items: self._draw_markers())
        session.equilibriumSelected.connect(lambda _index: self._draw_equilibria())
        session.cycleChanged.connect(lambda _c: self._draw_markers())
        session.startsRequested.connect(self._on_starts_requested)
        self.follow_session(values=self._on_values, trajectory=self._on_trajectory, cursor=self._update_cursor)

    # ------------------------------------------------------------ view protocol
    def view_settings(self) -> dict:
        return {"axes": self.axes(), "colour": COLOUR_MODES[self.colour_combo.currentIndex()],
                "spread": {"on": self.spread_box.isChecked(), "count": self.spread_count.value(),
                           "radius": float(self.spread_radius.value())},
                "starts": [dict(s) for s in self.added], "camera": self.camera()}

    def apply_view_settings(self, d: dict) -> None:
        if not isinstance(d, dict):
            return
        axes = d.get("axes")
        if isinstance(axes, list) and len(axes) == 3 and all(isinstance(a, str) for a in axes):
            self._wanted_axes = tuple(axes)
            if self._names:
                self.set_axes(*axes)
        if d.get("colour") in COLOUR_MODES:
            self.colour_combo.setCurrentIndex(COLOUR_MODES.index(d["colour"]))
        spread = d.get("spread")
        if isinstance(spread, dict):
            apply_numbers(spread, ((self.spread_count, "count", int), (self.spread_radius, "radius", float)))
            set_quietly(self.spread_box, spread.get("on", False))
        starts = d.get("starts")
        if isinstance(starts, list):
            self.added = [{"u0": [float(v) for v in s["u0"]], "backward": bool(s.get("backward", False))}
                          for s in starts[:MAX_ADDED]
                          if isinstance(s, dict) and isinstance(s.get("u0"), list)
                          and all(isinstance(v, (int, float)) for v in s["u0"])]
            self.added_runs = [None] * len(self.added)
        if isinstance(d.get("camera"), dict):
            self.set_camera(d["camera"])
        self._schedule_extra()

    def export_data(self):
        """The current trajectory at full resolution: time and the three chosen coordinates."""
        traj = self.trajectory
        if traj is None or traj.time.size == 0:
            return None
        xyz = self._coords(traj)
        if xyz is None:
            return None
        return [run_time_name(traj)] + self.axes(), np.column_stack([traj.time, xyz])

    # ------------------------------------------------------------ public
    def axes(self) -> list[str]:
        return [c.currentText() for c in self.axis_combos]

    def set_axes(self, x: str, y: str, z: str) -> None:
        idx = [c.findText(n) for c, n in zip(self.axis_combos, (x, y, z))]
        if min(idx) < 0:
            return
        for combo, i in zip(self.axis_combos, idx):
            combo.blockSignals(True)
            combo.setCurrentIndex(i)
            combo.blockSignals(False)
        self._on_axes()

    def camera(self) -> dict:
        o = self.glview.opts
        c = o["center"]
        return {"distance": float(o["distance"]), "elevation": float(o["elevation"]),
                "azimuth": float(o["azimuth"]), "center": [float(c.x()), float(c.y()), float(c.z())],
                "fov": float(o["fov"])}

    def set_camera(self, cam: dict) -> None:
        def num(key, lo, hi):
            v = cam.get(key)
            return float(min(max(v, lo), hi)) if is_number(v) else None

        distance, elevation, azimuth = num("distance", 0.01, 1e6), num("elevation", -90, 90), num("azimuth", -1e6, 1e6)
        center = cam.get("center")
        pos = None
        if (isinstance(center, list) and len(center) == 3
                and all(is_number(v) for v in center)):
            pos = QVector3D(*[float(v) for v in center])
        self.glview.setCameraPosition(pos=pos, distance=distance, elevation=elevation, azimuth=azimuth)
        fov = num("fov", 5, 120)
        if fov is not None:
            self.glview.setCameraParams(fov=fov)
        self.glview.update()

    def grab_image(self) -> QImage:
        """The whole view as an image, with the 3D scene read from its framebuffer."""
        image = self.grab().toImage()
        painter = QPainter(image)
        scene = self.glview.grabFramebuffer()
        painter.drawImage(self.glview.geometry(), scene)
        painter.end()
        return image

    def scene_points(self, points, width: int, height: int) -> np.ndarray:
        """Pixel positions (x right, y down) of box-coordinate ``points`` (N, 3) in a picture of that size
        (NaN behind the camera)."""
        return self.glview.pixel_points(points, width, height)

    def scene_labels(self) -> list:
        """The tick numbers and axis names of the scene: (box position, text, QColor, QFont) each."""
        return list(self.glview.labels)

    def box_in_view(self, margin: float = 0.97, size=None) -> bool:
        """Whether the whole box with its tick numbers and axis names projects inside the scene, or inside a
        picture of ``size`` (width, height) seen by the same camera; ``margin`` is the share of the half-width
        and half-height they may reach from the middle."""
        w, h = size if size is not None else (self.glview.width(), self.glview.height())
        return self.glview.frame_fits(w, h, margin)

    def fit_view(self) -> None:
        """Move the camera back (never closer) until the whole box shows: a walkthrough step's camera was
        chosen in a dock of another shape."""
        if not self.box_in_view():
            self.glview.setCameraPosition(distance=self.glview.fitting_distance(self.glview.width(),
                                                                                self.glview.height(), 0.97))
        self.glview.update()

    def figure_image(self, width: int, height: int) -> QImage | None:
        """The scene as a figure of ``width`` x ``height`` (reports): the box with its labels filling it, seen
        from the direction of the camera on screen (which is left as it was)."""
        return self.glview.framed_image(width, height, FIGURE_MARGIN)

    def reset_camera(self) -> None:
        """The starting camera, moved back in wide, short views so that the whole box shows
        (the field of view is horizontal, so the box's height is what gets cut off)."""
        cam = dict(DEFAULT_CAMERA)
        w, h = self.glview.width(), self.glview.height()
        if w > 0 and h > 0 and w / h > WIDE_ASPECT:
            cam["distance"] *= (w / h) / WIDE_ASPECT
        self.set_camera(cam)
        self._default_camera = self.camera()

    def resizeEvent(self, event) -> None:
        super().resizeEvent(event)
        if self._default_camera is not None and self.camera() == self._default_camera:
            self.reset_camera()  # still where it started: keep the whole box in view

    def add_starts(self, starts) -> None:
        """Add trajectories from full initial states: dicts with ``u0`` and optionally ``backward``."""
        s = self.system
        if s is None:
            return
        for st in starts:
            u0 = [float(v) for v in st["u0"]]
            if len(u0) != s.n_states:
                continue
            self.added.append({"u0": u0, "backward": bool(st.get("backward", False))})
            self.added_runs.append(None)
        del self.added[:-MAX_ADDED]
        del self.added_runs[:-MAX_ADDED]
        self.settings_changed()
        self._run_added()

    def keep_current_start(self) -> None:
        """Add a trajectory from the session's current initial state (it stays when the state changes)."""
        if self.system is not None:
            self.add_starts([{"u0": [float(v) for v in self.session.initial_vector()]}])

    def clear_extra(self) -> None:
        self.added, self.added_runs, self.spread_runs = [], [], []
        self.settings_changed()
        self.session.cancel_job("phase_space_3d.added")
        if self.spread_box.isChecked():
            self.spread_box.setChecked(False)  # cancels the spread job too
        self._redraw_all()
        self.addedChanged.emit()
        self.spreadChanged.emit()

    def _on_starts_requested(self, starts) -> None:
        if self.system is not None:
            self.add_starts(starts)
            self.session.note_starts_taken(self.title)

    def spread_starts(self) -> np.ndarray:
        """The K nearby starts (K, n): uniform in a ball of the chosen radius around the initial state."""
        u0 = self.session.initial_vector()
        n, K = u0.size, self.spread_count.value()
        rng = np.random.default_rng(20240917)  # the same starts every time, so runs can be compared
        d = rng.standard_normal((K, n))
        d /= np.linalg.norm(d, axis=1, keepdims=True)
        r = float(self.spread_radius.value()) * rng.random(K) ** (1.0 / max(n, 1))
        return u0[None, :] + r[:, None] * d

    # ------------------------------------------------------------ session events
    def _on_project_loaded(self) -> None:
        self.system, self.trajectory = None, None
        self._names = []
        self.added, self.added_runs, self.spread_runs = [], [], []
        saved = self.saved_view_settings()
        if not isinstance(saved.get("camera"), dict):
            self.reset_camera()  # the starting camera, never the one of the project before
        self.apply_view_settings(saved)
        self._redraw_all()

    def _on_system(self, system) -> None:
        old = self.system
        self.system = system
        if old is not None and list(old.states) != list(system.states):
            self.added, self.added_runs = [], []
        names = coordinate_names(system)
        if names != self._names:
            want = self._wanted_axes or tuple(self.axes())
            self._names = names
            for combo in self.axis_combos:
                fill_combo(combo, names)
            states = list(system.states)
            default = (states + [n for n in names if n not in states])[:3]
            if len(set(want)) == 3 and all(w in names for w in want):
                default = list(want)
            for combo, name in zip(self.axis_combos, default):
                combo.setCurrentIndex(names.index(name))
            self._wanted_axes = None
        self._on_axes()
        self._schedule_extra()

    def _on_values(self) -> None:
        self._draw_markers()  # equilibria found for other values: not drawn
        self._schedule_extra()

    def _on_trajectory(self, trajectory) -> None:
        self.trajectory = trajectory
        self._redraw_all()

    def _on_axes(self, _index=None) -> None:
        self._redraw_all()

    # ------------------------------------------------------------ added and nearby runs
    def _runs_job(self, starts):
        """A job running one engine run per start: starts are (u0, backward) pairs."""
        return runs_job(self.session, self.system, starts, EXTRA_SAMPLES)

    def _schedule_extra(self) -> None:
        if self.added or self.spread_box.isChecked():
            self._rerun_timer.start()

    def _rerun_extra(self) -> None:
        if self.system is None:
            return
        n = self.system.n_states
        keep = [i for i, s in enumerate(self.added) if len(s["u0"]) == n]
        self.added = [self.added[i] for i in keep]
        self.added_runs = [None] * len(self.added)
        if self.added:
            self._run_added()
        if self.spread_box.isChecked():
            self._run_spread()
        self._redraw_all()

    def _run_added(self) -> None:
        if self.system is None or not self.added:
            return
        starts = [(s["u0"], s["backward"]) for s in self.added]
        added = list(self.added)

        def done(runs):
            if self.added == added:
                self.added_runs = list(runs)
                self._redraw_all()
                self.addedChanged.emit()

        self.session.run_job("phase_space_3d.added", self._runs_job(starts), done)

    def _on_spread_toggled(self, on: bool) -> None:
        if on:
            self._run_spread()
        else:
            self.strip.cancel()
            self.session.cancel_job("phase_space_3d.spread")
            self.spread_runs = []
            self._redraw_all()
            self.spreadChanged.emit()

    def _spread_params_changed(self, *_args) -> None:
        if self.spread_box.isChecked():
            self._run_spread()

    def _run_spread(self) -> None:
        if self.system is None:
            return
        starts = [(u0, False) for u0 in self.spread_starts()]

        def done(runs):
            self.spread_runs = list(runs)
            self._redraw_all()
            self.spreadChanged.emit()

        self.strip.what = f"Running {len(starts)} nearby starts"
        self.strip.run("phase_space_3d.spread", self._runs_job(starts), done)

    # ------------------------------------------------------------ drawing
    def _coords(self, traj, wrapped: bool = True):
        """The run's values on the three axes; a state the model declares an angle wrapped to (-pi, pi]."""
        try:
            cols = [np.asarray(traj.series(n), dtype=float) for n in self.axes()]
        except KeyError:
            return None
        if any(c.shape != traj.time.shape for c in cols):
            return None
        if wrapped:
            cols = [wrap(c) if k in self._wrapped_columns() else c for k, c in enumerate(cols)]
        return np.column_stack(cols)

    def _wrapped_columns(self) -> list[int]:
        """The axes (0, 1, 2) showing a state the model declares an angle."""
        angles = angle_states(self.system) if self.system is not None else []
        return [k for k, name in enumerate(self.axes()) if name in angles]

    def _line_data(self, pos, colour):
        """(pos, colour, GL mode) of a run's line (its finite points): one strip, broken (invisible joins) at the
        model's events (the gaps ``_run_line`` put in) and where an angle goes round."""
        return (*broken_line(pos, colour, self._wrapped_columns()), "line_strip")

    def _run_line(self, run, xyz, limit: int):
        """(pos, time) of a run's line: at most ``limit`` of its samples, broken at the model's events like
        every view's trajectory (``event_marks.through_events``; an event's values are not wrapped, so not
        where an angle is shown wrapped: that line breaks where the angle goes round)."""
        keep = thin_indices(xyz.shape[0], limit)
        pos, time = xyz[keep], run.time[keep]
        if run.kind != "map" and getattr(run, "model_events", None) and not self._wrapped_columns():
            *cols, time = through_events(run, self.axes() + ["t"], [pos[:, 0], pos[:, 1], pos[:, 2], time], time)
            pos = np.column_stack(cols)
        return pos, time

    def _to_box(self, xyz: np.ndarray) -> np.ndarray:
        out = np.empty_like(xyz, dtype=np.float32)
        for k, (lo, hi) in enumerate(self._box):
            out[:, k] = (xyz[:, k] - lo) / (hi - lo) * (2 * HALF) - HALF
        return out

    def _colour_by_time(self) -> bool:
        return self.colour_combo.currentIndex() == 0

    def _redraw_all(self) -> None:
        main = self._coords(self.trajectory) if self.trajectory is not None and self.trajectory.time.size else None
        # kept for the time cursor, which moves often: unwrapped (read between samples, then wrapped)
        self._main_xyz = self._coords(self.trajectory, wrapped=False) if self._wrapped_columns() and main is not None \
            else main
        extras = []  # (run, xyz, role index)
        for i, run in enumerate(self.added_runs):
            if run is not None and run.time.size:
                xyz = self._coords(run)
                if xyz is not None:
                    extras.append((run, xyz, ("added", i)))
        for i, run in enumerate(self.spread_runs):
            if run is not None and run.time.size:
                xyz = self._coords(run)
                if xyz is not None:
                    extras.append((run, xyz, ("spread", i)))
        self._runs_xyz = [main] + [e[1] for e in extras]
        self._box = self._scene_box()
        self._draw_frame()
        self._draw_main(main)
        self._draw_extras(extras)
        self._draw_equilibria()
        self._draw_cycle()
        self._update_cursor(self.session.time_cursor)

    def _scene_box(self):
        """The data box: the runs, the cycle and the equilibria (those not farther than FAR of the runs'
        spans beyond them) all inside it, so every item is drawn in the box the axes show, to their scale."""
        runs = [a for a in getattr(self, "_runs_xyz", []) if a is not None]
        cycle = self._cycle_xyz()
        if cycle is not None:
            runs.append(cycle)
        points = self._equilibrium_xyz()
        return data_box(runs + ([points] if points is not None and len(points) else []))

    def _draw_markers(self) -> None:
        """The equilibria and the cycle after they changed: the whole scene again when its box changes."""
        if self._scene_box() != self._box:
            self._redraw_all()
            return
        self._draw_equilibria()
        self._draw_cycle()

    def _draw_main(self, xyz) -> None:
        traj = self.trajectory
        if xyz is None or traj is None:
            self._main_data = None
            self.main_item.setData(pos=np.zeros((0, 3), dtype=np.float32))
            self.main_item.setVisible(False)
            self.main_points.setVisible(False)
            return
        alpha = 0.3 if self.spread_runs else 0.95  # in the background while nearby starts are shown
        pos, time = self._run_line(traj, xyz, MAX_DRAWN_POINTS)
        colour = time_colours(time, alpha) if self._colour_by_time() else _solid(SERIES_COLOURS[0][1], alpha, len(pos))
        # while the camera moves: a subset, keeping the gaps (events) so the line stays broken there
        coarse = np.union1d(thin_indices(len(pos), MOVING_POINTS), np.flatnonzero(~np.isfinite(pos).all(axis=1)))
        self._main_data = tuple((self._to_box(p), c, mode) for p, c, mode in
                                (self._line_data(pos, colour), self._line_data(pos[coarse], colour[coarse])))
        self.main_item.setVisible(traj.kind != "map")
        self.main_points.setVisible(traj.kind == "map")
        self._show_main()

    def _show_main(self) -> None:
        """The run's line (or points), coarser while the camera moves: a software renderer then keeps up."""
        if self._main_data is None:
            return
        pos, colour, mode = self._main_data[1 if self._moving else 0]
        if self.main_points.visible():
            self.main_points.setData(pos=pos, color=colour, size=3)
        else:
            self.main_item.setData(pos=pos, color=colour, width=1.0 if self._moving else 1.6, mode=mode)

    def _set_moving(self, moving: bool) -> None:
        if moving != self._moving:
            self._moving = moving
            self.glview.set_moving(moving)
            self._show_main()
            if not moving:
                self.settings_changed()  # the camera came to rest

    def eventFilter(self, obj, event) -> bool:
        kind = event.type()
        if obj is self.glview and kind in (QEvent.Type.MouseButtonPress, QEvent.Type.MouseButtonRelease):
            self._set_moving(kind == QEvent.Type.MouseButtonPress)
        elif obj is self.glview and kind == QEvent.Type.Wheel:
            self._set_moving(True)
            self._still_timer.start()
        return False

    def _draw_extras(self, extras) -> None:
        gl = self._gl
        while len(self.extra_items) < len(extras):
            line = self._Line(mode="line_strip", antialias=False, width=1.2, glOptions="translucent")
            dots = self._Points(pxMode=True, size=2.5, glOptions="translucent")
            self.glview.addItem(line)
            self.glview.addItem(dots)
            self.extra_items.append((line, dots))
        by_time = self._colour_by_time()
        for (line, dots), (run, xyz, (role, i)) in zip(self.extra_items, extras):
            pos, t = self._run_line(run, xyz, MAX_EXTRA_POINTS)
            kind = run.kind
            if role == "spread":  # one hue per nearby start, so their separation shows
                colour = _solid(SERIES_COLOURS[i % len(SERIES_COLOURS)][1], 0.85, len(pos))
            elif by_time:
                colour = time_colours(np.abs(t - t[0]) if t.size else t, 0.8)
            else:
                colour = _solid(SERIES_COLOURS[2][1], 0.85, len(pos))
            pos, colour, mode = self._line_data(pos, colour)
            if kind == "map":
                dots.setData(pos=self._to_box(pos), color=colour, size=2.5)
                dots.setVisible(True)
                line.setVisible(False)
            else:
                line.setData(pos=self._to_box(pos), color=colour, width=1.2, mode=mode)
                line.setVisible(True)
                dots.setVisible(False)
        for line, dots in self.extra_items[len(extras):]:
            line.setVisible(False)
            dots.setVisible(False)

    def _draw_frame(self) -> None:
        """A floor grid, two back walls, the three axes with tick values and names, scaled to the data
        (``scene3d.box_frame``)."""
        font = QFont(self.font())
        font.setPointSizeF(max(7.0, font.pointSizeF() * 0.85))
        grid, edges, labels = box_frame(self._box, HALF, self.axes(), font, QColor(*SCENE_TEXT))
        self.grid_item.setData(pos=grid, color=_solid_rgba(SCENE_GRID, 0.28, len(grid)), width=1.0, mode="lines")
        self.axes_item.setData(pos=edges, color=_solid_rgba(SCENE_GRID, 0.9, len(edges)), width=1.4, mode="lines")
        self.glview.set_labels(labels)

    def _equilibria_shown(self) -> list:
        """(equilibrium, its point on the three axes) of each equilibrium drawn: found for the values in use,
        with coordinates on the axes, and not far beyond the runs (FAR)."""
        s = self.system
        if s is None or not self.equilibria:
            return []
        names, p = self.axes(), self.session.param_vector()
        wrapped = self._wrapped_columns()
        out = []
        for eq in self.equilibria:
            found = equilibrium_coordinates(s, eq, names, p)
            if found is None:
                continue
            point = np.array(found[1], dtype=float)
            point[wrapped] = wrap(point[wrapped])
            if np.all(np.isfinite(point)):
                out.append((eq, point))
        runs = [a for a in getattr(self, "_runs_xyz", []) if a is not None and np.isfinite(a).all(axis=1).any()]
        if runs and out:
            box = np.array(data_box(runs, pad=0.0))
            span = np.maximum(box[:, 1] - box[:, 0], 1e-12)
            out = [(eq, x) for eq, x in out
                   if np.all((x >= box[:, 0] - FAR * span) & (x <= box[:, 1] + FAR * span))]
        return out

    def _equilibrium_xyz(self):
        shown = self._equilibria_shown()
        return np.array([x for _eq, x in shown], dtype=float) if shown else None

    def _draw_equilibria(self) -> None:
        shown = self._equilibria_shown()
        if not shown:
            self.eq_item.setVisible(False)
            return
        pts = np.array([x for _eq, x in shown], dtype=float)
        chosen = [eq is self.selected_equilibrium for eq, _x in shown]
        sizes = [15.0 if c else 9.0 for c in chosen]
        colours = [rgba(QColor(SERIES_COLOURS[1][1]), 1.0) if c else rgba(SCENE_MARKER, 0.9) for c in chosen]
        self.eq_item.setData(pos=self._to_box(pts), size=np.array(sizes),
                             color=np.array(colours, dtype=np.float32))
        self.eq_item.setVisible(True)

    def _cycle_xyz(self):
        """The limit cycle of the cycle view on the three axes (None: none, or not on these axes)."""
        if self.system is None:
            return None
        cols = cycle_columns(self.system, self.session.current_cycle(), self.session.param_vector())
        names = self.axes()
        if not all(n in cols for n in names):
            return None
        return np.column_stack([wrap(cols[n]) if k in self._wrapped_columns() else cols[n] for k, n in enumerate(names)])

    def _draw_cycle(self) -> None:
        """The limit cycle of the cycle view, bold and in the highlight colour (a map's: its points)."""
        pos = self._cycle_xyz()
        if pos is None:
            self.cycle_item.setVisible(False)
            return
        colour = _solid(SERIES_COLOURS[1][1], 1.0, len(pos))
        mode = "lines"
        if self.system.kind != "map":
            pos, colour, mode = self._line_data(pos, colour)
        self.cycle_item.setData(pos=self._to_box(pos), color=colour, width=3.0, mode=mode)
        self.cycle_item.setVisible(True)

    def _update_cursor(self, t: float) -> None:
        traj = self.trajectory
        xyz = getattr(self, "_main_xyz", None)
        if xyz is not None and (traj is None or xyz.shape[0] != traj.time.size):
            xyz = None
        if xyz is None or not np.isfinite(t):
            self.cursor_item.setVisible(False)
            return
        (point,) = values_at_time(traj.time, t, traj.kind == "map", xyz)
        point = np.array(point, dtype=float)
        for k in self._wrapped_columns():
            point[k] = wrap(point[k])
        if not np.all(np.isfinite(point)):
            self.cursor_item.setVisible(False)
            return
        self.cursor_item.setData(pos=self._to_box(point.reshape(1, 3)), size=12.0, color=rgba(SCENE_MARKER, 1.0))
        self.cursor_item.setVisible(True)

    def changeEvent(self, event) -> None:
        super().changeEvent(event)
        if event.type() == QEvent.Type.FontChange:
            self._draw_frame()


VIEW = PhaseSpace3DView
