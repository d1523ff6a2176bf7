"""Keeping the user's files safe from the window.

- ``DocumentGuard`` (one per window) saves through the checks of ``core.project.save``: a file changed
  on disk since it was opened or saved (another window or program) or a read-only file is never
  overwritten without asking; the answer may be to compare both versions, save under another name,
  reload from disk or overwrite. It also marks the open file (``core.open_markers``, in the per-user
  data folder) and warns when a file that is already open elsewhere is opened again.
- ``AutosaveNotice`` tells the user once, plainly, when autosave stops working and when it works again.
- ``tell_data_folder_unusable`` says that the app runs without autosave when its data folder is unusable.

Every question goes through ``ask`` (tests replace it); with ``ORBITDESK_NO_DIALOGS`` set and nobody to
ask, the safe answer is taken (never overwrite). Text from files is shown as plain text only.
"""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path

from PySide6.QtCore import QObject, Qt
from PySide6.QtGui import QFontDatabase
from PySide6.QtWidgets import (QDialog, QDialogButtonBox, QLabel, QMessageBox, QPlainTextEdit, QSplitter,
                               QTabWidget, QVBoxLayout, QWidget)

from orbitdesk.document import open_markers
from orbitdesk.document import project as core_project
from orbitdesk.document.project import Project, ProjectConflict, ProjectError, ProjectReadOnly
from orbitdesk.document.project_changes import describe_changes, model_diff
from orbitdesk.document.safe_files import plain_reason

from orbitdesk.app import recovery
from orbitdesk.app.plain_text import plain_message, rich_tip

ENV_NO_DIALOGS = "ORBITDESK_NO_DIALOGS"
COMPARE, SAVE_AS, RELOAD, OVERWRITE, CANCEL, OPEN = "compare", "save_as", "reload", "overwrite", "cancel", "open"
_Role = QMessageBox.ButtonRole


# ---------------------------------------------------------------- questions

def choice_box(parent, title: str, text: str, informative: str, choices, default: str):
    """A question box with one button per ``(answer, label, role, tooltip)``; returns (box, {button: answer})."""
    box = QMessageBox(parent)
    box.setIcon(QMessageBox.Icon.Warning)
    box.setWindowTitle(title)
    box.setTextFormat(Qt.TextFormat.PlainText)
    box.setText(text)
    box.setInformativeText(informative)
    answers = {}
    for answer, label, role, tip in choices:
        button = box.addButton(label, role)
        button.setToolTip(tip)
        answers[button] = answer
        if answer == default:
            box.setDefaultButton(button)
        if role == _Role.RejectRole:
            box.setEscapeButton(button)
    return box, answers


def ask(parent, title: str, text: str, informative: str, choices, default: str, unattended: str = CANCEL) -> str:
    """Ask and return the chosen answer; ``unattended`` when dialogs are switched off."""
    if os.environ.get(ENV_NO_DIALOGS):
        return unattended
    box, answers = choice_box(parent, title, text, informative, choices, default)
    box.exec()
    return answers.get(box.clickedButton(), CANCEL)


def _when(state) -> str:
    return time.strftime("%H:%M:%S on %Y-%m-%d", time.localtime(state.modified)) if state is not None else ""


def conflict_question(e: ProjectConflict) -> tuple:
    """(title, text, informative, choices, default) for a file that changed on disk."""
    name = Path(e.target).name
    if e.current is None:
        return ("File removed", f"“{name}” was removed or renamed since you opened or last saved it.",
                "Save it here again, or under another name?",
                [(OVERWRITE, "Save Here", _Role.AcceptRole, "Write this window's version to the same place"),
                 (SAVE_AS, "Save As…", _Role.ActionRole, "Choose another file name"),
                 (CANCEL, "Cancel", _Role.RejectRole, "Do not save now")], SAVE_AS)
    return ("File changed on disk",
            f"“{name}” was changed on disk at {_when(e.current)}, after you opened or last saved it — "
            "by another OrbitDesk window or another program.",
            "Saving now would overwrite those changes. Compare both versions first, save under another name, "
            "reload the file from disk (dropping this window's unsaved changes), or overwrite it?",
            [(COMPARE, "Show Both…", _Role.ActionRole, "Compare this window's version with the file on disk"),
             (SAVE_AS, "Save As…", _Role.ActionRole, "Keep both: save this window's version under another name"),
             (RELOAD, "Reload from Disk", _Role.DestructiveRole, "Drop this window's changes and load the file"),
             (OVERWRITE, "Overwrite", _Role.DestructiveRole, "Replace the file on disk with this window's version "
              "(the file on disk is kept as the .bak backup)"),
             (CANCEL, "Cancel", _Role.RejectRole, "Do not save now")], COMPARE)


