"""Two-parameter map: the largest Lyapunov exponent (``core.sweep.lyapunov_grid``) or the period of the
attractor (``core.parameter_maps.period_grid``) over a grid of two parameters, as a coloured map with a
colour bar. Maps and forced flows: the period in iterations or forcing periods; autonomous flows: maxima per
cycle (doublings) with the cycle's period in time, equilibria apart. Clicking the map sets both parameters
there; a cross marks the values now set."""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QFontMetrics
from PySide6.QtWidgets import QLabel, QSpinBox, QStackedWidget

from orbitdesk.app.plots.plot_style import name_bar, style_colour_bar
from orbitdesk.app.views import empty_hint, muted_colour, style_plot
from orbitdesk.app.plots.plot_style import JobStrip, NumberBox, number_text, plain_axes, round_significant
from orbitdesk.app.views.common import (apply_numbers, clicked_point, combo_box, control_row, push_button, row_widget,
                                        status_label, status_row)
from orbitdesk.app.views.grid_axes import GridAxes, GridView, grid_rect

LYAPUNOV, PERIOD = "lyapunov", "period"
WHATS = (LYAPUNOV, PERIOD)
WHAT_LABELS = {LYAPUNOV: "largest Lyapunov exponent", PERIOD: "period of the attractor"}
MAX_SIDE = 400
BAR_AXIS_WIDTH = 45  # pyqtgraph's width of a colour bar's axis: tick, about 20 px of text, the axis name



