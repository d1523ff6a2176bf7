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
              "duration": "number", "lyapunov": "bool"},
    "cycles": {"start": ("end", "clicked"), "period_guess": "number", "forcing_multiple": "integer",
               "map_period": "integer"},
    "bifurcation": {"follow": ("steady", "cycles", "cycle", "response"), "parameter": "parameter", "from": "number",
                    "to": "number", "measure": "text", "overlay": "bool", "stepped": "bool",
                    "locus_kind": ("fold", "Hopf"), "param2": "parameter", "from2": "number", "to2": "number",
                    "tab": "integer", "branches": "list", "response": "table", "stepped_sweeps": "list",
                    "locus": "table"},
    "fit": {"parameters": "list", "local": "list", "initial": "list", "bounds": "list", "weights": "list",
            "segments": "integer", "max_evaluations": "integer"},
    "basins": {"x": {"state": "state", "from": "number", "to": "number", "count": "integer"},
               "y": {"state": "state", "from": "number", "to": "number", "count": "integer"},
               "transient": "number", "strobe": "bool", "period": "number", "manifolds": "bool"},
    "parameter_map": {"what": ("lyapunov", "period"),
                      "x": {"parameter": "parameter", "from": "number", "to": "number", "count": "integer"},
                      "y": {"parameter": "parameter", "from": "number", "to": "number", "count": "integer"},
                      "transient": "number", "duration": "number", "max_period": "integer", "period": "number"},
    "lyapunov": {"flow": {"length": "number", "transient": "number"},
                 "map": {"steps": "integer", "transient": "integer"}, "dt": "number", "auto": "bool"},
}

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


def without(settings: dict, path: str) -> dict:
    """A copy of ``settings`` without the (dotted) key ``path``."""
    out = dict(settings)
    head, _, rest = path.partition(".")
    if rest and isinstance(out.get(head), dict):
        out[head] = without(out[head], rest)
    else:
        out.pop(head, None)
    return out


__all__ = ["VIEW_SETTINGS", "unknown_keys", "names_in", "missing_names", "without"]
