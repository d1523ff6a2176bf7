"""The run bar's settings for a model with noise: the scheme, the fixed step, how many realisations
and the seed (the same seed gives the same realisations). Shown instead of the method menu when the
model has noise; every change goes through ``session.set_solver`` like the rest of the run bar."""

from __future__ import annotations

from PySide6.QtWidgets import QComboBox, QHBoxLayout, QLabel, QSpinBox, QWidget

from orbitdesk.app.plots.plot_style import NumberBox
from orbitdesk.engine.settings import RULES, SCHEMES


class NoiseControls(QWidget):
    def __init__(self, set_solver, parent=None):
        super().__init__(parent)
        self._set = set_solver
        self.scheme = QComboBox()
        for name, label in SCHEMES.items():
            self.scheme.addItem(label, name)
        self.scheme.setToolTip("Fixed-step scheme for the Ito equations of a model with noise")
        self.scheme.currentIndexChanged.connect(lambda _i: self._set(scheme=self.scheme.currentData()))
        self.dt = NumberBox(0.01, 1e-9, 1e6, ratio=2.0, digits=4)
        self.dt.setMinimumWidth(self.fontMetrics().horizontalAdvance("0.00125") + 30)
        self.dt.setToolTip("The fixed step: the run's span is cut into equal steps no longer than this")
        self.dt.valueChanged.connect(lambda v: self._set(dt=float(v)))
        self.realisations = QSpinBox()
        self.realisations.setRange(RULES["realisations"][1], RULES["realisations"][2])
        self.realisations.setKeyboardTracking(False)
        self.realisations.setMaximumWidth(self.fontMetrics().horizontalAdvance("1000000") + 30)
        self.realisations.setToolTip("How many realisations to run: their mean and spread are drawn in the time series")
        self.realisations.valueChanged.connect(lambda v: self._set(realisations=int(v)))
        self.seed = QSpinBox()
        self.seed.setRange(RULES["seed"][1], RULES["seed"][2])
        self.seed.setKeyboardTracking(False)
        self.seed.setMaximumWidth(self.fontMetrics().horizontalAdvance("10000000") + 30)
        self.seed.setToolTip("Seed of the random increments: the same seed gives the same realisations, "
                             "here, on the command line and in the exported script")
        self.seed.valueChanged.connect(lambda v: self._set(seed=int(v)))
        layout = QHBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.setSpacing(4)
        for item in (self.scheme, QLabel(" step "), self.dt, QLabel(" realisations "), self.realisations,
                     QLabel(" seed "), self.seed):
            layout.addWidget(item)

    def show_settings(self, solver) -> None:
        """Show ``solver``'s values (the caller blocks the echo back into the session)."""
        self.scheme.setCurrentIndex(max(0, self.scheme.findData(solver.scheme)))
        self.dt.setValue(solver.dt)
        self.realisations.setValue(solver.realisations)
        self.seed.setValue(solver.seed)