def read_only_question(e: ProjectReadOnly) -> tuple:
    name = Path(e.target).name
    return ("Read-only file", f"“{name}” is marked read-only.",
            "Save under another name, or overwrite it anyway (it stays read-only)?",
            [(SAVE_AS, "Save As…", _Role.AcceptRole, "Choose another file name"),
             (OVERWRITE, "Overwrite Anyway", _Role.DestructiveRole,
              "Replace the read-only file; its permissions are kept"),
             (CANCEL, "Cancel", _Role.RejectRole, "Do not save now")], SAVE_AS)


def open_twice_question(path, elsewhere: list) -> tuple:
    where = "\n".join(f"• {o.describe()}" for o in elsewhere)
    return ("Already open", f"“{Path(path).name}” is already open in\n{where}",
            "If both windows change it, the second save would overwrite the first; OrbitDesk will ask "
            "before that happens. Open it here as well?",
            [(OPEN, "Open Anyway", _Role.AcceptRole, "Open a second copy of the file in this window"),
             (CANCEL, "Cancel", _Role.RejectRole, "Do not open it here")], CANCEL)


# ---------------------------------------------------------------- comparing both versions

def _text_pane(title: str, text: str) -> QWidget:
    w = QWidget()
    lay = QVBoxLayout(w)
    lay.setContentsMargins(0, 0, 0, 0)
    label = QLabel(title)
    label.setTextFormat(Qt.TextFormat.PlainText)
    edit = QPlainTextEdit()
    edit.setReadOnly(True)
    edit.setLineWrapMode(QPlainTextEdit.LineWrapMode.NoWrap)
    edit.setFont(QFontDatabase.systemFont(QFontDatabase.SystemFont.FixedFont))
    edit.setPlainText(text)
    lay.addWidget(label)
    lay.addWidget(edit)
    return w


class CompareDialog(QDialog):
    """This window's version beside the file on disk: the key changes, the model texts side by side and
    the line differences. Everything is plain text."""

    def __init__(self, mine: Project, theirs: Project | None, problem: str = "", when: str = "", parent=None):
        super().__init__(parent)
        self.setWindowTitle("This window and the file on disk")
        lay = QVBoxLayout(self)
        if theirs is None:
            changes = [f"The file on disk cannot be read: {problem}"]
        else:
            changes = describe_changes(mine, theirs) or ["No differences in the project's content."]
        heading = QLabel("What differs (this window first, then the file on disk):")
        lay.addWidget(heading)
        self.changes = QPlainTextEdit()
        self.changes.setReadOnly(True)
        self.changes.setPlainText("\n".join(changes))
        self.changes.setMaximumHeight(130)
        lay.addWidget(self.changes)
        tabs = QTabWidget()
        split = QSplitter(Qt.Orientation.Horizontal)
        split.addWidget(_text_pane("This window (not saved)", mine.model))
        split.addWidget(_text_pane(f"On disk (changed {when})" if when else "On disk",
                                   theirs.model if theirs is not None else ""))
        tabs.addTab(split, "Model side by side")
        diff = model_diff(mine, theirs) if theirs is not None else []
        tabs.addTab(_text_pane("Lines only in this window start with -, lines only on disk with +",
                               "\n".join(diff) or "The model texts are the same."), "Line differences")
        lay.addWidget(tabs, 1)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
        buttons.rejected.connect(self.reject)
        lay.addWidget(buttons)
        self.resize(900, 560)


def show_dialog(dialog: QDialog) -> None:
    """Show a modal dialog (tests replace this)."""
    if not os.environ.get(ENV_NO_DIALOGS):
        dialog.exec()


# ---------------------------------------------------------------- the window's guard

def markers_dir() -> Path | None:
    try:
        return recovery.data_dir() / "open"
    except OSError:
        return None


