"""Bifurcation diagram: continued branches against a parameter (steady states, cycles born at Hopf
points, or the periodic response of a forced model with stepped sweeps over it), special points marked
and listed in words, and a second tab with fold and Hopf curves in two parameters.

Stable parts are drawn solid, unstable parts dashed. Clicking a branch or a row of the table sets the
parameter (and the state) there, so the run shows what happens at that point. All computing is done by
``orbitdesk.analyses.continuation`` in session jobs with progress and Cancel; the branches are kept in the
project with the view's settings, so walkthrough steps can show them.
"""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QPointF, Qt, Signal
from PySide6.QtGui import QColor, QPolygonF
from PySide6.QtWidgets import (QAbstractItemView, QGraphicsPolygonItem, QHeaderView, QSplitter, QTableWidget,
                               QTableWidgetItem, QTabWidget, QVBoxLayout, QWidget)

from orbitdesk.app.views import muted_colour, series_colour, style_plot
from orbitdesk.app.plots.plot_style import JobStrip, NumberBox, number_text
from orbitdesk.app.views.common import (SessionView, check_box, clicked_point, combo_box, control_row, fill_combo,
                                        fill_default_range, is_number, push_button, quiet, select_text,
                                        status_label, status_row)

STEADY, CYCLES, CYCLE_HERE, RESPONSE = "steady", "cycles", "cycle", "response"
FOLLOW_LABELS = {STEADY: "steady states", CYCLES: "steady states and their cycles",
                 CYCLE_HERE: "the cycle the run settles on", RESPONSE: "forced response"}
NORM, PERIOD, AMPLITUDE = "size of the state (norm)", "period", "amplitude"
# a marker shape per kind of point (pyqtgraph symbols); colours come from the series palette
SYMBOLS = {"fold": "d", "hopf": "star", "branch point": "+", "cycle fold": "d", "period doubling": "s",
           "torus": "o", "cusp": "t", "bogdanov-takens": "p", "generalised hopf": "h"}
SYMBOL_COLOUR = {"fold": 1, "cycle fold": 1, "hopf": 4, "branch point": 5, "period doubling": 2, "torus": 6,
                 "cusp": 1, "bogdanov-takens": 5, "generalised hopf": 4}
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


def _label_anchor(x, span):
    """Labels right of a point in the left part of the plot, left of it in the right part (never clipped)."""
    lo, hi = span
    return (1.1, 1.1) if x > lo + 0.7 * (hi - lo) else (-0.15, 1.1)


def _same_place(a, b) -> bool:
    """Two special points at one parameter value and state (found on two branches through it)."""
    scale = 1.0 + abs(a.value) + sum(abs(v) for v in a.state.values())
    gap = abs(a.value - b.value) + sum(abs(a.state[k] - b.state.get(k, math.inf)) for k in a.state)
    return gap < 1e-7 * scale


