"""Bifurcation diagram: continued branches against a parameter (steady states, cycles born at Hopf
points, or the periodic response of a forced model with stepped sweeps over it), special points marked
and listed in words, and a second tab with fold and Hopf curves in two parameters.

Stable parts are drawn solid, unstable parts dashed. Clicking a branch or a row of the table sets the
parameter (and the state) there, so the run shows what happens at that point. All computing is done by
``orbitdesk.analyses.continuation`` in session jobs with progress and Cancel; what comes out is the live
document's result of kind "bifurcation" (a ``ContinuationResult``; the two-parameter tab's curve, kind
"bifurcation_locus", lives in bifurcation_locus.py), saved in the project and marked stale when the values
change. A walkthrough step (or a file of an earlier version) may hold branches in the view's settings: they
are put into the document when applied.
"""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (QAbstractItemView, QHeaderView, QSplitter, QTableWidget, QTableWidgetItem, QTabWidget,
                               QVBoxLayout, QWidget)

from orbitdesk.app.views import muted_colour, series_colour, style_plot
from orbitdesk.app.plots.plot_style import JobStrip, NumberBox, number_text
from orbitdesk.app.views.bifurcation_locus import LOCUS_KIND, SYMBOL_COLOUR, SYMBOLS, LocusTab, label_anchor
from orbitdesk.app.views.common import (SessionView, check_box, clicked_point, combo_box, control_row, fill_combo,
                                        is_number, push_button, quiet, range_for_parameter, select_text,
                                        status_label, status_row)
from orbitdesk.document.results import results_from_view_settings, result_class, unpack

STEADY, CYCLES, CYCLE_HERE, RESPONSE = "steady", "cycles", "cycle", "response"
FOLLOW_LABELS = {STEADY: "steady states", CYCLES: "steady states and their cycles",
                 CYCLE_HERE: "the cycle the run settles on", RESPONSE: "forced response"}
NORM, PERIOD, AMPLITUDE = "size of the state (norm)", "period", "amplitude"
STEPPED_COUNT = 41


def stable_runs(values, measure, stable):
    """Split a branch into runs of equal stability: [(x, y, stable)] sharing their end points (stable: True,
    False, or None where the linearisation is neutral)."""
    runs, start = [], 0
    flags = [None if s is None else bool(s) for s in stable]
    for i in range(1, len(flags) + 1):
        if i == len(flags) or flags[i] != flags[start]:
            end = min(i + 1, len(flags))
            runs.append((values[start:end], measure[start:end], flags[start]))
            start = i
    return runs


def _same_place(a, b) -> bool:
    """Two special points at one parameter value and state (found on two branches through it)."""
    scale = 1.0 + abs(a.value) + sum(abs(v) for v in a.state.values())
    gap = abs(a.value - b.value) + sum(abs(a.state[k] - b.state.get(k, math.inf)) for k in a.state)
    return gap < 1e-7 * scale


