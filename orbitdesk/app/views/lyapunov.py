"""Lyapunov exponents: the spectrum of the current orbit (``core.lyapunov``, on a worker thread) in a small
table with the Kaplan–Yorke dimension and any warnings, beside the running estimates against time, which
show whether the averages have settled."""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (QAbstractItemView, QFrame, QHeaderView, QLabel, QScrollArea, QSplitter, QTableWidget,
                               QTableWidgetItem, QWidget)

from orbitdesk.analyses.error_digits import value_with_error
from orbitdesk.engine.methods import METHODS

from orbitdesk.app.layouts import column
from orbitdesk.app.views import muted_colour, series_colour, style_plot
from orbitdesk.app.plots.plot_style import JobStrip, NumberBox, hint_label, mono_font, number_text, typeset
from orbitdesk.app.views.common import (SessionView, auto_timer, check_box, control_row, push_button, quiet,
                                        set_quietly)
from orbitdesk.app.views.method_step import MethodStep

FLOW_LENGTH, FLOW_TRANSIENT = 500.0, 50.0
MAP_LENGTH, MAP_TRANSIENT = 20000, 1000
AUTO_DELAY_MS = 400
NEAR_ZERO = 0.01  # |exponent| below this (relative to the largest magnitude) is read as zero


class LyapunovView(SessionView):
    view_id = "lyapunov"
    on_request = True
    title = "Lyapunov exponents"
    result_kind = "lyapunov"

    resultChanged = Signal(object)  # the LyapunovResult shown (None when cleared)

    def __init__(self, session, parent=None):
        super().__init__(session, parent)
        self._lengths = {"flow": [FLOW_LENGTH, FLOW_TRANSIENT], "map": [MAP_LENGTH, MAP_TRANSIENT]}
        self._kind = "flow"

        self.length = NumberBox(FLOW_LENGTH, 1e-6, 1e12, step=100.0)
        self.length.setToolTip("How long the orbit is followed (time units for flows, iterations for maps)")
        self.transient = NumberBox(FLOW_TRANSIENT, 0.0, 1e12, step=10.0)
        self.transient.setToolTip("The first part of the run, left out of the averages so the orbit can settle")
        self.length_label, self.transient_label = QLabel("Run for"), QLabel("settle")
        self.integration = MethodStep("How the orbit and its tangent vectors are integrated: Automatic takes "
                                      "Dormand–Prince 8(5,3), or the stiff method when a trial run shows the "
                                      "system stiff; the fixed-step Runge–Kutta method uses the step beside it",
                                      "Fixed Runge-Kutta step of the tangent equations", changed=self._on_controls)
        self.method, self.dt = self.integration.method, self.integration.dt
        self.settle = check_box("Until settled", "Stop when every exponent's standard error (the spread of block "
                                "averages) is within 1% of it plus 0.002; the run length is then the longest run "
                                "(the cap)", True, self._on_controls)
        for w in (self.length, self.transient):
            w.valueChanged.connect(self._on_controls)
        self.compute_button = push_button("Compute", "Compute the exponents with the current values", self.compute)
        self.auto = check_box("Automatic", "Compute again whenever the model or its values change", False,
                              lambda on: on and self._schedule())
        self.strip = JobStrip(session, "Lyapunov exponents: following tangent vectors")

        self.table = QTableWidget(0, 3)
        self.table.setHorizontalHeaderLabels(["", "Exponent", "± std. error"])
        self.table.verticalHeader().setVisible(False)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.NoSelection)
        self.table.setFocusPolicy(Qt.FocusPolicy.NoFocus)
        self.table.horizontalHeader().setSectionResizeMode(0, QHeaderView.ResizeMode.ResizeToContents)
        self.table.horizontalHeader().setSectionResizeMode(1, QHeaderView.ResizeMode.Stretch)
        self.table.horizontalHeader().setSectionResizeMode(2, QHeaderView.ResizeMode.ResizeToContents)
        self.table.setToolTip("Average exponential rates of growth of small perturbations, largest first")
        self.summary = QLabel()
        self.summary.setWordWrap(True)
        self.summary.setTextFormat(Qt.TextFormat.RichText)
        self.summary.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)
        self.notes = hint_label()
        self.notes.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)

        self.plot_widget = pg.PlotWidget()
        self.plot = self.plot_widget.getPlotItem()
        self.plot_widget.setToolTip("Running estimates: each exponent's average so far (colours as in the table); "
                                    "flat curves have settled")
        self.zero = pg.InfiniteLine(pos=0.0, angle=0, movable=False)
        self.plot.addItem(self.zero, ignoreBounds=True)
        self.curves: list[pg.PlotDataItem] = []

        # the table, the summary and the notes scroll together (one bar) when the dock is short; the table is
        # as tall as its rows, so it never scrolls on its own
        self.table.setVerticalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.table.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self._fit_table_height()
        left = QWidget()
        column(left, self.table, self.summary, self.notes, None)
        self.left = QScrollArea()
        self.left.setWidget(left)
        self.left.setWidgetResizable(True)
        self.left.setFrameShape(QFrame.Shape.NoFrame)
        self.left.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.left.setMinimumWidth(180)
        self.splitter = QSplitter(Qt.Orientation.Horizontal)
        self.splitter.addWidget(self.left)
        self.splitter.addWidget(self.plot_widget)
        self.splitter.setStretchFactor(0, 0)
        self.splitter.setStretchFactor(1, 1)
        self.splitter.setSizes([250, 600])
        self.splitter.setChildrenCollapsible(False)

        row = control_row(self.length_label, self.length, 4, self.transient_label, self.transient, 4, self.settle, 8,
                          *self.integration.widgets(), 8, self.compute_button, self.auto)
        layout = self.main_layout()
        layout.addLayout(row)
        layout.addWidget(self.splitter, 1)
        layout.addWidget(self.strip)

        self._timer = auto_timer(self, AUTO_DELAY_MS, self.compute, self.auto.isChecked)
        self._restyle()
        self.follow_session(values=self._on_values)

    # ------------------------------------------------------------ view protocol
    def view_settings(self) -> dict:
        self._remember_lengths()
        return {"flow": {"length": self._lengths["flow"][0], "transient": self._lengths["flow"][1]},
                "map": {"steps": int(self._lengths["map"][0]), "transient": int(self._lengths["map"][1])},
                "auto": self.auto.isChecked(), "settle": self.settle.isChecked(), **self.integration.settings()}

    def apply_view_settings(self, d: dict) -> None:
        if not isinstance(d, dict):
            return

        def num(x):
            return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x) and x >= 0

        flow, maps = d.get("flow"), d.get("map")
        if isinstance(flow, dict) and num(flow.get("length")) and num(flow.get("transient")):
            self._lengths["flow"] = [float(flow["length"]), float(flow["transient"])]
        if isinstance(maps, dict) and num(maps.get("steps")) and num(maps.get("transient")):
            self._lengths["map"] = [int(maps["steps"]), int(maps["transient"])]
        self.integration.apply(d)
        self.auto.setChecked(bool(d.get("auto", False)))
        set_quietly(self.settle, bool(d.get("settle", True)))
        self._show_lengths()

    def export_data(self):
        """The running estimates: time (or step) and each exponent's average up to then."""
        r = self.result
        if r is None or r.times.size == 0:
            return None
        time_name = self.system.time_name if self.system is not None else "t"
        header = [time_name] + [f"exponent {k + 1}" for k in range(r.running.shape[1])]
        return header, np.column_stack([r.times, r.running])

    # ------------------------------------------------------------ public
    def compute(self) -> None:
        s = self.system
        if s is None:
            self.notes.setText("No model yet")
            return
        from orbitdesk.analyses.lyapunov import lyapunov_spectrum

        self._remember_lengths()
        p, u0 = self.session.param_vector(), self.session.initial_vector()
        settings = self.session.run_settings(transient=0.0)
        length, transient = self._lengths[self._kind]
        dt = self.integration.step()
        settle = self.settle.isChecked() and not s.delays
        if s.kind == "map":
            kwargs = {"transient": int(transient)}
            kwargs.update({"cap": int(length)} if settle else {"steps": int(length) + int(transient)})
        else:
            kwargs = {"transient": float(transient), "dt": dt}
            kwargs.update({"cap": float(length)} if settle else
                          {"t_end": settings.t_start + float(length) + float(transient)})
            if dt is None and not s.delays:
                kwargs["method"] = self.integration.method_name()
        if settle:
            kwargs["converge"] = True
        self.begin_computing()

        def job(cancel, report):
            if s.delays:  # the largest exponent from two nearby histories (the spectrum needs no delays)
                from orbitdesk.analyses.lyapunov import largest_lyapunov_two_trajectory

                return largest_lyapunov_two_trajectory(s, p, u0, settings=settings, cancel=cancel, progress=report,
                                                       t_end=settings.t_start + float(length) + float(transient),
                                                       transient=kwargs["transient"])
            return lyapunov_spectrum(s, p, u0, settings=settings, cancel=cancel, progress=report, **kwargs)

        self.strip.run("lyapunov", job, self._adopt, on_error=lambda m: None)

    # ------------------------------------------------------------ session events
    def _on_system(self, system) -> None:
        self._remember_lengths()
        self.system = system
        self._kind = "map" if system.kind == "map" else "flow"
        self._show_lengths()
        self.show_document_result()
        self._schedule()

    def show_result(self, result) -> None:
        wanted = 1 if self.system.delays else self.system.n_states
        if result.kind != self.system.kind or np.asarray(result.exponents).size not in (1, wanted):
            raise ValueError("the kept exponents belong to another kind of model")
        self._clear_drawing()
        self._draw()
        self.resultChanged.emit(result)

    def show_no_result(self) -> None:
        self._clear_drawing()
        self.resultChanged.emit(None)

    def _on_values(self) -> None:
        self._schedule()

    def _on_controls(self, *_args) -> None:
        self._remember_lengths()
        self._schedule()

    def _schedule(self) -> None:
        if self.auto.isChecked() and self.system is not None:
            self._timer.start()

    def _remember_lengths(self) -> None:
        self._lengths[self._kind] = [float(self.length.value()), float(self.transient.value())]

    def _show_lengths(self) -> None:
        length, transient = self._lengths[self._kind]
        with quiet(self.length, self.transient):
            self.length.setValue(length)
            self.transient.setValue(transient)
        is_map = self._kind == "map"
        self.length_label.setText("Iterate" if is_map else "Run for")
        self.transient_label.setText("times, skip" if is_map else "settle")
        delays = self.system is not None and bool(self.system.delays)  # the step follows the tolerances there
        self.integration.set_hidden(is_map or delays)

    # ------------------------------------------------------------ results
    def _clear_drawing(self) -> None:
        self.table.setRowCount(0)
        self._fit_table_height()
        self.summary.setText("")
        self.notes.setText("")
        for curve in self.curves:
            self.plot.removeItem(curve)
        self.curves = []

    def _adopt(self, result) -> None:
        self.keep_result(result)

    def _draw(self) -> None:
        r = self.result
        if r is None:
            return
        values = np.asarray(r.exponents, dtype=float)
        scale = float(np.nanmax(np.abs(values))) if np.isfinite(values).any() else 1.0
        mono = mono_font()
        self.table.setRowCount(values.size)
        per = "per step" if r.kind == "map" else f"per unit {self.system.time_name if self.system else 't'}"
        for k, v in enumerate(values):
            name = QTableWidgetItem(f"λ{k + 1}")
            name.setForeground(series_colour(k, self))
            name.setFont(mono)
            error = r.uncertainty[k] if r.uncertainty is not None and k < len(r.uncertainty) else math.nan
            shown = value_with_error(v, error)  # the digits the standard error supports
            value = QTableWidgetItem(typeset(shown[0]) if shown else number_text(v, 5))
            value.setFont(mono)
            value.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
            reading = ("about zero" if math.isfinite(v) and abs(v) < NEAR_ZERO * max(scale, 1e-300)
                       else "growing" if v > 0 else "shrinking")
            value.setToolTip(f"λ{k + 1} = {v!r} {per} ({reading})")
            spread = QTableWidgetItem(f"± {typeset(shown[1])}" if shown else "–")
            spread.setFont(mono)
            spread.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
            spread.setToolTip(f"standard error of λ{k + 1}: the spread of {r.blocks} block averages over the square "
                              "root of their number" if math.isfinite(error) else "too few blocks for a spread")
            self.table.setItem(k, 0, name)
            self.table.setItem(k, 1, value)
            self.table.setItem(k, 2, spread)
        self.table.resizeRowsToContents()
        self._fit_table_height()
        lines = []
        if r.kaplan_yorke_dimension is not None and math.isfinite(r.kaplan_yorke_dimension):
            lines.append(f"Kaplan–Yorke dimension <b>{number_text(r.kaplan_yorke_dimension, 4)}</b>")
        if values.size > 1 and np.isfinite(values).all():
            lines.append(f"Sum {number_text(values.sum(), 5)} {per}")
        method = "QR of the tangent vectors" if r.method == "qr" else "two nearby trajectories"
        over = f"{int(r.averaged_over)} steps" if r.kind == "map" else f"{number_text(r.averaged_over, 4)} time units"
        # the bound on the standard error as one piece of text: a line never breaks inside |λ|
        # (no-break spaces, and word joiners beside the bars, after which a line may otherwise break)
        bound = f"{r.tolerance[0]:g}\u00a0×\u00a0|\u2060λ\u2060|\u00a0+\u00a0{r.tolerance[1]:g}" if r.tolerance else ""
        if r.converged is True:
            lines.append(f"Settled to {bound} after {over}")
        elif r.converged is False:
            lines.append(f"<b>Stopped at the cap of {over}</b> before every estimate settled to "
                         f"{bound}: a longer run narrows them")
        detail = f"by {method}, averaged over {over}"
        if r.integrator and not r.dt:
            detail += f" ({METHODS[r.integrator].label})" if r.integrator in METHODS else f" ({r.integrator})"
        if r.dt:
            detail += f", step {number_text(r.dt, 3)}"
        lines.append(f"<span style='color:{muted_colour(self).name()}'>{detail}</span>")
        self.summary.setText("<br>".join(lines))
        # the cap is said above in the view's words (the warning names the command line's options)
        notes = [w for w in r.warnings if not (r.converged is False and w.startswith("the cap of"))]
        if r.status != "ok" and r.message:
            notes.insert(0, r.message[:1].upper() + r.message[1:])
        self.notes.setText("\n".join(f"• {n}" for n in notes))
        self.notes.setToolTip("\n".join(notes))
        time_label = "n" if r.kind == "map" else (self.system.time_name if self.system else "t")
        self.plot.setLabel("bottom", time_label)
        self.plot.setLabel("left", "running estimate")
        for k in range(r.running.shape[1] if r.running.ndim == 2 else 0):
            curve = pg.PlotDataItem(r.times, r.running[:, k], name=f"λ{k + 1}",
                                    pen=pg.mkPen(series_colour(k, self), width=1.6), connect="finite")
            self.plot.addItem(curve)
            self.curves.append(curve)
        self.plot.enableAutoRange()
        self.plot.autoRange(padding=0.05)

    def _fit_table_height(self) -> None:
        """The table exactly as tall as its header and rows."""
        t = self.table
        rows = sum(t.rowHeight(k) for k in range(t.rowCount()))
        header = max(t.horizontalHeader().sizeHint().height(), t.horizontalHeader().height())
        t.setFixedHeight(header + rows + 2 * t.frameWidth() + 2)

    def _restyle(self) -> None:
        style_plot(self.plot_widget, self)
        self.zero.setPen(pg.mkPen(muted_colour(self), width=1, style=Qt.PenStyle.DashLine))
        if self.result is not None:
            self._clear_drawing()
            self._draw()


VIEW = LyapunovView
