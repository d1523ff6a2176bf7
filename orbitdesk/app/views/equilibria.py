"""Equilibria (fixed points of maps): where they are, their eigenvalues and type; the selected one's
Jacobian and eigenvectors, and trajectories started just off it along each real eigen-direction."""

from __future__ import annotations

from html import escape

import numpy as np
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (QAbstractItemView, QFrame, QGridLayout, QLabel, QLayout, QScrollArea, QSizePolicy,
                               QSplitter, QTableWidget, QTableWidgetItem, QToolButton, QWidget)

from orbitdesk.app.layouts import FittedColumns, WholeText, column, row

from orbitdesk.app.panels.readback import equation_lhs, partial_label
from orbitdesk.app.plots.plot_style import JobStrip, NumberBox, complex_text, eigenvalues_text, hint_label, mono_font, number_text
from orbitdesk.app.views.common import SessionView, auto_timer, check_box, control_row, push_button

AUTO_MAX_STATES = 4      # models this small are searched again by themselves when they change
AUTO_DELAY_MS = 350
DEFAULT_EPS = 1e-3
TABLE_ROWS = 4           # rows the table always has room for (more scroll)
TABLE_ROOTS = 2          # eigenvalue entries (a conjugate pair is one) in the table; all of them below and in the tip
TABLE_WIDEST_LEAST = 520  # pixels: the most the table asks for to keep every column in sight
MAX_START_BUTTONS = 8    # eigen-directions offered as buttons (the largest models get the first ones)


def _method_text(method: str) -> str:
    return {"exact": "exact solve", "newton": "Newton search", "exact+newton": "exact solve and Newton"}.get(
        method, method)


def eigen_starts(eq, eps: float) -> list[dict]:
    """Starts eq ± eps * v along each real eigenvector v (unit length), with the direction in time that
    leaves the point: forward along unstable directions, backward along stable ones.

    Each start is {"u0": list, "backward": bool, "label": str, "eigenvalue": float, "index": k}."""
    out = []
    is_map = eq.is_map
    values, vectors = np.asarray(eq.eigenvalues), np.asarray(eq.eigenvectors)
    scale = max(1.0, abs(complex(values[0])) if values.size else 1.0)
    for k, lam in enumerate(values):
        if abs(lam.imag) > 1e-12 * scale:
            continue
        v = np.real(vectors[:, k])
        norm = np.linalg.norm(v)
        if norm == 0:
            continue
        v = v / norm
        growth = (abs(lam.real) > 1.0) if is_map else (lam.real > 0)
        for sign in (+1, -1):
            u0 = np.asarray(eq.vector, dtype=float) + sign * eps * v
            out.append({"u0": [float(x) for x in u0], "backward": (not growth) and not is_map,
                        "label": f"{'+' if sign > 0 else '−'}v{k + 1}", "eigenvalue": float(lam.real),
                        "index": k})
    return out


def _matrix_html(rows, col_heads=None, row_heads=None) -> str:
    cells = []
    if col_heads:
        head = "".join(f"<th align='right' nowrap style='padding:1px 10px; white-space:nowrap'>{h}</th>"
                       for h in col_heads)
        cells.append(f"<tr>{'<th></th>' if row_heads else ''}{head}</tr>")
    for i, row in enumerate(rows):
        lead = (f"<th align='right' nowrap style='padding:1px 8px; white-space:nowrap'>{row_heads[i]}</th>"
                if row_heads else "")
        # cells never wrap (a number broken after its sign): a matrix wider than the pane scrolls sideways
        body = "".join(f"<td align='right' nowrap style='padding:1px 10px; white-space:nowrap'>{c}</td>" for c in row)
        cells.append(f"<tr>{lead}{body}</tr>")
    return f"<table cellspacing='0'>{''.join(cells)}</table>"


EXACT_JOB = "equilibria-exact"  # the exact solve after the Newton search's table: a job of its own, no strip


