"""Time series: chosen states and derived quantities against t (or n), or their power spectra."""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QSize, Qt
from PySide6.QtGui import QColor, QIcon, QPainter, QPixmap
from PySide6.QtWidgets import (QHBoxLayout, QLabel, QListWidget, QListWidgetItem, QSizePolicy, QToolButton,
                               QVBoxLayout)

from orbitdesk.analyses.spectra import mean_power_spectrum, power_spectrum, spectrum_extent
from orbitdesk.app.plots.event_marks import EventMarks, through_events
from orbitdesk.app.views import empty_hint, muted_colour, series_colour, style_plot
from orbitdesk.app.plots.data_overlay import TIME, DataOverlay
from orbitdesk.app.plots.plot_style import ScreenCurve
from orbitdesk.app.views.common import SessionView, check_box, control_row, run_time_name

LIST_WIDTH, LIST_MAX_WIDTH = 112, 240  # the list of series: its width, and the most its names may widen it


def swatch(colour: QColor, size: int = 12) -> QIcon:
    pix = QPixmap(size, size)
    pix.fill(Qt.GlobalColor.transparent)
    p = QPainter(pix)
    p.setRenderHint(QPainter.RenderHint.Antialiasing)
    p.setPen(Qt.PenStyle.NoPen)
    p.setBrush(colour)
    p.drawRoundedRect(1, 1, size - 2, size - 2, 3, 3)
    p.end()
    return QIcon(pix)


FAINT_REALISATIONS = 12  # a model with noise: realisations drawn faintly behind the mean


def _span(traj):
    t = traj.time
    return (float(t[0]), float(t[-1])) if t.size else None


