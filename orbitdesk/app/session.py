"""The single live document every panel talks to: model text, values, solver settings, runs, undo.

Validation parses the text on the GUI thread after a short pause in typing; compiling and running
happen on worker threads. While the text has errors the last valid system stays active. Values the
user set (sliders, spin boxes) survive edits of the text unless the value written in the text for
that name changes.
"""

from __future__ import annotations

import copy
import dataclasses
import math
import os
import time
from pathlib import Path

import numpy as np
from PySide6.QtCore import QObject, QTimer, Signal
from PySide6.QtGui import QUndoCommand, QUndoStack

from orbitdesk.document import project as core_project
from orbitdesk.engine.settings import SAVED, RunSettings
from orbitdesk.document.project import ParameterSetting, Project, ProjectError

from orbitdesk.app.worker import JobRunner

VALIDATE_DELAY_MS = 120
TEXT_MERGE_SECONDS = 2.0     # typing pauses longer than this start a new undo step
VALUE_MERGE_SECONDS = 1.5    # same for slider moves of one parameter
clock = time.monotonic       # what undo merging reads (tests replace it to be independent of load)
PROJECT_SUFFIXES = (".orbitdesk", ".json")
SOLVER_FIELDS = SAVED


def _parse(text):
    from orbitdesk.language.model import parse_model  # sympy: imported on first use, after the window shows

    return parse_model(text)


def _signature(parsed) -> tuple:
    """What a compiled system depends on; equal signatures give the same system."""
    return (
        parsed.kind,
        tuple(parsed.states),
        tuple((s, str(parsed.equations[s])) for s in parsed.states),
        tuple((n, i.value, i.lo, i.hi) for n, i in parsed.parameters.items()),
        tuple(sorted(parsed.initial.items())),
        tuple((n, str(e)) for n, e in parsed.derived.items()),
        str(parsed.time_symbol),
    )


def read_document(path) -> tuple[Project, Path | None]:
    """Read a project file or a plain model text file. Returns (project, project_path or None).

    Raises ProjectError with a readable message for anything that cannot be opened.
    """
    return read_document_with_state(path)[:2]


def read_document_with_state(path) -> tuple[Project, Path | None, object]:
    """``read_document`` plus what a project file was on disk (a DiskState; UNCHECKED for model text)."""
    from orbitdesk.language.model_file import read_model_file

    path = Path(path)
    if path.suffix.lower() in PROJECT_SUFFIXES:
        return _project_with_state(path)
    try:
        text = read_model_file(path)
    except FileNotFoundError:
        raise ProjectError("$", f"cannot read {str(path)!r}: no such file") from None
    except OSError as e:
        raise ProjectError("$", f"cannot read {str(path)!r}: {e.strerror or e}") from None
    except ValueError as e:
        raise ProjectError("$", str(e)) from None
    if text.lstrip().startswith("{"):
        return _project_with_state(path)
    return Project(name=path.stem or "Untitled", model=text.replace("\r\n", "\n")), None, core_project.UNCHECKED


def _same_path(a: Path, b: Path) -> bool:
    return os.path.realpath(a) == os.path.realpath(b)


def _project_with_state(path: Path) -> tuple[Project, Path, object]:
    project, state = core_project.load_with_state(path)
    return project, path, state


# ---------------------------------------------------------------- undo commands

class _TextCommand(QUndoCommand):
    ID = 1001

    def __init__(self, session: "Session", old: str, new: str):
        super().__init__("Edit model")
        self.s, self.old, self.new = session, old, new
        self.stamp = clock()

    def id(self):
        return self.ID

    def redo(self):
        # always announced, so every panel (the editor too) shows text set by anyone; the editor
        # ignores an announcement of the text it already has
        self.s._apply_text(self.new, emit=True)

    def undo(self):
        self.s._apply_text(self.old, emit=True)

    def mergeWith(self, other):
        if other.id() != self.ID or other.stamp - self.stamp > TEXT_MERGE_SECONDS:
            return False
        self.new, self.stamp = other.new, other.stamp
        if self.new == self.old:
            self.setObsolete(True)
        return True


