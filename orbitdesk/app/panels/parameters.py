"""Parameter and initial-value controls: a slider over each range with a spin box beside it."""

from __future__ import annotations

import math

from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtGui import QFontDatabase
from PySide6.QtWidgets import (QAbstractSpinBox, QDoubleSpinBox, QFrame, QGridLayout, QHBoxLayout, QLabel,
                               QPushButton, QScrollArea, QSizePolicy, QSlider, QWidget)

from orbitdesk.app.layouts import column


SLIDER_STEPS = 1000
SPIN_LIMIT = 1e12
SLIDER_LEAST = 70  # pixels a slider keeps however narrow the panel (its value box is never clipped)


def default_range(value: float) -> tuple[float, float]:
    """A slider range around ``value`` when the model gives none: [0, 2v] for v > 0,
    [2v, 0] for v < 0, [-1, 1] for 0."""
    value = float(value)
    if not math.isfinite(value) or value == 0:
        return -1.0, 1.0
    return (0.0, 2 * value) if value > 0 else (2 * value, 0.0)


def slider_range(value: float, lo: float | None, hi: float | None) -> tuple[float, float]:
    if lo is not None and hi is not None and math.isfinite(lo) and math.isfinite(hi) and lo < hi:
        return float(lo), float(hi)
    return default_range(value)


def _decimals(lo: float, hi: float) -> int:
    """Enough decimals to show a thousandth of the range."""
    step = (hi - lo) / SLIDER_STEPS
    return int(min(10, max(2, -math.floor(math.log10(step)) if step > 0 else 2)))


def _fmt(v: float) -> str:
    return f"{v:.6g}"


class ValueRow:
    """The widgets of one value: name label, slider, spin box; keeps slider and spin box in step."""

    def __init__(self, panel: "ParameterPanel", kind: str, name: str, label: str, model_value: float,
                 lo: float, hi: float, written_range: bool):
        self.panel, self.kind, self.name = panel, kind, name
        self.model_value = float(model_value)
        self.label = QLabel(label)
        self.label.setFont(panel.mono)
        self.label.setAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        self.slider = QSlider(Qt.Orientation.Horizontal)
        self.slider.setRange(0, SLIDER_STEPS)
        self.slider.setPageStep(SLIDER_STEPS // 20)
        self.slider.setMinimumWidth(SLIDER_LEAST)
        self.slider.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)
        self.spin = QDoubleSpinBox()
        self.spin.setRange(-SPIN_LIMIT, SPIN_LIMIT)
        self.spin.setKeyboardTracking(False)
        self.spin.setAccelerated(True)
        self.spin.setAlignment(Qt.AlignmentFlag.AlignRight)
        self.spin.setButtonSymbols(QAbstractSpinBox.ButtonSymbols.UpDownArrows)
        self.spin.setFixedWidth(panel.fontMetrics().horizontalAdvance("-00000.000") + 34)
        self.lo, self.hi = lo, hi
        self.written_range = written_range
        self.set_range(lo, hi, written_range)
        self.slider.valueChanged.connect(self._slid)
        self.slider.sliderPressed.connect(lambda: panel.session.set_held(True))
        self.slider.sliderReleased.connect(lambda: panel.session.set_held(False))
        self.spin.valueChanged.connect(self._spun)
        self.show_value(self.model_value)

    # ---------------------------------------------------------------- state
    def set_range(self, lo: float, hi: float, written_range: bool) -> None:
        self.lo, self.hi, self.written_range = lo, hi, written_range
        self.spin.blockSignals(True)
        self.spin.setDecimals(_decimals(lo, hi))
        self.spin.setSingleStep((hi - lo) / 100)
        self.spin.blockSignals(False)
        what = "parameter" if self.kind == "param" else "initial value of"
        source = "the range written in the model" if written_range else \
            "a range chosen around the model's value (write 'in [LO, HI]' to set it)"
        self.slider.setToolTip(f"Drag to change the {what} {self.name} over [{_fmt(lo)}, {_fmt(hi)}], {source}")
        self.spin.setToolTip(f"Type a value for {self.name}; it may go beyond the slider's range "
                             f"[{_fmt(lo)}, {_fmt(hi)}]")
        self._update_label_tip(self.spin.value())

    def value(self) -> float:
        return self.spin.value()

    def show_value(self, value: float) -> None:
        """Show ``value`` without emitting; a slider being dragged is left where the hand is."""
        value = float(value)
        if self.spin.value() != value:
            self.spin.blockSignals(True)
            self.spin.setValue(value)
            self.spin.blockSignals(False)
        if not self.slider.isSliderDown():
            self.slider.blockSignals(True)
            self.slider.setValue(self._to_slider(value))
            self.slider.blockSignals(False)
        self._update_label_tip(value)

    def _to_slider(self, value: float) -> int:
        frac = (value - self.lo) / (self.hi - self.lo)
        return int(round(min(1.0, max(0.0, frac)) * SLIDER_STEPS))

    def _from_slider(self, position: int) -> float:
        value = self.lo + (self.hi - self.lo) * position / SLIDER_STEPS
        return float(f"{value:.{max(self.spin.decimals(), 1)}f}")

    def _update_label_tip(self, value: float) -> None:
        changed = abs(value - self.model_value) > 1e-12 * max(1.0, abs(self.model_value))
        font = self.label.font()
        font.setBold(changed)
        self.label.setFont(font)
        where = "parameter" if self.kind == "param" else "initial value"
        tip = f"{self.name}: {where}; the model says {_fmt(self.model_value)}"
        if changed:
            tip += f", now {_fmt(value)}"
        self.label.setToolTip(tip)

    # ---------------------------------------------------------------- gestures
    def _slid(self, position: int) -> None:
        value = self._from_slider(position)
        self.spin.blockSignals(True)
        self.spin.setValue(value)
        self.spin.blockSignals(False)
        self._update_label_tip(value)
        self.panel.queue(self.kind, self.name, value)

    def _spun(self, value: float) -> None:
        if not self.slider.isSliderDown():
            self.slider.blockSignals(True)
            self.slider.setValue(self._to_slider(value))
            self.slider.blockSignals(False)
        self._update_label_tip(value)
        self.panel.queue(self.kind, self.name, value)