class ParameterMapView(GridView):
    view_id = "parameter_map"
    title = "Two-parameter map"
    result_kind = "parameter_map"

    resultChanged = Signal(object)  # LyapunovGrid / PeriodGrid, or None

    def __init__(self, session, parent=None):
        super().__init__(session, parent)
        self._user_period = False
        self.what = combo_box("What is coloured at each pair of values", [WHAT_LABELS[w] for w in WHATS],
                              self._on_what)
        self.axes = GridAxes("parameter", {"x": (0.0, 1.0, 60), "y": (0.0, 1.0, 40)}, MAX_SIDE)
        for key in ("x", "y"):
            self.axes.combo[key].currentIndexChanged.connect(lambda _i, key=key: self._default_range(key))
        self.transient = NumberBox(200.0, 0.0, 1e9, step=10.0)
        self.transient.setToolTip("Time (flows) or iterations (maps) dropped before measuring")
        self.duration = NumberBox(500.0, 1.0, 1e9, step=100.0)
        self.duration.setToolTip("Averaging time (flows) or iterations (maps) of the exponent")
        self.max_period = QSpinBox()
        self.max_period.setRange(1, 256)
        self.max_period.setValue(16)
        self.max_period.setToolTip("The longest period looked for; longer or no period is coloured as 'none'")
        self.period = NumberBox(2 * np.pi, 1e-9, 1e9, step=0.1)
        self.period.setToolTip("Forcing period of a flow: the period is counted in these")
        self.period.valueChanged.connect(lambda _v: setattr(self, "_user_period", True))
        self.period_label = QLabel("forcing period")
        self.duration_page = row_widget("average over", self.duration)
        self.period_page = row_widget("up to", self.max_period, self.period_label, self.period)
        self.what_stack = QStackedWidget()
        self.what_stack.addWidget(self.duration_page)
        self.what_stack.addWidget(self.period_page)
        self.run_button = push_button("Compute", "Compute the map for the values now set", self.compute)
        self.strip = JobStrip(session, "Mapping")
        self.info = status_label()

        self.plot_widget = pg.PlotWidget()
        self.plot = self.plot_widget.getPlotItem()
        plain_axes(self.plot)
        self.plot_widget.setToolTip("Click to set both parameters there")
        self.image = pg.ImageItem(axisOrder="row-major")
        self.plot.addItem(self.image)
        self.marker = pg.ScatterPlotItem(size=14, symbol="+", pen=pg.mkPen("k", width=2))
        self.plot.addItem(self.marker, ignoreBounds=True)
        self.colour_bar = pg.ColorBarItem(values=(0, 1), width=14, interactive=False)
        self.colour_bar.setImageItem(self.image, insert_in=self.plot)
        self.colour_bar.getAxis("right").enableAutoSIPrefix(False)  # plain numbers, no "(x0.001)"
        self.plot.getViewBox().sigResized.connect(lambda *_a: self._name_bar())
        self.empty = empty_hint(self.plot, "Compute draws the map; click it to set both parameters")
        self.plot_widget.scene().sigMouseClicked.connect(self._on_click)

        layout = self.main_layout()
        layout.addLayout(control_row("Colour by", self.what, 8, self.what_stack, None, self.run_button,
                                     stretch=False))
        layout.addLayout(self.axes.row("x", "values", spacing=4))
        layout.addLayout(self.axes.row("y", "values", 8, "settle for", self.transient, spacing=4))
        layout.addLayout(status_row(self.info, self.strip))
        layout.addWidget(self.plot_widget, 1)
        self._restyle()
        self.follow_session(values=self._on_values)

    # ------------------------------------------------------------ view protocol
    def view_settings(self) -> dict:
        return {"what": WHATS[self.what.currentIndex()], **self.axes.settings(),
                "transient": float(self.transient.value()), "duration": float(self.duration.value()),
                "max_period": self.max_period.value(), "period": float(self.period.value())}

    def apply_view_settings(self, d: dict) -> None:
        if not isinstance(d, dict):
            return
        if d.get("what") in WHATS:
            self.what.setCurrentIndex(WHATS.index(d["what"]))
        apply_numbers(d, ((self.transient, "transient", float), (self.duration, "duration", float),
                          (self.max_period, "max_period", int), (self.period, "period", float)))
        self._user_period = isinstance(d.get("period"), (int, float))
        self._want_axes(d)

    # ------------------------------------------------------------ public
    def compute(self) -> None:
        s = self.system
        if s is None or len(s.parameters) < 2:
            self.info.setText("A two-parameter map needs a model with two parameters")
            return
        try:
            xn, xs, yn, ys = self.axes.chosen()
        except ValueError as e:
            self.info.setText(str(e))
            return
        p, u0 = self.session.param_vector(), self.session.initial_vector()
        what = WHATS[self.what.currentIndex()]
        transient = float(self.transient.value())
        if what == LYAPUNOV:
            from orbitdesk.analyses.sweep import GridSettings, accuracy_like, lyapunov_grid

            settings = GridSettings(transient=transient, duration=float(self.duration.value()),
                                    **accuracy_like(self.session.solver))

            def job(cancel, report):
                return lyapunov_grid(s, xn, xs, yn, ys, settings, u0=u0, p=p, cancel=cancel, progress=report)
        else:
            from orbitdesk.analyses.parameter_maps import period_grid
            from orbitdesk.analyses.sweep import STROBE, SweepSettings, accuracy_like

            settings = SweepSettings(transient=transient, **accuracy_like(self.session.solver))
            if self._forced():
                settings.mode, settings.period = STROBE, float(self.period.value())
            max_period = self.max_period.value()

            def job(cancel, report):
                return period_grid(s, xn, xs, yn, ys, settings, max_period=max_period, u0=u0, p=p,
                                   cancel=cancel, progress=report)
        self._run_grid("parameter_map", job, f"Mapping the {WHAT_LABELS[what]} over {xs.size} × {ys.size} values",
                       skip=[xn, yn])

    # ------------------------------------------------------------ session events
    def _on_system(self, system) -> None:
        self.system = system
        ranged = [n for n in system.parameters if None not in self.session.param_range(n)]
        self.axes.offer(system.parameters, (ranged + [n for n in system.parameters if n not in ranged])[:2])
        self._default_range("x")
        self._default_range("y")
        self.axes.apply_wanted()
        self._on_what()
        self._on_values()
        self.show_document_result()

    def show_result(self, result) -> None:
        if result.x_name not in self.system.parameters or result.y_name not in self.system.parameters:
            raise ValueError("the kept map is over parameters the model no longer has")
        if np.shape(getattr(result, "exponent", getattr(result, "period", None))) != (result.ys.size, result.xs.size):
            raise ValueError("the kept map does not fit together")
        self._show(result)

    def _on_values(self) -> None:
        super()._on_values()
        self._on_what()
        self._draw_marker()

    def _forced(self) -> bool:
        """A flow driven by the time (with its forcing on): its period is counted in forcing periods."""
        s = self.system
        return s is not None and s.kind != "map" and not s.autonomous_at(self.session.param_vector())

    def _on_what(self, _index=None) -> None:
        what = WHATS[self.what.currentIndex()]
        self.what_stack.setCurrentIndex(WHATS.index(what))
        forced = self._forced()
        self.period_label.setVisible(forced)
        self.period.setVisible(forced)

    def _default_range(self, key: str) -> None:
        name = self.axes.name(key)
        if not name or self.system is None:
            return
        lo, hi = self.session.param_range(name)
        value = self.session.params.get(name, 0.0)
        if lo is None or hi is None:
            lo, hi = (value - 1.0, value + 1.0) if value == 0 else (value * 0.5, value * 1.5)
        self.axes.set_range(key, lo, hi)

    # ------------------------------------------------------------ results
    def bar_names(self) -> tuple[str, ...]:
        """The colour bar's name, longest first: the longest that fits the bar's height is shown (on screen and
        in an exported figure: "largest Lyapunov exponent" was cut off beside a short map)."""
        r = self.result
        if r is None:
            return ("",)
        if hasattr(r, "exponent"):
            return ("largest Lyapunov exponent", "largest exponent", "\u03bb\u2081")
        return (f"period ({r.unit})", "period")

    def _name_bar(self) -> None:
        if self.result is not None:
            name_bar(self.colour_bar, self.bar_names())

    def _show(self, result) -> None:
        if result is None:
            self.image.clear()
            self.empty.setVisible(True)
            self.resultChanged.emit(None)
            return
        self.empty.setVisible(False)
        xs, ys = result.xs, result.ys
        if hasattr(result, "exponent"):
            data = np.asarray(result.exponent, dtype=float)
            span = float(np.nanmax(np.abs(data))) if np.isfinite(data).any() else 1.0
            span = span or 1.0
            self.colour_bar.setColorMap(pg.colormap.get("CET-D1"))
            self.colour_bar.setLevels((-span, span))  # zero in the middle: chaos red, order blue
            self.colour_bar.getAxis("right").setTicks(None)
            self._fit_bar_text([])
            finite = data[np.isfinite(data)]
            chaotic = int(np.sum(finite > 1e-3))
            self.info.setText(f"{chaotic} of {data.size} points with a positive exponent (red: chaos; blue: "
                              f"settling or periodic); blank: blew up")
        else:
            # coloured by log2 of the period, so a doubling cascade 1, 2, 4, 8 takes evenly spaced colours;
            # none up to the longest period looked for at the dark end (an equilibrium below it), a blow-up
            # left blank
            period = np.asarray(result.period)
            steady = period == -2
            data = np.full(period.shape, np.nan)
            data[period == 0] = -1.0
            data[steady] = -2.0
            data[period > 0] = np.log2(period[period > 0])
            top = float(np.log2(result.max_period))
            self.colour_bar.setColorMap(pg.colormap.get("turbo"))
            # half a band beyond the first and last: each category's colour is centred on its tick, and the
            # end ticks' text is not cut off at the ends of the bar
            self.colour_bar.setLevels((-2.5 if steady.any() else -1.5, top + 0.5))
            ticks = ([(-2.0, "equilibrium")] if steady.any() else []) + [(-1.0, "none")] + [
                (float(k), str(2 ** k)) for k in range(int(top) + 1)]
            self.colour_bar.getAxis("right").setTicks([ticks, []])
            self._fit_bar_text([label for _v, label in ticks])
            self.info.setText(period_summary(result))
        self.image.setImage(data, autoLevels=False)
        self.image.setRect(grid_rect(xs, ys))
        self.plot.setLabel("bottom", result.x_name)
        self.plot.setLabel("left", result.y_name)
        self._name_bar()
        self.plot.autoRange(padding=0.02)
        self._draw_marker()
        self.resultChanged.emit(result)

    def _fit_bar_text(self, labels) -> None:
        """The colour bar's axis wide enough for its longest tick text (pyqtgraph fixes it at 45 px and leaves
        out any text wider than that, such as "equilibrium")."""
        axis = self.colour_bar.getAxis("right")
        metrics = QFontMetrics(axis.style.get("tickFont") or axis.font())
        widest = max((metrics.horizontalAdvance(text) for text in labels), default=0)
        axis.setWidth(max(BAR_AXIS_WIDTH, widest + BAR_AXIS_WIDTH - 20))

    def _draw_marker(self) -> None:
        r = self.result
        if r is None or r.x_name not in self.session.params or r.y_name not in self.session.params:
            self.marker.setData([], [])
            return
        self.marker.setData([self.session.params[r.x_name]], [self.session.params[r.y_name]])

    def _on_click(self, event) -> None:
        r = self.result
        point = clicked_point(self.plot, event)
        if r is None or point is None:
            return
        x, y = float(point.x()), float(point.y())
        if not (min(r.xs[0], r.xs[-1]) <= x <= max(r.xs[0], r.xs[-1])
                and min(r.ys[0], r.ys[-1]) <= y <= max(r.ys[0], r.ys[-1])):
            return
        self.session.set_param(r.x_name, round_significant(x, 6))
        self.session.set_param(r.y_name, round_significant(y, 6))
        event.accept()

    def _restyle(self) -> None:
        style_plot(self.plot_widget, self)
        style_colour_bar(self.colour_bar, self)
        self.marker.setPen(pg.mkPen(muted_colour(self), width=2))


VIEW = ParameterMapView


def period_summary(result) -> str:
    """The commonest periods of a period map in words (with the periods in time of an autonomous flow)."""
    counts = {int(k): int(np.sum(result.period == k)) for k in np.unique(result.period) if k > 0}
    times = getattr(result, "time_period", None)
    parts = []
    for k, n in sorted(counts.items(), key=lambda kv: -kv[1])[:4]:
        text = f"period {k}: {n}"
        if times is not None:
            t = times[(result.period == k) & np.isfinite(times)]
            if t.size:
                lo, hi = number_text(float(t.min()), 4), number_text(float(t.max()), 4)
                text += f" (time {lo})" if lo == hi else f" (time {lo} to {hi})"
        parts.append(text)
    steady = int(np.sum(result.period == -2))
    if steady:
        parts.append(f"equilibrium: {steady}")
    return (f"In {result.unit}. {', '.join(parts) or 'no period found'}; none: no period up to "
            f"{result.max_period}; blank: blew up")