class BifurcationView(SessionView):
    view_id = "bifurcation"
    on_request = True
    title = "Bifurcation diagram"
    result_kind = "bifurcation"

    resultChanged = Signal()

    def __init__(self, session, parent=None):
        super().__init__(session, parent)
        self._wanted = None
        self._range_for = None
        self._specials = []  # (Special, Branch or None) in table order

        # ---- one-parameter controls
        self.follow = combo_box("What to follow: the steady states (equilibria of a flow, fixed points of a map), "
                                "also the cycles born at their Hopf points, the cycle the current run settles on (with the cycles "
                                "of twice the period born at its period doublings), or a forced model's periodic "
                                "response",
                                slot=self._on_follow)
        self.parameter = combo_box("The parameter that moves", slot=self._on_parameter)
        self.lo = NumberBox(0.0, -1e12, 1e12, step=0.1)
        self.lo.setToolTip("One end of the parameter interval")
        self.hi = NumberBox(1.0, -1e12, 1e12, step=0.1)
        self.hi.setToolTip("The other end of the parameter interval")
        self.compute_button = push_button("Compute", "Follow the branches through the interval and locate their "
                                          "special points", self.compute)
        self.measure = combo_box("What the vertical axis shows for each point of a branch", slot=self._redraw)
        self.overlay = check_box("orbit diagram", "Draw the Parameter sweep view's orbit diagram underneath "
                                 "(when it sweeps the same parameter)", slot=self._redraw)
        self.stepped_box = check_box("stepped sweeps", "Also step the parameter up and down, each value starting "
                                     "from the previous one's final state, as a test rig would (shows hysteresis)",
                                     checked=True)
        self.strip = JobStrip(session, "Following branches")
        self.info = status_label()

        self.plot_widget = pg.PlotWidget()
        self.plot = self.plot_widget.getPlotItem()
        self.plot_widget.setToolTip("Click a branch to set the parameter and the state there")
        self.plot_widget.scene().sigMouseClicked.connect(self._on_click)
        self.marker = pg.InfiniteLine(angle=90, movable=False)
        self.plot.addItem(self.marker, ignoreBounds=True)
        self.legend = self.plot.addLegend(offset=(-8, 8))
        self.table = QTableWidget(0, 4)
        self.table.setHorizontalHeaderLabels(["Point", "At", "State", "What it means"])
        self.table.verticalHeader().setVisible(False)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.horizontalHeader().setSectionResizeMode(3, QHeaderView.ResizeMode.Stretch)
        self.table.setToolTip("The special points found; click a row to set the parameter and state there")
        self.table.cellClicked.connect(self._on_row)

        branches_tab = QWidget()
        layout = QVBoxLayout(branches_tab)
        layout.setContentsMargins(0, 4, 0, 0)
        layout.addLayout(control_row("Follow", self.follow, "as", self.parameter, "goes from", self.lo, "to",
                                     self.hi, None, self.compute_button, stretch=False))
        layout.addLayout(control_row("Show", self.measure, self.overlay, self.stepped_box))
        split = QSplitter(Qt.Orientation.Vertical)
        split.addWidget(self.plot_widget)
        split.addWidget(self.table)
        split.setStretchFactor(0, 3)
        split.setStretchFactor(1, 1)
        layout.addWidget(split, 1)

        # ---- two-parameter tab
        self.locus_tab = LocusTab(self)
        self.locus_kind, self.param2 = self.locus_tab.kind, self.locus_tab.param2
        self.lo2, self.hi2, self.locus_button = self.locus_tab.lo2, self.locus_tab.hi2, self.locus_tab.button
        self.locus_widget, self.locus_plot = self.locus_tab.widget, self.locus_tab.plot

        self.tabs = QTabWidget()
        self.tabs.addTab(branches_tab, "One parameter")
        self.tabs.addTab(self.locus_tab, "Two parameters")
        self.tabs.currentChanged.connect(self.update_stale)
        main = self.main_layout()
        main.addWidget(self.tabs, 1)
        main.addLayout(status_row(self.info, self.strip))
        self._restyle()
        self.follow_session(values=self._on_values)

    # ------------------------------------------------------------ the document's results
    @property
    def branches(self) -> list:
        """The branches of the document's diagram (steady states and cycles)."""
        return list(self.result.branches) if self.result is not None else []

    @property
    def response(self):
        """The continued response of a forced flow (None: none)."""
        return self.result.response if self.result is not None else None

    @property
    def stepped(self) -> list:
        """The stepped sweeps up and down beside the response."""
        return list(self.result.stepped) if self.result is not None else []

    @property
    def notes(self) -> list[str]:
        return list(self.result.notes) if self.result is not None else []

    @property
    def locus_result(self):
        return self.locus_tab.result

    @property
    def locus_region(self):
        return self.locus_tab.region

    # ------------------------------------------------------------ view protocol
    def view_settings(self) -> dict:
        return {"follow": self.follow_mode(), "parameter": self.parameter.currentText(),
                "from": float(self.lo.value()), "to": float(self.hi.value()), "measure": self.measure.currentText(),
                "overlay": self.overlay.isChecked(), "stepped": self.stepped_box.isChecked(),
                "locus_kind": self.locus_kind.currentText(), "param2": self.param2.currentText(),
                "from2": float(self.lo2.value()), "to2": float(self.hi2.value()), "tab": self.tabs.currentIndex()}

    def apply_view_settings(self, d: dict) -> None:
        if not isinstance(d, dict):
            return
        self._wanted = dict(d)
        self.overlay.setChecked(bool(d.get("overlay", False)))
        self.stepped_box.setChecked(bool(d.get("stepped", True)))
        if isinstance(d.get("tab"), int) and 0 <= d["tab"] < self.tabs.count():
            self.tabs.setCurrentIndex(d["tab"])
        if self.system is not None:
            self._apply_wanted()
            self._fill_measures()
            select_text(self.measure, d.get("measure"))
        self._keep_held_results(d)   # (after the intervals: the shaded region is closed along them)
        if self.system is not None:
            self._redraw()
            self._show_locus()

    def _keep_held_results(self, d: dict) -> None:
        """Branches a walkthrough step holds in its settings for this view go into the document: they were
        computed for the values the step sets (now set)."""
        _settings, held = results_from_view_settings(d, self.session.params, self.session.text)
        unreadable = False
        for kind, entry in held.items():
            result = unpack(result_class(kind, entry["class"]), entry["data"])
            if result is None:
                unreadable = True
                continue
            skip = result.parameters if kind == LOCUS_KIND else result.parameter
            self.session.set_result(kind, result, self.values_now(skip))
        if unreadable:
            self.info.setText("The saved branches could not be read; press Compute to follow them again")

    def export_data(self):
        """Every point of every branch: branch number, parameter, state, stability."""
        rows, header = [], None
        for k, b in enumerate(self.branches, start=1):
            header = ["branch", b.parameter, *b.states, "stable"]
            for i in range(b.size):
                rows.append([k, b.values[i], *b.points[:, i], {True: 1, False: 0}.get(b.stable[i], math.nan)])
        if not rows and self.response is not None:
            r = self.response
            header = [r.parameter, f"amplitude of {r.observe}", "stable"]
            rows = [[v, a, {True: 1, False: 0}.get(s, math.nan)] for v, a, s in zip(r.values, r.amplitudes, r.stable)]
        return (header, np.array(rows, dtype=float)) if rows else None

    # ------------------------------------------------------------ computing
    def follow_mode(self) -> str:
        text = self.follow.currentText()
        return next((k for k, v in FOLLOW_LABELS.items() if v == text), STEADY)

    def request(self) -> tuple:
        """What Compute would follow: (follow, parameter, from, to, stepped)."""
        return (self.follow_mode(), self.parameter.currentText(), float(self.lo.value()), float(self.hi.value()),
                self.stepped_box.isChecked())

    def compute(self) -> None:
        """Follow the branches for the controls' settings (nothing to do when they are shown already)."""
        if self.shown_request() == self.request() and not self.is_stale():
            return
        s = self.system
        if s is None or not s.parameters:
            self.info.setText("The model has no parameter to follow" if s is not None else "No model yet")
            return
        name, lo, hi = self.parameter.currentText(), float(self.lo.value()), float(self.hi.value())
        if not lo < hi:
            self.info.setText("The first value must be below the second")
            return
        mode, stepped = self.follow_mode(), self.stepped_box.isChecked()
        observe = self.measure.currentText() if self.measure.currentText() in s.states else None
        u0, p = self.session.initial_vector(), self.session.param_vector()
        from orbitdesk.analyses import continuation as cont
        from orbitdesk.analyses.continuation.results import ContinuationResult

        def job(cancel, report):
            if mode == RESPONSE:
                from orbitdesk.analyses.continuation.response import response_curve, stepped_sweep

                parts = 3 if stepped else 1
                curve = response_curve(s, name, lo, hi, p, observe, initial=u0, cancel=cancel,
                                       progress=lambda f: report(f / parts))
                sweeps = []
                if stepped:
                    for i, direction in enumerate(("up", "down"), start=1):
                        sweeps.append(stepped_sweep(s, name, lo, hi, direction, STEPPED_COUNT, p, observe,
                                                    initial=u0, cancel=cancel,
                                                    progress=lambda f, i=i: report((i + f) / parts)))
                return ("response", curve, sweeps)
            if mode == CYCLE_HERE:
                from orbitdesk.analyses.continuation.cycles import cycle_branches

                return ("branches", cycle_branches(s, name, lo, hi, p, initial=u0, cancel=cancel, progress=report),
                        None)
            result = cont.steady_branches(s, name, lo, hi, p, initial=u0, cancel=cancel,
                                          progress=lambda f: report(f * (0.4 if mode == CYCLES else 1.0)))
            if mode == CYCLES:
                from orbitdesk.analyses.continuation.cycles import cycles_from_hopf_points

                result = cycles_from_hopf_points(s, result, lo, hi, p, cancel=cancel,
                                                 progress=lambda f: report(0.4 + 0.6 * f))
            return ("branches", result, None)

        self.info.setText("")
        self.begin_computing(skip=name)

        def adopt(outcome):
            kind, result, extra = outcome
            if kind == "response":
                kept = ContinuationResult(mode, name, lo, hi, response=result, stepped=list(extra or []))
            else:
                kept = ContinuationResult(mode, name, lo, hi, list(result.branches), list(result.notes))
            self.keep_result(kept)
            self.computed_by_user()

        self.strip.what = f"Following {FOLLOW_LABELS[mode]} in {name}"
        self.strip.run("bifurcation", job, adopt, on_error=lambda m: None)

    def shown_request(self):
        """What the document's diagram followed, as ``request()`` gives it (None: no diagram)."""
        r = self.result
        if r is None:
            return None
        return (r.follow, r.parameter, r.lo, r.hi, bool(r.stepped) if r.follow == RESPONSE
                else self.stepped_box.isChecked())

    def computed_by_user(self) -> None:
        """A result the user asked for is in the document: the project has unsaved work."""
        self.session.mark_dirty()

    def values_now(self, skip=None):
        """Branches do not depend on the initial state (it only picks where the search starts), so a
        click that moves the state onto a branch does not make them stale."""
        return self.session.doc.basis(skip, initial=False)

    def show_result(self, result) -> None:
        names = self.system.parameters
        if result.parameter not in names or any(b.states != list(self.system.states) for b in result.branches):
            raise ValueError("the kept diagram follows a parameter or states the model no longer has")
        self._fill_measures()
        self._redraw()
        self.resultChanged.emit()

    def show_no_result(self) -> None:
        self._redraw()

    def _on_result_changed(self, kind: str) -> None:
        super()._on_result_changed(kind)
        if kind == LOCUS_KIND and self.system is not None:
            self._show_locus()
            self.resultChanged.emit()

    def _show_locus(self) -> None:
        L = self.locus_tab.result
        if L is not None and not set(L.parameters) <= set(self.system.parameters):
            self.session.clear_result(LOCUS_KIND)
            return
        self.locus_tab.draw((float(self.lo.value()), float(self.hi.value()), float(self.lo2.value()),
                             float(self.hi2.value())))
        self.update_stale()

    def stale_text(self) -> str:
        """The stale words of the tab in sight: the branches', or the two-parameter curve's."""
        if self.tabs.currentWidget() is self.locus_tab and self.system is not None:
            return self.session.result_stale(LOCUS_KIND)
        return super().stale_text()

    def recompute(self) -> None:
        if self.tabs.currentWidget() is self.locus_tab:
            self.locus_tab.compute()
        else:
            self.compute()

    # ------------------------------------------------------------ session events
    def _on_project_loaded(self) -> None:
        self.system = None
        self._range_for = None
        self.apply_view_settings(self.saved_view_settings())

    def _on_system(self, system) -> None:
        self.system = system
        keep = (self.parameter.currentText(), self.param2.currentText(), self.follow_mode())
        forced = system.kind != "map" and not system.autonomous
        with quiet(self.parameter, self.param2, self.follow):
            fill_combo(self.parameter, system.parameters)
            fill_combo(self.param2, system.parameters)
            modes = [RESPONSE] if forced else [STEADY] if system.kind == "map" else [STEADY, CYCLES, CYCLE_HERE]
            fill_combo(self.follow, [FOLLOW_LABELS[m] for m in modes])
            select_text(self.follow, FOLLOW_LABELS.get(keep[2]))
            ranged = [n for n in system.parameters if None not in self.session.param_range(n)]
            if ranged and not (keep[0] and self.parameter.findText(keep[0]) >= 0):
                select_text(self.parameter, ranged[0])
            select_text(self.parameter, keep[0])
            others = [n for n in system.parameters if n != self.parameter.currentText()]
            if not select_text(self.param2, keep[1]) and others:
                select_text(self.param2, others[0])
        self.stepped_box.setVisible(forced)
        self._apply_wanted()
        self._on_parameter()
        self._fill_measures()
        if not self.show_document_result():
            self.info.setText("Compute follows every steady state through the interval, unstable ones included, "
                              "and marks where the behaviour changes")
        self._show_locus()

    def _apply_wanted(self) -> None:
        d, self._wanted = self._wanted, None
        if not d or self.system is None:
            return
        with quiet(self.parameter, self.param2):
            select_text(self.follow, FOLLOW_LABELS.get(d.get("follow")))
            select_text(self.parameter, d.get("parameter"))
            select_text(self.param2, d.get("param2"))
            select_text(self.locus_kind, d.get("locus_kind"))
        if is_number(d.get("from")) and is_number(d.get("to")):
            self.lo.setValue(float(d["from"]))
            self.hi.setValue(float(d["to"]))
            self._range_for = self.parameter.currentText()
        if is_number(d.get("from2")) and is_number(d.get("to2")):
            self.lo2.setValue(float(d["from2"]))
            self.hi2.setValue(float(d["to2"]))
        self._fill_measures()
        select_text(self.measure, d.get("measure"))

    def _on_values(self) -> None:
        self._update_markers()

    def _on_follow(self, _index=None) -> None:
        self._fill_measures()

    def _on_parameter(self, _index=None) -> None:
        if range_for_parameter(self, self.parameter, self.lo, self.hi):
            self._update_markers()

    def _fill_measures(self) -> None:
        if self.system is None:
            return
        keep = self.measure.currentText()
        items = list(self.system.states)
        if self.follow_mode() != RESPONSE:
            items.append(NORM)
            if any(b.periods is not None for b in self.branches) or self.follow_mode() in (CYCLES, CYCLE_HERE):
                items.append(PERIOD)
        with quiet(self.measure):
            fill_combo(self.measure, items)
            if not select_text(self.measure, keep) and self.response is not None:
                select_text(self.measure, self.response.observe)

    # ------------------------------------------------------------ drawing
    def _measure(self, branch):
        """(lower, upper or None) arrays of the chosen measure for a branch (cycles: min and max)."""
        m = self.measure.currentText()
        if m == PERIOD:
            return (branch.periods, None) if branch.periods is not None else (None, None)
        if m == NORM:
            if branch.maxima is not None:
                top = np.sqrt(sum(branch.maxima[s] ** 2 for s in branch.states))
                return np.linalg.norm(branch.points, axis=0), top
            return np.linalg.norm(branch.points, axis=0), None
        if m in branch.states:
            if branch.maxima is not None:
                return branch.minima[m], branch.maxima[m]
            return branch.points[branch.states.index(m)], None
        return None, None

    def _redraw(self, *_args) -> None:
        self.plot.clear()
        self.legend.clear()
        self.plot.addItem(self.marker, ignoreBounds=True)
        self._specials = []
        if self.overlay.isChecked():
            self._draw_overlay()
        seen = set()
        for branch in self.branches:
            lower, upper = self._measure(branch)
            if lower is None:
                continue
            colour = series_colour(2 if branch.kind == "cycle" else 0, self)
            for curve in (lower, upper):
                if curve is None:
                    continue
                for x, y, stable in stable_runs(branch.values, curve, branch.stable):
                    name = None
                    key = (branch.kind, stable)
                    if key not in seen:
                        seen.add(key)
                        what = {"equilibrium": "steady state", "fixed point": "fixed point",
                                "cycle": "cycle (lowest and highest)"}[branch.kind]
                        word = {True: "stable", False: "unstable"}.get(stable, branch.neutral or "undecided")
                        name = f"{what}, {word}"
                    self.plot.addItem(pg.PlotDataItem(x, y, pen=self._pen(colour, stable), name=name))
            for s in branch.special:
                if not any(t.type == s.type and _same_place(t, s) for t, _b in self._specials):
                    self._specials.append((s, branch))
        if self.response is not None:
            self._draw_response()
        self._draw_specials()
        self._place_legend()
        self._fill_table()
        self.plot.setLabel("bottom", self._x_name())
        self.plot.setLabel("left", self._y_label())
        self._update_markers()
        self._show_info()

    def _pen(self, colour, stable):
        style = Qt.PenStyle.DotLine if stable is None else Qt.PenStyle.SolidLine if stable else Qt.PenStyle.DashLine
        return pg.mkPen(colour, width=2.2 if stable else 1.6, style=style)

    def _draw_response(self) -> None:
        r = self.response
        colour = series_colour(0, self)
        named = set()
        for x, y, stable in stable_runs(r.values, r.amplitudes, r.stable):
            word = {True: "stable", False: "unstable"}.get(stable, "undecided")
            name = None if stable in named else f"response, {word}"
            named.add(stable)
            self.plot.addItem(pg.PlotDataItem(x, y, pen=self._pen(colour, stable), name=name))
        for curve, symbol, index in zip(self.stepped, ("t1", "t"), (3, 5)):
            label = f"stepped {curve.stepped}"
            self.plot.addItem(pg.ScatterPlotItem(curve.values, curve.amplitudes, symbol=symbol, size=7,
                                                 pen=pg.mkPen(series_colour(index, self), width=1.2),
                                                 brush=pg.mkBrush(None), name=label))
        for s in r.special:
            self._specials.append((s, None))

    def _draw_overlay(self) -> None:
        result = self.session.doc.result("sweep")  # the Parameter sweep view's orbit diagram
        if result is None or result.parameter != self._x_name():
            return
        from orbitdesk.app.views.sweep import diagram_points

        x, y, _ok = diagram_points(result)
        colour = muted_colour(self, 140)
        self.plot.addItem(pg.ScatterPlotItem(x, y, size=2, pen=None, brush=pg.mkBrush(colour),
                                             name="orbit diagram (sweep)"))

    def _special_y(self, s, branch):
        if branch is None:
            return s.amplitude
        m = self.measure.currentText()
        if m == PERIOD:
            return s.period
        if m == NORM:
            return float(np.linalg.norm(list(s.state.values())))
        if branch.maxima is not None and m in branch.maxima and 0 < s.index <= len(branch.values) - 1:
            # a cycle is drawn by its highest and lowest values: mark the point on the highest curve, not at
            # the state where the orbit happens to start
            i, j = s.index - 1, s.index
            a, b = branch.values[i], branch.values[j]
            w = 0.5 if a == b else min(max((s.value - a) / (b - a), 0.0), 1.0)
            return float((1 - w) * branch.maxima[m][i] + w * branch.maxima[m][j])
        return s.state.get(m)

    def _draw_specials(self) -> None:
        text_colour = self.palette().color(self.foregroundRole())
        labelled = set()
        for s, branch in self._specials:
            y = self._special_y(s, branch)
            if y is None or not math.isfinite(y):
                continue
            colour = series_colour(SYMBOL_COLOUR.get(s.type, 1), self)
            self.plot.addItem(pg.ScatterPlotItem([s.value], [y], symbol=SYMBOLS.get(s.type, "o"), size=13,
                                                 pen=pg.mkPen(colour, width=1.5), brush=pg.mkBrush(colour)))
            key = (s.type, round(s.value, 6), round(y, 6))
            if key in labelled:
                continue
            labelled.add(key)
            text = pg.TextItem(s.label, color=text_colour, anchor=label_anchor(s.value, self._x_span()))
            text.setPos(s.value, y)
            self.plot.addItem(text)

    def _fill_table(self) -> None:
        self.table.setRowCount(len(self._specials))
        name = self._x_name()
        for row, (s, branch) in enumerate(self._specials):
            size = max([1.0] + [abs(v) for v in s.state.values()])
            state = ", ".join(f"{k} = {number_text(v if abs(v) > 1e-10 * size else 0.0)}" for k, v in s.state.items())
            cells = [s.label, f"{name} = {s.value:.10g}", state, s.meaning(response=branch is None)]
            for col, text in enumerate(cells):
                item = QTableWidgetItem(text)
                item.setToolTip(text)
                self.table.setItem(row, col, item)
        self.table.resizeColumnsToContents()
        self.table.resizeRowsToContents()

    def _place_legend(self) -> None:
        """Put the legend in the corner of the plot where the fewest drawn points lie."""
        xs, ys = [], []
        for item in self.plot.listDataItems():
            x, y = item.getData() if hasattr(item, "getData") else (None, None)
            if x is not None and len(x):
                xs.append(np.asarray(x, float))
                ys.append(np.asarray(y, float))
        if not xs:
            return
        x, y = np.concatenate(xs), np.concatenate(ys)
        ok = np.isfinite(x) & np.isfinite(y)
        x, y = x[ok], y[ok]
        if not x.size:
            return
        (x0, x1), (y0, y1) = (x.min(), x.max()), (y.min(), y.max())
        u = (x - x0) / max(x1 - x0, 1e-300)
        v = (y - y0) / max(y1 - y0, 1e-300)
        corners = {(0, 0): (u < 0.4) & (v > 0.6), (1, 0): (u > 0.6) & (v > 0.6),
                   (0, 1): (u < 0.4) & (v < 0.4), (1, 1): (u > 0.6) & (v < 0.4)}
        corner = min(corners, key=lambda c: (int(np.sum(corners[c])), c[1], -c[0]))
        offset = (8 if corner[0] == 0 else -8, 8 if corner[1] == 0 else -8)
        self.legend.anchor(itemPos=corner, parentPos=corner, offset=offset)

    def _x_span(self) -> tuple[float, float]:
        values = [b.values for b in self.branches] + ([self.response.values] if self.response is not None else [])
        if not values:
            return (0.0, 1.0)
        return (min(float(np.min(v)) for v in values), max(float(np.max(v)) for v in values))

    def _x_name(self) -> str:
        if self.branches:
            return self.branches[0].parameter
        if self.response is not None:
            return self.response.parameter
        return self.parameter.currentText()

    def _y_label(self) -> str:
        if self.response is not None and not self.branches:
            return f"amplitude of {self.response.observe} (half peak to peak)"
        return self.measure.currentText()

    def _show_info(self) -> None:
        parts = []
        if self.branches:
            n = len(self.branches)
            parts.append(f"One-parameter diagram: {n} branch{'es' if n != 1 else ''}, "
                         f"{len(self._specials)} special point{'s' if len(self._specials) != 1 else ''}")
        if self.response is not None:
            folds = [s for s in self.response.special if s.type == "fold"]
            if folds:
                parts.append("jumps at " + ", ".join(f"{self.response.parameter} = {s.value:.6g}" for s in folds))
            else:
                parts.append(f"response over {len(self.response.values)} points, no jump")
        parts += self.notes
        if parts:
            self.info.setText("; ".join(parts))
            self.info.setToolTip("\n".join(parts))

    def _update_markers(self) -> None:
        name = self._x_name()
        value = self.session.params.get(name)
        show = value is not None and math.isfinite(value)
        self.marker.setVisible(bool(show))
        if show:
            self.marker.setValue(value)
        self.locus_tab.update_marker()

    # ------------------------------------------------------------ gestures
    def _on_click(self, event) -> None:
        point = clicked_point(self.plot, event)
        if point is None or self.system is None:
            return
        nearest = self._nearest_point(point.x(), point.y())
        if nearest is None:
            return
        value, state = nearest
        self.go_to(value, state)
        event.accept()

    def _nearest_point(self, x, y):
        """The branch point nearest a click, in screen proportions: (parameter value, state dict)."""
        vb = self.plot.getViewBox()
        (x0, x1), (y0, y1) = vb.viewRange()
        sx, sy = max(x1 - x0, 1e-300), max(y1 - y0, 1e-300)
        best, found = math.inf, None
        for branch in self.branches:
            lower, upper = self._measure(branch)
            for curve in (lower, upper):
                if curve is None:
                    continue
                d = ((branch.values - x) / sx) ** 2 + ((curve - y) / sy) ** 2
                i = int(np.argmin(d))
                if d[i] < best:
                    best, found = float(d[i]), (float(branch.values[i]), branch.state_at(i))
        r = self.response
        if r is not None:
            d = ((r.values - x) / sx) ** 2 + ((r.amplitudes - y) / sy) ** 2
            i = int(np.argmin(d))
            if d[i] < best:
                best, found = float(d[i]), (float(r.values[i]), {s: float(r.points[k, i])
                                                                 for k, s in enumerate(r.states)})
        return found if best < 0.05 ** 2 else None

    def _on_row(self, row, _col) -> None:
        if 0 <= row < len(self._specials):
            s, _branch = self._specials[row]
            self.go_to(s.value, s.state)

    def go_to(self, value: float, state: dict) -> None:
        """Set the parameter and the initial state there (one undo step); the run follows."""
        s = self.session
        name = self._x_name()
        if self.system is None or name not in self.system.parameters:
            return
        s.undo_stack.beginMacro(f"go to {name} = {value:.6g}")
        try:
            s.set_param(name, float(value))
            for k, v in state.items():
                if k in self.system.states and math.isfinite(v):
                    s.set_initial(k, float(v))
        finally:
            s.undo_stack.endMacro()

    # ------------------------------------------------------------ look
    def _restyle(self) -> None:
        style_plot(self.plot_widget, self)
        back = self.palette().color(self.backgroundRole())
        back.setAlpha(215)
        self.legend.setBrush(pg.mkBrush(back))
        style_plot(self.locus_widget, self)
        accent = muted_colour(self)
        self.marker.setPen(pg.mkPen(accent, width=1, style=Qt.PenStyle.DotLine))
        self.locus_tab.here.setPen(pg.mkPen(accent, width=2))
        if self.system is not None:
            self._redraw()
            self._show_locus()


VIEW = BifurcationView

__all__ = ["BifurcationView", "VIEW", "stable_runs"]
