"""Fixtures for the Qt side: a live Session, a MainWindow, and per-user folders inside a temp dir."""

import os
import tempfile

if os.environ.get("DISPLAY"):
    os.environ.setdefault("QT_QPA_PLATFORM", "xcb")
else:
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
# Per-user data (autosave, error log) and settings go to a private folder for the whole run.
_USER_DIR = tempfile.mkdtemp(prefix="orbitdesk-ui-tests-")
os.environ["ORBITDESK_DATA_DIR"] = os.path.join(_USER_DIR, "data")
os.environ["ORBITDESK_NO_DIALOGS"] = "1"

import pytest  # noqa: E402
from PySide6.QtCore import QSettings, QStandardPaths  # noqa: E402
from PySide6.QtWidgets import QMessageBox  # noqa: E402

QStandardPaths.setTestModeEnabled(True)
# One GL context share group for every 3D view the tests create (as the app does at start-up):
# pyqtgraph's GL items keep their shader programs per context group.
from PySide6.QtCore import QCoreApplication, Qt  # noqa: E402

QCoreApplication.setAttribute(Qt.ApplicationAttribute.AA_ShareOpenGLContexts)
for _fmt in (QSettings.Format.NativeFormat, QSettings.Format.IniFormat):
    QSettings.setPath(_fmt, QSettings.Scope.UserScope, os.path.join(_USER_DIR, "config"))

ARTIFACTS = os.path.join(os.path.dirname(__file__), "..", "..", "test-artifacts")


class MessageBoxes:
    """Stands in for QMessageBox's static functions: records each call and gives a set answer."""

    def __init__(self):
        self.calls = []
        self.boxes = []  # the QMessageBox objects built by orbitdesk.app.plain_text, to inspect
        self.answer = QMessageBox.StandardButton.Discard

    def ask(self, kind):
        def box(parent, title, text, *args, **kwargs):
            self.calls.append((kind, title, text))
            if kind in ("question", "warning") and self.answer is not None:
                return self.answer
            return QMessageBox.StandardButton.Ok
        return box

    def show(self, box, kind):
        self.boxes.append(box)
        return self.ask(kind)(box.parent(), box.windowTitle(), box.text())

    def texts(self, kind=None):
        return [t for k, _title, t in self.calls if kind is None or k == kind]


@pytest.fixture(autouse=True)
def message_boxes(monkeypatch):
    """No test ever blocks on a modal message box; tests can read what was asked and set the answer."""
    boxes = MessageBoxes()
    for kind in ("question", "warning", "critical", "information"):
        monkeypatch.setattr(QMessageBox, kind, staticmethod(boxes.ask(kind)))
    from orbitdesk.app import plain_text

    monkeypatch.setattr(plain_text, "show_box", boxes.show)
    return boxes


@pytest.fixture
def artifacts():
    os.makedirs(ARTIFACTS, exist_ok=True)
    return os.path.abspath(ARTIFACTS)


@pytest.fixture
def session(qtbot):
    from orbitdesk.app.session import Session

    s = Session()
    yield s
    s.shutdown()
    # a job may be inside a call that cannot be interrupted (a first compile on a cold cache takes long on a
    # loaded machine): wait for it to end, then check that nothing is left running
    assert s.jobs.wait(180_000)
    assert s.jobs.pool.activeThreadCount() == 0
    s.deleteLater()


@pytest.fixture
def window(qtbot):
    from orbitdesk.app.main_window import MainWindow

    w = MainWindow()
    qtbot.addWidget(w)
    w.resize(1440, 900)
    w.show()
    qtbot.waitExposed(w)
    yield w
    w.session.shutdown()
    assert w.session.jobs.wait(180_000)  # as in the session fixture: an uninterruptible first compile ends
    w.session.doc.mark_saved()


def wait_for_trajectory(qtbot, session, action=None, timeout=20000, check=None):
    """Run ``action`` and wait for the trajectory it causes (optionally one that satisfies ``check``)."""
    with qtbot.waitSignal(session.trajectoryChanged, timeout=timeout,
                          check_params_cb=(lambda t: check(t)) if check else None) as blocker:
        if action is not None:
            action()
    return blocker.args[0]


def load_model(qtbot, session, text, defaults, views=None, **solver):
    """Load ``text`` as a fresh project with solver settings ``defaults`` updated by ``solver`` (and the
    views' saved settings ``views``), and wait for its first trajectory."""
    from orbitdesk.engine import RunSettings
    from orbitdesk.document.project import Project

    session.solver = RunSettings(**{**defaults, **solver})
    return wait_for_trajectory(qtbot, session, lambda: session.load_project(
        Project(name="m", model=text, solver=session.solver, views=dict(views or {}))))


SHORT_RUN = dict(t_end=20.0, samples=1001, steps=500)  # the analysis views' tests: a short run to start from


def load_short(qtbot, session, text, **solver):
    """``load_model`` with a short run (SHORT_RUN, updated by ``solver``)."""
    return load_model(qtbot, session, text, SHORT_RUN, **solver)


def click_for_result(qtbot, button, signal, timeout):
    """Click a view's compute button and wait for ``signal``; returns the signal's first argument."""
    with qtbot.waitSignal(signal, timeout=timeout) as blocker:
        button.click()
    return blocker.args[0]


def show_view(qtbot, view, size):
    """Show a view widget at ``size`` and wait until it is on screen."""
    qtbot.addWidget(view)
    view.resize(*size)
    view.show()
    qtbot.waitExposed(view)
    return view


def open_view(qtbot, session, module, size=(800, 600)):
    """A view of ``module`` (the registry, document/views.py) on ``session``, shown at ``size`` and on screen:
    the one set-up of the view tests (each test module names its view and size once)."""
    from orbitdesk.app import views as views_pkg

    return show_view(qtbot, views_pkg.load_view_class(module)(session), size)
