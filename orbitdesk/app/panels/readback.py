"""A live read-back of what the tool understood from the model text: kind, states, the
first-order form, parameters, derived quantities, time dependence, smoothness and the Jacobian."""

from __future__ import annotations

import html

from PySide6.QtCore import Qt, QTimer
from PySide6.QtGui import QColor, QFontDatabase, QPalette
from PySide6.QtWidgets import QLabel, QTextBrowser, QWidget

from orbitdesk.app.layouts import column
from orbitdesk.app.panels.highlighter import colour, is_dark, FLOW_EQ, MAP_EQ, PARAMETER, DERIVED, INITIAL

def _is_flow(system) -> bool:
    from orbitdesk.language.model import FLOW  # loaded with the first model (it imports sympy)

    return system.kind == FLOW


def model_str(expr) -> str:
    """One expression as the model language would write it (``model_printer``, imported on first use)."""
    from orbitdesk.app.panels.model_printer import model_str as printed

    return printed(expr)


def number_str(value: float) -> str:
    return f"{float(value):.6g}"


def _grouped(state: str) -> str:
    """A state name as one unit in notation: x stays x, the introduced state x' is written (x')."""
    return f"({state})" if state.endswith("'") else state


def equation_lhs(system, state: str) -> str:
    """The left side of a state's first-order equation: dx/dt, d(x')/dt for the speed x' that a
    second-order equation introduces (never x'' or a bare x' that reads like the state), x[n+1] for maps."""
    if not _is_flow(system):
        return f"{state}[n+1]"
    return f"d{_grouped(state)}/d{system.time_name}"


def partial_label(state: str) -> str:
    """A Jacobian column head: the derivative with respect to a state, ∂/∂x or ∂/∂(x')."""
    return "\u2202/\u2202" + _grouped(state)


def time_dependent_states(system) -> list[str]:
    return [s for s, f in zip(system.states, system.f) if system.t_symbol in f.free_symbols]


def reduced_orders(system) -> dict[str, int]:
    """Base names whose equation was typed above first order, with the typed order."""
    typed = system.model.typed_order if _is_flow(system) else {}
    return {base: k for base, k in typed.items() if k > 1}


def _esc(text: str) -> str:
    return html.escape(text, quote=False)


