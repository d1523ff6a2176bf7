"""Basins of attraction: a grid of starts in two states coloured by the attractor each reaches
(``core.basins``, on the ensemble engine as a job with progress and Cancel), escape in grey; for a forced
flow, once per forcing period (the stroboscopic basins). Over it, the stable manifolds of the saddles of a
two-state flow (``core.manifolds``), which are the basin boundaries. A click on a cell runs the orbit from
that start (drawn over the map, and started in the phase views too). The result is kept in the project."""

from __future__ import annotations

import html

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QColor
from PySide6.QtWidgets import QFrame, QLabel, QScrollArea, QSizePolicy

from orbitdesk.app.views import SERIES_COLOURS, empty_hint, is_dark, style_plot
from orbitdesk.app.plots.plot_style import JobStrip, NumberBox, number_text, plain_axes
from orbitdesk.app.views.common import (apply_numbers, check_box, clicked_point, control_row, push_button,
                                        set_quietly, status_label, status_row)
from orbitdesk.app.views.grid_axes import GridAxes, GridView, grid_rect
from orbitdesk.app.views.method_step import MethodStep

ESCAPE_COLOUR = "#9a9a9a"
MAX_SIDE = 300
ORBIT_SAMPLES = 4000  # of the orbit run from a clicked cell
FIGURE_ENTRIES = 8   # attractors named under an exported figure (the rest counted in one line)
LEGEND_LINES = 6     # lines of the attractor list in sight under the map (the rest scrolls)


