"""The one definition of what each view keeps in a project and a walkthrough step.

``VIEW_SETTINGS[view_id]`` maps each key a view saves to what it holds. The views save and read exactly
these keys (a UI test compares them), the sample projects are checked against them when they are
written, and walkthroughs use them to find names in a step that a model no longer has.

Kinds: ``"series"`` (a state, derived quantity or the time), ``"series list"``, ``"state"``,
``"parameter"``, ``"parameter or none"`` (a parameter name or empty), ``"number"``, ``"integer"``,
``"bool"``, ``"text"``, ``"list"``, ``"table"`` (free), a tuple (one of those values), or a dict (a nested
table with its own keys).
"""

from __future__ import annotations

import math

from orbitdesk.engine.methods import METHODS

# the views' method choices, read off the one registry ("automatic": the default, or the stiff method when stiff;
# "rk4" with the saved "dt": the fixed step)
_METHOD_CHOICES = ("automatic", *METHODS)

VIEW_SETTINGS: dict[str, dict] = {
    "timeseries": {"series": "series list", "log_y": "bool", "spectrum": "bool"},
    "phase_plane": {"x": "series", "y": "series", "arrows": "bool", "nullclines": "bool", "backward": "bool",
                    "seeds": "list", "range": "list"},
    "phase_space_3d": {"axes": "series list", "colour": ("time", "trajectory"),
                       "spread": {"on": "bool", "count": "integer", "radius": "number"},
                       "starts": "list", "camera": "table"},
    "equilibria": {"auto": "bool", "eps": "number", "selected": "integer"},
    "noise_statistics": {"state": "state", "mode": ("stationary", "time"), "time": "number"},
    "sections": {"kind": ("plane", "strobe"), "coordinate": "state", "value": "number",
                 "direction": ("up", "down", "both"), "period": "number", "phase": "number",
                 "count": "integer", "transient": "number", "auto": "bool", "axes": "series list", "return_of": "series"},
    "sweep": {"parameter": "parameter", "from": "number", "to": "number", "count": "integer",
              "observe": "series", "mode": ("maxima", "strobe", "plane", "iterate"),
              "plane": {"state": "state", "value": "number", "direction": (1, -1, 0)},
              "period": "number", "transient": "number", "samples": "integer", "dt": "number",
              "duration": "number", "lyapunov": "bool", "method": _METHOD_CHOICES},
    "cycles": {"start": ("end", "clicked"), "period_guess": "number", "forcing_multiple": "integer",
               "map_period": "integer"},
    "bifurcation": {"follow": ("steady", "cycles", "cycle", "response"), "parameter": "parameter", "from": "number",
                    "to": "number", "measure": "text", "overlay": "bool", "stepped": "bool",
                    "locus_kind": ("fold", "Hopf"), "param2": "parameter", "from2": "number", "to2": "number",
                    "tab": "integer",
                    # computed results a walkthrough step (or a file of an earlier version) holds: the view
                    # puts them into the document (results.results_from_view_settings), never saves them
                    "branches": "list", "response": "table", "stepped_sweeps": "list", "locus": "table",
                    "notes": "list"},
    "fit": {"parameters": "list", "local": "list", "initial": "list", "bounds": "list", "weights": "list",
            "segments": "integer", "max_evaluations": "integer", "page": ("set up", "result")},
    "basins": {"x": {"state": "state", "from": "number", "to": "number", "count": "integer"},
               "y": {"state": "state", "from": "number", "to": "number", "count": "integer"},
               "transient": "number", "strobe": "bool", "period": "number", "manifolds": "bool",
               "method": _METHOD_CHOICES, "dt": "number"},
    "parameter_map": {"what": ("lyapunov", "period"),
                      "x": {"parameter": "parameter", "from": "number", "to": "number", "count": "integer"},
                      "y": {"parameter": "parameter", "from": "number", "to": "number", "count": "integer"},
                      "transient": "number", "duration": "number", "max_period": "integer", "period": "number"},
    "lyapunov": {"flow": {"length": "number", "transient": "number"},
                 "map": {"steps": "integer", "transient": "integer"}, "dt": "number", "auto": "bool",
                 "method": _METHOD_CHOICES, "settle": "bool"},
}

# The settings that say what a view computes from the model: a user's change of one of them is an edit of
# the project (an undo step, an unsaved change: LiveDocument.change_view_settings); the others (plot ranges,
# shown series, tabs, camera) only say how it is shown and go into the project without either.
PROJECT_KEYS: dict[str, frozenset] = {
    "sweep": frozenset({"parameter", "from", "to", "observe", "mode", "plane", "period"}),
    "sections": frozenset({"kind", "coordinate", "value", "direction", "period", "phase"}),
    "bifurcation": frozenset({"follow", "parameter", "from", "to", "locus_kind", "param2", "from2", "to2"}),
    "parameter_map": frozenset({"what", "x", "y"}),
    "basins": frozenset({"x", "y", "strobe", "period"}),
    "fit": frozenset({"parameters", "local", "initial", "bounds"}),
    "noise_statistics": frozenset({"state", "mode", "time"}),
}


