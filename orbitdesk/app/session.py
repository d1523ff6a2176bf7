"""The window's side of the live document: a Qt adapter over one ``document.live.LiveDocument``.

The document (headless) holds the model text, values, solver settings, the project's parts and the
results of the current system and values, with undoable commands and plain-Python change events. The
Session turns those events into Qt signals, parses the text after a short pause in typing (a timer),
compiles and runs on worker threads (``run_job``: progress, cancel, results of a job started before the
model or the values changed are dropped) and re-runs when what a run depends on changes. While the
text has errors the last valid system stays active.

Reading ``session.params``, ``session.project`` and the other document fields reads the document;
editing goes through the document's commands (``set_text``, ``set_param``, ... or ``session.doc``).
"""

from __future__ import annotations

from contextlib import contextmanager

from PySide6.QtCore import QObject, QTimer, Signal

from orbitdesk.document import project as core_project
from orbitdesk.document.live import (PROJECT_SUFFIXES, SOLVER_FIELDS, LiveDocument,  # noqa: F401 (re-exported)
                                     compile_parsed, read_document, read_document_with_state, signature)
from orbitdesk.document.project import Project, ProjectError

from orbitdesk.app.undo import QtUndoStack
from orbitdesk.app.worker import JobRunner

VALIDATE_DELAY_MS = 120


def _field(name: str) -> property:
    """A document field read (and, for the few the window sets directly, written) through the Session."""
    return property(lambda self: getattr(self.doc, name), lambda self, v: setattr(self.doc, name, v),
                    doc=f"The live document's ``{name}``.")


def _call(name: str):
    """A document method offered by the Session under the same name."""
    def method(self, *args, **kwargs):
        return getattr(self.doc, name)(*args, **kwargs)

    method.__name__ = name
    method.__doc__ = getattr(LiveDocument, name).__doc__
    return method