class _ValueCommand(QUndoCommand):
    """One parameter or initial value; consecutive changes of the same name merge."""

    ID = 1002

    def __init__(self, session: "Session", table: str, name: str, old, new):
        what = "parameter" if table == "params" else "initial value"
        super().__init__(f"Change {what} {name}")
        self.s, self.table, self.name, self.old, self.new = session, table, name, old, new
        self.stamp = clock()

    def id(self):
        return self.ID

    def redo(self):
        self.s._apply_value(self.table, self.name, self.new)

    def undo(self):
        self.s._apply_value(self.table, self.name, self.old)

    def mergeWith(self, other):
        if (other.id() != self.ID or (other.table, other.name) != (self.table, self.name)
                or other.stamp - self.stamp > VALUE_MERGE_SECONDS):
            return False
        self.new, self.stamp = other.new, other.stamp
        if self.new == self.old:
            self.setObsolete(True)
        return True


class _ValuesCommand(QUndoCommand):
    """Replace all parameter and initial values at once (reset)."""

    def __init__(self, session: "Session", label: str, old: tuple, new: tuple):
        super().__init__(label)
        self.s, self.old, self.new = session, old, new

    def redo(self):
        self.s._apply_values(*self.new)

    def undo(self):
        self.s._apply_values(*self.old)


class _RangeCommand(QUndoCommand):
    def __init__(self, session: "Session", name: str, old, new):
        super().__init__(f"Change range of {name}")
        self.s, self.name, self.old, self.new = session, name, old, new

    def redo(self):
        self.s._apply_range(self.name, self.new)

    def undo(self):
        self.s._apply_range(self.name, self.old)


class _SolverCommand(QUndoCommand):
    ID = 1003

    def __init__(self, session: "Session", old: RunSettings, new: RunSettings, keys: frozenset):
        super().__init__("Change solver settings")
        self.s, self.old, self.new, self.keys = session, old, new, keys
        self.stamp = clock()

    def id(self):
        return self.ID

    def redo(self):
        self.s._apply_solver(self.new)

    def undo(self):
        self.s._apply_solver(self.old)

    def mergeWith(self, other):
        if other.id() != self.ID or other.keys != self.keys or other.stamp - self.stamp > VALUE_MERGE_SECONDS:
            return False
        self.new, self.stamp = other.new, other.stamp
        if self.new == self.old:
            self.setObsolete(True)
        return True


# ---------------------------------------------------------------- session