class EquilibriaView(SessionView):
    view_id = "equilibria"
    on_request = True
    title = "Equilibria"

    equilibriaChanged = Signal(object)     # the Equilibria list after each search (may be empty), the exact
    #                                        solve's refinement included (the table shows the Newton search's before)
    equilibriumSelected = Signal(object)   # the selected Equilibrium, or None
    startsRequested = Signal(object)       # list of start dicts (see eigen_starts)

    @property
    def equilibria(self) -> list:
        """The document's equilibria, also when found for other values (shown under the stale bar)."""
        return self.session.equilibria

    def stale_text(self) -> str:
        return self.session.doc.equilibria_stale() if self.system is not None else ""

    def __init__(self, session, parent=None):
        super().__init__(session, parent)
        self.notes: list[str] = []
        self._wanted_selection: int | None = None
        self._searched_generation = None

        self.find_button = push_button("Find", "Search for equilibria with the current parameter values", self.find)
        self.auto = check_box("Automatic", f"Search again whenever the model or its values change "
                              f"(models with up to {AUTO_MAX_STATES} states)", True,
                              lambda on: on and self._schedule())
        self.strip = JobStrip(session, "Searching")
        self.summary = hint_label()  # wrapped: a long note must not widen the dock (and the window) past the screen
        self.summary.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)

        self.table = QTableWidget(0, 0)
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.verticalHeader().setVisible(False)
        self.table.setAlternatingRowColors(True)
        self.table.setWordWrap(False)
        self.table.setToolTip("Equilibria found; select one to see its linearisation")
        self.table.itemSelectionChanged.connect(self._on_selection)
        self.columns = FittedColumns(self.table)  # the words give way (elided, whole in the tip) to the numbers

        self.details = WholeText()  # the pane below scrolls as one: no second bar inside it
        self.details.setOpenLinks(False)
        self.details.setToolTip("Jacobian and eigenvectors of the selected equilibrium")
        self.eps = NumberBox(DEFAULT_EPS, 1e-9, 1.0, ratio=2.0)
        self.eps.setToolTip("How far off the equilibrium the new trajectories start (along a unit eigenvector)")
        self.eps.valueChanged.connect(lambda _v: self._fill_start_buttons())
        self.starts_box = QWidget()
        self.starts_grid = QGridLayout(self.starts_box)
        self.starts_grid.setContentsMargins(0, 0, 0, 0)
        self.starts_grid.setHorizontalSpacing(4)
        self.starts_grid.setVerticalSpacing(2)
        self.all_button = QToolButton(text="All directions")
        self.all_button.setToolTip("Start trajectories along every real eigen-direction at once")
        self.all_button.clicked.connect(lambda: self.start_along(None))
        self.starts_note = hint_label()

        top = control_row(self.find_button, self.auto, spacing=8, stretch=False)
        top.addWidget(self.strip, 1)

        # the table keeps room for TABLE_ROWS rows however short the dock; the linearisation and the start
        # buttons below it scroll together when the dock is short (three views sharing a column's height)
        starts_title = QLabel("Start trajectories off it along its eigenvectors")
        starts_title.setWordWrap(True)
        lower = QWidget()
        column(lower, self.details, starts_title, row("offset", self.eps, self.all_button, None, spacing=6),
               self.starts_box, self.starts_note, None, spacing=4).setSizeConstraint(
            QLayout.SizeConstraint.SetMinimumSize)
        self.lower = QScrollArea()
        self.lower.setWidget(lower)
        self.lower.setWidgetResizable(True)
        self.lower.setFrameShape(QFrame.Shape.NoFrame)
        self.lower.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.lower.setMinimumHeight(3 * self.details.fontMetrics().lineSpacing())
        self._fit_table_rows()

        self.splitter = QSplitter(Qt.Orientation.Vertical)
        self.splitter.addWidget(self.table)
        self.splitter.addWidget(self.lower)
        self.splitter.setStretchFactor(0, 3)
        self.splitter.setStretchFactor(1, 2)
        self.splitter.setChildrenCollapsible(False)

        layout = self.main_layout()
        layout.addLayout(top)
        layout.addWidget(self.summary)  # a line of its own: beside the buttons a narrow dock cut it ("3 equil")
        layout.addWidget(self.splitter, 1)

        self._timer = auto_timer(self, AUTO_DELAY_MS, self.find, self._auto_ok)
        session.equilibriumSelected.connect(self._on_shared_selection)
        session.equilibriaChanged.connect(lambda _items: self._show_equilibria())
        self.follow_session(values=self._on_values)

    # ------------------------------------------------------------ view protocol
    def view_settings(self) -> dict:
        return {"auto": self.auto.isChecked(), "eps": float(self.eps.value()), "selected": self.selected_index()}

    def apply_view_settings(self, d: dict) -> None:
        if not isinstance(d, dict):
            return
        self.auto.setChecked(bool(d.get("auto", True)))
        eps = d.get("eps")
        if isinstance(eps, (int, float)) and 0 < eps <= 1:
            self.eps.setValue(float(eps))
        sel = d.get("selected")
        self._wanted_selection = sel if isinstance(sel, int) and sel >= 0 else None
        if self._wanted_selection is not None and self._wanted_selection < len(self.equilibria):
            self.select(self._wanted_selection)

    def export_data(self):
        if not self.equilibria or self.system is None:
            return None
        # as many columns as the longest list (a delay model lists its rightmost characteristic roots, more
        # than it has states); a shorter list leaves its last cells empty
        n = max(len(eq.eigenvalues) for eq in self.equilibria)
        what = "characteristic root" if self.system.delays else "eigenvalue"
        header = list(self.system.states)
        for k in range(n):
            header += [f"re({what} {k + 1})", f"im({what} {k + 1})"]
        header += ["stable (1 yes, 0 no, empty undecided)", "unstable dimension"]
        rows = []
        for eq in self.equilibria:
            row = list(eq.vector)
            for lam in eq.eigenvalues:
                row += [lam.real, lam.imag]
            row += [np.nan, np.nan] * (n - len(eq.eigenvalues))
            row += [{True: 1.0, False: 0.0}.get(eq.stable, np.nan), float(eq.n_unstable)]
            rows.append(row)
        return header, np.array(rows, dtype=float)

    # ------------------------------------------------------------ public
    def find(self) -> None:
        """Search with the current system and values (in the background)."""
        system = self.system
        if system is None:
            self.summary.setText("No model yet")
            return
        from orbitdesk.analyses.equilibria import find_equilibria

        p, u0 = self.session.param_vector(), self.session.initial_vector()
        self._searched_generation = self.session.generation
        self.begin_computing()

        def job(cancel, report):  # the Newton search: the table fills before the exact solve starts
            return find_equilibria(system, p, u0=u0, exact=False, cancel=cancel, progress=report)

        def exact_job(found):  # then the exact solve (sympy, time-limited) refines the table quietly
            from orbitdesk.analyses.equilibria import EXACT_MAX_STATES, refine_exactly

            exact = system.n_states <= EXACT_MAX_STATES
            self._adopt(found, final=not exact)  # the table now; the search's end is signalled after sympy
            if exact:
                self.session.run_job(EXACT_JOB, lambda cancel, report: refine_exactly(
                    system, found, p, cancel=cancel, progress=report), self._refined,
                    on_error=lambda _message: self.equilibriaChanged.emit(found))

        self.session.cancel_job(EXACT_JOB)
        self.summary.setText("")
        self.strip.run("equilibria", job, exact_job, on_error=self._failed)

    def compute(self) -> None:
        self.find()

    def selected_index(self) -> int | None:
        rows = self.table.selectionModel().selectedRows() if self.table.selectionModel() else []
        return rows[0].row() if rows else None

    def selected(self):
        i = self.selected_index()
        return self.equilibria[i] if i is not None and i < len(self.equilibria) else None

    def select(self, index: int) -> None:
        if 0 <= index < self.table.rowCount():
            self.table.selectRow(index)

    def start_along(self, which=None) -> list[dict]:
        """Start trajectories off the selected equilibrium: ``which`` is a start label ("+v1") or None for all."""
        eq = self.selected()
        if eq is None:
            return []
        starts = [s for s in eigen_starts(eq, float(self.eps.value())) if which is None or s["label"] == which]
        if not starts:
            return []
        self.startsRequested.emit(starts)
        taken = self.session.request_starts(starts)
        where = " and ".join(f"{w[:1].lower()}{w[1:]} view" for w in taken)
        self.starts_note.setText(f"Started {len(starts)} trajector{'y' if len(starts) == 1 else 'ies'}"
                                 + (f" in the {where}" if where else "; open the 3D view to see them"))
        return starts

    # ------------------------------------------------------------ session events
    def show_no_result(self) -> None:
        """With no model (a project being opened): the table of nothing."""
        self._show_equilibria()

    def _on_system(self, system) -> None:
        self.system = system
        self._show_equilibria()
        self._schedule()

    def _on_values(self) -> None:
        if self.equilibria and self._searched_generation != self.session.generation:
            self.summary.setText("Values changed: " + ("searching again…" if self._auto_ok() else "press Find"))
        self._schedule()

    def _auto_ok(self) -> bool:
        s = self.system
        return (self.auto.isChecked() and s is not None and s.n_states <= AUTO_MAX_STATES
                and self._autonomous_now())

    def _autonomous_now(self) -> bool:
        """Free of time at the present values: a forcing switched off by its parameter counts as absent."""
        s = self.system
        return s is None or s.autonomous or s.autonomous_at(self.session.param_vector())

    def _schedule(self) -> None:
        if self._auto_ok():
            self._timer.start()
        elif self.system is not None and not self._autonomous_now():
            self.summary.setText("The equations depend on time at these values: no equilibria in the usual "
                                 "sense (switch the forcing off to find the rest points)")

    def _failed(self, message: str) -> None:
        self.session.set_equilibria([])
        self.summary.setText("")

    def _adopt(self, result, final: bool = True) -> None:
        self.session.set_equilibria(result, self._computing_for)  # the table shows the document's list
        self._publish_selection()
        if final:
            self.equilibriaChanged.emit(result)

    def _refined(self, result) -> None:
        """The exact solve's answer after the Newton search's table. Where it confirms the points shown
        (as many, at the same places, of the same kinds) they take its coordinates and "Found by" in
        place: the selection, the starts made from it and the other views' references stay. Otherwise
        (it adds points) the new list is adopted. Either way the search has ended: equilibriaChanged."""
        shown = self.equilibria
        if len(shown) != len(result) or any(
                a.kind != b.kind or not np.allclose(a.vector, b.vector, rtol=1e-9, atol=1e-12)
                for a, b in zip(shown, result)):
            self._adopt(result)
            return
        column = self.table.columnCount() - 1
        selected = self.selected()
        if selected is not None:  # the details' last line names it too: replaced in place, the pane not laid out again
            i = shown.index(selected)
            found = self.details.document().find(f"Found by {_method_text(selected.method)}.")
            if not found.isNull():
                found.insertText(f"Found by {_method_text(result[i].method)}.")
        for r, (eq, better) in enumerate(zip(shown, result)):
            before, after = f"found by {_method_text(eq.method)}", f"found by {_method_text(better.method)}"
            eq.method, eq.state, eq.vector = better.method, better.state, better.vector
            for c in range(column + 1):  # every cell's tip names how the point was found
                item = self.table.item(r, c)
                if item is not None:
                    item.setToolTip(item.toolTip().replace(before, after))
            item = self.table.item(r, column)
            if item is not None:
                item.setText(_method_text(eq.method))
        self.equilibriaChanged.emit(type(result)(shown, result.notes, result.box, result.starts))  # the shown points

    # ------------------------------------------------------------ table and details
    def _show_equilibria(self) -> None:
        """The table of the document's equilibria, with the notes of the search that found them."""
        previous = self.selected_index()
        items, notes = self.equilibria, list(self.session.doc.equilibria_notes)
        self.notes = notes
        self.update_stale()
        s = self.system
        states = list(s.states) if s is not None else []
        point_word = "fixed point" if s is not None and s.kind == "map" else "equilibrium"
        heads = ["#"] + states + (["Multipliers"] if point_word == "fixed point" else ["Eigenvalues"]) + [
            "Type", "Stability", "Found by"]
        self.table.blockSignals(True)
        self.table.clear()
        self.table.setColumnCount(len(heads))
        self.table.setHorizontalHeaderLabels(heads)
        self.table.setRowCount(len(items))
        mono = mono_font()
        right = Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter
        for r, eq in enumerate(items):
            values = [eigenvalues_text(eq.eigenvalues, most=TABLE_ROOTS)]
            cells = [str(r + 1)] + [number_text(eq.state[n]) for n in states] + values + [
                eq.kind, eq.stability, _method_text(eq.method)]
            for c, text in enumerate(cells):
                item = QTableWidgetItem(text)
                if 0 < c <= len(states) + 1:
                    item.setFont(mono)
                if 0 <= c <= len(states):
                    item.setTextAlignment(right)
                tip = f"{point_word} {r + 1}: {eq.kind}, {eq.stability}, found by {_method_text(eq.method)}"
                if c == len(states) + 1 and text != eigenvalues_text(eq.eigenvalues):
                    tip += "\n" + eigenvalues_text(eq.eigenvalues)  # all of them
                if eq.warnings:
                    tip += "\n" + "\n".join(eq.warnings)
                item.setToolTip(tip)
                self.table.setItem(r, c, item)
        self.table.blockSignals(False)
        self.columns.set_elastic(range(len(states) + 1, len(heads)))
        # the dock keeps every column in sight (up to a width that leaves room for the views beside it; a model
        # of many states scrolls sideways): beside the 3D view, Lorenz's table was squeezed to its coordinates
        self.table.setMinimumWidth(min(self.columns.least_width(), TABLE_WIDEST_LEAST))
        self._fit_table_rows()
        if not items:
            self.summary.setText("; ".join(notes).capitalize() if notes else "")
        else:
            n = len(items)
            word = point_word if n == 1 else ("fixed points" if point_word == "fixed point" else "equilibria")
            text = f"{n} {word}"
            if notes:
                text += " — " + "; ".join(notes)
            self.summary.setText(text)
            self.summary.setToolTip("\n".join(notes) if notes else "")
        want = self._wanted_selection if self._wanted_selection is not None else previous
        self._wanted_selection = None
        if items:
            self.select(want if want is not None and want < len(items) else 0)
        else:
            self._on_selection()

    def _fit_table_rows(self) -> None:
        """The table's least height: its header and TABLE_ROWS rows (the columns fit the width: no scroll bar
        below them but for a model of many states, which then shows one row less)."""
        t = self.table
        header = max(t.horizontalHeader().sizeHint().height(), t.fontMetrics().height() + 8)
        t.setMinimumHeight(header + TABLE_ROWS * t.verticalHeader().defaultSectionSize() + 2 * t.frameWidth())

    def _on_selection(self) -> None:
        eq = self.selected()
        self._show_details(eq)
        self._fill_start_buttons()
        self.equilibriumSelected.emit(eq)
        self._publish_selection()

    def _show_details(self, eq) -> None:
        s = self.system
        if eq is None or s is None:
            self.details.setHtml("<p style='color:gray'>Select an equilibrium to see its Jacobian and "
                                 "eigenvectors.</p>" if self.equilibria else "")
            return
        states = list(s.states)
        i = self.equilibria.index(eq) + 1
        family = mono_font().family()
        where = ", ".join(f"{n} = {number_text(eq.state[n], 8)}" for n in states)
        J = [[number_text(v, 5) for v in row] for row in np.asarray(eq.jacobian)]
        lam_heads = [f"λ{k + 1} =<br>{complex_text(v, 5)}" for k, v in enumerate(eq.eigenvalues)]
        vecs = [[complex_text(eq.eigenvectors[r, c], 4) for c in range(len(eq.eigenvalues))]
                for r in range(len(states))]
        multipliers = eq.is_map
        counts = (f"{eq.n_stable} stable, {eq.n_unstable} unstable{f', {eq.n_center} neutral' if eq.n_center else ''}"
                  f" direction{'s' if len(eq.eigenvalues) != 1 else ''}")
        if s.delays:  # infinitely many characteristic roots: the rightmost are listed
            counts = f"{len(eq.eigenvalues)} rightmost roots listed, {eq.n_unstable} with positive real part"
        html = [f"<div style='font-family:\"{family}\"'>",
                f"<p><b>{'Fixed point' if multipliers else 'Equilibrium'} {i}: {eq.kind}</b> "
                f"({eq.stability}; {counts})<br>{where}</p>",
                f"<p><b>Jacobian{' with the delays dropped' if s.delays else ''}</b></p>",
                _matrix_html(J, [escape(partial_label(n)) for n in states],
                             [escape(equation_lhs(self.system, n)) for n in states]),
                f"<p><b>{'Multipliers' if multipliers else 'Characteristic roots' if s.delays else 'Eigenvalues'}"
                " and eigenvectors</b> (columns, unit length)</p>", _matrix_html(vecs, lam_heads, states)]
        if eq.warnings:
            html.append("<p><b>Notes</b></p><ul>" + "".join(f"<li>{w}</li>" for w in eq.warnings) + "</ul>")
        html.append(f"<p style='color:gray'>Found by {_method_text(eq.method)}.</p></div>")
        self.details.setHtml("".join(html))

    def _fill_start_buttons(self) -> None:
        while self.starts_grid.count():
            item = self.starts_grid.takeAt(0)
            if item.widget() is not None:
                item.widget().deleteLater()
        eq = self.selected()
        delays = self.system is not None and bool(self.system.delays)
        starts = eigen_starts(eq, float(self.eps.value())) if eq is not None and not delays else []
        self.all_button.setEnabled(bool(starts))
        self.eps.setEnabled(eq is not None and not delays)
        if eq is not None and delays:  # a start of a delay model is a whole history, not a point
            self.starts_note.setText("A start of a model with delays needs a history before it, so none is "
                                     "offered along the roots' vectors")
        elif eq is not None and not starts:
            self.starts_note.setText("No real eigen-direction: every eigenvalue is complex")
        elif eq is None:
            self.starts_note.setText("")
        else:
            self.starts_note.setText("Unstable directions run forward in time, stable ones backward")
        by_index: dict[int, list] = {}
        for s in starts:
            by_index.setdefault(s["index"], []).append(s)
        for row, (k, pair) in enumerate(list(by_index.items())[:MAX_START_BUTTONS]):
            lam = pair[0]["eigenvalue"]
            self.starts_grid.addWidget(QLabel(f"v{k + 1} (λ = {number_text(lam, 5)})"), row, 0)
            for col, s in enumerate(pair, start=1):
                b = QToolButton(text=s["label"])
                way = "backward" if s["backward"] else "forward"
                b.setToolTip(f"Start at the equilibrium {'plus' if s['label'][0] == '+' else 'minus'} "
                             f"{number_text(self.eps.value())} along v{k + 1}, run {way} in time")
                b.clicked.connect(lambda _c=False, label=s["label"]: self.start_along(label))
                self.starts_grid.addWidget(b, row, col)
        self.starts_grid.setColumnStretch(3, 1)

    # ------------------------------------------------------------ the document's selection
    def _publish_selection(self) -> None:
        self.session.select_equilibrium(self.selected_index())

    def _on_shared_selection(self, index) -> None:
        if index is not None and index != self.selected_index():
            self.select(index)


VIEW = EquilibriaView