class ParameterPanel(QWidget):
    """Sliders and spin boxes for the session's parameters and initial values. Moves are
    coalesced: at most one ``set_param``/``set_initial`` per name per event-loop turn."""

    valueQueued = Signal(str, str, float)  # kind ("param"|"initial"), name, value

    def __init__(self, session, parent=None):
        super().__init__(parent)
        self.session = session
        self.mono = QFontDatabase.systemFont(QFontDatabase.SystemFont.FixedFont)
        self._rows: dict[tuple[str, str], ValueRow] = {}
        self._layout_key = None
        self._pending: dict[tuple[str, str], float] = {}
        self._flush_timer = QTimer(self)
        self._flush_timer.setSingleShot(True)
        self._flush_timer.setInterval(0)
        self._flush_timer.timeout.connect(self.flush)

        self.scroll = QScrollArea(self)
        self.scroll.setWidgetResizable(True)
        self.scroll.setFrameShape(QFrame.Shape.NoFrame)
        self.scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        bar = QHBoxLayout()
        bar.setContentsMargins(8, 0, 8, 6)
        self.reset_button = QPushButton("Back to the model's values")
        self.reset_button.setToolTip("Set every parameter and initial value back to what the model text says")
        self.reset_button.clicked.connect(self._reset)
        bar.addStretch(1)
        bar.addWidget(self.reset_button)
        column(self, (self.scroll, 1), bar, spacing=4)
        self.empty = QLabel("No parameters yet. Write a line such as <tt>a = 1.5 in [0, 3]</tt> in the model.")
        self.empty.setWordWrap(True)
        self.empty.setToolTip("Parameters and initial values of the model appear here")

        session.systemChanged.connect(self.on_system_changed)
        session.valuesChanged.connect(self.on_values_changed)
        self.on_system_changed(session.system)

    # ---------------------------------------------------------------- public API
    def rows(self) -> dict[tuple[str, str], ValueRow]:
        """(kind, name) -> row; kind is "param" or "initial"."""
        return dict(self._rows)

    def row(self, name: str, kind: str = "param") -> ValueRow:
        return self._rows[(kind, name)]

    def queue(self, kind: str, name: str, value: float) -> None:
        """Ask for ``name`` to take ``value``; sent to the session on the next event-loop turn."""
        self._pending[(kind, name)] = float(value)
        self.valueQueued.emit(kind, name, float(value))
        if not self._flush_timer.isActive():
            self._flush_timer.start()

    def flush(self) -> None:
        pending, self._pending = self._pending, {}
        for (kind, name), value in pending.items():
            if kind == "param":
                self.session.set_param(name, value)
            else:
                self.session.set_initial(name, value)

    def on_system_changed(self, system) -> None:
        if system is None:
            self._build(None)
            return
        key = (system.kind, tuple(system.parameters), tuple(system.states))
        if key != self._layout_key:
            self._build(system)
        self.on_values_changed()

    def on_values_changed(self) -> None:
        system = self.session.system
        if system is not None and self._rows:
            self._update_model_values(system)
        params, initial = self.session.params, self.session.initial
        for (kind, name), row in self._rows.items():
            source = params if kind == "param" else initial
            if name in source and (kind, name) not in self._pending:
                row.show_value(source[name])

    # ---------------------------------------------------------------- building
    def _reset(self) -> None:
        self._pending.clear()
        self.session.reset_values()

    def _ranges(self, system):
        for name, value in zip(system.parameters, system.param_values):
            lo, hi = self.session.param_range(name)
            yield "param", name, name, float(value), slider_range(value, lo, hi), lo is not None
        for name, value in zip(system.states, system.initial):
            label = f"{name}(0)" if system.kind == _flow() else f"{name}[0]"
            yield "initial", name, label, float(value), default_range(value), False

    def _update_model_values(self, system) -> None:
        """New written values or ranges for the same rows (values are shown by the caller)."""
        for kind, name, _label, value, (lo, hi), written in self._ranges(system):
            row = self._rows.get((kind, name))
            if row is None:
                continue
            row.model_value = value
            if (lo, hi, written) != (row.lo, row.hi, row.written_range):
                row.set_range(lo, hi, written)

    def _build(self, system) -> None:
        old = self.scroll.takeWidget()
        if old is self.empty:
            old.setParent(self)
            old.hide()
        elif old is not None:
            old.deleteLater()
        self._rows = {}
        self._pending.clear()
        self._layout_key = None if system is None else (system.kind, tuple(system.parameters), tuple(system.states))
        self.reset_button.setEnabled(system is not None)
        if system is None:
            self.scroll.setWidget(self.empty)
            self.empty.show()
            self.setMinimumWidth(0)
            return
        body = QWidget()
        grid = QGridLayout(body)
        grid.setContentsMargins(8, 6, 8, 6)
        grid.setHorizontalSpacing(8)
        grid.setVerticalSpacing(3)
        grid.setColumnStretch(1, 1)
        row_index = 0
        sections = (("param", "Parameters"), ("initial", "Initial values" if system.kind == _flow() else "Starting values"))
        entries = list(self._ranges(system))
        for kind, title in sections:
            items = [e for e in entries if e[0] == kind]
            if not items:
                continue
            heading = QLabel(title)
            font = heading.font()
            font.setBold(True)
            heading.setFont(font)
            heading.setToolTip("Parameters of the model" if kind == "param" else
                               "Where the trajectory starts, one value per state")
            if row_index:
                grid.setRowMinimumHeight(row_index, 8)
                row_index += 1
            grid.addWidget(heading, row_index, 0, 1, 3)
            row_index += 1
            for _kind, name, label, value, (lo, hi), written in items:
                row = ValueRow(self, kind, name, label, value, lo, hi, written)
                grid.addWidget(row.label, row_index, 0)
                grid.addWidget(row.slider, row_index, 1)
                grid.addWidget(row.spin, row_index, 2)
                self._rows[(kind, name)] = row
                row_index += 1
        grid.setRowStretch(row_index, 1)
        self.scroll.setWidget(body)
        # never narrower than a row's label, slider and whole value box: the panel (and the model dock it sits
        # in) keeps that width when views and a walkthrough share the window, instead of clipping the boxes
        bar = self.scroll.verticalScrollBar().sizeHint().width()
        self.setMinimumWidth(body.minimumSizeHint().width() + bar)


def _flow() -> str:
    from orbitdesk.language.model import FLOW  # loaded with the first model (it imports sympy)

    return FLOW
