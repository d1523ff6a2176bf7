"""The live document: one open project as it is being worked on, headless (no Qt).

It holds the model text, the parsed model and compiled system, the values (parameters, initial values,
slider ranges), the solver settings, the project's other parts (view settings, written by the views as
they change; walkthrough, data sets, kept parameter sets), the main run and the limit cycle of the
current system, the equilibria with the selected one and the values both were found for, and
the kept results of the analyses (sweep, Lyapunov spectrum, section, basins, two-parameter map, bifurcation
diagram, fit:
document/results.py, each once, marked stale rather than dropped when the values change, saved in the
project file). Edits are undoable commands on ``undo`` (document/undo.py); the run is replaced when the
model or the values change, the cycle and the equilibria are cleared when the model changes.

Every change is announced to plain Python callbacks: ``doc.subscribe(event, fn)``. Events and their
arguments: ``text`` (text), ``parsed`` (ParsedModel), ``system`` (CompiledSystem), ``values`` (),
``settings`` (), ``inputs`` () (what a run depends on changed: run again), ``trajectory`` (Trajectory),
``time_cursor`` (t), ``equilibria`` (list), ``selection`` (index or None), ``cycle`` (cycle or None),
``result`` (kind: a kept result of that kind was set or cleared, see document/results.py),
``part`` (name of a project part replaced: "walkthrough", "datasets", "parameter_sets", "views"),
``view_settings`` (a view's id: its settings in the project changed, see ``set_view_settings``),
``view_restored`` (a view's id: undo or redo put its settings back, ``change_view_settings``),
``step`` (index of a walkthrough step whose title or note changed), ``loaded`` (), ``dirty`` (bool), ``message`` (plain words for a status line).

The app's Session (app/session.py) is a Qt adapter over one LiveDocument (signals, timers, worker
jobs); the command line and exports build one the same way (``LiveDocument.open``/``from_project``)
and read values, settings and the project from it. Values the user set survive edits of the text
unless the value written in the text for that name changes.
"""

from __future__ import annotations

import copy
import dataclasses
import math
import os
import time
from pathlib import Path

import numpy as np

from orbitdesk.document import project as core_project
from orbitdesk.document.project import ParameterSetting, Project, ProjectError
from orbitdesk.document.results import (RESULTS_KEY, Basis, Results, results_from_view_settings, stale_words,
                                        text_digest)
from orbitdesk.document.undo import Command, UndoStack
from orbitdesk.document.views import WINDOW_KEY
from orbitdesk.engine.settings import SAVED, RunSettings

TEXT_MERGE_SECONDS = 2.0     # typing pauses longer than this start a new undo step
VALUE_MERGE_SECONDS = 1.5    # same for slider moves of one parameter
clock = time.monotonic       # what undo merging reads (tests replace it to be independent of load)
PROJECT_SUFFIXES = (".orbitdesk", ".json")
SOLVER_FIELDS = SAVED
PARTS = ("walkthrough", "datasets", "parameter_sets", "views")   # project parts replaced by ``replace_part``
EVENTS = ("text", "parsed", "system", "values", "settings", "inputs", "trajectory", "time_cursor",
          "equilibria", "selection", "cycle", "result", "part", "view_settings", "view_restored", "step", "loaded",
          "dirty", "message")


def parse(text):
    from orbitdesk.language.model import parse_model  # sympy: imported on first use, after the window shows

    return parse_model(text)


def signature(parsed) -> tuple:
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


def compile_parsed(parsed):
    """The compiled system of a valid parsed model with its evaluators built (slow: a worker's job)."""
    from orbitdesk.system.compiled_system import compile_model

    system = compile_model(parsed)
    system.rhs_function()
    system.rhs_vec(0.0, np.zeros((system.n_states, 1)))
    return system


# ---------------------------------------------------------------- reading files

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


def _project_with_state(path: Path) -> tuple[Project, Path, object]:
    project, state = core_project.load_with_state(path)
    return project, path, state


def _listed(value):
    """Tuples as lists, all the way down (as a project file gives them back)."""
    return [_listed(v) for v in value] if isinstance(value, (list, tuple)) else value


def _same_path(a: Path, b: Path) -> bool:
    return os.path.realpath(a) == os.path.realpath(b)


# ---------------------------------------------------------------- commands

class _Swap(Command):
    """Set something to ``new`` / back to ``old`` through ``apply(value)``."""

    def __init__(self, label: str, apply, old, new):
        super().__init__(label)
        self.apply, self.old, self.new = apply, old, new

    def redo(self):
        self.apply(self.new)

    def undo(self):
        self.apply(self.old)