def project_part(view_id: str, settings) -> dict:
    """The part of a view's settings that is an edit of the project (``PROJECT_KEYS``)."""
    keys = PROJECT_KEYS.get(view_id, frozenset())
    return {k: v for k, v in settings.items() if k in keys} if isinstance(settings, dict) else {}


# Saved by the window for every view with plots, once the user names an axis quantity
# (``ui.plot_tools``): {quantity: {"text": name, "units": units}}.
PLOT_SETTINGS = {"axis_names": "table"}
for _view in ("timeseries", "phase_plane", "sections", "sweep", "lyapunov", "cycles", "bifurcation"):
    VIEW_SETTINGS[_view].update(PLOT_SETTINGS)

_NAME_KINDS = {"series": "series", "state": "states", "parameter": "parameters"}


def unknown_keys(view_id: str, settings: dict) -> list[str]:
    """Keys of ``settings`` (dotted for nested tables) that the view does not have; all of them for a
    view OrbitDesk does not have."""
    schema = VIEW_SETTINGS.get(view_id)
    if schema is None:
        return sorted(settings) if isinstance(settings, dict) else []
    return _unknown(schema, settings, "")


def _unknown(schema: dict, settings, prefix: str) -> list[str]:
    out = []
    for key, value in (settings.items() if isinstance(settings, dict) else ()):
        kind = schema.get(key)
        if kind is None:
            out.append(prefix + key)
        elif isinstance(kind, dict):
            out.extend(_unknown(kind, value, f"{prefix}{key}."))
    return out


def names_in(view_id: str, settings: dict) -> list[tuple[str, str, str]]:
    """(key path, kind, name) for each model name the settings refer to: series, states, parameters."""
    schema = VIEW_SETTINGS.get(view_id, {})
    return _names(schema, settings, "")


def _names(schema: dict, settings, prefix: str) -> list:
    out = []
    for key, value in (settings.items() if isinstance(settings, dict) else ()):
        kind = schema.get(key)
        if isinstance(kind, dict):
            out.extend(_names(kind, value, f"{prefix}{key}."))
        elif kind in _NAME_KINDS and isinstance(value, str) and value:
            out.append((prefix + key, kind, value))
        elif kind == "series list" and isinstance(value, list):
            out.extend((prefix + key, "series", v) for v in value if isinstance(v, str))
    return out


def missing_names(view_id: str, settings: dict, known: dict[str, set]) -> list[tuple[str, str, str]]:
    """The (key path, kind, name) of ``names_in`` whose name is not in ``known[kind]`` (kinds: "series",
    "state", "parameter")."""
    return [(path, kind, name) for path, kind, name in names_in(view_id, settings)
            if name not in known.get(kind, set())]


# ---------------------------------------------------------------- validation and clamping

NUMBER_SPAN = 1e12  # |number| of any view setting without a bound of its own
MAX_ITEMS = 1000  # entries of a list setting (seeds, starts, branches, ...)

# (view, dotted key) -> (low, high): numbers and integers are clamped into these ranges
BOUNDS: dict[tuple[str, str], tuple[float, float]] = {
    ("phase_space_3d", "spread.count"): (1, 1000), ("phase_space_3d", "spread.radius"): (0.0, 1e6),
    ("equilibria", "eps"): (1e-15, 1e6), ("equilibria", "selected"): (-1, 10_000),
    ("sections", "period"): (1e-9, 1e6), ("sections", "count"): (1, 100_000), ("sections", "transient"): (0.0, 1e6),
    ("sweep", "count"): (1, 10_000), ("sweep", "period"): (1e-9, 1e6), ("sweep", "transient"): (0.0, 1e6),
    ("sweep", "samples"): (1, 10_000), ("sweep", "dt"): (1e-9, 1e3), ("sweep", "duration"): (1e-9, 1e6),
    ("cycles", "period_guess"): (0.0, 1e6), ("cycles", "forcing_multiple"): (0, 64),  # 0: automatic
    ("cycles", "map_period"): (1, 1000), ("bifurcation", "tab"): (0, 10),
    ("lyapunov", "flow.length"): (1e-9, 1e7), ("lyapunov", "flow.transient"): (0.0, 1e7),
    ("lyapunov", "map.steps"): (1, 10_000_000), ("lyapunov", "map.transient"): (0, 10_000_000),
    ("lyapunov", "dt"): (1e-9, 1e3),
    ("basins", "x.count"): (2, 300), ("basins", "y.count"): (2, 300), ("basins", "transient"): (0.0, 1e6),
    ("basins", "period"): (1e-9, 1e6), ("basins", "dt"): (1e-9, 1e3),
    ("parameter_map", "x.count"): (2, 400), ("parameter_map", "y.count"): (2, 400),
    ("parameter_map", "transient"): (0.0, 1e6), ("parameter_map", "duration"): (1e-9, 1e6),
    ("parameter_map", "max_period"): (1, 256), ("parameter_map", "period"): (1e-9, 1e6),
    ("fit", "segments"): (1, 100), ("fit", "max_evaluations"): (10, 100_000),
}


