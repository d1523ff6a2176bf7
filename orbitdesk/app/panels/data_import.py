"""Importing measured data: File > Import Data..., the file dialog, and the column mapping dialog.

Reading and checking are done by ``core.datasets`` (line and column in every refusal); this module
asks which model quantity a column stands for when its name is not one, then adds the data set to the
project (an undoable step).
"""

from __future__ import annotations

from PySide6.QtGui import QAction
from PySide6.QtWidgets import QComboBox, QDialog, QDialogButtonBox, QFileDialog, QFormLayout, QVBoxLayout

from orbitdesk.document.datasets import DataError, DataSet, read_data_file

from orbitdesk.app.datastore import data_store
from orbitdesk.app.plain_text import plain_label, plain_message, rich_tip

LEAVE_OUT = "(leave out)"
FILE_FILTER = "Data files (*.csv *.txt *.dat *.tsv);;All files (*)"


class MappingDialog(QDialog):
    """For each column whose name is not a model quantity: a choice among the states and derived ones."""

    def __init__(self, dataset: DataSet, names: list[str], parent=None):
        super().__init__(parent)
        self.setWindowTitle("Match the columns to the model")
        self.dataset = dataset
        layout = QVBoxLayout(self)
        intro = plain_label(f"Some columns of {dataset.source or dataset.name} are not named after a state or "
                            "derived quantity of the model. Choose what each one measures, or leave it out.")
        intro.setWordWrap(True)
        layout.addWidget(intro)
        form = QFormLayout()
        self.choices: dict[str, QComboBox] = {}
        taken = set(dataset.quantities())
        for name in dataset.unmatched(names):
            combo = QComboBox()
            combo.addItems([LEAVE_OUT] + [n for n in names if n not in taken])
            combo.setToolTip(rich_tip(f"The model quantity that column '{name}' measures"))
            form.addRow(plain_label(dataset.column(name).label), combo)
            self.choices[name] = combo
        layout.addLayout(form)
        self.problem = plain_label()
        self.problem.setWordWrap(True)
        layout.addWidget(self.problem)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel)
        buttons.accepted.connect(self._accept)
        buttons.rejected.connect(self.reject)
        layout.addWidget(buttons)

    def mapping(self) -> dict[str, str]:
        return {n: c.currentText() for n, c in self.choices.items()}

    def mapped(self) -> DataSet:
        """The data set with the chosen targets; left-out columns dropped."""
        chosen = self.mapping()
        keep = [c for c in self.dataset.columns if chosen.get(c.name) != LEAVE_OUT]
        ds = DataSet(self.dataset.name, self.dataset.time, keep, self.dataset.time_label, self.dataset.source,
                     self.dataset.checksum)
        return ds.with_mapping({k: v for k, v in chosen.items() if v != LEAVE_OUT})

    def _accept(self) -> None:
        try:
            ds = self.mapped()
        except DataError as e:
            self.problem.setText(e.message)
            return
        if not ds.columns:
            self.problem.setText("Every column is left out: nothing would be imported.")
            return
        self.accept()


def model_quantities(session) -> list[str]:
    system = session.system
    return [*system.states, *system.derived_names] if system is not None else []


def import_file(window, path) -> DataSet | None:
    """Read ``path``, ask for a mapping if needed, add it to the project; None if refused or cancelled."""
    session = window.session
    kind = "map" if session.system is not None and session.system.kind == "map" else "flow"
    try:
        ds = read_data_file(path, kind=kind)
    except DataError as e:
        plain_message(window, "warning", "Import data", f"This file cannot be imported:\n\n{e}\n\nNothing was imported.")
        return None
    names = model_quantities(session)
    if names and ds.unmatched(names):
        dialog = MappingDialog(ds, names, window)
        if dialog.exec() != QDialog.DialogCode.Accepted:
            return None
        ds = dialog.mapped()
    added = data_store(session).add(ds)
    session.statusMessage.emit(f"Imported {added.name}: {added.n_samples} samples of "
                               f"{', '.join(c.label for c in added.columns)}")
    return added


def import_dialog(window) -> DataSet | None:
    path, _ = QFileDialog.getOpenFileName(window, "Import measured data", "", FILE_FILTER)
    if not path:
        return None
    added = import_file(window, path)
    if added is not None and hasattr(window, "view_docks") and "fit" in window.view_docks:
        window.view_docks["fit"].show()
        window.view_docks["fit"].raise_()
    return added


def fit_script_text(window) -> str:
    """The standalone script of the fit as the Fit panel is set up now (or as the project saved it)."""
    from orbitdesk.exports.fit_script import fit_script
    from orbitdesk.exports.report_fit import fit_settings_from_project

    session = window.session
    if session.system is None:
        raise ValueError("the model has errors")
    store = data_store(session)
    if not store.datasets:
        raise ValueError("the project holds no data sets (File > Import Data...)")
    view = getattr(window, "views", {}).get("fit")
    settings = view.fit_settings() if view is not None else fit_settings_from_project(session.to_project())
    if settings is None or not (settings.parameters or settings.local or settings.initial):
        raise ValueError("nothing is ticked to estimate in the Fit panel")
    system = session.system
    ranges = {n: session.param_range(n) for n in system.parameters}
    return fit_script(system, store.datasets, settings, session.param_vector(), session.initial_vector(), ranges,
                      title=session.name)


def export_fit_script_dialog(window) -> bool:
    from pathlib import Path

    path, _ = QFileDialog.getSaveFileName(window, "Export Python Script of the Fit", "fit.py", "Python script (*.py)")
    if not path:
        return False
    from orbitdesk.document.safe_files import atomic_write

    try:  # complete or not at all, like the other exports
        atomic_write(str(path), fit_script_text(window).encode("utf-8"), 0o755)
    except (ValueError, OSError) as e:
        plain_message(window, "warning", "Export", f"The script of the fit could not be written: {e}")
        return False
    window.statusBar().showMessage(f"Wrote a script that reproduces the fit: {Path(path).name}", 8000)
    return True


def install(window) -> None:
    """File > Import Data... (before the export entries) and File > Export > Python Script of the Fit..."""
    action = QAction("Import &Data...", window)
    action.setToolTip("Read a measured record (CSV or text with a header) into the project")
    action.triggered.connect(lambda: import_dialog(window))
    window.import_data_action = action
    menu = window.file_menu
    anchor = getattr(window, "export_png_action", None)
    if anchor is not None and anchor in menu.actions():
        menu.insertAction(anchor, action)
        menu.insertSeparator(anchor)
    else:
        menu.addAction(action)
    export_menu = getattr(window, "export_menu", None)
    if export_menu is not None:
        script = QAction("Python Script of the &Fit…", window)
        tip = "A Python script (numpy and scipy only) that repeats the Fit panel's fit on the project's data sets"
        script.setToolTip(tip)
        script.setStatusTip(tip)
        script.triggered.connect(lambda: export_fit_script_dialog(window))
        export_menu.addAction(script)
        window.export_fit_script_action = script