class BasinsView(GridView):
    view_id = "basins"
    title = "Basins of attraction"
    result_kind = "basins"

    resultChanged = Signal(object)  # BasinResult or None
    orbitChanged = Signal(object)   # the run from a clicked cell (Trajectory) or None

    def __init__(self, session, parent=None):
        super().__init__(session, parent)
        self.manifold_items: list = []
        self._user_period = False
        self._auto_strobe = False  # the strobe was ticked because the flow is forced (not by the user)
        self.axes = GridAxes("state", {"x": (-2.0, 2.0, 80), "y": (-2.0, 2.0, 60)}, MAX_SIDE)
        self.transient = NumberBox(200.0, 0.0, 1e9, step=10.0)
        self.transient.setToolTip("Time (flows) or iterations (maps) before looking where a start has gone")
        self.strobe = check_box("Once per forcing period", "The stroboscopic basins of a forced flow: look at "
                                "each start once per forcing period")
        self.period = NumberBox(2 * np.pi, 1e-9, 1e9, step=0.1)
        self.period.setToolTip("The forcing period")
        self.period.valueChanged.connect(lambda _v: setattr(self, "_user_period", True))
        self.strobe.clicked.connect(lambda _on: setattr(self, "_auto_strobe", False))
        self.integration = MethodStep("How each start is integrated: Automatic takes Dormand–Prince 8(5,3) with "
                                      "the run's tolerances, each start with its own step; or another adaptive "
                                      "method; or classical Runge–Kutta at a fixed step. (The stiff methods run "
                                      "one orbit at a time, not every start together: not offered here.)",
                                      "The fixed step of classical Runge–Kutta (a forcing period is divided "
                                      "exactly)", stiff=False)
        self.manifolds = check_box("Saddle manifolds", "Draw the stable manifolds of the saddles (two-state "
                                   "flows): the edges of the basins", True, self._manifolds_toggled)
        self.run_button = push_button("Compute", "Run every start and colour it by where it goes", self.compute)
        self.strip = JobStrip(session, "Basins")
        self.info = status_label()
        self.legend = QLabel()
        self.legend.setWordWrap(True)
        self.legend.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)
        # the attractor list scrolls below a few lines: a map with many attractors must not push the map
        # out of the view (it once grew the window past the screen)
        self.legend_scroll = QScrollArea()
        self.legend_scroll.setWidget(self.legend)
        self.legend_scroll.setWidgetResizable(True)
        self.legend_scroll.setFrameShape(QFrame.Shape.NoFrame)
        self.legend_scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.legend_scroll.setMaximumHeight(LEGEND_LINES * self.fontMetrics().lineSpacing() + 4)
        self.legend_scroll.setSizePolicy(QSizePolicy.Policy.Preferred, QSizePolicy.Policy.Maximum)

        self.plot_widget = pg.PlotWidget()
        self.plot = self.plot_widget.getPlotItem()
        plain_axes(self.plot)
        self.image = pg.ImageItem(axisOrder="row-major")
        self.plot.addItem(self.image)
        self.centres = pg.ScatterPlotItem(size=9, symbol="o")
        self.plot.addItem(self.centres)
        self.orbit_item = pg.PlotDataItem(connect="finite")
        self.orbit_item.setToolTip("The orbit from the clicked start")
        self.orbit_start = pg.ScatterPlotItem(size=10, symbol="s")
        for item in (self.orbit_item, self.orbit_start):
            self.plot.addItem(item, ignoreBounds=True)
        self.orbit = None
        self.plot_widget.scene().sigMouseClicked.connect(self._on_click)
        self.plot_widget.setToolTip("Click a cell to run the orbit from that start")
        self.empty = empty_hint(self.plot, "Compute colours each start by the attractor it reaches")

        layout = self.main_layout()
        layout.addLayout(self.axes.row("x", "starts", None, self.run_button, stretch=False))
        layout.addLayout(self.axes.row("y", "starts"))
        layout.addLayout(control_row("Settle for", self.transient, *self.integration.widgets(), 8, self.strobe,
                                     self.period, 8, self.manifolds))
        layout.addLayout(status_row(self.info, self.strip))
        layout.addWidget(self.plot_widget, 1)
        layout.addWidget(self.legend_scroll)
        self._restyle()
        self.follow_session(values=self._on_values)

    # ------------------------------------------------------------ view protocol
    def view_settings(self) -> dict:
        return {**self.axes.settings(), "transient": float(self.transient.value()), "strobe": self.strobe.isChecked(),
                "period": float(self.period.value()), "manifolds": self.manifolds.isChecked(),
                **self.integration.settings()}

    def apply_view_settings(self, d: dict) -> None:
        if not isinstance(d, dict):
            return
        apply_numbers(d, ((self.transient, "transient", float), (self.period, "period", float)))
        self._user_period = isinstance(d.get("period"), (int, float))
        if isinstance(d.get("strobe"), bool):
            set_quietly(self.strobe, d["strobe"])
        if isinstance(d.get("manifolds"), bool):
            set_quietly(self.manifolds, d["manifolds"])
        if "method" in d or "dt" in d:  # (saved before the method choice: the control keeps "Automatic")
            self.integration.apply(d)
        self._want_axes(d)

    # ------------------------------------------------------------ public
    def compute(self) -> None:
        s = self.system
        if s is None or s.n_states < 2:
            self.info.setText("Basins need a model with at least two states")
            return
        try:
            xn, xs, yn, ys = self.axes.chosen()
        except ValueError as e:
            self.info.setText(str(e))
            return
        from orbitdesk.analyses.basins import BasinSettings, basins

        settings = BasinSettings(transient=float(self.transient.value()), dt=self.integration.step(),
                                 method=self.integration.method_name(), rtol=float(self.session.solver.rtol),
                                 atol=float(self.session.solver.atol))
        if s.kind != "map" and self.strobe.isChecked():
            settings.period = float(self.period.value())
        p, u0 = self.session.param_vector(), self.session.initial_vector()

        def job(cancel, report):
            return basins(s, xn, xs, yn, ys, settings, u0=u0, p=p, cancel=cancel, progress=report)

        self._run_grid("basins", job, f"Running {xs.size * ys.size:,} starts")

    # ------------------------------------------------------------ session events
    def _on_system(self, system) -> None:
        self.system = system
        self.axes.offer(system.states)
        self.axes.apply_wanted()
        self.strobe.setEnabled(system.kind != "map")
        self.integration.set_hidden(system.kind == "map")
        self._on_values()
        self.show_document_result()

    def _on_values(self) -> None:
        super()._on_values()
        self._strobe_if_forced()

    def _strobe_if_forced(self) -> None:
        """A forced flow is looked at once per forcing period unless the user chose otherwise; a forcing switched
        off by its parameter (its amplitude at 0) leaves an autonomous flow, looked at in time (its equilibria)."""
        s = self.system
        if s is None or s.kind == "map" or s.autonomous:
            return
        forced = not s.autonomous_at(self.session.param_vector())
        if forced and not self.strobe.isChecked() and not self._user_period:
            set_quietly(self.strobe, True)
            self._auto_strobe = True
        elif not forced and self.strobe.isChecked() and self._auto_strobe:
            set_quietly(self.strobe, False)
            self._auto_strobe = False

    def show_result(self, result) -> None:
        if result.x_name not in self.system.states or result.y_name not in self.system.states:
            raise ValueError("the kept basins are over states the model no longer has")
        if result.labels.shape != (result.ys.size, result.xs.size) or any(
                not isinstance(a.get("label"), int) or not isinstance(a.get("centre"), dict) for a in result.attractors):
            raise ValueError("the kept basins do not fit together")
        self._show(result)
    # ------------------------------------------------------------ results
    def _adopt(self, result) -> None:
        super()._adopt(result)
        self._request_manifolds()

    def colour_of(self, label: int) -> QColor:
        if label < 0:
            return QColor(ESCAPE_COLOUR)
        light, dark = SERIES_COLOURS[label % len(SERIES_COLOURS)]
        return QColor(dark if is_dark(self) else light)

    def _show(self, result) -> None:
        self._show_orbit(None)
        for item in self.manifold_items:
            self.plot.removeItem(item)
        self.manifold_items = []
        if result is None:
            self.image.clear()
            self.centres.setData([], [])
            self.legend.setText("")
            self.empty.setVisible(True)
            self.resultChanged.emit(None)
            return
        self.empty.setVisible(False)
        labels = result.labels
        rgba = np.zeros(labels.shape + (4,), dtype=np.ubyte)
        for label in np.unique(labels):
            c = self.colour_of(int(label))
            rgba[labels == label] = (c.red(), c.green(), c.blue(), 255 if label >= 0 else 150)
        xs, ys = result.xs, result.ys
        self.image.setImage(rgba, autoLevels=False)
        self.image.setRect(grid_rect(xs, ys))
        self.plot.setLabel("bottom", result.x_name)
        self.plot.setLabel("left", result.y_name)
        points = [(a["centre"].get(result.x_name), a["centre"].get(result.y_name), a["label"])
                  for a in result.attractors if a["kind"] in ("equilibrium", "fixed point", "period-1 response")]
        self.centres.setData([p[0] for p in points], [p[1] for p in points],
                             brush=[pg.mkBrush("w") for _ in points],
                             pen=[pg.mkPen(self.colour_of(p[2]).darker(160), width=2) for p in points])
        rows = [f"<span style='color:{colour.name()}'>■</span> {text}" for colour, text in self.figure_legend(None, result)]
        what = "stroboscopic basins, once per forcing period" if result.stroboscopic else "basins"
        if getattr(result, "method", ""):
            what += f", integrated by {method_words(result.method)}"
        self.legend.setText(f"<b>{len(result.attractors)} attractor{'s' if len(result.attractors) != 1 else ''}"
                            f"</b> ({what})<br>" + "<br>".join(rows))
        self.plot.autoRange(padding=0.02)
        self.resultChanged.emit(result)

    def figure_legend(self, most: int | None = FIGURE_ENTRIES, result=None) -> list[tuple[QColor, str]]:
        """(colour, words) of each attractor of the result shown, the largest basins first, then escape: the
        legend under the map on screen and under an exported figure (``most`` entries there, the rest
        counted in one line)."""
        r = result if result is not None else self.result
        if r is None:
            return []
        entries = [(self.colour_of(a["label"]), f"{attractor_text(a)}: {a['share'] * 100:.0f}% of the starts", a["share"])
                   for a in sorted(r.attractors, key=lambda a: -a["share"])]
        if most is not None and len(entries) > most:
            rest = entries[most - 1:]
            entries = entries[:most - 1] + [(QColor(self.palette().color(self.foregroundRole())),
                                             f"{len(rest)} more attractors: {sum(e[2] for e in rest) * 100:.0f}% "
                                             f"of the starts", 0.0)]
        out = [(c, text) for c, text, _share in entries]
        escaped = float(np.mean(r.labels < 0))
        if escaped:
            out.append((QColor(ESCAPE_COLOUR), f"escape (ran off or failed): {escaped * 100:.0f}%"))
        return out

    # ------------------------------------------------------------ saddle manifolds
    def _manifolds_toggled(self, on: bool) -> None:
        for item in self.manifold_items:
            item.setVisible(on)
        if on and not self.manifold_items:
            self._request_manifolds()

    def _request_manifolds(self) -> None:
        s, r = self.system, self.result
        if (s is None or r is None or not self.manifolds.isChecked() or s.kind == "map" or s.n_states != 2
                or not s.autonomous_at(self.session.param_vector())):
            return
        from orbitdesk.analyses.equilibria import find_equilibria
        from orbitdesk.analyses.manifolds import is_planar_saddle, saddle_manifolds

        p = self.session.param_vector()
        box = {r.x_name: (float(r.xs[0]), float(r.xs[-1])), r.y_name: (float(r.ys[0]), float(r.ys[-1]))}

        def job(cancel, report):
            eqs = find_equilibria(s, p, box=box, cancel=cancel, progress=report.part(0.0, 0.3))
            saddles = [eq for eq in eqs if is_planar_saddle(s, eq)]
            out = []
            for k, eq in enumerate(saddles):
                out.append(saddle_manifolds(s, eq, p, box=box, cancel=cancel,
                                            progress=report.part(0.3 + 0.7 * k / len(saddles), 0.7 / len(saddles))))
            return out

        self.session.run_job("basins.manifolds", job, self._draw_manifolds, label="Saddle manifolds over the basins")

    def _draw_manifolds(self, found) -> None:
        r, s = self.result, self.system
        if r is None or s is None:
            return
        ix, iy = s.states.index(r.x_name), s.states.index(r.y_name)
        pen = pg.mkPen("k" if not is_dark(self) else "w", width=2)
        for m in found:
            for branch in m.stable:
                item = pg.PlotDataItem(branch.points[ix], branch.points[iy], pen=pen)
                item.setToolTip("A stable manifold of a saddle: a basin boundary")
                self.plot.addItem(item, ignoreBounds=True)
                self.manifold_items.append(item)
        self.info.setText(f"{sum(len(m.stable) for m in found)} stable manifold branches of "
                          f"{len(found)} saddle{'s' if len(found) != 1 else ''} drawn" if found else "")

    # ------------------------------------------------------------ the orbit from a clicked cell
    def _on_click(self, event) -> None:
        r, s = self.result, self.system
        point = clicked_point(self.plot, event)
        if r is None or s is None or point is None or r.x_name not in s.states or r.y_name not in s.states:
            return
        i = cell_index(r.xs, float(point.x()))
        j = cell_index(r.ys, float(point.y()))
        if i is None or j is None:
            return
        event.accept()
        self.start_orbit(float(r.xs[i]), float(r.ys[j]))

    def start_orbit(self, x: float, y: float) -> None:
        """Run the orbit from the start (x, y) of the map (the other states at their initial values) over the
        map's settling time, draw it over the map and start it in the phase views too."""
        s, r = self.system, self.result
        u0 = self.session.initial_vector().astype(float)
        u0[s.states.index(r.x_name)], u0[s.states.index(r.y_name)] = x, y
        settings = self.session.run_settings(samples=ORBIT_SAMPLES)
        span = max(float(self.transient.value()), settings.t_end - settings.t_start)
        if s.kind == "map":
            span = float(int(span))
        settings = self.session.run_settings(samples=ORBIT_SAMPLES, t_end=settings.t_start + span, transient=0.0)
        p = self.session.param_vector()

        def job(cancel, report):
            from orbitdesk.engine.runs import simulate

            return simulate(s, settings, u0, p, cancel=cancel, progress=report)

        self._show_orbit(None)
        self.orbit_start.setData([x], [y], brush=pg.mkBrush("w"), pen=pg.mkPen("k", width=1.5))
        self.session.run_job("basins.orbit", job, self._show_orbit, label="Orbit from the clicked start")
        self.session.note_clicked_start(u0)
        self.session.request_starts([{"u0": u0.tolist()}])

    def _show_orbit(self, run) -> None:
        self.orbit = run
        r = self.result
        if run is None or r is None or run.time.size == 0:
            self.orbit_item.setData([], [])
            if run is None:
                self.orbit_start.setData([], [])
            self.orbitChanged.emit(None)
            return
        x, y = run.series(r.x_name), run.series(r.y_name)
        pen = pg.mkPen("w" if is_dark(self) else "k", width=1.6)
        if run.kind == "map":
            self.orbit_item.setData(x, y, pen=None, symbol="o", symbolSize=3, symbolPen=None,
                                    symbolBrush=pen.color())
        else:
            self.orbit_item.setData(x, y, pen=pen, symbol=None)
        self.orbitChanged.emit(run)

    def _restyle(self) -> None:
        style_plot(self.plot_widget, self)