def _finite(value) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)


def clean_settings(view_id: str, settings) -> tuple[dict, list[str]]:
    """``settings`` of one view with every value checked against ``VIEW_SETTINGS``: a value of the
    wrong type (a string where a number belongs, NaN, a list where a flag belongs) is dropped, so
    the view uses its default; a number beyond its range (``BOUNDS``, else +-``NUMBER_SPAN``) is
    clamped into it. Returns the cleaned copy and one plain line per change."""
    if not isinstance(settings, dict):
        return {}, [f"{view_id}: the settings are not a table; the view's defaults are used"]
    schema = VIEW_SETTINGS.get(view_id)
    if schema is None:
        return dict(settings), []
    notes: list[str] = []
    return _clean(view_id, schema, settings, "", notes), notes


def _clean(view_id, schema, settings, prefix, notes) -> dict:
    out = {}
    for key, value in settings.items():
        kind, path = schema.get(key), prefix + key
        if kind is None:
            out[key] = value  # unknown keys are reported by unknown_keys, not changed here
            continue
        if isinstance(kind, dict):
            if isinstance(value, dict):
                out[key] = _clean(view_id, kind, value, path + ".", notes)
            else:
                notes.append(f"{view_id}.{path}: expected a table; the default is used")
            continue
        cleaned = _clean_value(view_id, path, kind, value)
        if cleaned is _DROP:
            notes.append(f"{view_id}.{path}: {_shown(value)} is not a valid {_kind_name(kind)}; the default is used")
            continue
        if cleaned != value:
            notes.append(f"{view_id}.{path}: {_shown(value)} is out of range; {cleaned!r} is used")
        out[key] = cleaned
    return out


_DROP = object()


def _clean_value(view_id, path, kind, value):
    if isinstance(kind, tuple):
        return value if any(value == choice and type(value) is type(choice) for choice in kind) else _DROP
    if kind == "bool":
        return value if isinstance(value, bool) else _DROP
    if kind in ("number", "integer"):
        if not _finite(value):
            return _DROP
        lo, hi = BOUNDS.get((view_id, path), (-NUMBER_SPAN, NUMBER_SPAN) if kind == "number" else (0, 1_000_000))
        value = min(max(value, lo), hi)
        return int(round(value)) if kind == "integer" else float(value)
    if kind in ("series", "state", "parameter", "parameter or none", "text"):
        return value if isinstance(value, str) and len(value) <= 10_000 else _DROP
    if kind == "series list":
        ok = isinstance(value, list) and all(isinstance(v, str) for v in value)
        return value[:MAX_ITEMS] if ok else _DROP
    if view_id == "phase_plane" and path == "range":
        return _plot_range(value)
    if kind == "list":
        return _numbers_bounded(value[:MAX_ITEMS]) if isinstance(value, list) else _DROP
    if kind == "table":
        return _numbers_bounded(value) if isinstance(value, dict) else _DROP
    return value


def _plot_range(value):
    """A phase-plane range [[x0, x1], [y0, y1]]: finite, ordered, within +-NUMBER_SPAN and not empty."""
    if value in ([], None):
        return value
    if not (isinstance(value, list) and len(value) == 2 and all(isinstance(r, list) and len(r) == 2 for r in value)):
        return _DROP
    if not all(_finite(v) and abs(v) <= NUMBER_SPAN for r in value for v in r):
        return _DROP
    if not all(r[0] < r[1] and (r[1] - r[0]) > 1e-12 * max(1.0, abs(r[0]), abs(r[1])) for r in value):
        return _DROP
    return [[float(v) for v in r] for r in value]


def _numbers_bounded(value):
    """A free list or table without the entries that hold a number that is not finite or is beyond
    +-NUMBER_SPAN (a seed [1e308, 2] goes as a whole)."""
    if isinstance(value, dict):
        return {k: v for k, v in value.items() if not _holds_bad_number(v)}
    return [v for v in value[:MAX_ITEMS] if not _holds_bad_number(v)]


def _holds_bad_number(value) -> bool:
    stack = [value]
    while stack:
        v = stack.pop()
        if isinstance(v, dict):
            stack.extend(v.values())
        elif isinstance(v, list):
            stack.extend(v)
        elif isinstance(v, (int, float)) and not isinstance(v, bool) and not (_finite(v) and abs(v) <= NUMBER_SPAN):
            return True
    return False


def _kind_name(kind) -> str:
    if isinstance(kind, tuple):
        return "choice (" + ", ".join(repr(c) for c in kind) + ")"
    return {"bool": "true/false", "series list": "list of names"}.get(kind, kind)


def _shown(value) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def without(settings: dict, path: str) -> dict:
    """A copy of ``settings`` without the (dotted) key ``path``."""
    out = dict(settings)
    head, _, rest = path.partition(".")
    if rest and isinstance(out.get(head), dict):
        out[head] = without(out[head], rest)
    else:
        out.pop(head, None)
    return out


__all__ = ["BOUNDS", "VIEW_SETTINGS", "clean_settings", "unknown_keys", "names_in", "missing_names", "without"]