class DocumentGuard(QObject):
    """Saves and opens for one window, with the questions above; keeps this window's open-file marker."""

    def __init__(self, window):
        super().__init__(window)
        self.window = window
        self.session = window.session
        self.marker: open_markers.Marker | None = None
        self.session.projectLoaded.connect(self.follow)

    # ------------------------------------------------------------ open markers
    def elsewhere(self, path) -> list:
        folder = markers_dir()
        if folder is None or path is None:
            return []
        return open_markers.others(folder, path, mine=self.marker)

    def confirm_open(self, path) -> bool:
        """Before opening ``path``: if another window has it open, warn and let the user choose."""
        path = Path(path)
        if self.marker is not None and self.marker.path == os.path.realpath(path):
            return True  # reopening (revert, reload) in the same window
        others = self.elsewhere(path) if path.suffix.lower() == ".orbitdesk" or path.exists() else []
        if not others:
            return True
        return ask(self.window, *open_twice_question(path, others), unattended=OPEN) == OPEN

    def follow(self) -> None:
        """Move this window's marker to the session's current file."""
        path = self.session.path
        if self.marker is not None and path is not None and self.marker.path == os.path.realpath(path):
            return
        self.release()
        folder = markers_dir()
        if path is None or folder is None:
            return
        try:
            self.marker = open_markers.claim(folder, path)
        except OSError:
            self.marker = None  # no marker: the save-time check still protects the file

    def release(self) -> None:
        if self.marker is not None:
            self.marker.release()
            self.marker = None

    # ------------------------------------------------------------ saving
    def save(self, path) -> bool:
        """Save the session to ``path``, asking where the file changed on disk or is read-only."""
        path = Path(path)
        overwrite = overwrite_read_only = False
        while True:
            try:
                self.session.save(path, overwrite=overwrite, overwrite_read_only=overwrite_read_only)
            except ProjectConflict as e:
                answer = ask(self.window, *conflict_question(e))
                if answer == COMPARE:
                    self.compare(path, e)
                    continue
                if answer == OVERWRITE:
                    overwrite = True
                    continue
                if answer == SAVE_AS:
                    return self.window.save_as()
                if answer == RELOAD:
                    self.window.open_path(path, ask=False)
                return False
            except ProjectReadOnly as e:
                answer = ask(self.window, *read_only_question(e))
                if answer == OVERWRITE:
                    overwrite_read_only = True
                    continue
                if answer == SAVE_AS:
                    return self.window.save_as()
                return False
            except ProjectError as e:
                plain_message(self.window, "critical", "Could not save", e.message)
                return False
            self.follow()
            return True

    def compare(self, path, e: ProjectConflict | None = None) -> None:
        try:
            theirs, problem = core_project.load(path), ""
        except ProjectError as err:
            theirs, problem = None, err.message
        when = _when(e.current) if e is not None else ""
        show_dialog(CompareDialog(self.session.to_project(), theirs, problem, when, self.window))


# ---------------------------------------------------------------- autosave and the data folder

def autosave_warning(message: str) -> tuple[str, str]:
    return ("Autosave is not working", f"{message}\n\nOrbitDesk keeps trying and will say when it works "
            "again. Until then, save your project yourself (File ▸ Save, or Save As to another drive).")


class AutosaveNotice(QObject):
    """Shows autosave trouble once (status bar + one message), keeps the status bar saying so while it
    lasts, and says when autosave works again."""

    def __init__(self, window, autosaver):
        super().__init__(window)
        self.window = window
        self.label = QLabel("")
        self.label.setStyleSheet("color: #b3261e; font-weight: bold;")
        self.label.hide()
        window.statusBar().addPermanentWidget(self.label)
        self.told = False
        autosaver.failed.connect(self.on_failed)
        autosaver.recovered.connect(self.on_recovered)
        if autosaver.failing is not None:
            self.on_failed(autosaver.failing)

    def on_failed(self, message: str) -> None:
        self.label.setText("Autosave is not working")
        self.label.setToolTip(rich_tip(message + "\nOrbitDesk keeps trying."))
        self.label.show()
        self.window.statusBar().showMessage(message.splitlines()[0], 30_000)
        if not self.told:
            self.told = True
            plain_message(self.window, "warning", *autosave_warning(message))

    def on_recovered(self) -> None:
        self.label.hide()
        self.window.statusBar().showMessage("Autosave works again: unsaved work is kept safe.", 15_000)


def tell_data_folder_unusable(window, error: Exception) -> None:
    """The app runs without autosave and crash recovery: say so once, plainly."""
    where = getattr(error, "filename", None)
    message = (f"OrbitDesk cannot use its data folder{f' {where}' if where else ''} ({plain_reason(error)}). "
               "It runs without autosave and crash recovery until this is fixed.")
    window.statusBar().showMessage(message, 60_000)
    if os.environ.get(ENV_NO_DIALOGS):
        print(f"OrbitDesk: {message}", file=sys.stderr, flush=True)
    plain_message(window, "warning", "Data folder unusable", f"{message}\n\nSave your work yourself. To use another "
                 f"folder, set {recovery.ENV_DATA_DIR} to it before starting OrbitDesk.")
