"""Between the window and a walkthrough step's snapshot (the shape of ``orbitdesk.document.walkthrough``):
``capture_state`` reads what is on screen, ``put_on_screen`` shows a step (values and solver settings
without an undo step, open views and their settings, the 3D camera, the selected equilibrium, the
section, the time cursor) and brings views that compute on request up to date through their
``compute`` (the analysis contract of ``views.common.SessionView``)."""

from __future__ import annotations

import copy
import math

from orbitdesk.document.views import VIEWS, title_of
from orbitdesk.document.walkthrough import VIEW_IDS

from orbitdesk.app.dock_layout import is_open, show_docks
from orbitdesk.app.session import SOLVER_FIELDS

CAMERA_VIEW, EQUILIBRIA_VIEW, SECTIONS_VIEW = "phase_space_3d", "equilibria", "sections"


def _view_modules(window) -> dict[str, str]:
    """view_id -> module name for every view this window can show (module name when not yet imported)."""
    return {v.id: v.module for v in VIEWS if v.module in window.view_docks}


def model_info(session):
    """What apply_step checks names against: the active system, else the last parse, else nothing."""
    if session.system is not None:
        return session.system
    if session.parsed is not None:
        return session.parsed
    return {"states": [], "parameters": []}


def capture_state(window) -> dict:
    """What is on screen now, in the snapshot shape of ``orbitdesk.document.walkthrough``."""
    s = window.session
    state = {"parameters": dict(s.params), "initial": dict(s.initial),
             "solver": {k: getattr(s.solver, k) for k in SOLVER_FIELDS}}
    open_views, settings = [], {}
    for view_id, module in _view_modules(window).items():
        if not is_open(window.view_docks[module]):
            continue
        open_views.append(view_id)
        view = window.views.get(module)
        if view is None:
            continue
        try:
            d = copy.deepcopy(view.view_settings())
        except Exception:  # noqa: BLE001 - a view that cannot report is left out of the step
            continue
        if view_id == CAMERA_VIEW and isinstance(d.get("camera"), dict):
            state["camera"] = d.pop("camera")
        if view_id == EQUILIBRIA_VIEW and "selected" in d:
            selected = d.pop("selected")
            state["selected_equilibrium"] = selected if isinstance(selected, int) else None
        if view_id == SECTIONS_VIEW:
            section = _section_of(d, s)
            if section is not None:
                state["section"] = section
        settings[view_id] = d
    state["open_views"] = open_views
    state["views"] = settings
    if s.trajectory is not None and math.isfinite(s.time_cursor):
        state["time_cursor"] = float(s.time_cursor)
    return state


def _section_of(d: dict, session) -> dict | None:
    """The snapshot's section ({"plane": "x=0", "direction": ...} or {"strobe": T}) from a sections view's settings."""
    kind = d.get("kind")
    states = list(session.system.states) if session.system is not None else []
    if kind == "strobe" and isinstance(d.get("period"), (int, float)) and d["period"] > 0:
        phase = d.get("phase")
        if isinstance(phase, (int, float)) and phase > 0:
            return {"strobe": float(d["period"]), "phase": float(phase)}
        return {"strobe": float(d["period"])}
    if kind == "plane" and d.get("coordinate") in states and isinstance(d.get("value"), (int, float)):
        return {"plane": f"{d['coordinate']}={float(d['value'])!r}", "direction": d.get("direction", "up")}
    return None


def _apply_view(view, changes: dict) -> None:
    """Apply ``changes`` over the view's present settings (views reset keys a partial dict leaves out)."""
    try:
        current = view.view_settings()
    except Exception:  # noqa: BLE001
        current = {}
    view.apply_view_settings({**current, **changes})


class ScreenResult:
    """What ``put_on_screen`` could not do: ``problems`` (plain words) and views this build does not have."""

    def __init__(self):
        self.problems: list[str] = []
        self.missing_views: list[str] = []


