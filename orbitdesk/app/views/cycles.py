"""Limit cycle: the periodic orbit (a flow) or the period-K cycle (a map) reached from the end of the
current run or from the last clicked start, found by the same core as ``orbitdesk cycle``
(``core.cycles``) as a session job with progress and Cancel. Shows the period, the range of every state
over the cycle, the Floquet multipliers and the verdict; shares the cycle so the phase plane and the 3D
view draw it; exports one period as CSV."""

from __future__ import annotations

import html

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import QLabel, QSpinBox, QSplitter, QTextBrowser

from orbitdesk.app.views import empty_hint, series_colour, style_plot
from orbitdesk.app.plots.plot_style import JobStrip, NumberBox, complex_text, number_text, plain_axes
from orbitdesk.app.plots.legends import keep_legend_clear
from orbitdesk.app.views.common import (SessionView, apply_numbers, combo_box, control_row, cycle_columns, push_button,
                     set_quietly, status_label)

END, CLICKED = "end", "clicked"
START_LABELS = {END: "the end of the run", CLICKED: "the last clicked start"}
STARTS = (END, CLICKED)
WIDE = 1.8  # width / height beyond which the report and the plot sit side by side


class CyclesView(SessionView):
    view_id = "cycles"
    on_request = True
    title = "Limit cycle"

    cycleChanged = Signal(object)  # the Cycle / MapCycle shown (None when cleared)

    def __init__(self, session, parent=None):
        super().__init__(session, parent)
        self._after_run = False
        self.start = combo_box("Where the search starts: the last state of the current run, or the trajectory "
                               "started by the last click in the phase plane (run on until it settles)",
                               [START_LABELS[k] for k in STARTS])
        self.period_guess = NumberBox(0.0, 0.0, 1e9, ratio=1.5)
        self.period_guess.setSpecialValueText("automatic")
        self.period_guess.setToolTip("A rough period of the orbit (automatic: the time of the first return)")
        self.multiple = QSpinBox()
        self.multiple.setRange(0, 64)
        self.multiple.setSpecialValueText("automatic")
        self.multiple.setToolTip("The orbit's period in forcing periods (automatic: read off the settled run)")
        self.map_period = QSpinBox()
        self.map_period.setRange(1, 512)
        self.map_period.setToolTip("Number of iterates after which the cycle repeats")
        self.find_button = push_button("Find cycle", "Look for the cycle near the chosen start", self.compute)
        self.strip = JobStrip(session, "Looking for the cycle")
        self.guess_label = status_label()

        self.report = QTextBrowser()
        self.report.setOpenLinks(False)
        self.report.setToolTip("Period, range of each state and Floquet multipliers of the cycle")
        self.plot_widget = pg.PlotWidget()
        self.plot = self.plot_widget.getPlotItem()
        plain_axes(self.plot)
        self.plot.setLabel("bottom", "t within one period")  # room for the label from the start
        self.plot.addLegend(offset=(-8, 8), labelTextSize="8pt")
        self.curves: list = []
        self.empty = empty_hint(self.plot, "One period of the cycle will be drawn here")
        self.splitter = splitter = QSplitter(Qt.Orientation.Vertical)
        splitter.addWidget(self.report)
        splitter.addWidget(self.plot_widget)
        splitter.setStretchFactor(0, 3)
        splitter.setStretchFactor(1, 2)
        splitter.setChildrenCollapsible(False)

        self.period_label = QLabel("period about")
        self.multiple_label = QLabel("forcing periods")
        self.map_label = QLabel("period")
        layout = self.main_layout()
        layout.addLayout(control_row("Start from", self.start, 8, self.period_label, self.period_guess,
                                     self.multiple_label, self.multiple, self.map_label, self.map_period, 8,
                                     self.find_button, spacing=4))
        strip_row = control_row(self.guess_label, stretch=False)
        strip_row.setStretch(0, 1)
        strip_row.addWidget(self.strip, 1)
        layout.addLayout(strip_row)
        layout.addWidget(splitter, 1)
        self._restyle()
        session.cycleChanged.connect(lambda _cycle: self._show())
        self.follow_session(trajectory=self._on_trajectory)

    def resizeEvent(self, event) -> None:
        """Report and plot one above the other, or side by side in a wide, short dock (the numbers then keep
        their height instead of scrolling)."""
        super().resizeEvent(event)
        wide = self.width() > WIDE * self.height()
        orientation = Qt.Orientation.Horizontal if wide else Qt.Orientation.Vertical
        if self.splitter.orientation() != orientation:
            self.splitter.setOrientation(orientation)
            self.splitter.setSizes([3, 2])

    def _on_trajectory(self, _trajectory) -> None:
        if self._after_run and not self.session.run_pending():
            self.compute()

    # ------------------------------------------------------------ view protocol
    def view_settings(self) -> dict:
        return {"start": STARTS[self.start.currentIndex()], "period_guess": float(self.period_guess.value()),
                "forcing_multiple": self.multiple.value(), "map_period": self.map_period.value()}

    def apply_view_settings(self, d: dict) -> None:
        if not isinstance(d, dict):
            return
        if d.get("start") in STARTS:
            set_quietly(self.start, STARTS.index(d["start"]))
        apply_numbers(d, ((self.period_guess, "period_guess", float), (self.multiple, "forcing_multiple", int),
                          (self.map_period, "map_period", int)))

    def export_data(self):
        """One period of the cycle (a flow: time, states, derived quantities) or its points (a map)."""
        cols = cycle_columns(self.system, self.cycle, self.session.param_vector())
        if not cols:
            return None
        names = list(cols)
        if self.system.kind == "map":  # the points once each, without the repeated first one
            return names, np.column_stack([cols[n][:-1] for n in names])
        return names, np.column_stack([cols[n] for n in names])

    # ------------------------------------------------------------ public
    @property
    def cycle(self):
        """The live document's cycle (one copy: the phase plane and the 3D view draw it while it is current);
        shown here with the stale bar when it was found for other values."""
        return self.session.cycle

    @property
    def result(self):
        return self.session.cycle

    def compute(self) -> None:
        """Look for the cycle from the chosen start (in the background)."""
        s = self.system
        if s is None:
            self.guess_label.setText("No model yet")
            return
        from orbitdesk.analyses.cycles import find_cycle, find_map_cycle

        self._after_run = False
        if STARTS[self.start.currentIndex()] == END and self.session.run_pending():
            self._after_run = True  # start from the end of the run for these values, not an older one
            self.guess_label.setText("Waiting for the run to finish…")
            return
        p = self.session.param_vector()
        guess, initial, where = self._start_point()
        if guess is None and initial is None:
            self.guess_label.setText(where)
            return
        self.guess_label.setText(f"Starting from {where}")
        self.guess_label.setToolTip(f"Starting from {where}")
        self.begin_computing()
        if s.kind == "map":
            k = self.map_period.value()

            def job(cancel, report):
                return find_map_cycle(s, p, k, guess=guess, initial=initial, cancel=cancel, progress=report)
        else:
            period = float(self.period_guess.value()) or None
            multiple = self.multiple.value() or None
            autonomous = s.autonomous_at(p)

            def job(cancel, report):
                return find_cycle(s, p, guess=guess, initial=initial, cancel=cancel, progress=report,
                                  period_guess=period if autonomous else None,
                                  forcing_multiple=None if autonomous else multiple)
        self.strip.run("cycles", job, self._adopt, on_error=self._failed)

    # ------------------------------------------------------------ session events
    def show_no_result(self) -> None:
        self._show()

    def _on_system(self, system) -> None:
        self.system = system
        self._show()   # (a new model has cleared the document's cycle)
        self._show_controls()

    def _show_controls(self) -> None:
        s = self.system
        is_map = s is not None and s.kind == "map"
        forced = s is not None and not is_map and not s.autonomous_at(self.session.param_vector())
        for w in (self.period_label, self.period_guess):
            w.setVisible(not is_map and not forced)
        for w in (self.multiple_label, self.multiple):
            w.setVisible(forced)
        for w in (self.map_label, self.map_period):
            w.setVisible(is_map)

    def update_stale(self, *_args) -> None:
        super().update_stale()
        self._show_controls()

    def stale_text(self) -> str:
        return self.session.cycle_stale() if self.system is not None else ""

    def _start_point(self):
        """(guess, initial, words): the search starts at ``guess`` (settled already) or runs on from
        ``initial``; both None when there is no such start (``words`` says why)."""
        s = self.system
        if STARTS[self.start.currentIndex()] == CLICKED:
            u0 = self.session.clicked_start
            if u0 is None or len(u0) != s.n_states:
                return None, None, "No clicked start yet: click in the phase plane first"
            return None, np.asarray(u0, dtype=float), "the clicked start " + self._point_text(u0)
        traj = self.session.trajectory
        if traj is None or traj.time.size == 0 or not np.all(np.isfinite(traj.states[:, -1])):
            return None, self.session.initial_vector(), "the initial values (no finished run yet)"
        end = traj.states[:, -1]
        if s.kind == "map":
            return None, end, "the end of the run " + self._point_text(end)
        return end, None, "the end of the run " + self._point_text(end)

    def _point_text(self, u) -> str:
        return "(" + ", ".join(f"{n} = {number_text(v, 4)}" for n, v in zip(self.system.states, u)) + ")"

    # ------------------------------------------------------------ results
    def _failed(self, message: str) -> None:
        self.session.set_cycle(None)   # the one found before is no answer to this search either
        self.report.setHtml(f"<p>No cycle found: {html.escape(message)}</p>")

    def _adopt(self, cycle) -> None:
        self.session.set_cycle(cycle, self._computing_for)

    def _show(self) -> None:
        """Show the document's cycle (or nothing) with its stale bar."""
        cycle = self.cycle if self.system is not None else None
        self.report.setHtml(self._report_html(cycle) if cycle is not None else "")
        self._draw()
        self.update_stale()
        self.cycleChanged.emit(cycle)

    def _report_html(self, c) -> str:
        s = self.system
        esc = html.escape
        is_map = s.kind == "map"
        rows = []
        verdict = getattr(c, "stability", "") or ("stable" if c.stable else "unstable")
        if is_map:
            rows.append(f"<p><b>Cycle of period {c.period}</b> — {verdict}</p>")
        else:
            extra = ""
            if c.forcing_period is not None:
                extra = f" = {c.forcing_multiple} × the forcing period {number_text(c.forcing_period)}"
            rows.append(f"<p style='margin-top:0'><b>Period {number_text(c.period, 8)}</b>{esc(extra)} — {verdict}</p>")
        cols = cycle_columns(s, c, self.session.param_vector())
        head = "<tr><th align='left'>state</th><th align='right'>min</th><th align='right'>max</th>" \
               "<th align='right' title='max − min'>amplitude</th></tr>"
        body = "".join(
            f"<tr><td>{esc(n)}</td><td align='right'>{number_text(cols[n].min())}</td>"
            f"<td align='right'>{number_text(cols[n].max())}</td>"
            f"<td align='right'>{number_text(cols[n].max() - cols[n].min())}</td></tr>" for n in s.states)
        rows.append(f"<table cellspacing='0' cellpadding='3'>{head}{body}</table>")
        trivial = getattr(c, "trivial_index", None)
        mult = []
        for k, m in enumerate(c.multipliers):
            size = abs(m)
            if k == trivial:
                note = "along the orbit (always 1)"
            else:
                note = "inside the unit circle: disturbances die out" if size < 1 else \
                    "outside the unit circle: disturbances grow"
            mult.append(f"<tr><td align='right'>{esc(complex_text(m))}</td><td align='right'>{number_text(size, 5)}"
                        f"</td><td>{esc(note)}</td></tr>")
        what = "Multipliers</b> (eigenvalues of the map's Jacobian over one cycle)" if is_map else \
            "Floquet multipliers</b> (of the monodromy matrix)"
        rows.append(f"<p style='margin-top:6px; margin-bottom:0'><b>{what}</p><table cellspacing='0' cellpadding='3'><tr><th align='right'>value"
                    f"</th><th align='right'>modulus</th><th></th></tr>{''.join(mult)}</table>")
        for w in c.warnings:
            rows.append(f"<p><i>{esc(w)}</i></p>")
        return "".join(rows)

    def _draw(self) -> None:
        for curve in self.curves:
            self.plot.removeItem(curve)
        self.curves = []
        legend = self.plot.legend
        if legend is not None:
            legend.clear()
        cols = cycle_columns(self.system, self.cycle, self.session.param_vector())
        self.empty.setVisible(not cols)
        if not cols:
            return
        s = self.system
        t = cols[s.time_name]
        is_map = s.kind == "map"
        self.plot.setLabel("bottom", "step within the cycle" if is_map else f"{s.time_name} within one period")
        for i, name in enumerate(s.states):
            pen = pg.mkPen(series_colour(i, self), width=2)
            kwargs = dict(symbol="o", symbolSize=6, symbolBrush=series_colour(i, self)) if is_map else {}
            curve = self.plot.plot(t, cols[name], pen=pen, name=name, **kwargs)
            self.curves.append(curve)
        self.plot.autoRange(padding=0.05)
        keep_legend_clear(self.plot)  # in the corner the curves leave free

    def _restyle(self) -> None:
        style_plot(self.plot_widget, self)
        self.plot.legend.setLabelTextColor(self.palette().color(self.foregroundRole()))  # readable, not faint
        self._draw()


VIEW = CyclesView