def method_words(name: str) -> str:
    """A method of the registry by its label (classical Runge–Kutta: at a fixed step)."""
    from orbitdesk.engine.methods import METHODS

    info = METHODS.get(name)
    if info is None:
        return html.escape(name)
    return html.escape(info.label) + ("" if info.adaptive else " at a fixed step")


def cell_index(values, v: float):
    """The index of the grid value nearest ``v``, or None when ``v`` lies outside the grid's cells."""
    values = np.asarray(values, dtype=float)
    if values.size == 1:
        return 0
    half = abs(values[-1] - values[0]) / (values.size - 1) / 2
    if not min(values[0], values[-1]) - half <= v <= max(values[0], values[-1]) + half:
        return None
    return int(np.argmin(np.abs(values - v)))


def attractor_text(a: dict) -> str:
    """One attractor of a basin map in words (HTML-escaped): what it is, its period, where it lies."""
    where = ", ".join(f"{html.escape(str(k))} ≈ {number_text(v if abs(v) > 1e-7 else 0.0, 4)}"
                      for k, v in a["centre"].items() if isinstance(v, (int, float)))  # round-off shown as 0
    kind = html.escape(str(a.get("kind", "")))
    if isinstance(a.get("period"), float) and a.get("multiplier") is not None:  # a cycle of an autonomous flow
        m = a["multiplier"]
        return (f"{kind} of period {number_text(a['period'], 5)} (largest Floquet multiplier "
                f"{number_text(m if abs(m) > 1e-12 else 0.0, 3)}), around ({where})")
    return f"{kind} near ({where})"


VIEW = BasinsView
