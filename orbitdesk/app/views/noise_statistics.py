"""Noise statistics: the histogram of a state over the realisations of a model with noise, at one time
or over the stationary part (``analyses.noise_statistics``), with a Gaussian of the same mean and
spread drawn over it for comparison. The realisations come with the run; nothing is integrated here."""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt

from orbitdesk.analyses.noise_statistics import AT_TIME, STATIONARY, histogram
from orbitdesk.app.plots.plot_style import NumberBox, hint_label
from orbitdesk.app.views import empty_hint, muted_colour, series_colour, style_plot
from orbitdesk.app.views.common import (SessionView, combo_box, control_row, fill_combo, push_button, quiet,
                                        select_text, set_quietly, status_label)

MODES = ((STATIONARY, "Over the stationary part, from t ="), (AT_TIME, "At the time t ="))


class NoiseStatisticsView(SessionView):
    view_id = "noise_statistics"
    title = "Noise statistics"

    def __init__(self, session, parent=None):
        super().__init__(session, parent)
        self.trajectory = None
        self.result = None  # the Histogram shown
        self._user_time = False
        self.state = combo_box("The state whose distribution is shown", (), self._redraw)
        self.mode = combo_box("Pool every sample from a time on (the stationary part: the start has been "
                              "forgotten), or take one value per realisation at one time",
                              [label for _, label in MODES], self._on_mode)
        self.time = NumberBox(0.0, -1e12, 1e12, step=1.0)
        self.time.setToolTip("Where the stationary part starts, or the time of the histogram")
        self.time.valueChanged.connect(self._on_time)
        self.at_cursor = push_button("At cursor", "Take the time of the time cursor", self._take_cursor)
        self.summary = status_label()
        self.hint = hint_label()

        self.plot_widget = pg.PlotWidget()
        self.plot = self.plot_widget.getPlotItem()
        self.plot_widget.setToolTip("Bars: the share of values in each bin (a density); line: a Gaussian with the "
                                    "same mean and standard deviation")
        self.bars = pg.PlotDataItem(stepMode="center", fillLevel=0)
        self.gauss = pg.PlotDataItem()
        self.plot.addItem(self.bars)
        self.plot.addItem(self.gauss)
        self.plot.setLabel("left", "density")
        self.empty = empty_hint(self.plot, "For a model with noise: write noise in an equation, as in x' = -x + s*noise")

        layout = self.main_layout()
        layout.addLayout(control_row("State", self.state, 8, self.mode, self.time, self.at_cursor))
        layout.addWidget(self.summary)
        layout.addWidget(self.plot_widget, 1)
        self._restyle()
        self.follow_session(trajectory=self._on_trajectory)

    # ------------------------------------------------------------ view protocol
    def view_settings(self) -> dict:
        return {"state": self.state.currentText(), "mode": self._mode(), "time": float(self.time.value())}

    def apply_view_settings(self, d: dict) -> None:
        if not isinstance(d, dict):
            return
        with quiet(self.mode, self.time):
            modes = [m for m, _ in MODES]
            if d.get("mode") in modes:
                self.mode.setCurrentIndex(modes.index(d["mode"]))
            if isinstance(d.get("time"), (int, float)) and not isinstance(d.get("time"), bool):
                self.time.setValue(float(d["time"]))
                self._user_time = True
        self._wanted_state = d.get("state") if isinstance(d.get("state"), str) else None
        if self._wanted_state:
            select_text(self.state, self._wanted_state)
        self._redraw()

    def export_data(self):
        r = self.result
        if r is None:
            return None
        centres = (r.edges[:-1] + r.edges[1:]) / 2
        return [r.state, "density"], np.column_stack([centres, r.density])

    # ------------------------------------------------------------ session
    def _on_project_loaded(self) -> None:
        self._user_time = False
        self.apply_view_settings(self.saved_view_settings())

    def _on_system(self, system) -> None:
        self.system = system
        current = self.state.currentText() or getattr(self, "_wanted_state", None)
        with quiet(self.state):
            fill_combo(self.state, list(system.states))
            if current:
                select_text(self.state, current)
        self._redraw()

    def _on_trajectory(self, trajectory) -> None:
        self.trajectory = trajectory
        R = trajectory.realisations if trajectory is not None else None
        if R is not None and not self._user_time:
            default = R.time[0] + (R.time[-1] - R.time[0]) / 2 if self._mode() == STATIONARY else R.time[-1]
            set_quietly(self.time, float(default))
        self._redraw()

    # ------------------------------------------------------------ controls
    def _mode(self) -> str:
        return MODES[max(0, self.mode.currentIndex())][0]

    def _on_mode(self, _index=None) -> None:
        self._user_time = False
        self._on_trajectory(self.trajectory)

    def _on_time(self, _value=None) -> None:
        self._user_time = True
        self._redraw()

    def _take_cursor(self) -> None:
        t = self.session.time_cursor
        if np.isfinite(t):
            self.time.setValue(float(t))

    # ------------------------------------------------------------ drawing
    def _redraw(self, *_args) -> None:
        R = self.trajectory.realisations if self.trajectory is not None else None
        name = self.state.currentText()
        self.result = None
        if R is None or name not in R.state_names:
            self.bars.setData([], [])
            self.gauss.setData([], [])
            self.empty.setVisible(True)
            self.summary.setText("" if R is None else "Choose a state")
            return
        self.empty.setVisible(False)
        self.result = histogram(R, name, self._mode(), float(self.time.value()))
        if self.result is None:
            self.bars.setData([], [])
            self.gauss.setData([], [])
            self.summary.setText("No finite values there (every realisation blew up)")
            return
        r = self.result
        self.bars.setData(r.edges, r.density)
        if r.std > 0:
            x = np.linspace(r.edges[0], r.edges[-1], 200)
            self.gauss.setData(x, np.exp(-0.5 * ((x - r.mean) / r.std) ** 2) / (r.std * np.sqrt(2 * np.pi)))
        else:
            self.gauss.setData([], [])
        self.plot.setLabel("bottom", name)
        self.summary.setText(r.describe() + "; dashed: a Gaussian with that mean and standard deviation")
        self.plot.enableAutoRange()

    def fit_view(self) -> None:
        self.plot.enableAutoRange()
        self.plot.autoRange()

    def _restyle(self) -> None:
        style_plot(self.plot_widget, self)
        colour = series_colour(0, self)
        fill = pg.mkColor(colour)
        fill.setAlpha(110)
        self.bars.setPen(pg.mkPen(colour, width=1))
        self.bars.setBrush(pg.mkBrush(fill))
        self.gauss.setPen(pg.mkPen(muted_colour(self), width=1.5, style=Qt.PenStyle.DashLine))


VIEW = NoiseStatisticsView
