"""Start the desktop application: ``main(path=...)`` (used by ``orbitdesk`` and ``orbitdesk open PATH``).

Heavy modules (sympy, scipy, OpenGL, analyses) are imported when first needed, after the window shows.
"""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path

from PySide6.QtCore import QEvent, QObject, Qt, QTimer
from PySide6.QtGui import QGuiApplication, QIcon
from PySide6.QtWidgets import QApplication

APP_NAME = "OrbitDesk"
RESOURCES = Path(__file__).resolve().parent.parent / "resources"


def app_icon() -> QIcon:
    for name in ("icon.svg", "icon-256.png"):
        path = RESOURCES / name
        if path.exists():
            icon = QIcon(str(path))
            if not icon.isNull():
                return icon
    return QIcon()


def make_application(argv=None) -> QApplication:
    """The QApplication (created once), named, with the icon; follows the system palette and scaling."""
    app = QApplication.instance()
    if app is None:
        QGuiApplication.setHighDpiScaleFactorRoundingPolicy(Qt.HighDpiScaleFactorRoundingPolicy.PassThrough)
        app = QApplication(list(argv) if argv else [sys.argv[0] if sys.argv else APP_NAME])
    app.setApplicationName(APP_NAME)
    app.setOrganizationName(APP_NAME)
    app.setApplicationDisplayName(APP_NAME)
    import orbitdesk

    app.setApplicationVersion(getattr(orbitdesk, "__version__", ""))
    app.setDesktopFileName("orbitdesk")
    app.setWindowIcon(app_icon())
    return app


class _FirstPaint(QObject):
    """Opens the path given to ``open_after_paint`` once the window has painted for the first time (a project given on the command
    line is opened then: parsing and compiling it load sympy, which the first paint does without).
    ``report``: print ``shown SECONDS`` (``time.time()``) at that moment (``ORBITDESK_REPORT_SHOWN=1``);
    ``quit``: then quit once the project is open and its run shown, printing ``ready SECONDS`` (the
    start-up benchmark)."""

    def __init__(self, window, report: bool = False, quit: bool = False):
        super().__init__(window)
        self.report, self.quit = report, quit
        self.then_open = None  # a path to open after the first paint (at once if it has been painted)
        self.painted = False
        window.installEventFilter(self)

    def open_after_paint(self, path) -> None:
        self.then_open = path
        if self.painted:  # a recovery question ran the event loop: the window has been painted already
            QTimer.singleShot(0, self._open)

    def eventFilter(self, obj, event):
        if event.type() == QEvent.Type.Paint:
            obj.removeEventFilter(self)
            QTimer.singleShot(0, self._painted)  # after this first frame is painted
        return False

    def _painted(self):
        self.painted = True
        if self.report:
            print(f"shown {time.time():.6f}", flush=True)
        self._open()
        if self.quit:
            self._poll = QTimer(self)
            self._poll.timeout.connect(self._ready)
            self._poll.start(5)

    def _open(self):
        path, self.then_open = self.then_open, None
        if path is not None:
            self.parent().open_path(path, ask=False)

    def _ready(self):
        session = self.parent().session
        if session.busy or session.run_pending() or (session.system is not None and session.trajectory is None):
            return
        self._poll.stop()
        QTimer.singleShot(0, lambda: (print(f"ready {time.time():.6f}", flush=True), QApplication.instance().quit()))


def create(argv=None, path=None):
    """Build the application and its window (shown); offer recovery, else open ``path`` once the window
    has painted.

    Returns (app, window). ``window.autosaver`` keeps unsaved work safe; call ``finish(window)`` after
    the event loop ends.
    """
    app = make_application(argv)
    from orbitdesk.app import errors
    from orbitdesk.app import file_guard
    from orbitdesk.app import recovery
    from orbitdesk.app.main_window import MainWindow

    data_problem = None  # an unusable data folder: run without autosave, recovery and crash log
    try:
        recovery.enable_crash_log()
    except OSError as e:
        data_problem = e
    errors.install(app)
    window = MainWindow()
    window.autosaver = None
    if data_problem is None:
        try:
            window.autosaver = recovery.Autosaver(window.session, parent=window)
        except OSError as e:
            data_problem = e
    if window.autosaver is not None:
        window.autosave_notice = file_guard.AutosaveNotice(window, window.autosaver)
    report = os.environ.get("ORBITDESK_REPORT_SHOWN", "")
    window._first_paint = first = _FirstPaint(window, report=bool(report), quit=report == "quit")
    window.show()
    if data_problem is not None:
        file_guard.tell_data_folder_unusable(window, data_problem)
    restored = data_problem is None and recovery.offer_recovery(window)
    if path is not None and not restored:
        first.open_after_paint(path)
    return app, window


def finish(window) -> None:
    """After the event loop: stop the workers and remove this run's autosave (a clean exit)."""
    window.session.shutdown()
    window.guard.release()
    autosaver = getattr(window, "autosaver", None)
    if autosaver is not None:
        autosaver.finish()


def main(argv=None, path=None) -> int:
    app, window = create(argv, path)
    code = app.exec()
    finish(window)
    return int(code)


if __name__ == "__main__":
    args = sys.argv[1:]
    sys.exit(main(sys.argv[:1], path=args[0] if args else None))