class BifurcationView(SessionView):
    view_id = "bifurcation"
    on_request = True
    title = "Bifurcation diagram"

    resultChanged = Signal()

    def __init__(self, session, parent=None):
        super().__init__(session, parent)
        self.branches = []  # core Branch objects (steady states and cycles)
        self.response = None  # ResponseCurve (continued)
        self.stepped = []  # ResponseCurve (stepped up / down)
        self.locus_result = None
        self.locus_region = None  # the shaded region between fold curves meeting at a cusp
        self.notes: list[str] = []
        self._wanted = None
        self._range_for = None
        self._specials = []  # (Special, Branch or None) in table order
        self._shown_request = None  # (follow, parameter, from, to, stepped) of the branches shown

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

        # ---- two-parameter controls
        self.locus_kind = combo_box("Which point to follow in two parameters", ["fold", "Hopf"])
        self.param2 = combo_box("The second parameter")
        self.lo2 = NumberBox(-1.0, -1e12, 1e12, step=0.1)
        self.lo2.setToolTip("Lowest value of the second parameter")
        self.hi2 = NumberBox(1.0, -1e12, 1e12, step=0.1)
        self.hi2.setToolTip("Highest value of the second parameter")
        self.locus_button = push_button("Compute", "Follow the fold or Hopf point found on the branch (first tab's "
                                        "parameter and interval) as both parameters move", self.compute_locus)
        self.locus_widget = pg.PlotWidget()
        self.locus_plot = self.locus_widget.getPlotItem()
        self.locus_widget.setToolTip("Click to set both parameters there")
        self.locus_widget.scene().sigMouseClicked.connect(self._on_locus_click)
        self.locus_here = pg.ScatterPlotItem(size=11, symbol="x")
        self.locus_plot.addItem(self.locus_here)
        self.locus_table = QTableWidget(0, 3)
        self.locus_table.setHorizontalHeaderLabels(["Point", "At", "What it means"])
        self.locus_table.verticalHeader().setVisible(False)
        self.locus_table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.locus_table.horizontalHeader().setSectionResizeMode(2, QHeaderView.ResizeMode.Stretch)
        self.locus_table.setMaximumHeight(110)
        loci_tab = QWidget()
        l2 = QVBoxLayout(loci_tab)
        l2.setContentsMargins(0, 4, 0, 0)
        l2.addLayout(control_row("Follow the", self.locus_kind, "point in", self.param2, "from", self.lo2, "to",
                                 self.hi2, None, self.locus_button, stretch=False))
        l2.addWidget(self.locus_widget, 1)
        l2.addWidget(self.locus_table)

        self.tabs = QTabWidget()
        self.tabs.addTab(branches_tab, "One parameter")
        self.tabs.addTab(loci_tab, "Two parameters")
        main = self.main_layout()
        main.addWidget(self.tabs, 1)
        main.addLayout(status_row(self.info, self.strip))
        self._restyle()
        self.follow_session(values=self._on_values)

    # ------------------------------------------------------------ view protocol
    def view_settings(self) -> dict:
        d = {"follow": self.follow_mode(), "parameter": self.parameter.currentText(), "from": float(self.lo.value()),
             "to": float(self.hi.value()), "measure": self.measure.currentText(), "overlay": self.overlay.isChecked(),
             "stepped": self.stepped_box.isChecked(), "locus_kind": self.locus_kind.currentText(),
             "param2": self.param2.currentText(), "from2": float(self.lo2.value()), "to2": float(self.hi2.value()),
             "tab": self.tabs.currentIndex(), "branches": [b.to_saved() for b in self.branches],
             "response": self.response.to_dict() if self.response is not None else {},
             "stepped_sweeps": [c.to_dict() for c in self.stepped],
             "locus": self.locus_result.to_dict() if self.locus_result is not None else {}}
        return d

    def apply_view_settings(self, d: dict) -> None:
        if not isinstance(d, dict):
            return
        self._wanted = dict(d)
        self.overlay.setChecked(bool(d.get("overlay", False)))
        self.stepped_box.setChecked(bool(d.get("stepped", True)))
        if isinstance(d.get("tab"), int) and 0 <= d["tab"] < self.tabs.count():
            self.tabs.setCurrentIndex(d["tab"])
        self._restore_results(d)
        if self.branches or self.response is not None:
            # stored branches are shown as they are: they were computed for the values set with them
            self._shown_request = (d.get("follow"), d.get("parameter"), d.get("from"), d.get("to"),
                                   bool(d.get("stepped", True)))
            self.begin_computing(skip=d.get("parameter"))
            self.shown_computed()
        if self.system is not None:
            self._apply_wanted()
            self._fill_measures()
            select_text(self.measure, d.get("measure"))
            self._redraw()

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
        if (self.branches or self.response is not None) and self._shown_request == self.request() \
                and not self.is_stale():
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
        self._pending_request = self.request()
        self.begin_computing(skip=name)
        self.strip.what = f"Following {FOLLOW_LABELS[mode]} in {name}"
        self.strip.run("bifurcation", job, self._adopt, on_error=lambda m: None)

    def compute_locus(self) -> None:
        s = self.system
        if s is None or len(s.parameters) < 2:
            self.info.setText("Two-parameter curves need a model with two parameters")
            return
        name, name2 = self.parameter.currentText(), self.param2.currentText()
        if name == name2:
            self.info.setText("Choose a second parameter other than the first tab's parameter")
            return
        lo, hi = float(self.lo.value()), float(self.hi.value())
        range2 = (float(self.lo2.value()), float(self.hi2.value()))
        kind = "fold" if self.locus_kind.currentIndex() == 0 else "hopf"
        u0, p = self.session.initial_vector(), self.session.param_vector()

        def job(cancel, report):
            from orbitdesk.analyses.continuation.loci import locus

            return ("locus", locus(s, kind, name, name2, lo, hi, p, initial=u0, range2=range2, cancel=cancel,
                                   progress=report), None)

        self.strip.what = f"Following the {kind} point in {name} and {name2}"
        self.strip.run("bifurcation-locus", job, self._adopt, on_error=lambda m: None)

    def _adopt(self, outcome) -> None:
        kind, result, extra = outcome
        if kind == "locus":
            self.locus_result = result
            self.tabs.setCurrentIndex(1)
        elif kind == "response":
            self.branches, self.response, self.stepped, self.notes = [], result, list(extra or []), []
        else:
            self.branches, self.response, self.stepped = list(result.branches), None, []
            self.notes = list(result.notes)
        if kind != "locus":
            self._shown_request = getattr(self, "_pending_request", None)
            self.shown_computed()
        self._fill_measures()
        self._redraw()
        self.resultChanged.emit()
        self.session.mark_dirty()  # the branches are kept in the project
        self.settings_changed()

    def values_now(self, skip=None):
        """Branches do not depend on the initial state (it only picks where the search starts), so a
        click that moves the state onto a branch does not make them stale."""
        basis = super().values_now(skip)
        basis.initial = {}
        return basis

    # ------------------------------------------------------------ session events
    def _on_project_loaded(self) -> None:
        self.system = None
        self.branches, self.response, self.stepped, self.locus_result = [], None, [], None
        self._range_for = None
        self.shown_nothing()
        self.apply_view_settings(self.saved_view_settings())

    def _on_system(self, system) -> None:
        old = self.system
        self.system = system
        if old is not None and (list(old.parameters) != list(system.parameters)
                                or list(old.states) != list(system.states)):
            self.branches, self.response, self.stepped, self.locus_result = [], None, [], None
            self.shown_nothing()
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
        self._redraw()
        if not (self.branches or self.response):
            self.info.setText("Compute follows every steady state through the interval, unstable ones included, "
                              "and marks where the behaviour changes")

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

    def _restore_results(self, d) -> None:
        from orbitdesk.analyses.continuation.results import Branch, locus_from_saved, response_from_saved

        self.branches, self.response, self.stepped, self.locus_result = [], None, [], None
        try:
            self.branches = [Branch.from_saved(b) for b in d.get("branches", [])]
            if isinstance(d.get("response"), dict) and d["response"]:
                self.response = response_from_saved(d["response"])
            self.stepped = [response_from_saved(c) for c in d.get("stepped_sweeps", [])]
            if isinstance(d.get("locus"), dict) and d["locus"]:
                self.locus_result = locus_from_saved(d["locus"])
        except (KeyError, TypeError, ValueError, AttributeError, IndexError):
            self.branches, self.response, self.stepped, self.locus_result = [], None, [], None
            self.info.setText("The saved branches could not be read; press Compute to follow them again")

    def _on_values(self) -> None:
        self._update_markers()

    def _on_follow(self, _index=None) -> None:
        self._fill_measures()

    def _on_parameter(self, _index=None) -> None:
        name = self.parameter.currentText()
        if not name or self.system is None:
            return
        if self._range_for != name:
            fill_default_range(self.session, name, self.lo, self.hi)
            self._range_for = name
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
        self._draw_locus()
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
        view = getattr(self.window(), "views", {}).get("sweep")
        result = getattr(view, "result", None)
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
            text = pg.TextItem(s.label, color=text_colour, anchor=_label_anchor(s.value, self._x_span()))
            text.setPos(s.value, y)
            self.plot.addItem(text)

    def _fill_table(self) -> None:
        self.table.setRowCount(len(self._specials))
        name = self._x_name()
        for row, (s, branch) in enumerate(self._specials):
            size = max([1.0] + [abs(v) for v in s.state.values()])
            state = ", ".join(f"{k} = {number_text(v if abs(v) > 1e-10 * size else 0.0)}" for k, v in s.state.items())
            cells = [s.label, f"{name} = {s.value:.10g}", state, self._meaning(s, branch is None)]
            for col, text in enumerate(cells):
                item = QTableWidgetItem(text)
                item.setToolTip(text)
                self.table.setItem(row, col, item)
        self.table.resizeColumnsToContents()
        self.table.resizeRowsToContents()

    @staticmethod
    def _meaning(s, response=False) -> str:
        if response and s.type == "fold":
            return "the stable and unstable responses meet: a slow sweep jumps here"
        if s.type == "hopf":
            l1 = s.first_lyapunov_coefficient
            onset = ("a small stable oscillation grows gently (soft onset)" if l1 is not None and l1 < 0 else
                     "oscillation starts with a jump (hard onset)" if l1 is not None and l1 > 0 else "")
            freq = f"frequency {number_text(s.frequency)}, " if s.frequency is not None else ""
            coeff = f" (first Lyapunov coefficient {l1:.4g})" if l1 is not None else ""
            return f"{freq}{onset}{coeff}"
        return {"fold": "two steady states meet and vanish: a jump happens here",
                "branch point": "two branches cross: the other branch is drawn too",
                "cycle fold": "two cycles meet and vanish" + (f" (period {number_text(s.period)})" if s.period else ""),
                "period doubling": "a multiplier passes -1: the period doubles",
                "torus": "a pair of multipliers leaves the unit circle: a second frequency appears"}.get(s.type, "")

    def _draw_locus(self) -> None:
        self.locus_plot.clear()
        self.locus_plot.addItem(self.locus_here)
        self.locus_table.setRowCount(0)
        L = self.locus_result
        if L is None:
            return
        colour = series_colour(1 if L.kind == "fold" else 4, self)
        self.locus_region = None
        if L.kind == "fold" and any(s["type"] == "cusp" for s in L.special):
            box = (float(self.lo.value()), float(self.hi.value()), float(self.lo2.value()), float(self.hi2.value()))
            corners = region_between_fold_curves(L.values[0], L.values[1], box)
            if corners is not None:
                fill = QColor(colour)
                fill.setAlpha(45)
                inside = QPolygonF([QPointF(box[0], box[2]), QPointF(box[1], box[2]), QPointF(box[1], box[3]),
                                    QPointF(box[0], box[3])])
                polygon = QPolygonF([QPointF(x, y) for x, y in corners]).intersected(inside)
                self.locus_region = QGraphicsPolygonItem(polygon)
                self.locus_region.setBrush(fill)
                self.locus_region.setPen(pg.mkPen(None))
                self.locus_region.setToolTip("Between the fold curves: two more steady states than outside, so the "
                                             "state depends on the way there (hysteresis)")
                self.locus_plot.addItem(self.locus_region)
        self.locus_plot.plot(L.values[0], L.values[1], pen=pg.mkPen(colour, width=2))
        p1, p2 = L.parameters
        self.locus_plot.setLabel("bottom", p1)
        self.locus_plot.setLabel("left", p2)
        from orbitdesk.analyses.continuation.results import LABELS

        text_colour = self.palette().color(self.foregroundRole())
        self.locus_table.setRowCount(len(L.special))
        meanings = {"cusp": "two fold curves meet: the region of two steady states ends here",
                    "bogdanov-takens": "the Hopf curve ends on the fold curve (zero frequency)",
                    "generalised hopf": "the onset of oscillation turns from soft to hard"}
        for row, s in enumerate(L.special):
            x, y = s["values"][p1], s["values"][p2]
            symbol_colour = series_colour(SYMBOL_COLOUR.get(s["type"], 1), self)
            self.locus_plot.addItem(pg.ScatterPlotItem([x], [y], symbol=SYMBOLS.get(s["type"], "o"), size=13,
                                                       pen=pg.mkPen(symbol_colour), brush=pg.mkBrush(symbol_colour)))
            span = (float(np.min(L.values[0])), float(np.max(L.values[0])))
            label = pg.TextItem(LABELS.get(s["type"], s["type"]), color=text_colour, anchor=_label_anchor(x, span))
            label.setPos(x, y)
            self.locus_plot.addItem(label)
            cells = [LABELS.get(s["type"], s["type"]), f"{p1} = {x:.8g}, {p2} = {y:.8g}", meanings.get(s["type"], "")]
            for col, text in enumerate(cells):
                self.locus_table.setItem(row, col, QTableWidgetItem(text))
        self.locus_table.resizeColumnsToContents()

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
        L = self.locus_result
        if L is not None:
            a, b = (self.session.params.get(n) for n in L.parameters)
            self.locus_here.setData([a], [b]) if a is not None and b is not None else self.locus_here.setData([], [])

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

    def _on_locus_click(self, event) -> None:
        point = clicked_point(self.locus_plot, event)
        if point is None or self.locus_result is None:
            return
        p1, p2 = self.locus_result.parameters
        s = self.session
        s.undo_stack.beginMacro(f"go to {p1}, {p2}")
        try:
            s.set_param(p1, float(point.x()))
            s.set_param(p2, float(point.y()))
        finally:
            s.undo_stack.endMacro()
        event.accept()

    # ------------------------------------------------------------ look
    def _restyle(self) -> None:
        style_plot(self.plot_widget, self)
        back = self.palette().color(self.backgroundRole())
        back.setAlpha(215)
        self.legend.setBrush(pg.mkBrush(back))
        style_plot(self.locus_widget, self)
        accent = muted_colour(self)
        self.marker.setPen(pg.mkPen(accent, width=1, style=Qt.PenStyle.DotLine))
        self.locus_here.setPen(pg.mkPen(accent, width=2))
        if self.system is not None:
            self._redraw()


VIEW = BifurcationView

__all__ = ["BifurcationView", "VIEW", "stable_runs"]


def region_between_fold_curves(x, y, box):
    """The polygon between the two arms of a fold curve that meet at a cusp, closed along the edge of the
    computed range ``box`` = (x0, x1, y0, y1) where the arms leave it (through its corner when they leave by
    two adjacent edges); None when an arm ends inside the range or the arms leave by opposite edges (the
    region is then not drawn)."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    if len(x) < 3:
        return None
    size = (max(box[1] - box[0], 1e-300), max(box[3] - box[2], 1e-300))

    def edge(i):
        beyond = [(box[0] - x[i]) / size[0], (x[i] - box[1]) / size[0],
                  (box[2] - y[i]) / size[1], (y[i] - box[3]) / size[1]]
        k = int(np.argmax(beyond))
        return k if beyond[k] > -0.01 else None

    first, last = edge(0), edge(-1)
    if first is None or last is None:
        return None
    points = list(zip(x, y))
    if first != last:
        if {first, last} in ({0, 1}, {2, 3}):
            return None
        vertical = last if last in (0, 1) else first
        horizontal = last if last in (2, 3) else first
        points.append((box[vertical], box[horizontal]))
    return points