class Session(QObject):
    textChanged = Signal(str)          # model text changed (load, undo/redo, walkthrough, set_text)
    modelParsed = Signal(object)       # ParsedModel after each validation; may have errors
    systemChanged = Signal(object)     # CompiledSystem, only when a valid model compiled
    valuesChanged = Signal()           # parameter / initial values changed
    settingsChanged = Signal()         # solver settings changed
    trajectoryChanged = Signal(object) # engine Trajectory for the current system + values
    timeCursorChanged = Signal(float)  # shared time cursor (t or n)
    dirtyChanged = Signal(bool)
    projectLoaded = Signal()           # a project was opened/new; views re-read their settings
    statusMessage = Signal(str)
    busyChanged = Signal(bool)         # any background job running
    runProgress = Signal(float)        # progress of the main run, 0..1
    runFailed = Signal(str)            # the main run raised (plain message)
    equilibriaChanged = Signal(object)   # list of equilibria found for the current system and values
    equilibriumSelected = Signal(object) # index into that list, or None
    startsRequested = Signal(object)     # list of {"u0": [...], "backward": bool}: trajectories to start
    cycleChanged = Signal(object)        # the limit cycle (core Cycle / MapCycle) for these values, or None
    heldChanged = Signal(bool)           # a value's slider is held by the hand (views keep their ranges)

    def __init__(self, parent=None):
        super().__init__(parent)
        self.project = Project()
        self.path: Path | None = None
        self.disk_state = core_project.UNCHECKED  # what the file at ``path`` was when opened or last saved
        self.text = ""
        self.parsed = None
        self.system = None
        self.params: dict[str, float] = {}
        self.initial: dict[str, float] = {}
        self.ranges: dict[str, tuple] = {}   # slider ranges the user set (overriding the model's)
        self.solver = RunSettings()
        self.trajectory = None
        self.time_cursor = math.inf
        self.equilibria: list = []                   # shared by the views that show equilibria
        self.selected_equilibrium: int | None = None  # index into ``equilibria``
        self._start_takers: list[str] | None = None
        self.cycle = None                            # the limit cycle found for the current values
        self.clicked_start: list[float] | None = None  # full state of the last trajectory started by a click
        self.generation = 0
        self.auto_run = True
        self.held = False
        self.undo_stack = QUndoStack(self)
        self.jobs = JobRunner(self)
        self.jobs.busyChanged.connect(self.busyChanged)
        self._save_hooks: list = []
        self._written_params: dict[str, float] = {}
        self._written_ranges: dict[str, tuple] = {}
        self._written_initial: dict[str, float] = {}
        self._signature = None
        self._text_gen = 0
        self._forced_dirty = False
        self._last_dirty = False
        self._validate_timer = QTimer(self, singleShot=True, interval=VALIDATE_DELAY_MS)
        self._validate_timer.timeout.connect(self.validate_now)
        self._run_timer = QTimer(self, singleShot=True, interval=0)
        self._run_timer.timeout.connect(self.run)
        self.undo_stack.cleanChanged.connect(self._on_clean_changed)

    # ------------------------------------------------------------ state
    @property
    def dirty(self) -> bool:
        return self._forced_dirty or not self.undo_stack.isClean()

    @property
    def name(self) -> str:
        return self.project.name or "Untitled"

    @property
    def busy(self) -> bool:
        return self.jobs.busy

    def mark_dirty(self) -> None:
        """Unsaved work that is not on the undo stack (e.g. restored from an autosave)."""
        self._forced_dirty = True
        self._update_dirty()

    def _on_clean_changed(self, _clean: bool) -> None:
        try:
            self._update_dirty()
        except RuntimeError:  # the stack is being destroyed with the session
            pass

    def _update_dirty(self) -> None:
        d = self.dirty
        if d != self._last_dirty:
            self._last_dirty = d
            self.dirtyChanged.emit(d)

    def param_range(self, name: str) -> tuple:
        """Slider range (lo, hi) of a parameter: the user's, else the model's (either may be None)."""
        if name in self.ranges:
            return self.ranges[name]
        return self._written_ranges.get(name, (None, None))

    def written_values(self) -> tuple[dict, dict]:
        """Parameter and initial values as written in the model text (last valid model)."""
        return dict(self._written_params), dict(self._written_initial)

    def param_vector(self) -> np.ndarray:
        if self.system is None:
            return np.array(list(self.params.values()), dtype=float)
        return self.system.param_vector({n: v for n, v in self.params.items() if n in self.system.parameters})

    def initial_vector(self) -> np.ndarray:
        if self.system is None:
            return np.array(list(self.initial.values()), dtype=float)
        return self.system.initial_vector({n: v for n, v in self.initial.items() if n in self.system.states})

    def run_settings(self, **changes):
        """The current solver settings with ``changes`` applied (checked: SettingsError when they do not fit)."""
        return self.solver.replace(**changes)

    # ------------------------------------------------------------ edits (undoable)
    def set_text(self, text: str) -> None:
        if text == self.text:
            return
        self.undo_stack.push(_TextCommand(self, self.text, text))

    def set_param(self, name: str, value: float) -> None:
        value = float(value)
        if self.params.get(name) == value:
            return
        parsed = self.parsed
        if parsed is not None and name in parsed.structural and name in parsed.parameters:
            # the size of a family: the model itself changes, so the new value goes into its line
            from orbitdesk.language.families import with_structural_value  # sympy: after the window shows

            self.set_text(with_structural_value(self.text, parsed.parameters[name].line, name, value))
            self.validate_now()
            return
        self.undo_stack.push(_ValueCommand(self, "params", name, self.params.get(name, value), value))

    def set_initial(self, name: str, value: float) -> None:
        value = float(value)
        if self.initial.get(name) == value:
            return
        self.undo_stack.push(_ValueCommand(self, "initial", name, self.initial.get(name, value), value))

    def reset_values(self) -> None:
        old = (dict(self.params), dict(self.initial))
        new = ({n: self._written_params.get(n, v) for n, v in self.params.items()},
               {n: self._written_initial.get(n, v) for n, v in self.initial.items()})
        if new != old:
            self.undo_stack.push(_ValuesCommand(self, "Reset values", old, new))

    def set_param_range(self, name: str, lo, hi) -> None:
        old = self.ranges.get(name)
        new = (None if lo is None else float(lo), None if hi is None else float(hi))
        if new != self.param_range(name):
            self.undo_stack.push(_RangeCommand(self, name, old, new))

    def set_solver(self, **changes) -> None:
        """Change solver settings (undoable); SettingsError says in plain words what does not fit."""
        unknown = set(changes) - set(SOLVER_FIELDS)
        if unknown:
            raise KeyError(f"unknown solver setting(s): {', '.join(sorted(unknown))}")
        new = dataclasses.replace(self.solver, **changes)
        if new != self.solver:
            self.undo_stack.push(_SolverCommand(self, copy.copy(self.solver), new, frozenset(changes)))

    def set_held(self, held: bool) -> None:
        """A slider is being dragged (True) or was let go (False): views keep their ranges while it is
        held, so only the curves are drawn again, and fit them when it is let go."""
        held = bool(held)
        if held != self.held:
            self.held = held
            self.heldChanged.emit(held)

    def set_time_cursor(self, t: float) -> None:
        t = float(t)
        if t != self.time_cursor:
            self.time_cursor = t
            self.timeCursorChanged.emit(t)

    # ------------------------------------------------------------ equilibria and added starts (not undoable)
    def set_equilibria(self, items) -> None:
        """Share the equilibria found for the current system and values; a selection that no longer
        points into the list is dropped. Cleared by the session when the model or its values change."""
        self.equilibria = list(items or [])
        self.equilibriaChanged.emit(list(self.equilibria))
        if self.selected_equilibrium is not None and self.selected_equilibrium >= len(self.equilibria):
            self.select_equilibrium(None)

    def select_equilibrium(self, index) -> None:
        """Select one of the shared equilibria by its index (None: no selection)."""
        if index is not None and not 0 <= int(index) < len(self.equilibria):
            index = None
        index = None if index is None else int(index)
        if index != self.selected_equilibrium:
            self.selected_equilibrium = index
            self.equilibriumSelected.emit(index)

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

    def set_cycle(self, cycle) -> None:
        """Share a limit cycle found for the current system and values (None: none); cleared by the
        session when the model or its values change."""
        self.cycle = cycle
        self.cycleChanged.emit(cycle)

    def note_clicked_start(self, u0) -> None:
        """A view started a trajectory from a clicked point: its full state (a start for a cycle search)."""
        self.clicked_start = [float(v) for v in u0]

    def _clear_shared_results(self) -> None:
        """Equilibria and the cycle belong to the values they were found for."""
        if self.cycle is not None:
            self.set_cycle(None)
        if self.equilibria or self.selected_equilibrium is not None:
            self.equilibria, self.selected_equilibrium = [], None
            self.equilibriaChanged.emit([])
            self.equilibriumSelected.emit(None)

    def show_state(self, params: dict | None = None, initial: dict | None = None,
                   solver: dict | None = None) -> None:
        """Put values and solver settings on screen without an undo step or an unsaved mark: a
        walkthrough showing one of its steps, or giving the user's own state back."""
        new_p = {**self.params, **{n: float(v) for n, v in (params or {}).items()}}
        new_u = {**self.initial, **{n: float(v) for n, v in (initial or {}).items()}}
        new_s = dataclasses.replace(self.solver, **{k: v for k, v in (solver or {}).items() if k in SOLVER_FIELDS})
        if new_s != self.solver:
            self._apply_solver(new_s)
        if (new_p, new_u) != (self.params, self.initial):
            self._apply_values(new_p, new_u)

    # ------------------------------------------------------------ appliers (called by undo commands)
    def _apply_text(self, text: str, emit: bool) -> None:
        self.text = text
        self._text_gen += 1
        if emit:
            self.textChanged.emit(text)
        self._validate_timer.start()

    def _apply_value(self, table: str, name: str, value: float) -> None:
        getattr(self, table)[name] = value
        self._values_changed()

    def _apply_values(self, params: dict, initial: dict) -> None:
        self.params, self.initial = dict(params), dict(initial)
        self._values_changed()

    def _apply_range(self, name: str, value) -> None:
        if value is None:
            self.ranges.pop(name, None)
        else:
            self.ranges[name] = value
        self.valuesChanged.emit()

    def _apply_solver(self, solver: RunSettings) -> None:
        self.solver = copy.copy(solver)
        self.generation += 1
        self.settingsChanged.emit()
        self.schedule_run()

    def _values_changed(self) -> None:
        self.generation += 1
        self._clear_shared_results()
        self.valuesChanged.emit()
        self.schedule_run()

    # ------------------------------------------------------------ validation and compiling
    def validate_now(self) -> None:
        """Parse the current text now (normally done after a short pause in typing)."""
        self._validate_timer.stop()
        parsed = _parse(self.text)
        self.parsed = parsed
        self.modelParsed.emit(parsed)
        if parsed.ok:
            self._compile(parsed)

    def _compile(self, parsed) -> None:
        sig = _signature(parsed)
        if self.system is not None and sig == self._signature:
            self.jobs.cancel("compile")  # back to the active system: a pending compile is moot
            return
        text_gen = self._text_gen

        def job(cancel, report):
            from orbitdesk.system.compiled_system import compile_model

            system = compile_model(parsed)
            cancel.check()
            system.rhs_function()  # build the evaluators here rather than on the GUI thread
            system.rhs_vec(0.0, np.zeros((system.n_states, 1)))
            return system

        self.jobs.submit("compile", job, lambda system: self._adopt_system(system, sig),
                         on_error=lambda msg: self.statusMessage.emit(f"The model could not be compiled: {msg}"),
                         is_current=lambda: text_gen == self._text_gen)

    def _adopt_system(self, system, sig) -> None:
        model = system.model
        written_p = {n: float(i.value) for n, i in model.parameters.items()}
        written_r = {n: (i.lo, i.hi) for n, i in model.parameters.items()}
        written_u = {s: float(model.initial.get(s, 0.0)) for s in system.states}
        params = {n: (self.params[n] if n in self.params and self._written_params.get(n) == v else v)
                  for n, v in written_p.items()}
        initial = {s: (self.initial[s] if s in self.initial and self._written_initial.get(s) == v else v)
                   for s, v in written_u.items()}
        self.ranges = {n: r for n, r in self.ranges.items()
                       if n in written_r and self._written_ranges.get(n, written_r[n]) == written_r[n]
                       and r != written_r[n]}
        values_changed = params != self.params or initial != self.initial
        self.params, self.initial = params, initial
        self._written_params, self._written_ranges, self._written_initial = written_p, written_r, written_u
        self.system, self._signature = system, sig
        self.generation += 1
        self._clear_shared_results()
        self.systemChanged.emit(system)
        if values_changed:
            self.valuesChanged.emit()
        self.schedule_run()

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

        self.run_job("run", job, self._adopt_trajectory, on_progress=self.runProgress.emit,
                     on_error=self._run_failed)

    def _adopt_trajectory(self, trajectory) -> None:
        self.trajectory = trajectory
        if trajectory.status != "ok" and trajectory.message:
            self.statusMessage.emit(trajectory.message[0].upper() + trajectory.message[1:])
        self.trajectoryChanged.emit(trajectory)
        if trajectory.time.size:
            lo, hi = sorted((float(trajectory.time[0]), float(trajectory.time[-1])))
            self.set_time_cursor(min(max(self.time_cursor, lo), hi))

    def _run_failed(self, message: str) -> None:
        self.statusMessage.emit(f"The run failed: {message}")
        self.runFailed.emit(message)

    def run_job(self, key: str, fn, on_done, on_progress=None, on_error=None, label: str | None = None):
        """Run ``fn(cancel_token, reporter)`` on a worker thread; see the module docstring of worker.py.

        A newer job with the same key cancels the older; results of a job started before the model or
        the values changed are dropped. ``on_done(result)`` runs on the GUI thread. Returns the CancelToken.
        """
        generation = self.generation
        if on_error is None:
            on_error = lambda msg: self.statusMessage.emit(msg)  # noqa: E731
        return self.jobs.submit(key, fn, on_done, on_progress, on_error,
                                is_current=lambda: generation == self.generation, label=label)

    def cancel_all(self) -> None:
        self._run_timer.stop()
        self.jobs.cancel_all()

    def shutdown(self) -> None:
        """Cancel everything and wait for the worker threads (on close)."""
        self._run_timer.stop()
        self._validate_timer.stop()
        self.jobs.shutdown()

    # ------------------------------------------------------------ documents
    def add_save_hook(self, fn) -> None:
        """``fn()`` runs before the session is turned into a Project (views write their settings)."""
        self._save_hooks.append(fn)

    def to_project(self) -> Project:
        for hook in list(self._save_hooks):
            hook()
        proj = copy.deepcopy(self.project)
        proj.model = self.text
        proj.parameters = {n: ParameterSetting(v, *self.param_range(n)) for n, v in self.params.items()}
        proj.initial = dict(self.initial)
        proj.solver = copy.copy(self.solver)
        return proj

    def load_project(self, project: Project, path=None, disk_state=core_project.UNCHECKED) -> None:
        """Replace the whole document (no undo); the model is parsed at once and compiled in the background.
        ``disk_state``: what the file at ``path`` held when read (saving checks it has not changed since)."""
        self.cancel_all()
        self._validate_timer.stop()
        project = copy.deepcopy(project)
        parsed = _parse(project.model)
        self.project, self.path = project, (Path(path) if path is not None else None)
        self.disk_state = disk_state if path is not None else core_project.UNCHECKED
        self.text = project.model
        self._written_params = {n: float(i.value) for n, i in parsed.parameters.items()}
        self._written_ranges = {n: (i.lo, i.hi) for n, i in parsed.parameters.items()}
        self._written_initial = {s: float(parsed.initial.get(s, 0.0)) for s in parsed.states}
        self.params = {n: float(s.value) for n, s in project.parameters.items()}
        self.ranges = {n: (s.lo, s.hi) for n, s in project.parameters.items()
                       if (s.lo, s.hi) != self._written_ranges.get(n, (None, None))}
        self.initial = {k: float(v) for k, v in project.initial.items()}
        self.solver = copy.copy(project.solver)
        self.system, self._signature, self.trajectory = None, None, None
        self.time_cursor = math.inf
        self._clear_shared_results()
        self.generation += 1
        self._text_gen += 1
        self.undo_stack.clear()
        self.undo_stack.setClean()
        self._forced_dirty = False
        self.textChanged.emit(self.text)
        self.parsed = parsed
        self.modelParsed.emit(parsed)
        self.settingsChanged.emit()
        self.valuesChanged.emit()
        self.projectLoaded.emit()
        self._update_dirty()
        if parsed.ok:
            self._compile(parsed)

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

    def save(self, path=None, *, overwrite: bool = False, overwrite_read_only: bool = False) -> Path:
        """Save to ``path`` (default: the current path); raises ProjectError on failure.

        Saving over the open file raises ProjectConflict if it changed on disk since it was opened or last
        saved (another window or program wrote it), unless ``overwrite``; a read-only file raises
        ProjectReadOnly unless ``overwrite_read_only`` (it stays read-only).
        """
        target = Path(path) if path is not None else self.path
        if target is None:
            raise ProjectError("$", "no file name given")
        proj = self.to_project()
        if proj.name in ("", "Untitled"):
            proj.name = target.stem
        same_file = self.path is not None and _same_path(target, self.path)
        expected = self.disk_state if same_file and not overwrite else core_project.UNCHECKED
        self.disk_state = core_project.save(target, proj, expected=expected, overwrite_read_only=overwrite_read_only)
        self.project.name = proj.name
        self.project.views = copy.deepcopy(proj.views)
        self.path = target
        self._forced_dirty = False
        self.undo_stack.setClean()
        self._update_dirty()
        return target
