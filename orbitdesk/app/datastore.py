"""The project's measured data sets and fit results as the app sees them (one per Session).

``data_store(session)`` returns the store, created on first use. Data sets live in
``session.project.datasets`` (saved with the project); adding, removing and editing them, applying
fitted values and keeping them as a named parameter set are undoable commands of the live document.
The latest fit result is the live document's result of kind "fit" (document/results.py: saved in the project
file, stale when the values or the data sets it was fitted to change); the residuals on screen are not kept.
"""

from __future__ import annotations

import copy

from PySide6.QtCore import QObject, Signal

from orbitdesk.document.datasets import DataSet, unique_name


class DataStore(QObject):
    changed = Signal()           # data sets, kept parameter sets or residuals changed
    resultChanged = Signal(object)  # the latest FitResult (or None)

    def __init__(self, session):
        super().__init__(session)
        self.session = session
        self.residuals: dict[str, dict] = {}   # data set name -> {quantity: model value at each sample}
        self.show_residuals = False
        session.projectLoaded.connect(self._on_project_loaded)
        session.systemChanged.connect(lambda _s: self.clear_residuals())
        session.valuesChanged.connect(self.clear_residuals)
        session.partChanged.connect(self._on_part_changed)
        session.resultChanged.connect(lambda kind: self.resultChanged.emit(self.result) if kind == "fit" else None)

    # ------------------------------------------------------------ reading
    @property
    def datasets(self) -> list[DataSet]:
        return list(self.session.project.datasets)

    @property
    def parameter_sets(self) -> dict[str, dict]:
        return dict(self.session.project.parameter_sets)

    def get(self, name: str) -> DataSet | None:
        for d in self.session.project.datasets:
            if d.name == name:
                return d
        return None

    # ------------------------------------------------------------ edits (undoable)
    def add(self, dataset: DataSet) -> DataSet:
        dataset = copy.copy(dataset)
        dataset.name = unique_name(dataset.name, [d.name for d in self.datasets])
        self._push(f"Import data {dataset.name}", "datasets", self.datasets + [dataset])
        return dataset

    def remove(self, name: str) -> None:
        self._push(f"Remove data {name}", "datasets", [d for d in self.datasets if d.name != name])

    def replace(self, name: str, dataset: DataSet, label: str) -> None:
        self._push(label, "datasets", [dataset if d.name == name else d for d in self.datasets])

    def keep_parameter_set(self, name: str, values: dict) -> str:
        sets = self.parameter_sets
        name = unique_name(name, sets)
        sets[name] = {k: float(v) for k, v in values.items()}
        self._push(f"Keep parameter set {name}", "parameter_sets", sets)
        return name

    def apply_values(self, params: dict, initial: dict, label: str = "Apply fitted values") -> None:
        self.session.set_values(params, initial, label)

    def _push(self, label, part, new) -> None:
        self.session.replace_part(part, new, label)

    def _on_part_changed(self, part: str) -> None:
        if part not in ("datasets", "parameter_sets"):
            return
        if part == "datasets":
            names = {d.name for d in self.session.project.datasets}
            self.residuals = {k: v for k, v in self.residuals.items() if k in names}
        self.changed.emit()

    # ------------------------------------------------------------ the fit result (the document's)
    @property
    def result(self):
        """The latest FitResult (None: none), kept once in the live document."""
        return self.session.doc.result("fit")

    def set_result(self, result, basis=None) -> None:
        """Keep ``result`` as the document's fit, computed for ``basis`` (default: the values now set and the
        data sets it names, as they are now)."""
        if basis is None and result is not None:
            basis = self.session.doc.basis(data=[d["name"] for d in result.datasets])
        self.session.set_result("fit", result, basis)

    def set_residuals(self, residuals: dict) -> None:
        self.residuals = dict(residuals)
        self.show_residuals = True
        self.changed.emit()

    def clear_residuals(self) -> None:
        if self.residuals or self.show_residuals:
            self.residuals, self.show_residuals = {}, False
            self.changed.emit()

    def _on_project_loaded(self) -> None:
        self.residuals, self.show_residuals = {}, False   # (the document holds the opened project's fit)
        self.changed.emit()


def data_store(session) -> DataStore:
    store = getattr(session, "_data_store", None)
    if store is None:
        store = DataStore(session)
        session._data_store = store
    return store