def put_on_screen(window, new_state: dict, snapshot: dict, arrange: bool = True, defer=None) -> ScreenResult:
    """Show ``new_state`` (from ``apply_step``) in the window; only what ``snapshot`` names is changed.

    Settings for a view that has not been created yet go to ``defer(module, changes, section)``."""
    with window.session.program():   # a step shown is no edit of the project (no undo step)
        return _put_on_screen(window, new_state, snapshot, arrange, defer)


def _put_on_screen(window, new_state: dict, snapshot: dict, arrange: bool, defer) -> ScreenResult:
    s, out = window.session, ScreenResult()
    modules = _view_modules(window)
    generation = s.generation
    s.show_state(new_state.get("parameters") if "parameters" in snapshot else None,
                 new_state.get("initial") if "initial" in snapshot else None,
                 new_state.get("solver") if "solver" in snapshot else None)

    def unknown(view_id):
        if view_id in VIEW_IDS:
            if view_id not in out.missing_views:
                out.missing_views.append(view_id)
        else:
            out.problems.append(f"this step names a view '{view_id}' that OrbitDesk does not have")

    if "open_views" in snapshot:
        wanted = []
        for view_id in new_state.get("open_views", []):
            if view_id in modules:
                wanted.append(modules[view_id])
            else:
                unknown(view_id)
        for module in wanted:  # made before they are laid out, so the layout knows the room they need
            if window.ensure_view(module) is None:
                out.problems.append(f"the {title_of(module).lower()} view could not be opened")
        show_docks(window, wanted, arrange)

    changes: dict[str, dict] = {}
    for view_id in snapshot.get("views", {}) if isinstance(snapshot.get("views"), dict) else ():
        if view_id in new_state.get("views", {}):
            changes[view_id] = dict(new_state["views"][view_id])
    if "camera" in snapshot and "camera" in new_state:
        changes.setdefault(CAMERA_VIEW, {})["camera"] = new_state["camera"]
    if "selected_equilibrium" in snapshot:
        changes.setdefault(EQUILIBRIA_VIEW, {})["selected"] = new_state.get("selected_equilibrium")
    section = new_state.get("section") if "section" in snapshot else None
    if section is not None:
        changes.setdefault(SECTIONS_VIEW, {})
    for view_id, d in changes.items():
        module = modules.get(view_id)
        if module is None:
            if view_id in snapshot.get("views", {}) or view_id == SECTIONS_VIEW:
                unknown(view_id)
            continue
        view = window.views.get(module)
        if view is None:
            if defer is not None:
                defer(module, d, section if view_id == SECTIONS_VIEW else None)
            continue
        apply_to_view(view, d, section if view_id == SECTIONS_VIEW else None)

    if "time_cursor" in snapshot and "time_cursor" in new_state:
        s.set_time_cursor(new_state["time_cursor"])
    if "open_views" in snapshot:
        for view_id in new_state.get("open_views", []):
            view = window.views.get(modules.get(view_id, ""))
            if view is not None and view_id != SECTIONS_VIEW:
                _bring_up_to_date(view, s.generation != generation)
            own = snapshot["views"].get(view_id) if isinstance(snapshot.get("views"), dict) else None
            zoomed = isinstance(own, dict) and bool(own.get("range"))  # a zoom the step itself chose stays
            if view is not None and not zoomed and (arrange or getattr(view, "fit_own_state", True)):
                view.fit_after_next_run()  # the step's plots shown whole, once its run is in
    return out


def _bring_up_to_date(view, values_changed: bool) -> None:
    """A view that computes only on request (a sweep, the Lyapunov spectrum) computes for the step's
    values; views that follow the values by themselves are left alone."""
    if not view.follows_values() and (values_changed or view.result is None):
        view.compute()


def apply_to_view(view, changes: dict, section: dict | None) -> None:
    with view.not_a_gesture():   # a step shows settings: no edit of the project (no undo step)
        if changes:
            _apply_view(view, changes)
        if section is None:
            return
        if "strobe" in section:
            view.set_strobe(section["strobe"], section.get("phase", 0.0))
        elif "plane" in section:
            name, _, value = section["plane"].partition("=")
            view.set_plane(name, float(value), section.get("direction", "up"))
        view.compute()