class TimeSeriesView(SessionView):
    view_id = "timeseries"
    title = "Time series"

    def __init__(self, session, parent=None):
        super().__init__(session, parent)
        self.trajectory = None
        self._names: list[str] = []
        self._wanted: list[str] | None = None  # selection from view settings, applied when names are known
        self._curves: dict[str, pg.PlotDataItem] = {}
        self._moving_cursor = False
        self._fitted = True              # follows the data until the user pans or zooms
        self._refit_on_release = False
        self._spectrum_top: float | None = None  # the frequency the spectra are shown up to (spectrum_extent)

        self._noise_items: list = []  # realisations drawn faintly and the +-1 std bands (models with noise)
        self.series_list = QListWidget()
        self.series_list.setToolTip("Tick the quantities to plot")
        self.series_list.setFixedWidth(LIST_WIDTH)
        self.series_list.setIconSize(QSize(12, 12))
        self.series_list.itemChanged.connect(self._on_item_changed)

        self.log_y = check_box("Log scale", "Logarithmic vertical axis (values at or below zero are left out)",
                               False, self._on_mode)
        self.spectrum = check_box("Spectrum", "Show the power spectrum of each series instead of the series itself",
                                  False, self._on_mode)
        self.fit = QToolButton(text="Fit")
        self.fit.setToolTip("Zoom to show all the data")
        self.fit.clicked.connect(self.fit_view)
        self.note = QLabel()
        self.note.setStyleSheet("color: palette(placeholder-text);")
        self.note.setMinimumWidth(0)
        self.note.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)  # never widens the view

        self.plot_widget = pg.PlotWidget()
        self.plot_widget.setToolTip("")
        self.plot = self.plot_widget.getPlotItem()
        self.cursor = pg.InfiniteLine(angle=90, movable=True)
        self.cursor.setToolTip("Time cursor: drag to move it")
        self.cursor.sigPositionChanged.connect(self._on_cursor_dragged)
        self.cursor.setVisible(False)
        self.plot.addItem(self.cursor, ignoreBounds=True)
        self.empty_hint = empty_hint(self.plot, "The run of the model will be plotted here")
        self.plot.getViewBox().sigRangeChangedManually.connect(self._on_manual_range)
        session.heldChanged.connect(self._on_held)
        self.data_overlay = DataOverlay(session, self.plot, self._overlay_pairs)
        self.event_marks = EventMarks(self.plot)

        options = control_row(self.log_y, self.spectrum, None, self.note, self.fit, spacing=6, stretch=False)
        options.setStretchFactor(self.note, 10)  # the note takes the free room (it never widens the view)
        right = QVBoxLayout()
        right.setContentsMargins(0, 0, 0, 0)
        right.setSpacing(4)
        right.addLayout(options)
        right.addWidget(self.plot_widget, 1)
        layout = QHBoxLayout(self)
        layout.setContentsMargins(6, 6, 6, 6)
        layout.setSpacing(6)
        layout.addWidget(self.series_list)
        layout.addLayout(right, 1)

        self._restyle()
        self.follow_session(trajectory=self._on_trajectory, cursor=self._on_time_cursor)

    # ------------------------------------------------------------ view protocol
    def view_settings(self) -> dict:
        return {"series": self.checked(), "log_y": self.log_y.isChecked(), "spectrum": self.spectrum.isChecked()}

    def apply_view_settings(self, d: dict) -> None:
        if not isinstance(d, dict):
            return
        if isinstance(d.get("series"), list):
            self._wanted = [s for s in d["series"] if isinstance(s, str)]
            if self._names:
                self._set_checked(self._wanted)
        self.log_y.setChecked(bool(d.get("log_y", False)))
        self.spectrum.setChecked(bool(d.get("spectrum", False)))

    def export_data(self):
        """Full-resolution data of the ticked series (or their spectra in spectrum mode)."""
        traj, names = self.trajectory, self.checked()
        if traj is None or not names:
            return None
        R = traj.realisations
        if self.spectrum.isChecked():
            cols, freq = [], None
            for name in names:
                spec = (mean_power_spectrum(R.time, R.series(name)) if R is not None and name in R.state_names
                        else power_spectrum(traj.time, traj.series(name)))
                if spec is not None:
                    n = spec[0].size if freq is None else min(freq.size, spec[0].size)
                    freq = spec[0][:n]
                    cols = [c[:n] for c in cols] + [spec[1][:n]]
            if freq is None:
                return None
            return ["frequency"] + [f"power({n})" for n in names], np.column_stack([freq] + cols)
        if R is not None:  # each state: the first realisation, the mean and the standard deviation
            header, cols = [run_time_name(traj)], [R.time]
            for n in names:
                extra = n in R.state_names
                header += [n] + ([f"mean({n})", f"std({n})"] if extra else [])
                i = R.state_names.index(n) if extra else None
                cols += [traj.series(n)] + ([R.mean[i], R.std[i]] if extra else [])
            return header, np.column_stack(cols)
        return [run_time_name(traj)] + names, np.column_stack([traj.time] + [traj.series(n) for n in names])

    # ------------------------------------------------------------ selection
    def checked(self) -> list[str]:
        out = []
        for i in range(self.series_list.count()):
            item = self.series_list.item(i)
            if item.checkState() == Qt.CheckState.Checked:
                out.append(item.text())
        return out

    def set_series(self, names: list[str]) -> None:
        """Tick exactly these series."""
        self._set_checked(names)
        self.settings_changed()

    def _set_checked(self, names) -> None:
        self.series_list.blockSignals(True)
        for i in range(self.series_list.count()):
            item = self.series_list.item(i)
            item.setCheckState(Qt.CheckState.Checked if item.text() in names else Qt.CheckState.Unchecked)
        self.series_list.blockSignals(False)
        self._redraw()

    def _on_item_changed(self, _item) -> None:
        self._wanted = None
        self._redraw()

    def _on_system(self, system) -> None:
        names = list(system.states) + list(system.derived_names)
        if names == self._names:
            return
        keep = self._wanted if self._wanted is not None else self.checked()
        keep = [n for n in keep if n in names]
        if not keep:
            keep = list(system.states[:3])
        self._names = names
        self.series_list.blockSignals(True)
        self.series_list.clear()
        for i, name in enumerate(names):
            item = QListWidgetItem(swatch(series_colour(i, self)), name)
            item.setFlags(item.flags() | Qt.ItemFlag.ItemIsUserCheckable)
            item.setCheckState(Qt.CheckState.Checked if name in keep else Qt.CheckState.Unchecked)
            kind = "state" if name in system.states else "derived quantity"
            item.setToolTip(f"{name} ({kind})")
            self.series_list.addItem(item)
        self.series_list.blockSignals(False)
        # wide enough for the longest name (check box, swatch and scroll bar beside it), within reason
        longest = max((self.series_list.fontMetrics().horizontalAdvance(n) for n in names), default=0)
        self.series_list.setFixedWidth(int(min(LIST_MAX_WIDTH, max(LIST_WIDTH, longest + 64))))
        self._redraw(refit=True)

    def _on_project_loaded(self) -> None:
        self._names = []
        self.trajectory = None
        self.apply_view_settings(self.saved_view_settings())

    # ------------------------------------------------------------ drawing
    def _on_trajectory(self, trajectory) -> None:
        old = self.trajectory
        self.trajectory = trajectory
        refit = old is None or _span(old) != _span(trajectory) or self._fitted
        # while a slider is held the range stays (only the curves are drawn again); fitted on release
        self._refit_on_release = refit and self.session.held
        self._redraw(refit=refit and not self.session.held)

    def _on_held(self, held: bool) -> None:
        if not held and self._refit_on_release:
            self.fit_view()
        self._refit_on_release = False

    def _on_manual_range(self, *_args) -> None:
        self._fitted = False

    def _on_mode(self, _checked=None) -> None:
        self._redraw(refit=True)

    def _redraw(self, refit: bool = False) -> None:
        traj = self.trajectory
        names = self.checked()
        spectrum = self.spectrum.isChecked()
        for name in list(self._curves):
            if name not in names or traj is None:
                self.plot.removeItem(self._curves.pop(name))
        self.note.setText("")
        self.note.setToolTip("")
        for item in self._noise_items:
            self.plot.removeItem(item)
        self._noise_items = []
        log_y = self.log_y.isChecked() or spectrum
        if bool(self.plot.getAxis("left").logMode) != log_y:  # (each change redraws the axes)
            self.plot.setLogMode(x=False, y=log_y)
        time_label = run_time_name(traj) if traj is not None else "t"
        if spectrum:
            unit = "per step" if time_label == "n" else f"cycles per unit {time_label}"
            self.plot.setLabel("bottom", f"frequency ({unit})")
            self.plot.setLabel("left", "power")
        else:
            self.plot.setLabel("bottom", time_label)
            # one series: its name on the axis (a picture of the plot says what it shows; several: a legend)
            self.plot.setLabel("left", names[0] if len(names) == 1 else "")
        self.cursor.setVisible(not spectrum and traj is not None)
        self.empty_hint.setVisible(traj is None)
        self.data_overlay.refresh()
        if traj is None:
            self.event_marks.clear()
            return
        discrete = traj.kind == "map"
        missing, tops = [], []
        for name in names:
            index = self._names.index(name) if name in self._names else len(self._curves)
            try:
                y = traj.series(name)
            except KeyError:
                continue
            x = traj.time
            realisations = traj.realisations
            noisy = realisations is not None and name in realisations.state_names
            if spectrum:
                spec = self._mean_spectrum(name) if noisy else power_spectrum(x, y)
                if spec is None:
                    missing.append(name)
                    if name in self._curves:
                        self.plot.removeItem(self._curves.pop(name))
                    continue
                x, y = spec
                tops.append(spectrum_extent(x, y))
            elif noisy:
                y = self._draw_realisations(name, series_colour(index, self), log_y)
                x = realisations.time
            else:  # broken at the model's events: no line drawn up or down the jump
                x, y = through_events(traj, ("t", name), (x, y))
                if log_y:
                    y = np.where(y > 0, y, np.nan)
            curve = self._curves.get(name)
            if curve is None:
                curve = ScreenCurve(name=name, ordered_x=True)  # min/max per pixel column of what is in view
                self.plot.addItem(curve)
                self._curves[name] = curve
            colour = series_colour(index, self)
            pen = pg.mkPen(colour, width=1.6)
            if discrete and not spectrum and x.size <= 600:
                curve.setData(x, y, pen=pg.mkPen(colour, width=1), symbol="o", symbolSize=4,
                              symbolPen=None, symbolBrush=colour, connect="finite")
            else:
                curve.setData(x, y, pen=pen, symbol=None, connect="finite")
        marks = [] if spectrum else [("t", n, series_colour(self._names.index(n) if n in self._names else 0, self))
                                     for n in names if n in traj.state_names]
        event_note = self.event_marks.show(traj, marks) if marks else ""
        if event_note:  # (a model with noise has no events: its note about the realisations stays)
            self.note.setText(event_note)
        if missing:
            self.note.setText("Spectrum needs evenly spaced samples")
        tops = [top for top in tops if top is not None]
        self._spectrum_top = max(tops) if tops else None
        if refit:
            self.fit_view()
        self._on_time_cursor(self.session.time_cursor)

    def _mean_spectrum(self, name: str):
        """The power spectrum of ``name`` averaged over the realisations (the note says over how many)."""
        R = self.trajectory.realisations
        spec = mean_power_spectrum(R.time, R.series(name))
        if spec is None:
            return None
        self.note.setText(f"Spectra averaged over {spec[2]} realisations")
        return spec[:2]

    def _draw_realisations(self, name: str, colour: QColor, log_y: bool) -> np.ndarray:
        """Some realisations faint and the band mean +- 1 standard deviation; returns the mean (drawn bold
        by the caller)."""
        R = self.trajectory.realisations
        i = R.state_names.index(name)
        t = R.time

        def shown(v):
            return np.where(v > 0, v, np.nan) if log_y else v

        faint = QColor(colour)
        faint.setAlpha(70)
        for r in range(min(R.count, FAINT_REALISATIONS)):
            curve = ScreenCurve(ordered_x=True)
            curve.setData(t, shown(R.states[r, i]), pen=pg.mkPen(faint, width=1), connect="finite")
            self.plot.addItem(curve)
            self._noise_items.append(curve)
        if R.count > 1:
            edge = QColor(colour)
            edge.setAlpha(150)
            lo = pg.PlotDataItem(t, shown(R.mean[i] - R.std[i]), pen=pg.mkPen(edge, width=1, style=Qt.PenStyle.DashLine))
            hi = pg.PlotDataItem(t, shown(R.mean[i] + R.std[i]), pen=pg.mkPen(edge, width=1, style=Qt.PenStyle.DashLine))
            fill = QColor(colour)
            fill.setAlpha(45)
            band = pg.FillBetweenItem(lo, hi, brush=pg.mkBrush(fill))
            for item in (band, lo, hi):
                self.plot.addItem(item)
                self._noise_items.append(item)
        self.note.setText(f"{R.count} realisations, seed {R.seed}: mean, ±1 std")
        self.note.setToolTip(f"{min(R.count, FAINT_REALISATIONS)} of the {R.count} realisations are drawn faintly, "
                             "their mean bold and the band of one standard deviation either side dashed")
        return shown(R.mean[i])

    def _overlay_pairs(self) -> list:
        """Measured data that belongs here: the ticked series against time (not their spectra)."""
        if self.spectrum.isChecked():
            return []
        return [(TIME, n, series_colour(self._names.index(n) if n in self._names else 0, self)) for n in self.checked()]

    def fit_view(self) -> None:
        """Zoom to the data; spectra from zero to where their power has fallen well below the peak
        (the power axis fitted to that band)."""
        self._fitted = True
        box = self.plot.getViewBox()
        top = self._spectrum_top if self.spectrum.isChecked() else None
        box.setAutoVisible(y=top is not None)
        self.plot.enableAutoRange()
        if top is None:
            self.plot.autoRange()
            return
        self.plot.setXRange(0.0, top, padding=0.02)  # (turns the x auto-range off, keeps the y one)
        box.updateAutoRange()

    # ------------------------------------------------------------ time cursor
    def _on_time_cursor(self, t: float) -> None:
        if not np.isfinite(t):
            return
        self._moving_cursor = True
        try:
            self.cursor.setValue(t)
        finally:
            self._moving_cursor = False

    def _on_cursor_dragged(self) -> None:
        if not self._moving_cursor:
            self.session.set_time_cursor(float(self.cursor.value()))

    def _restyle(self) -> None:
        style_plot(self.plot_widget, self)
        self.cursor.setPen(pg.mkPen(muted_colour(self), width=1, style=Qt.PenStyle.DashLine))
        self.cursor.setHoverPen(pg.mkPen(muted_colour(self), width=2))
        for i in range(self.series_list.count()):
            self.series_list.item(i).setIcon(swatch(series_colour(i, self)))
        if self.trajectory is not None:
            self._redraw()


VIEW = TimeSeriesView
