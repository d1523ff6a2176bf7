"""Fit to data: the project's measured data sets, the choice of what to estimate, the fit as a background
job (``core.fitting``), and its results: estimates with standard errors and 95 % intervals, the
correlations, plain-word warnings; the fitted values can be applied to the model (undoable) or kept as
a named parameter set."""

from __future__ import annotations

import math

import numpy as np
from PySide6.QtCore import Qt
from PySide6.QtGui import QBrush, QColor
from PySide6.QtWidgets import (QAbstractItemView, QComboBox, QHeaderView, QInputDialog, QLabel, QListWidget,
                               QScrollArea, QSpinBox, QTabWidget, QTableWidget, QTableWidgetItem, QVBoxLayout,
                               QWidget)

from orbitdesk.analyses.fitting import FitSettings, fit, predict
from orbitdesk.exports.report_fit import saved_bounds, saved_weights

from orbitdesk.app.datastore import data_store
from orbitdesk.app.plots.plot_style import JobStrip, hint_label, number_text
from orbitdesk.app.views.common import SessionView, check_box, control_row, push_button

HIGH_CORRELATION = 0.95


def _item(text: str, editable: bool = False, tip: str = "") -> QTableWidgetItem:
    item = QTableWidgetItem(text)
    flags = Qt.ItemFlag.ItemIsEnabled | Qt.ItemFlag.ItemIsSelectable
    if editable:
        flags |= Qt.ItemFlag.ItemIsEditable
    item.setFlags(flags)
    if tip:
        item.setToolTip(tip)
    return item


def _check_item(checked: bool, tip: str) -> QTableWidgetItem:
    item = QTableWidgetItem()
    item.setFlags(Qt.ItemFlag.ItemIsEnabled | Qt.ItemFlag.ItemIsUserCheckable)
    item.setCheckState(Qt.CheckState.Checked if checked else Qt.CheckState.Unchecked)
    item.setToolTip(tip)
    return item


def _table(columns: list[str], tip: str) -> QTableWidget:
    table = QTableWidget(0, len(columns))
    table.setHorizontalHeaderLabels(columns)
    table.verticalHeader().setVisible(False)
    table.setSelectionMode(QAbstractItemView.SelectionMode.NoSelection)
    table.setToolTip(tip)
    header = table.horizontalHeader()
    header.setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
    header.setStretchLastSection(False)
    if columns:
        header.setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
    table.setVerticalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAsNeeded)
    return table


def _fit_height(table: QTableWidget, rows_max: int = 12) -> None:
    rows = min(table.rowCount(), rows_max)
    h = table.horizontalHeader().height() + sum(table.rowHeight(r) for r in range(rows)) + 2 * table.frameWidth()
    table.setFixedHeight(max(h, table.horizontalHeader().height() + 8))


def _page():
    page = QWidget()
    layout = QVBoxLayout(page)
    layout.setContentsMargins(6, 6, 6, 6)
    layout.setSpacing(5)
    return page, layout


def _scrolled(page: QWidget) -> QScrollArea:
    scroll = QScrollArea()
    scroll.setWidgetResizable(True)
    scroll.setFrameShape(QScrollArea.Shape.NoFrame)
    scroll.setWidget(page)
    return scroll


def _heading(text: str) -> QLabel:
    label = QLabel(f"<b>{text}</b>")
    label.setTextFormat(Qt.TextFormat.RichText)
    return label


def _bound_text(v) -> str:
    """An editable number: plain digits that ``_parse_bound`` reads back (empty for none)."""
    return "" if v is None else f"{float(v):.6g}"


def _parse_bound(text: str):
    text = text.strip().replace("−", "-")
    if text.lower().lstrip("+-") in ("", "inf", "none"):
        return None
    try:
        v = float(text)
    except ValueError:
        return None
    return v if math.isfinite(v) else None


PAGES = ("set up", "result")