class ModelReadback(QWidget):
    """Shows the last valid system of the session; a note says when the current text has errors."""

    def __init__(self, session, parent=None):
        super().__init__(parent)
        self.session = session
        self._system = None
        self._static_html: dict[str, str] = {}
        self.note = QLabel(self)
        self.note.setWordWrap(True)
        self.note.setTextFormat(Qt.TextFormat.RichText)
        self.note.setContentsMargins(10, 6, 10, 6)
        self.note.setToolTip("The read-back below is of the last model that had no errors")
        self.note.hide()
        self.browser = QTextBrowser(self)
        self.browser.setOpenLinks(False)
        self.browser.setFrameShape(QTextBrowser.Shape.NoFrame)
        self.browser.setToolTip("What the tool understood from the model text")
        self.browser.setLineWrapMode(QTextBrowser.LineWrapMode.WidgetWidth)  # notes wrap, never cut off
        self.browser.document().setDocumentMargin(12)
        column(self, self.note, (self.browser, 1), spacing=0)
        self._values_timer = QTimer(self)
        self._values_timer.setSingleShot(True)
        self._values_timer.setInterval(80)
        self._values_timer.timeout.connect(self.render)
        session.systemChanged.connect(self.on_system_changed)
        session.modelParsed.connect(self.on_model_parsed)
        session.valuesChanged.connect(self._values_timer.start)
        self._style_note()
        self.on_system_changed(session.system)
        self.on_model_parsed(session.parsed)

    # ------------------------------------------------------------ public API
    @property
    def system(self):
        return self._system

    def html(self) -> str:
        return self.browser.toHtml()

    def plain_text(self) -> str:
        return self.browser.toPlainText()

    def note_text(self) -> str:
        return self.note.text() if not self.note.isHidden() else ""

    def equation_lines(self) -> list[str]:
        """The shown equations as plain 'lhs = rhs' lines (first-order form for flows)."""
        s = self._system
        if s is None:
            return []
        return [f"{equation_lhs(s, state)} = {model_str(f)}" for state, f in zip(s.states, s.f_delayed or s.f)]

    def jacobian_entries(self) -> list[list[str]]:
        s = self._system
        if s is None:
            return []
        J = s.jacobian
        return [[model_str(J[i, j]) for j in range(s.n_states)] for i in range(s.n_states)]

    def on_system_changed(self, system) -> None:
        self._system = system
        self._static_html = {}
        self.render()

    def on_model_parsed(self, parsed) -> None:
        if parsed is None or parsed.ok:
            self.note.hide()
            return
        n = len(parsed.errors)
        errors = f"{n} error{'s' if n != 1 else ''}"
        if self._system is None:
            text = f"The text has {errors}; the read-back appears once the model reads cleanly."
        else:
            text = f"The text has {errors}; this shows the last model that read without errors."
        first = parsed.errors[0]
        text = f"<b>{_esc(text)}</b><br>line {first.line}: {_esc(first.message)}"
        self.note.setText(text)
        self.note.show()

    def render(self) -> None:
        bar = self.browser.verticalScrollBar().value()
        self.browser.setHtml(self._compose())
        self.browser.verticalScrollBar().setValue(bar)

    # ------------------------------------------------------------ HTML
    def changeEvent(self, event) -> None:
        super().changeEvent(event)
        if event.type() in (event.Type.PaletteChange, event.Type.ApplicationPaletteChange):
            self._style_note()
            self._static_html = {}
            self.render()

    def _style_note(self) -> None:
        pal = self.palette()
        dark = is_dark(pal)
        bg = QColor("#5a4312" if dark else "#fbf1d9")
        fg = QColor("#f5e2b8" if dark else "#5c4410")
        self.note.setStyleSheet(f"QLabel {{ background: {bg.name()}; color: {fg.name()}; }}")

    def _colours(self) -> dict[str, str]:
        pal = self.palette()
        dark = is_dark(pal)
        text, base = pal.color(QPalette.ColorRole.Text), pal.color(QPalette.ColorRole.Base)
        return {
            "text": text.name(),
            "muted": _blend(text, base, 0.42).name(),
            "cell": _blend(text, base, 0.06).name(),
            "lhs": colour(FLOW_EQ if self._system is None or _is_flow(self._system) else MAP_EQ, dark).name(),
            "param": colour(PARAMETER, dark).name(),
            "derived": colour(DERIVED, dark).name(),
            "initial": colour(INITIAL, dark).name(),
            "mono": QFontDatabase.systemFont(QFontDatabase.SystemFont.FixedFont).family(),
        }

    def _compose(self) -> str:
        system = self._system
        c = self._colours()
        self._c = c
        if system is None:
            example = self._m("x' = -x")
            return (f"<p style='color:{c['muted']}'>No model yet. Type equations such as {example} in the "
                    "editor; what the tool reads from them appears here.</p>")
        if not self._static_html:
            self._static_html = {
                "summary": self._summary(system),
                "equations": self._equations(system),
                "derived": self._derived(system),
                "events": self._events(system),
                "jacobian": self._jacobian(system),
            }
        s = self._static_html
        return "".join([s["summary"], s["equations"], s["events"], self._initial(system), self._parameters(system),
                        s["derived"], s["jacobian"]])

    # small builders with inline styles (Qt's rich text honours those, not class rules, for margins)
    def _m(self, text: str, colour: str | None = None) -> str:
        tint = f" color:{colour};" if colour else ""
        return f"<span style=\"font-family:'{self._c['mono']}';{tint}\">{_esc(text)}</span>"

    def _heading(self, title: str) -> str:
        return f"<p style='margin-top:14px; margin-bottom:4px'><b>{_esc(title)}</b></p>"

    def _muted(self, html_text: str, top: int = 2) -> str:
        return f"<p style='margin-top:{top}px; color:{self._c['muted']}'>{html_text}</p>"

    def _td(self, content: str, align: str = "left", style: str = "") -> str:
        return f"<td align='{align}' valign='middle' style='padding:1px 6px 1px 0; {style}'>{content}</td>"

    def _table(self, rows: list[str], spacing: int = 0) -> str:
        return f"<table cellspacing='{spacing}' cellpadding='0'>{''.join(rows)}</table>"

    def _equation_row(self, lhs: str, rhs: str, tint: str) -> str:
        return ("<tr>" + self._td(self._m(lhs, tint), "right") + self._td(self._m("=")) +
                self._td(self._m(rhs)) + "</tr>")

    def _summary(self, system) -> str:
        n = system.n_states
        kind = "Flow" if _is_flow(system) else "Map"
        states = ", ".join(self._m(s) for s in system.states)
        facts = []
        if system.autonomous:
            facts.append(f"autonomous: no explicit {self._m(system.time_name)}")
        else:
            where = ", ".join(self._m(equation_lhs(system, s)) for s in time_dependent_states(system))
            facts.append(f"non-autonomous: depends on {self._m(system.time_name)} in {where}")
        if system.delays:
            from orbitdesk.engine.delay import uses_history

            delays = ", ".join(self._m(f"{d.label} ({number_str(d.value)})") for d in system.delays)
            facts.append(f"delays: {delays}; {_esc(uses_history(system))}")
        if system.smooth:
            facts.append("smooth")
        else:
            facts.append("not smooth: uses " + ", ".join(self._m(f) for f in system.nonsmooth))
        return (f"<p style='margin-bottom:2px'><b>{kind}</b> in {n} state{'s' if n != 1 else ''}: {states}</p>"
                + self._muted(" \u00b7 ".join(facts)))

    def _equations(self, system) -> str:
        title = "First-order form" if _is_flow(system) else "Map"
        from orbitdesk.language.noise import terms_text  # (with sympy: never before the first paint)

        rows = [self._equation_row(equation_lhs(system, s), model_str(f) + terms_text(system, i, model_str), self._c["lhs"])
                for i, (s, f) in enumerate(zip(system.states, system.f_delayed or system.f))]
        notes = []
        if system.stochastic:
            notes.append(f"{self._m('noise')} is white noise in the Ito sense (x' = f + g noise is dx = f dt + g dW); "
                         "runs are realisations, and equilibria, cycles, sections, sweeps, continuation and "
                         "Lyapunov exponents use the noise-free part, the equations without the noise terms")
        for base, order in reduced_orders(system).items():
            new = ", ".join(self._m(base + "'" * k) for k in range(1, order))
            plural = order > 2
            what = "the rates" if plural else "the rate"
            notes.append(f"{self._m(base + chr(39) * order + ' = ...')} was reduced to first order: {what} {new} "
                         f"{'are states' if plural else 'is a state'} of {'their' if plural else 'its'} own, so "
                         f"{self._m(equation_lhs(system, base) + ' = ' + base + chr(39))} just says that "
                         f"{self._m(base + chr(39))} is the rate of change of {self._m(base)}")
        return self._heading(title) + self._table(rows) + (self._muted("<br>".join(notes), 4) if notes else "")

    def _events(self, system) -> str:
        """Each event as understood: when it happens (the boundary and its direction) and what it does."""
        events = system.model.events
        if not events:
            return ""
        rows = []
        for ev in events:
            if ev.on_time:
                when = f"at {system.time_name} = {model_str(-ev.time_offset / ev.time_rate)}"
            else:
                left, _, right = ev.sides
                when = f"{model_str(left)} {'rises above' if ev.direction > 0 else 'falls below'} {model_str(right)}"
            does = [f"{target} = {model_str(expr)}" for target, _, expr in ev.assignments]
            if ev.stop:
                does.append("stop")
            rows.append("<tr>" + self._td(f"<span style='color:{self._c['muted']}'>line {ev.line}</span>", "right")
                        + self._td(self._m(when)) + self._td("\u2192") + self._td(self._m(", ".join(does)))
                        + "</tr>")
        note = ("right sides are worked out with the values from before the event, then all are set; the "
                "crossing is located on the integrator's dense output")
        return self._heading("Events") + self._table(rows) + self._muted(note, 4)

    def _initial(self, system) -> str:
        current = self.session.initial
        label = "Initial values" if _is_flow(system) else "Starting values"
        rows = [self._value_row(f"{name}(0)" if _is_flow(system) else f"{name}[0]", value, current.get(name),
                                self._c["initial"], "")
                for name, value in zip(system.states, system.initial)]
        return self._heading(label) + self._table(rows)

    def _parameters(self, system) -> str:
        if not system.parameters:
            return self._heading("Parameters") + self._muted("none", 0)
        current = self.session.params
        rows = []
        for name, value in zip(system.parameters, system.param_values):
            lo, hi = system.param_ranges.get(name, (None, None))
            span = f"in [{number_str(lo)}, {number_str(hi)}]" if lo is not None else ""
            rows.append(self._value_row(name, value, current.get(name), self._c["param"], span))
        return self._heading("Parameters") + self._table(rows)

    def _value_row(self, label, value, now, tint, extra) -> str:
        muted = self._c["muted"]
        changed = ""
        if now is not None and float(now) != float(value):
            changed = f"now {number_str(now)}"
        return ("<tr>" + self._td(self._m(label, tint), "right") + self._td(self._m("=")) +
                self._td(self._m(number_str(value))) +
                self._td(self._m(extra, muted) if extra else "&nbsp;") +  # an empty cell would eat the
                self._td(f"<span style='color:{muted}'>{changed}</span>" if changed else "&nbsp;") +  # next gap
                "</tr>")

    def _derived(self, system) -> str:
        if not system.derived_names:
            return ""
        rows = [self._equation_row(n, model_str(e), self._c["derived"])
                for n, e in zip(system.derived_names, system.derived_delayed or system.derived_exprs)]
        return self._heading("Derived quantities") + self._table(rows)

    def _jacobian(self, system) -> str:
        J = system.jacobian
        c = self._c
        head = "".join(self._td(self._m(partial_label(s), c["muted"]), "center", "padding:1px 10px")
                       for s in system.states)
        rows = ["<tr><td></td>" + head + "</tr>"]
        for i, state in enumerate(system.states):
            cells = "".join(f"<td align='center' valign='middle' bgcolor='{c['cell']}' style='padding:4px 12px'>"
                            f"{self._m(model_str(J[i, j]))}</td>" for j in range(system.n_states))
            rows.append("<tr>" + self._td(self._m(equation_lhs(system, state), c["lhs"]), "right",
                                          "padding-right:8px") + cells + "</tr>")
        title = "Jacobian with the delays dropped" if system.delays else "Jacobian"
        return self._heading(title) + self._table(rows, spacing=2)


def _blend(a: QColor, b: QColor, t: float) -> QColor:
    """``a`` mixed into ``b`` by the fraction ``t``."""
    return QColor.fromRgbF(a.redF() * t + b.redF() * (1 - t), a.greenF() * t + b.greenF() * (1 - t),
                           a.blueF() * t + b.blueF() * (1 - t))