class Session(QObject):
    textChanged = Signal(str)          # model text changed (load, undo/redo, walkthrough, set_text)
    modelParsed = Signal(object)       # ParsedModel after each validation; may have errors
    systemChanged = Signal(object)     # CompiledSystem, only when a valid model compiled
    valuesChanged = Signal()           # parameter / initial values or slider ranges changed
    settingsChanged = Signal()         # solver settings changed
    trajectoryChanged = Signal(object) # engine Trajectory for the current system + values
    timeCursorChanged = Signal(float)  # shared time cursor (t or n)
    dirtyChanged = Signal(bool)
    projectLoaded = Signal()           # a project was opened/new; views re-read their settings
    partChanged = Signal(str)          # a project part was replaced (walkthrough, datasets, parameter_sets, views)
    viewSettingsChanged = Signal(str)  # a view wrote its settings into the project (its id)
    viewSettingsRestored = Signal(str) # undo or redo put a view's settings back (its id): the view shows them
    stepChanged = Signal(int)          # a walkthrough step's title or note changed (its index)
    statusMessage = Signal(str)
    busyChanged = Signal(bool)         # any background job running
    runProgress = Signal(float)        # progress of the main run, 0..1
    runFailed = Signal(str)            # the main run raised (plain message)
    equilibriaChanged = Signal(object)   # list of equilibria found for the current system and values
    equilibriumSelected = Signal(object) # index into that list, or None
    startsRequested = Signal(object)     # list of {"u0": [...], "backward": bool}: trajectories to start
    cycleChanged = Signal(object)        # the limit cycle (core Cycle / MapCycle) for these values, or None
    resultChanged = Signal(str)          # a kept result of this kind was set or cleared (document/results.py)
    heldChanged = Signal(bool)           # a value's slider is held by the hand (views keep their ranges)

    def __init__(self, parent=None):
        super().__init__(parent)
        self.doc = LiveDocument()
        self.auto_run = True
        self.held = False
        self._start_takers: list[str] | None = None
        self.undo_stack = QtUndoStack(self.doc.undo, self)
        self.jobs = JobRunner(self)
        self.jobs.busyChanged.connect(self.busyChanged)
        self._validate_timer = QTimer(self, singleShot=True, interval=VALIDATE_DELAY_MS)
        self._validate_timer.timeout.connect(self.validate_now)
        self._run_timer = QTimer(self, singleShot=True, interval=0)
        self._run_timer.timeout.connect(self.run)
        self._answering = 0   # > 0 while the document's events or a job's result are handed to the views

        def on(event, fn):
            self.doc.subscribe(event, self._answer(fn))
        on("text", self.textChanged.emit)
        on("text", lambda _t: self._validate_timer.start())
        on("parsed", self.modelParsed.emit)
        on("parsed", self._on_parsed)
        on("system", self.systemChanged.emit)
        on("values", self.valuesChanged.emit)
        on("settings", self.settingsChanged.emit)
        on("inputs", self.schedule_run)
        on("trajectory", self.trajectoryChanged.emit)
        on("time_cursor", self.timeCursorChanged.emit)
        on("equilibria", self.equilibriaChanged.emit)
        on("selection", self.equilibriumSelected.emit)
        on("cycle", self.cycleChanged.emit)
        on("result", self.resultChanged.emit)
        on("part", self.partChanged.emit)
        on("view_settings", self.viewSettingsChanged.emit)
        on("view_restored", self.viewSettingsRestored.emit)
        on("step", self.stepChanged.emit)
        on("loaded", self._validate_timer.stop)
        on("loaded", self.projectLoaded.emit)
        on("dirty", self._on_dirty)
        on("message", self.statusMessage.emit)

    def _answer(self, fn):
        """``fn`` run as the program's answer to the document or a job (``answering``)."""
        def answer(*args):
            with self.program():
                return fn(*args)
        return answer

    @contextmanager
    def program(self):
        """What the views set on their controls inside this is the program's (a view being opened, a
        walkthrough step shown), not a gesture of the user: no undo step (SessionView.settings_changed)."""
        self._answering += 1
        try:
            yield
        finally:
            self._answering -= 1

    @property
    def answering(self) -> bool:
        """The views are being told of a change of the document or a job's result, or set up by the program
        (``program``): what they set on their controls now is no gesture of the user."""
        return self._answering > 0

    def _on_dirty(self, dirty: bool) -> None:
        try:
            self.dirtyChanged.emit(dirty)
        except RuntimeError:  # the session is being destroyed
            pass

    @property
    def busy(self) -> bool:
        return self.jobs.busy

    def set_held(self, held: bool) -> None:
        """A slider is being dragged (True) or was let go (False): views keep their ranges while it is
        held, so only the curves are drawn again, and fit them when it is let go."""
        held = bool(held)
        if held != self.held:
            self.held = held
            self.heldChanged.emit(held)

    # ------------------------------------------------------------ added starts (not undoable, not kept)
    def request_starts(self, starts) -> list[str]:
        """Ask the views that draw added trajectories to start them from these full initial states:
        dicts with ``u0`` (a value per state, in system order) and ``backward`` (run backward in time).

        Returns the titles of the views that took them (each calls ``note_starts_taken``)."""
        starts = [{"u0": [float(v) for v in st["u0"]], "backward": bool(st.get("backward", False))}
                  for st in starts]
        self._start_takers = []
        try:
            if starts:
                self.startsRequested.emit(starts)
            return list(self._start_takers)
        finally:
            self._start_takers = None

    def note_starts_taken(self, title: str) -> None:
        """Called by a view handling ``startsRequested``: it drew the starts (``title`` names it)."""
        if self._start_takers is not None and title not in self._start_takers:
            self._start_takers.append(title)

    # ------------------------------------------------------------ validation and compiling
    def validate_now(self) -> None:
        """Parse the current text now (normally done after a short pause in typing)."""
        self.doc.parse_now()

    def _on_parsed(self, parsed) -> None:
        self._validate_timer.stop()
        if not parsed.ok:
            return
        if not self.doc.needs_system(parsed):
            self.jobs.cancel("compile")  # back to the active system: a pending compile is moot
            return
        sig, text_gen = signature(parsed), self.doc.text_generation

        def job(cancel, report):
            return compile_parsed(parsed)

        self.jobs.submit("compile", job, lambda system: self.doc.adopt_system(system, sig),
                         on_error=lambda msg: self.statusMessage.emit(f"The model could not be compiled: {msg}"),
                         is_current=lambda: text_gen == self.doc.text_generation)

    # ------------------------------------------------------------ running
    def schedule_run(self) -> None:
        """Re-run soon (coalesces bursts of changes into one run)."""
        if self.auto_run:
            self._run_timer.start()

    def run_pending(self) -> bool:
        """A run for the values now set is scheduled or under way (the trajectory held is an older one)."""
        return self._run_timer.isActive() or self.jobs.running("run")

    def run(self) -> None:
        """Integrate / iterate the current system with the current values and settings."""
        self._run_timer.stop()
        system = self.system
        if system is None:
            return
        try:
            settings = self.run_settings()
        except (TypeError, ValueError) as e:
            self.statusMessage.emit(f"Cannot run: {e}")
            return
        u0, p = self.initial_vector(), self.param_vector()

        def job(cancel, report):
            from orbitdesk.engine.runs import simulate

            return simulate(system, settings, u0, p, cancel=cancel, progress=report, noise=True)

        self.run_job("run", job, self.doc.set_trajectory, on_progress=self.runProgress.emit,
                     on_error=self._run_failed)

    def _run_failed(self, message: str) -> None:
        self.statusMessage.emit(f"The run failed: {message}")
        self.runFailed.emit(message)

    def run_job(self, key: str, fn, on_done, on_progress=None, on_error=None, label: str | None = None):
        """Run ``fn(cancel_token, reporter)`` on a worker thread; see the module docstring of worker.py.

        A newer job with the same key cancels the older; results of a job started before the model or
        the values changed are dropped. ``on_done(result)`` runs on the GUI thread. Returns the CancelToken.
        """
        generation = self.doc.generation
        if on_error is None:
            on_error = lambda msg: self.statusMessage.emit(msg)  # noqa: E731
        return self.jobs.submit(key, fn, self._answer(on_done), on_progress, on_error,
                                is_current=lambda: generation == self.doc.generation, label=label)

    def cancel_job(self, key: str) -> None:
        """Cancel the job started under ``key`` (a view's Cancel button)."""
        self.jobs.cancel(key)

    def job_running(self, key: str) -> bool:
        """A job started under ``key`` is under way."""
        return self.jobs.running(key)

    def cancel_all(self) -> None:
        self._run_timer.stop()
        self.jobs.cancel_all()

    def shutdown(self) -> None:
        """Cancel everything and wait for the worker threads (on close)."""
        self._run_timer.stop()
        self._validate_timer.stop()
        self.jobs.shutdown()

    # ------------------------------------------------------------ documents
    def load_project(self, project: Project, path=None, disk_state=core_project.UNCHECKED) -> None:
        """Replace the whole document (no undo); the model is parsed at once and compiled in the background.
        ``disk_state``: what the file at ``path`` held when read (saving checks it has not changed since)."""
        self.cancel_all()
        self._validate_timer.stop()
        self.doc.load_project(project, path, disk_state)

    def new(self) -> None:
        self.load_project(Project(), None)

    def open(self, path) -> None:
        """Open a project or model text file; raises ProjectError and changes nothing if it cannot be read.
        Temporary files left beside a project by interrupted saves are cleaned up."""
        proj, project_path, state = read_document_with_state(path)
        if project_path is not None:
            core_project.remove_stale_temps(project_path)
        self.load_project(proj, project_path, state)

    def revert(self) -> None:
        if self.path is None:
            raise ProjectError("$", "this project has not been saved yet")
        self.open(self.path)

    def save(self, path=None, *, overwrite: bool = False, overwrite_read_only: bool = False):
        return self.doc.save(path, overwrite=overwrite, overwrite_read_only=overwrite_read_only)

    save.__doc__ = LiveDocument.save.__doc__


for _name in ("project", "path", "disk_state", "text", "parsed", "system", "params", "initial", "ranges",
              "solver", "trajectory", "time_cursor", "equilibria", "selected_equilibrium", "cycle",
              "clicked_start", "generation", "dirty", "name"):
    setattr(Session, _name, _field(_name))
for _name in ("param_range", "written_values", "param_vector", "initial_vector", "run_settings",
              "set_text", "set_param", "set_initial", "set_values", "reset_values", "set_param_range",
              "set_solver", "replace_part", "show_state", "set_time_cursor", "set_equilibria",
              "select_equilibrium", "set_cycle", "current_cycle", "cycle_stale", "set_result", "clear_result", "result", "result_stale", "basis",
              "note_clicked_start", "mark_dirty", "mark_saved", "set_view_settings", "change_view_settings",
              "to_project"):
    setattr(Session, _name, _call(_name))
del _name