class FitView(SessionView):
    """The Fit to data panel. Its analysis contract: ``compute()`` runs the fit, ``result`` is the latest fit
    result; it computes on request only while its Result page is shown (a walkthrough step that shows the
    Result page shows the fit for the step's values: the step runs it)."""

    view_id = "fit"
    title = "Fit to data"
    on_request = True

    def __init__(self, session, parent=None):
        super().__init__(session, parent)
        self.store = data_store(session)
        self._choices: dict = {}
        self._filling = False

        setup, layout = _page()

        self.data_list = QListWidget()
        self.data_list.setToolTip("The measured data sets kept in the project")
        self.data_list.setMaximumHeight(84)
        self.data_list.currentRowChanged.connect(self._show_details)
        self.details = hint_label()
        self.details.setWordWrap(True)
        self.import_button = push_button("Import...", "Read a measured record (CSV or text with a header)",
                                         self._import)
        self.remove_button = push_button("Remove", "Remove the selected data set from the project", self._remove)
        self.empty_note = hint_label("No data yet: import a record with a time column and columns named after "
                                     "the model's states (File > Import Data...).")
        self.empty_note.setWordWrap(True)
        self.show_button = push_button("Run as this set", "Start the model from the selected data set's own "
                                        "values, so the curves on screen belong to its points (undoable)",
                                        self._run_as_set)
        self.take_button = push_button("Take model values", "Give the selected data set the model's current "
                                       "initial values as its own (undoable)", self._take_values)
        layout.addLayout(control_row(_heading("Data sets"), None, self.import_button, self.remove_button))
        layout.addWidget(self.empty_note)
        layout.addWidget(self.data_list)
        layout.addWidget(self.details)
        layout.addLayout(control_row(self.show_button, self.take_button))

        self.unknowns = _table(["Name", "Estimate", "Per data set", "Low", "High"],
                               "Tick what to estimate; the bounds start at the slider ranges (empty: none)")
        self.weights = _table(["Column", "Weight"], "Weight of each measured quantity (a column with sd(NAME) "
                              "values is weighted by 1/sd instead)")
        layout.addWidget(_heading("Estimate"))
        layout.addWidget(self.unknowns)
        layout.addWidget(_heading("Weights"))
        layout.addWidget(self.weights)

        self.segments = QSpinBox()
        self.segments.setRange(1, 100)
        self.segments.setToolTip("Multiple shooting: cut each record into this many segments joined by "
                                 "continuity (1 = single shooting). Helps long or oscillating records.")
        self.max_evals = QSpinBox()
        self.max_evals.setRange(10, 100000)
        self.max_evals.setValue(400)
        self.max_evals.setToolTip("Model evaluations allowed before the fit stops")
        layout.addLayout(control_row("Segments", self.segments, 10, "Evaluations", self.max_evals))

        self.fit_button = push_button("Fit", "Estimate the ticked values from the data sets", self.run_fit)
        self.residuals_box = check_box("Show residuals", "Draw lines from each data point to the model's value "
                                       "there (in the time series)", False, self._on_residuals)
        self.strip = JobStrip(session, "Fitting")
        layout.addStretch(1)

        self.results = _table(["Estimate", "Value", "Std. error", "95 % interval"],
                              "Estimates with standard errors and 95 % intervals (t distribution)")
        self.results.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.summary = QLabel()
        self.summary.setWordWrap(True)
        self.summary.setTextFormat(Qt.TextFormat.PlainText)
        self.correlation = _table([], "Correlations of the estimates (strong ones, above 0.95, are marked)")
        self.correlation.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.correlation.verticalHeader().setVisible(True)
        self.warnings = QLabel()
        self.warnings.setWordWrap(True)
        self.warnings.setTextFormat(Qt.TextFormat.PlainText)
        self.apply_button = push_button("Apply to model", "Put the fitted values into the model's values "
                                        "(Edit > Undo takes them back)", self.apply_result)
        self.keep_button = push_button("Keep as set...", "Keep the fitted parameter values under a name in the "
                                       "project, without changing the model", self.keep_result)
        self.sets = QComboBox()
        self.sets.setToolTip("Parameter sets kept in the project")
        self.use_set = push_button("Use", "Put the chosen kept set into the model's values (undoable)", self._use_set)
        result_page, layout = _page()
        layout.addWidget(self.results)
        layout.addWidget(self.summary)
        layout.addWidget(self.correlation)
        layout.addWidget(self.warnings)
        layout.addLayout(control_row(self.apply_button, self.keep_button, None))
        layout.addLayout(control_row("Kept sets", self.sets, self.use_set))
        layout.addStretch(1)

        self.tabs = QTabWidget()
        self.tabs.addTab(_scrolled(setup), "Set up")
        self.tabs.addTab(_scrolled(result_page), "Result")
        outer = self.main_layout()
        outer.addLayout(control_row(self.fit_button, self.residuals_box, None, self.strip, stretch=False))
        outer.addWidget(self.tabs, 1)

        self.store.changed.connect(self._refresh_data)
        self.store.resultChanged.connect(self._show_result)
        self.store.changed.connect(self.update_stale)   # (a data set edited: the fit may be stale)
        self.follow_session(values=lambda: self._fill_unknowns())
        self._refresh_data()
        self._show_result(self.store.result)

    # ------------------------------------------------------------ view protocol
    def view_settings(self) -> dict:
        self._read_choices()
        ch = self._choices
        return {"parameters": list(ch["parameters"]), "local": list(ch["local"]), "initial": list(ch["initial"]),
                "bounds": [[k, lo, hi] for k, (lo, hi) in ch["bounds"].items()],
                "weights": [[k, w] for k, w in ch["weights"].items()],
                "segments": self.segments.value(), "max_evaluations": self.max_evals.value(),
                "page": PAGES[self.tabs.currentIndex()]}

    def apply_view_settings(self, d: dict) -> None:
        if not isinstance(d, dict):
            d = {}
        self._choices = {k: [x for x in d.get(k, []) if isinstance(x, str)] if isinstance(d.get(k), list) else []
                         for k in ("parameters", "local", "initial")}
        self._choices["bounds"] = saved_bounds(d)
        self._choices["weights"] = saved_weights(d)
        seg, ev = d.get("segments"), d.get("max_evaluations")
        self.segments.setValue(seg if isinstance(seg, int) and not isinstance(seg, bool) else 1)
        self.max_evals.setValue(ev if isinstance(ev, int) and not isinstance(ev, bool) else 400)
        self._fill_unknowns(read=False)
        self._fill_weights(read=False)
        if d.get("page") in PAGES:
            self.tabs.setCurrentIndex(PAGES.index(d["page"]))

    def _on_project_loaded(self) -> None:
        self.apply_view_settings(self.saved_view_settings())

    def _on_system(self, system) -> None:
        self.system = system
        self._fill_unknowns()

    # ------------------------------------------------------------ data sets
    def _import(self) -> None:
        from orbitdesk.app.panels.data_import import import_dialog
        import_dialog(self.window())

    def _selected(self):
        item = self.data_list.currentItem()
        return self.store.get(item.text()) if item is not None else None

    def _run_as_set(self) -> None:
        d = self._selected()
        if d is not None and self.system is not None:
            params = {k: v for k, v in d.parameters.items() if k in self.system.parameters}
            initial = {k: v for k, v in d.initial.items() if k in self.system.states}
            self.store.apply_values(params, initial, f"Run as data set {d.name}")

    def _take_values(self) -> None:
        import copy

        d = self._selected()
        if d is not None and self.system is not None:
            new = copy.copy(d)
            new.initial = {s: float(v) for s, v in zip(self.system.states, self.session.initial_vector())}
            self.store.replace(d.name, new, f"Initial values of {d.name}")

    def _remove(self) -> None:
        item = self.data_list.currentItem()
        if item is not None:
            self.store.remove(item.text())

    def _refresh_data(self) -> None:
        sets = self.store.datasets
        current = self.data_list.currentItem().text() if self.data_list.currentItem() else None
        self.data_list.blockSignals(True)
        self.data_list.clear()
        for d in sets:
            self.data_list.addItem(d.name)
        self.data_list.blockSignals(False)
        names = [d.name for d in sets]
        self.data_list.setCurrentRow(names.index(current) if current in names else (0 if names else -1))
        self.empty_note.setVisible(not sets)
        self.data_list.setVisible(bool(sets))
        for button in (self.remove_button, self.show_button, self.take_button):
            button.setEnabled(bool(sets))
        self.fit_button.setEnabled(bool(sets))
        self._show_details(self.data_list.currentRow())
        self._fill_weights()
        self.sets.clear()
        self.sets.addItems(list(self.store.parameter_sets))
        self.use_set.setEnabled(self.sets.count() > 0)
        self.residuals_box.blockSignals(True)
        self.residuals_box.setChecked(self.store.show_residuals)
        self.residuals_box.blockSignals(False)

    def _show_details(self, row: int) -> None:
        sets = self.store.datasets
        if not 0 <= row < len(sets):
            self.details.setText("")
            return
        d = sets[row]
        cols = ", ".join(c.label + (f" → {c.target}" if c.target else "") + (" ± sd" if c.sd is not None else "")
                         for c in d.columns)
        src = f"Read from {d.source}" if d.source else "Entered in the project"
        check = f" (SHA-256 {d.checksum[:12]}…)" if d.checksum else ""
        span = f"{d.time_label} from {number_text(d.time[0])} to {number_text(d.time[-1])}"
        own = ", ".join(f"{k} = {number_text(v)}" for k, v in {**d.initial, **d.parameters}.items())
        self.details.setText(f"{d.n_samples} samples of {cols}, {span}. {src}{check}."
                             + (f" Its own values: {own}." if own else ""))

    # ------------------------------------------------------------ choices
    def _read_choices(self) -> None:
        """Take the choices from the tables into ``_choices`` (a table not filled yet keeps what was there)."""
        if self._filling:
            return
        ch = self._choices
        if self.unknowns.rowCount():
            params, local, initial, bounds = [], [], [], {}
            for r in range(self.unknowns.rowCount()):
                head = self.unknowns.item(r, 0)
                name, kind = head.data(Qt.ItemDataRole.UserRole), head.data(Qt.ItemDataRole.UserRole + 1)
                if self.unknowns.item(r, 1).checkState() == Qt.CheckState.Checked:
                    if kind == "initial":
                        initial.append(name)
                    elif self.unknowns.item(r, 2).checkState() == Qt.CheckState.Checked:
                        local.append(name)
                    else:
                        params.append(name)
                pair = [_parse_bound(self.unknowns.item(r, 3).text()), _parse_bound(self.unknowns.item(r, 4).text())]
                default = self.session.param_range(name) if kind == "parameter" else (None, None)
                if [None if v is None else float(_bound_text(v)) for v in default] != pair:
                    bounds[name] = tuple(pair)  # only bounds the user changed; the rest follow the slider ranges
            ch.update(parameters=params, local=local, initial=initial, bounds=bounds)
        if self.weights.rowCount():
            weights = {}
            for r in range(self.weights.rowCount()):
                item = self.weights.item(r, 1)
                if item.flags() & Qt.ItemFlag.ItemIsEditable:
                    v = _parse_bound(item.text())
                    if v is not None and v > 0:
                        weights[self.weights.item(r, 0).data(Qt.ItemDataRole.UserRole)] = v
            ch["weights"] = weights
        for key in ("parameters", "local", "initial"):
            ch.setdefault(key, [])
        ch.setdefault("bounds", {})
        ch.setdefault("weights", {})

    def _fill_unknowns(self, read: bool = True) -> None:
        system = self.system
        if system is None:
            return
        if read:
            self._read_choices()
        ch = self._choices
        self._filling = True
        rows = [(n, "parameter") for n in system.parameters] + [(s, "initial") for s in system.states]
        self.unknowns.setRowCount(len(rows))
        for r, (name, kind) in enumerate(rows):
            label = _item(name if kind == "parameter" else f"{name}(0)" if system.kind != "map" else f"{name}[0]")
            label.setData(Qt.ItemDataRole.UserRole, name)
            label.setData(Qt.ItemDataRole.UserRole + 1, kind)
            self.unknowns.setItem(r, 0, label)
            chosen = name in (ch.get("parameters", []) + ch.get("local", []) if kind == "parameter"
                              else ch.get("initial", []))
            self.unknowns.setItem(r, 1, _check_item(chosen, f"Estimate {name}"))
            if kind == "parameter":
                self.unknowns.setItem(r, 2, _check_item(name in ch.get("local", []),
                                                        f"Estimate {name} separately for each data set"))
                lo, hi = self.session.param_range(name)
            else:
                self.unknowns.setItem(r, 2, _item("each", tip="Initial values always belong to each data set"))
                lo = hi = None
            saved = ch.get("bounds", {}).get(name)
            if saved is not None:
                lo, hi = saved
            self.unknowns.setItem(r, 3, _item(_bound_text(lo), True, "Lower bound (empty: none)"))
            self.unknowns.setItem(r, 4, _item(_bound_text(hi), True, "Upper bound (empty: none)"))
        self._filling = False
        _fit_height(self.unknowns)

    def _fill_weights(self, read: bool = True) -> None:
        if read:
            self._read_choices()
        saved = self._choices.get("weights", {})
        seen = []
        for d in self.store.datasets:
            for c in d.columns:
                if c.quantity not in [q for q, _ in seen]:
                    seen.append((c.quantity, c.sd is not None))
        self._filling = True
        self.weights.setRowCount(len(seen))
        for r, (q, has_sd) in enumerate(seen):
            label = _item(q)
            label.setData(Qt.ItemDataRole.UserRole, q)
            self.weights.setItem(r, 0, label)
            if has_sd:
                self.weights.setItem(r, 1, _item("1/sd from the sd column"))
            else:
                self.weights.setItem(r, 1, _item(_bound_text(saved.get(q, 1.0)), True, "Weight of this column"))
        self._filling = False
        _fit_height(self.weights, 6)

    def fit_settings(self) -> FitSettings:
        self._read_choices()
        ch = self._choices
        s = self.session.solver
        bounds = dict(ch.get("bounds", {}))
        return FitSettings(parameters=list(ch["parameters"]), local=list(ch["local"]), initial=list(ch["initial"]),
                           bounds=bounds, weights=dict(ch.get("weights", {})),
                           multiple_shooting=self.segments.value(), max_evaluations=self.max_evals.value(),
                           t_start=s.t_start, method=s.method)

    # ------------------------------------------------------------ the analysis contract
    @property
    def result(self):
        """The latest fit result (None: none yet)."""
        return self.store.result

    def follows_values(self) -> bool:
        """Nothing to compute while the set-up page is shown; the Result page shows a fit of the values now set."""
        return PAGES[self.tabs.currentIndex()] != "result"

    def compute(self) -> None:
        self.run_fit()

    # ------------------------------------------------------------ running
    def run_fit(self) -> None:
        system, sets = self.system, self.store.datasets
        if system is None or not sets:
            return
        settings = self.fit_settings()
        p0, u0 = self.session.param_vector(), self.session.initial_vector()
        ranges = {n: self.session.param_range(n) for n in system.parameters}

        basis = self.session.doc.basis(data=[d.name for d in sets])  # what the fit is computed for

        def job(cancel, report):
            return fit(system, sets, settings, p0, u0, ranges, cancel=cancel, progress=report)

        self.strip.run("fit", job, lambda result: self.store.set_result(result, basis), on_error=self._failed)

    def _failed(self, message: str) -> None:
        self.warnings.setText(f"The fit could not run: {message}")

    def _on_residuals(self, on: bool) -> None:
        if not on:
            self.store.clear_residuals()
            return
        system, sets = self.system, self.store.datasets
        if system is None or not sets:
            return
        p0, u0, t0 = self.session.param_vector(), self.session.initial_vector(), self.session.solver.t_start

        def job(cancel, report):
            out = {}
            for d in sets:
                p, u = p0.copy(), u0.copy()
                for k, v in d.parameters.items():
                    if k in system.parameters:
                        p[system.parameters.index(k)] = v
                for k, v in d.initial.items():
                    if k in system.states:
                        u[system.states.index(k)] = v
                out[d.name] = predict(system, d, p, u, t0)
                cancel.check()
            return out

        self.session.run_job("fit-residuals", job, self.store.set_residuals)

    # ------------------------------------------------------------ results
    def stale_text(self) -> str:
        """Words when the document's fit was computed for other values or other data (document/results.py)."""
        return self.session.result_stale("fit") if self.store.result is not None else ""

    def _show_result(self, result) -> None:
        self.update_stale()
        self.apply_button.setEnabled(result is not None)
        self.keep_button.setEnabled(result is not None)
        if result is None:
            self.results.setRowCount(0)
            self.correlation.setRowCount(0)
            self.correlation.setColumnCount(0)
            self.summary.setText("")
            self.warnings.setText("")
            self.results.setVisible(False)
            self.correlation.setVisible(False)
            return
        self.results.setVisible(True)
        self.tabs.setCurrentIndex(1)
        est = result.estimates
        self.results.setRowCount(len(est))
        for r, e in enumerate(est):
            self.results.setItem(r, 0, _item(e.name if e.kind == "parameter" else f"{e.name}, initial"))
            self.results.setItem(r, 1, _item(number_text(e.value, 7)))
            self.results.setItem(r, 2, _item(number_text(e.stderr, 3) if e.stderr is not None else "–"))
            iv = f"{number_text(e.interval[0], 5)} … {number_text(e.interval[1], 5)}" if e.interval else "–"
            self.results.setItem(r, 3, _item(iv))
        _fit_height(self.results)
        rms = ", ".join(f"{q} {number_text(v, 3)}" for q, v in result.residual_rms.items())
        self.summary.setText(f"{result.message.capitalize()} after {result.evaluations} model evaluations; "
                             f"residual RMS {rms}; {result.dof} degrees of freedom.")
        n = len(est)
        self.correlation.setVisible(n > 1)
        self.correlation.setColumnCount(n)
        self.correlation.setRowCount(n)
        short = [e.name for e in est]
        self.correlation.setHorizontalHeaderLabels(short)
        self.correlation.setVerticalHeaderLabels(short)
        strong = QBrush(QColor(214, 120, 40, 90))
        for a in range(n):
            for b in range(n):
                v = result.correlation[a, b]
                item = _item("–" if not np.isfinite(v) else f"{v:+.2f}")
                item.setTextAlignment(Qt.AlignmentFlag.AlignCenter)
                if a != b and np.isfinite(v) and abs(v) > HIGH_CORRELATION:
                    item.setBackground(strong)
                self.correlation.setItem(a, b, item)
        _fit_height(self.correlation)
        self.warnings.setText("\n".join(f"• {w[:1].upper()}{w[1:]}." for w in result.warnings)
                              if result.warnings else "No warnings: every estimate is determined by the data.")

    def _values_of(self, result):
        """(model parameters, model initial values, per-data-set values) from a result."""
        params = result.shared_values()
        initial, per = {}, {}
        several = len(self.store.datasets) > 1
        for e in result.estimates:
            if e.dataset is None:
                continue
            if e.kind == "initial" and not several:
                initial[e.target] = e.value
            else:
                table = per.setdefault(e.dataset, ({}, {}))
                table[0 if e.kind == "parameter" else 1][e.target] = e.value
        return params, initial, per

    def apply_result(self) -> None:
        result = self.store.result
        if result is None:
            return
        params, initial, per = self._values_of(result)
        stack = self.session.undo_stack
        stack.beginMacro("Apply fitted values")
        try:
            if per:
                import copy
                for name, (p, u) in per.items():
                    d = self.store.get(name)
                    if d is not None:
                        new = copy.copy(d)
                        new.parameters, new.initial = {**d.parameters, **p}, {**d.initial, **u}
                        self.store.replace(name, new, f"Fitted values of {name}")
            self.store.apply_values(params, initial)
        finally:
            stack.endMacro()

    def keep_result(self) -> None:
        result = self.store.result
        if result is None:
            return
        name, ok = QInputDialog.getText(self, "Keep parameter set", "Name of the set:",
                                        text=f"fit {len(self.store.parameter_sets) + 1}")
        if ok and name.strip():
            params, _initial, _per = self._values_of(result)
            self.store.keep_parameter_set(name.strip()[:100], {**self.session.params, **params})

    def _use_set(self) -> None:
        values = self.store.parameter_sets.get(self.sets.currentText())
        if values:
            known = {k: v for k, v in values.items() if self.system is None or k in self.system.parameters}
            self.store.apply_values(known, {}, f"Use parameter set {self.sets.currentText()}")


VIEW = FitView
