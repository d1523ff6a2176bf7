"""Uncaught exceptions: a non-blocking dialog with a readable message and expandable details, plus a
log file (``logs/errors.log`` in the per-user data folder). The program keeps running.

``ORBITDESK_NO_DIALOGS=1`` (used by tests) logs without showing the dialog.
"""

from __future__ import annotations

import logging
import os
import sys
import threading
import time
import traceback
from logging.handlers import RotatingFileHandler
from pathlib import Path

from PySide6.QtCore import QObject, QThread, Qt, Signal
from PySide6.QtGui import QGuiApplication
from PySide6.QtWidgets import (QApplication, QDialog, QDialogButtonBox, QHBoxLayout, QLabel, QPlainTextEdit,
                               QPushButton, QStyle, QVBoxLayout)

from orbitdesk.app.recovery import log_dir

ENV_NO_DIALOGS = "ORBITDESK_NO_DIALOGS"
log = logging.getLogger("orbitdesk")


def error_log_path() -> Path:
    return log_dir() / "errors.log"


def summary(exc_type, exc) -> str:
    """One readable line: what went wrong, without the traceback."""
    text = str(exc).strip()
    name = getattr(exc_type, "__name__", str(exc_type))
    return f"{name}: {text}" if text else name


class ErrorDialog(QDialog):
    """Says what went wrong in plain words; the traceback is one click away."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setWindowTitle("Something went wrong")
        self.setModal(False)
        self.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose, False)
        self.count = 0
        icon = QLabel()
        icon.setPixmap(self.style().standardIcon(QStyle.StandardPixmap.SP_MessageBoxWarning).pixmap(40, 40))
        icon.setAlignment(Qt.AlignmentFlag.AlignTop)
        self.message = QLabel()
        self.message.setWordWrap(True)
        self.message.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.message.setMinimumWidth(420)
        self.details = QPlainTextEdit()
        self.details.setReadOnly(True)
        self.details.setMinimumHeight(220)
        self.details.setLineWrapMode(QPlainTextEdit.LineWrapMode.NoWrap)
        self.details.hide()
        self.toggle = QPushButton("Show Details")
        self.toggle.setCheckable(True)
        self.toggle.setToolTip("Show the technical details (useful in a bug report)")
        self.toggle.toggled.connect(self._toggle)
        copy = QPushButton("Copy Details")
        copy.setToolTip("Copy the technical details to the clipboard")
        copy.clicked.connect(lambda: QGuiApplication.clipboard().setText(self.details.toPlainText()))
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
        buttons.addButton(self.toggle, QDialogButtonBox.ButtonRole.ActionRole)
        buttons.addButton(copy, QDialogButtonBox.ButtonRole.ActionRole)
        buttons.rejected.connect(self.hide)
        top = QHBoxLayout()
        top.addWidget(icon)
        top.addWidget(self.message, 1)
        layout = QVBoxLayout(self)
        layout.addLayout(top)
        layout.addWidget(self.details, 1)
        layout.addWidget(buttons)

    def _toggle(self, on: bool) -> None:
        self.details.setVisible(on)
        self.toggle.setText("Hide Details" if on else "Show Details")
        self.adjustSize()

    def add(self, message: str, details: str, log_file: Path | None) -> None:
        self.count += 1
        where = f"<p>The details were written to <code>{_escape(str(log_file))}</code>.</p>" if log_file else ""
        more = f"<p>({self.count} problems so far in this session.)</p>" if self.count > 1 else ""
        self.message.setText(
            f"<p><b>OrbitDesk ran into an internal problem</b> and stopped what it was doing.</p>"
            f"<p>{_escape(message)}</p><p>Your work is still open; saving it now is a good idea.</p>{where}{more}")
        stamp = time.strftime("%H:%M:%S")
        previous = self.details.toPlainText()
        self.details.setPlainText(f"[{stamp}] {details}" + (f"\n{previous}" if previous else ""))
        self.show()
        self.raise_()


def _escape(text: str) -> str:
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


class ErrorReporter(QObject):
    """Receives uncaught exceptions from any thread; logs them and shows them on the GUI thread."""

    reported = Signal(str, str)  # message, details
    _from_thread = Signal(str, str)

    def __init__(self, parent=None, show_dialogs: bool | None = None, log_file: Path | None = None):
        super().__init__(parent)
        if show_dialogs is None:
            show_dialogs = not os.environ.get(ENV_NO_DIALOGS)
        self.show_dialogs = show_dialogs
        if log_file is None:
            try:
                log_file = error_log_path()
            except OSError:  # data folder unusable: no log file, the app still runs
                log_file = None
        self.log_file = Path(log_file) if log_file is not None else None
        self.dialog: ErrorDialog | None = None
        self._previous = None
        self._previous_thread = None
        self._handler = None
        self._from_thread.connect(self._present, Qt.ConnectionType.QueuedConnection)

    # ------------------------------------------------------------ hooks
    def install(self) -> "ErrorReporter":
        self._previous, self._previous_thread = sys.excepthook, threading.excepthook
        sys.excepthook = self.excepthook
        threading.excepthook = self.thread_excepthook
        try:
            self._handler = RotatingFileHandler(self.log_file, maxBytes=1_000_000, backupCount=2,
                                                encoding="utf-8") if self.log_file is not None else None
        except OSError:
            self._handler = self.log_file = None
        if self._handler is not None:
            self._handler.setFormatter(logging.Formatter("%(asctime)s %(levelname)s %(name)s: %(message)s"))
            self._handler.setLevel(logging.WARNING)
            log.addHandler(self._handler)
        return self

    def uninstall(self) -> None:
        if self._previous is not None:
            sys.excepthook = self._previous
            threading.excepthook = self._previous_thread
            self._previous = None
        if self._handler is not None:
            log.removeHandler(self._handler)
            self._handler.close()
            self._handler = None

    def excepthook(self, exc_type, exc, tb) -> None:
        if issubclass(exc_type, KeyboardInterrupt):
            (self._previous or sys.__excepthook__)(exc_type, exc, tb)
            return
        self.report(exc_type, exc, tb)

    def thread_excepthook(self, args) -> None:
        if args.exc_type is SystemExit:
            return
        where = f" in thread {args.thread.name}" if args.thread is not None else ""
        self.report(args.exc_type, args.exc_value, args.exc_traceback, where)

    # ------------------------------------------------------------ reporting
    def report(self, exc_type, exc, tb, where: str = "") -> None:
        message = summary(exc_type, exc)
        details = "".join(traceback.format_exception(exc_type, exc, tb))
        self.write_log(f"uncaught exception{where}: {message}\n{details}")
        app = QApplication.instance()
        if app is not None and QThread.currentThread() is app.thread():
            self._present(message, details)
        else:
            self._from_thread.emit(message, details)

    def write_log(self, text: str) -> None:
        try:
            if self.log_file is not None:
                self.log_file.parent.mkdir(parents=True, exist_ok=True)
                with open(self.log_file, "a", encoding="utf-8") as f:
                    f.write(f"--- {time.strftime('%Y-%m-%d %H:%M:%S')} pid {os.getpid()}\n{text}\n")
        except OSError:
            pass
        try:
            sys.stderr.write(text + "\n")
        except (OSError, AttributeError, ValueError):
            pass

    def _present(self, message: str, details: str) -> None:
        self.reported.emit(message, details)
        if not self.show_dialogs:
            return
        if self.dialog is None:
            parent = QApplication.activeWindow()
            self.dialog = ErrorDialog(parent)
        self.dialog.add(message, details, self.log_file)


class _Forward(logging.Handler):
    def __init__(self, signal):
        super().__init__(logging.WARNING)
        self.signal = signal

    def emit(self, record) -> None:
        try:
            self.signal.emit(record.getMessage())
        except RuntimeError:  # the window is gone
            pass


class Notices(QObject):
    """Warnings of the core meant for the user (a refused compiled-code cache folder, ...), logged from
    any thread, shown in the window's status bar (each is logged once by the core)."""

    text = Signal(str)
    LOGGERS = ("orbitdesk.cache",)

    def __init__(self, window):
        super().__init__(window)
        self.text.connect(window.statusBar().showMessage)  # queued to the GUI thread when logged elsewhere
        self._handler = _Forward(self.text)
        for name in self.LOGGERS:
            logging.getLogger(name).addHandler(self._handler)

    def close(self) -> None:
        for name in self.LOGGERS:
            logging.getLogger(name).removeHandler(self._handler)


_installed: ErrorReporter | None = None


def install(parent=None) -> ErrorReporter:
    """Install the hooks once for the program (returns the reporter)."""
    global _installed
    if _installed is None:
        _installed = ErrorReporter(parent).install()
    return _installed