class _Edit(_Swap):
    """A swap that takes in the next one of the same kind and ``key`` pushed within ``window`` seconds
    (typing, slider moves); back at its start it leaves the stack."""

    def __init__(self, label: str, merge_id: str, key, apply, old, new, window: float):
        super().__init__(label, apply, old, new)
        self.merge_id, self.key, self.window = merge_id, key, window
        self.stamp = clock()

    def merge(self, other):
        if other.key != self.key or other.stamp - self.stamp > self.window:
            return False
        self.new, self.stamp = other.new, other.stamp
        self.obsolete = self.new == self.old
        return True


# ---------------------------------------------------------------- the document

class LiveDocument:
    def __init__(self):
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
        self.equilibria_notes: list[str] = []        # what the search that found them said
        self.equilibria_basis: Basis | None = None   # the values they were found for (results.py)
        self.selected_equilibrium: int | None = None  # index into ``equilibria``
        self.cycle = None                            # the limit cycle found for the current system
        self.cycle_basis: Basis | None = None        # the values it was found for
        self.clicked_start: list[float] | None = None  # full state of the last trajectory started by a click
        self.results = Results()  # kept results of the analyses by kind (read with ``result(kind)``)
        self.generation = 0       # grows whenever what results depend on changes (stale-result check)
        self.text_generation = 0  # grows with every change of the text (a compile of older text is moot)
        self.undo = UndoStack()
        self.system_signature = None
        self._listeners: dict[str, list] = {e: [] for e in EVENTS}
        self._written_params: dict[str, float] = {}
        self._written_ranges: dict[str, tuple] = {}
        self._written_initial: dict[str, float] = {}
        self._forced_dirty = False
        self._last_dirty = False
        self._pushing_view = False
        self.undo.on_change(self._update_dirty)

    # ------------------------------------------------------------ events
    def subscribe(self, event: str, fn):
        """Call ``fn(*arguments)`` after each ``event`` (see the module docstring); returns an unsubscriber."""
        listeners = self._listeners[event]
        listeners.append(fn)
        return lambda: listeners.remove(fn) if fn in listeners else None

    def emit(self, event: str, *args) -> None:
        for fn in list(self._listeners[event]):
            fn(*args)

    # ------------------------------------------------------------ building
    @classmethod
    def from_project(cls, project: Project, path=None, disk_state=core_project.UNCHECKED,
                     compile: bool = False) -> "LiveDocument":
        """A document holding ``project``; with ``compile`` its model is compiled at once (headless use)."""
        doc = cls()
        doc.load_project(project, path, disk_state)
        if compile:
            doc.compile_now()
        return doc

    @classmethod
    def open(cls, path, compile: bool = False) -> "LiveDocument":
        """A document for a project or model text file (ProjectError when it cannot be read)."""
        project, project_path, state = read_document_with_state(path)
        doc = cls.from_project(project, project_path, state, compile=compile)
        if project_path is None:
            doc.source_path = Path(path)
        return doc

    # ------------------------------------------------------------ state
    @property
    def dirty(self) -> bool:
        return self._forced_dirty or not self.undo.is_clean()

    @property
    def name(self) -> str:
        return self.project.name or "Untitled"

    def mark_dirty(self) -> None:
        """Unsaved work that is not on the undo stack (e.g. restored from an autosave)."""
        self._forced_dirty = True
        self._update_dirty()

    def mark_saved(self) -> None:
        self._forced_dirty = False
        self.undo.set_clean()
        self._update_dirty()

    def _update_dirty(self) -> None:
        d = self.dirty
        if d != self._last_dirty:
            self._last_dirty = d
            self.emit("dirty", d)

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

    def run_settings(self, **changes) -> RunSettings:
        """The current solver settings with ``changes`` applied (checked: SettingsError when they do not fit)."""
        return self.solver.replace(**changes)

    # ------------------------------------------------------------ edits (undoable)
    def set_text(self, text: str) -> None:
        if text != self.text:
            self.undo.push(_Edit("Edit model", "text", None, self._apply_text, self.text, text, TEXT_MERGE_SECONDS))

    def set_param(self, name: str, value: float) -> None:
        value = float(value)
        if self.params.get(name) == value:
            return
        parsed = self.parsed
        if parsed is not None and name in parsed.structural and name in parsed.parameters:
            # the size of a family: the model itself changes, so the new value goes into its line
            from orbitdesk.language.families import with_structural_value  # sympy: after the window shows

            self.set_text(with_structural_value(self.text, parsed.parameters[name].line, name, value))
            self.parse_now()
            return
        self._push_value("params", name, value)

    def set_initial(self, name: str, value: float) -> None:
        value = float(value)
        if self.initial.get(name) != value:
            self._push_value("initial", name, value)

    def _push_value(self, table: str, name: str, value: float) -> None:
        """One parameter or initial value; consecutive changes of the same name merge."""
        current = self.params if table == "params" else self.initial
        label = f"Change {'parameter' if table == 'params' else 'initial value'} {name}"
        self.undo.push(_Edit(label, "value", (table, name), lambda v: self._apply_value(table, name, v),
                             current.get(name, value), value, VALUE_MERGE_SECONDS))

    def set_values(self, params: dict, initial: dict, label: str) -> None:
        """Put several values in at once (one undo step); names not given keep their values."""
        old = (dict(self.params), dict(self.initial))
        new = ({**self.params, **{n: float(v) for n, v in params.items()}},
               {**self.initial, **{n: float(v) for n, v in initial.items()}})
        self.undo.push(_Swap(label, lambda pu: self._apply_values(*pu), old, new))

    def reset_values(self) -> None:
        new_p = {n: self._written_params.get(n, v) for n, v in self.params.items()}
        new_u = {n: self._written_initial.get(n, v) for n, v in self.initial.items()}
        if (new_p, new_u) != (self.params, self.initial):
            self.set_values(new_p, new_u, "Reset values")

    def set_param_range(self, name: str, lo, hi) -> None:
        new = (None if lo is None else float(lo), None if hi is None else float(hi))
        if new != self.param_range(name):
            self.undo.push(_Swap(f"Change range of {name}", lambda r: self._apply_range(name, r),
                                 self.ranges.get(name), new))

    def set_solver(self, **changes) -> None:
        """Change solver settings (undoable); SettingsError says in plain words what does not fit."""
        unknown = set(changes) - set(SOLVER_FIELDS)
        if unknown:
            raise KeyError(f"unknown solver setting(s): {', '.join(sorted(unknown))}")
        new = dataclasses.replace(self.solver, **changes)
        if new != self.solver:
            self.undo.push(_Edit("Change solver settings", "solver", frozenset(changes), self._apply_solver,
                                 copy.copy(self.solver), new, VALUE_MERGE_SECONDS))

    def replace_part(self, part: str, new, label: str, after=None) -> None:
        """Replace one part of the project (``PARTS``) as one undo step; ``after(redone: bool)`` runs
        after every redo and undo (a panel selects the row that goes with it)."""
        if part not in PARTS:
            raise KeyError(f"not a replaceable part of a project: {part}")
        old = getattr(self.project, part)

        def apply(value):
            self._apply_part(part, copy.deepcopy(value))
            if after is not None:
                after(value is new)

        old, new = copy.deepcopy(old), copy.deepcopy(new)
        self.undo.push(_Swap(label, apply, old, new))

    def set_view_settings(self, view_id: str, settings: dict) -> None:
        """A view's settings as they are now, written by the view whenever they change, so that the project
        is always current (the walkthrough, the exports, a save and an autosave read it). Not an undo step and
        not an unsaved change by itself: how a view is set up is no edit of the model (a walkthrough's own
        steps keep the settings a step shows)."""
        settings = copy.deepcopy(settings)
        if self.project.views.get(view_id) != settings:
            self.project.views[view_id] = settings
            self.emit("view_settings", view_id)

    def change_view_settings(self, view_id: str, settings: dict, label: str | None = None) -> None:
        """A view's settings changed by the user: when what it computes changed (view_settings.PROJECT_KEYS:
        the swept parameter, a section's plane, ranges...) one undo step (changes of the same view within
        VALUE_MERGE_SECONDS merge: a drag is one step) and an unsaved change; undoing and redoing put the
        settings back and announce ``view_restored`` (the view shows them again). Changes of how it is shown
        only are written as ``set_view_settings`` writes them."""
        from orbitdesk.document.view_settings import project_part
        from orbitdesk.document.views import title_of

        settings = copy.deepcopy(settings)
        old = self.project.views.get(view_id)
        before = project_part(view_id, old)   # (a key written for the first time is no edit)
        if before == {k: v for k, v in project_part(view_id, settings).items() if k in before}:
            self.set_view_settings(view_id, settings)
            return
        self._pushing_view = True
        try:
            title = title_of(view_id)
            self.undo.push(_Edit(label or f"Change {title[:1].lower()}{title[1:]} settings", "view settings", view_id,
                                 lambda v: self._apply_view_settings(view_id, v), copy.deepcopy(old), settings,
                                 VALUE_MERGE_SECONDS))
        finally:
            self._pushing_view = False

    def _apply_view_settings(self, view_id: str, settings) -> None:
        if self._pushing_view:
            self.project.views[view_id] = copy.deepcopy(settings)
        else:   # an undo or redo: what the view computes goes back; how it is shown stays as it is now
            from orbitdesk.document.view_settings import PROJECT_KEYS, project_part

            keys = PROJECT_KEYS.get(view_id, frozenset())
            now = self.project.views.get(view_id)
            shown = {k: v for k, v in now.items() if k not in keys} if isinstance(now, dict) else {}
            self.project.views[view_id] = {**shown, **copy.deepcopy(project_part(view_id, settings))}
        self.emit("view_settings", view_id)
        if not self._pushing_view:     # the view shows them again
            self.emit("view_restored", view_id)

    def set_step_text(self, index: int, field: str, text: str) -> None:
        """A walkthrough step's ``title`` or ``note`` (undoable, typing merges)."""
        old = getattr(self.project.walkthrough[index], field)
        if text != old:
            self.undo.push(_Edit("Edit step title" if field == "title" else "Edit step note", "step text",
                                 (index, field), lambda v: self._apply_step_text(index, field, v), old, text,
                                 TEXT_MERGE_SECONDS))

    # ------------------------------------------------------------ shown without an undo step
    def show_state(self, params: dict | None = None, initial: dict | None = None,
                   solver: dict | None = None) -> None:
        """Put values and solver settings in without an undo step or an unsaved mark: a walkthrough
        showing one of its steps, or giving the user's own state back."""
        new_p = {**self.params, **{n: float(v) for n, v in (params or {}).items()}}
        new_u = {**self.initial, **{n: float(v) for n, v in (initial or {}).items()}}
        new_s = dataclasses.replace(self.solver, **{k: v for k, v in (solver or {}).items() if k in SOLVER_FIELDS})
        if new_s != self.solver:
            self._apply_solver(new_s)
        if (new_p, new_u) != (self.params, self.initial):
            self._apply_values(new_p, new_u)

    def set_time_cursor(self, t: float) -> None:
        t = float(t)
        if t != self.time_cursor:
            self.time_cursor = t
            self.emit("time_cursor", t)

    # ------------------------------------------------------------ results of the current system and values
    def set_trajectory(self, trajectory) -> None:
        """The main run for the current system, values and settings."""
        self.trajectory = trajectory
        if trajectory.status != "ok" and trajectory.message:
            self.emit("message", trajectory.message[0].upper() + trajectory.message[1:])
        self.emit("trajectory", trajectory)
        if trajectory.time.size:
            lo, hi = sorted((float(trajectory.time[0]), float(trajectory.time[-1])))
            self.set_time_cursor(min(max(self.time_cursor, lo), hi))

    def set_equilibria(self, items, basis: Basis | None = None) -> None:
        """The equilibria found for the current system and the values of ``basis`` (default: now); a
        selection that no longer points into the list is dropped. Cleared when the model changes; with
        other values they are kept but stale (``equilibria_stale``, ``current_equilibria``). A search
        result's ``notes`` are kept beside them (``equilibria_notes``)."""
        self.equilibria = list(items or [])
        self.equilibria_basis = basis if basis is not None else self.basis()
        self.equilibria_notes = [str(n) for n in getattr(items, "notes", None) or []]
        self.emit("equilibria", list(self.equilibria))
        if self.selected_equilibrium is not None and self.selected_equilibrium >= len(self.equilibria):
            self.select_equilibrium(None)

    def equilibria_stale(self) -> str:
        """Plain words when the equilibria were found for other values than those now set ("" if not)."""
        return self._stale_since(self.equilibria_basis) if self.equilibria else ""

    def current_equilibria(self) -> list:
        """The equilibria if they were found for the values now set, else none (what markers show)."""
        return [] if self.equilibria_stale() else list(self.equilibria)

    def select_equilibrium(self, index) -> None:
        """Select one of the equilibria by its index (None: no selection)."""
        if index is not None and not 0 <= int(index) < len(self.equilibria):
            index = None
        index = None if index is None else int(index)
        if index != self.selected_equilibrium:
            self.selected_equilibrium = index
            self.emit("selection", index)

    def set_cycle(self, cycle, basis: Basis | None = None) -> None:
        """The limit cycle found for the current system and the values of ``basis`` (default: now; None: no
        cycle). Cleared when the model changes; with other values it is kept but stale (``cycle_stale``,
        ``current_cycle``), as the equilibria are: the Limit cycle view shows it marked so, the plots draw
        only a current one."""
        self.cycle = cycle
        self.cycle_basis = None if cycle is None else basis if basis is not None else self.basis()
        self.emit("cycle", cycle)

    def cycle_stale(self) -> str:
        """Plain words when the cycle was found for other values than those now set ("" if not)."""
        return self._stale_since(self.cycle_basis) if self.cycle is not None else ""

    def current_cycle(self):
        """The cycle if it was found for the values now set, else None (what the plots draw)."""
        return None if self.cycle_stale() else self.cycle

    # ------------------------------------------------------------ kept results of the analyses (results.py)
    def basis(self, skip=(), solver: bool = False, initial: bool = True, data=None) -> Basis:
        """What a result computed now is computed for: the values (the initial ones unless ``initial`` is
        False), the model of the system in use and (``solver``) the solver settings; ``skip``: parameters
        the result runs over; ``data``: names of the project's data sets it is computed from."""
        skip = (skip,) if isinstance(skip, str) else tuple(skip or ())
        model = text_digest(self.system.model.text if self.system is not None else self.text)  # (not compiled yet)
        return Basis(dict(self.params), dict(self.initial) if initial else None, model,
                     _listed(dataclasses.astuple(self.solver)) if solver else None, skip,
                     None if data is None else self._data_digests(data))

    def _data_digests(self, names) -> dict:
        """name -> digest of each named data set of the project (None: there is none of that name)."""
        from orbitdesk.document.datasets import dataset_digest

        held = {d.name: d for d in self.project.datasets}
        return {n: dataset_digest(held[n]) if n in held else None for n in names}

    def set_result(self, kind: str, result, basis: Basis | None = None) -> None:
        """Keep ``result`` (a core result dataclass) as the project's result of ``kind`` (results.KINDS),
        computed for ``basis`` (default: now); None clears it. Announced by the ``result`` event."""
        self.results.set(kind, result, basis if basis is not None else self.basis())
        self.emit("result", kind)

    def clear_result(self, kind: str) -> None:
        if self.results.get(kind) is not None:
            self.set_result(kind, None)

    def result(self, kind: str):
        """The kept result of ``kind`` (None: none)."""
        return self.results.get(kind)

    def result_stale(self, kind: str) -> str:
        """Plain words when the kept result of ``kind`` was computed for another model or other values than
        those now set ("" when it is current or there is none)."""
        return self._stale_since(self.results.basis(kind))

    def _stale_since(self, then: Basis | None) -> str:
        """Plain words when what was computed for ``then`` (None: nothing) differs from what is set now, by
        the same parts ``then`` holds (the solver settings, the initial values, data sets)."""
        if then is None:
            return ""
        return stale_words(then, self.basis(then.skip, solver=then.solver is not None,
                                            initial=then.initial is not None, data=then.data))

    def note_clicked_start(self, u0) -> None:
        """A view started a trajectory from a clicked point: its full state (a start for a cycle search)."""
        self.clicked_start = [float(v) for v in u0]

    def _clear_results(self, model: bool = True) -> None:
        """The cycle and the equilibria belong to the system: cleared when the model changed (``model``); with
        other values they are kept, stale (``current_cycle``, ``current_equilibria``), and the cycle is
        announced again (the plots draw only a current one)."""
        if not model:
            if self.cycle is not None:
                self.emit("cycle", self.cycle)
            return
        if self.cycle is not None:
            self.set_cycle(None)
        if self.equilibria or self.selected_equilibrium is not None:
            self.equilibria, self.equilibria_notes, self.selected_equilibrium = [], [], None
            self.emit("equilibria", [])
            self.emit("selection", None)

    # ------------------------------------------------------------ appliers (run by the commands)
    def _apply_text(self, text: str) -> None:
        self.text = text
        self.text_generation += 1
        self.emit("text", text)

    def _apply_value(self, table: str, name: str, value: float) -> None:
        (self.params if table == "params" else self.initial)[name] = value
        self._values_changed()

    def _apply_values(self, params: dict, initial: dict) -> None:
        self.params, self.initial = dict(params), dict(initial)
        self._values_changed()

    def _apply_range(self, name: str, value) -> None:
        if value is None:
            self.ranges.pop(name, None)
        else:
            self.ranges[name] = value
        self.emit("values")

    def _apply_solver(self, solver: RunSettings) -> None:
        self.solver = copy.copy(solver)
        self.generation += 1
        self.emit("settings")
        self.emit("inputs")

    def _apply_part(self, part: str, value) -> None:
        setattr(self.project, part, copy.copy(value))
        self.emit("part", part)

    def _apply_step_text(self, index: int, field: str, value: str) -> None:
        if 0 <= index < len(self.project.walkthrough):
            setattr(self.project.walkthrough[index], field, value)
            self.emit("step", index)

    def _values_changed(self) -> None:
        self.generation += 1
        self._clear_results(model=False)
        self.emit("values")
        self.emit("inputs")

    # ------------------------------------------------------------ parsing and compiling
    def parse_now(self):
        """Parse the current text and announce it (``parsed``); returns the ParsedModel."""
        parsed = parse(self.text)
        self.parsed = parsed
        self.emit("parsed", parsed)
        return parsed

    def needs_system(self, parsed) -> bool:
        """Whether a valid ``parsed`` model gives another system than the one in use."""
        return self.system is None or signature(parsed) != self.system_signature

    def compile_now(self):
        """Parse and compile here and now (the command line; the app compiles on a worker)."""
        parsed = self.parsed if self.parsed is not None else self.parse_now()
        if parsed.ok and self.needs_system(parsed):
            self.adopt_system(compile_parsed(parsed), signature(parsed))
        return self.system

    def adopt_system(self, system, sig) -> None:
        """Use a newly compiled system: values the user set stay unless the model's written value changed."""
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
        self.system, self.system_signature = system, sig
        self.generation += 1
        self._clear_results()
        self.emit("system", system)
        if values_changed:
            self.emit("values")
        self.emit("inputs")

    # ------------------------------------------------------------ the project
    def to_project(self) -> Project:
        """The project as it is now: the views write their settings into it as they change
        (``set_view_settings``), the results and the time cursor are added here."""
        proj = copy.deepcopy(self.project)
        proj.model = self.text
        proj.parameters = {n: ParameterSetting(v, *self.param_range(n)) for n, v in self.params.items()}
        proj.initial = dict(self.initial)
        proj.solver = copy.copy(self.solver)
        window = {k: v for k, v in (proj.views.get(WINDOW_KEY) or {}).items() if k != "time_cursor"}
        if self.trajectory is not None and math.isfinite(self.time_cursor):
            window["time_cursor"] = float(self.time_cursor)
        if window:
            proj.views[WINDOW_KEY] = window
        results = self.results.to_json()
        proj.views.pop(RESULTS_KEY, None)
        if results:
            proj.views[RESULTS_KEY] = results
        return proj

    def load_project(self, project: Project, path=None, disk_state=core_project.UNCHECKED):
        """Replace the whole document (no undo); the model is parsed at once. Returns the ParsedModel.
        ``disk_state``: what the file at ``path`` held when read (saving checks it has not changed since)."""
        project = copy.deepcopy(project)
        parsed = parse(project.model)
        kept_before = self.results.kinds()
        stored = project.views.pop(RESULTS_KEY, None)
        view, moved = results_from_view_settings(project.views.get("bifurcation"),
                                                 {n: s.value for n, s in project.parameters.items()}, project.model)
        if moved:   # a file of an earlier version: its branches were kept in the view's settings
            project.views["bifurcation"] = view
            stored = {**moved, **(stored if isinstance(stored, dict) else {})}
        kept_now = self.results.load_json(stored)
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
        self.system, self.system_signature, self.trajectory = None, None, None
        self.time_cursor = math.inf
        self._clear_results()
        self.generation += 1
        self.text_generation += 1
        self.undo.clear()
        self.undo.set_clean()
        self._forced_dirty = False
        self.emit("text", self.text)
        self.parsed = parsed
        self.emit("parsed", parsed)
        self.emit("settings")
        self.emit("values")
        for kind in dict.fromkeys(kept_before + kept_now):
            self.emit("result", kind)
        self.emit("loaded")
        self._update_dirty()
        return parsed

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
        self.project.views = {k: v for k, v in copy.deepcopy(proj.views).items() if k != RESULTS_KEY}
        self.path = target
        self.mark_saved()
        return target
