"""Walkthroughs: recorded steps of a study that a reader replays one by one.

A step is a ``WalkthroughStep(title, note, snapshot)``; the snapshot is plain JSON data::

    {"parameters": {name: value}, "initial": {state: value}, "solver": {subset of RunSettings.saved()},
     "views": {view_id: {settings}}, "open_views": [view_id, ...], "camera": {...},
     "selected_equilibrium": int | None, "section": {"plane": "x=0", "direction": "up"} | {"strobe": T},
     "time_cursor": float}

Every key is optional. ``apply_step`` applies what still fits the model and says in plain words what
it could not; ``render_note`` turns a note's light markup into safe HTML.
"""

from __future__ import annotations

import bisect
import copy
import html
import math
import numbers
import re

from orbitdesk.engine.settings import SAVED, SettingsError, check_value
from orbitdesk.document.project import WalkthroughStep
from orbitdesk.document.view_settings import VIEW_SETTINGS, missing_names, unknown_keys, without
from orbitdesk.document.views import VIEW_IDS

SNAPSHOT_KEYS = ("parameters", "initial", "solver", "views", "open_views", "camera",
                 "selected_equilibrium", "section", "time_cursor")
_AXIS_KEYS = ("x", "y", "z")
_DIRECTIONS = ("up", "down", "both")
_PLANE = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*'*)\s*=\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*$")


# ---------------------------------------------------------------- validation

def _is_number(v) -> bool:
    return isinstance(v, numbers.Real) and not isinstance(v, bool) and math.isfinite(float(v))


def _is_json(v, depth=0) -> bool:
    if depth > 32:
        return False
    if v is None or isinstance(v, (bool, str)):
        return True
    if isinstance(v, numbers.Real):
        return math.isfinite(float(v))
    if isinstance(v, (list, tuple)):
        return all(_is_json(x, depth + 1) for x in v)
    if isinstance(v, dict):
        return all(isinstance(k, str) and _is_json(x, depth + 1) for k, x in v.items())
    return False


def _check_numbers(v, what: str, problems: list[str]) -> dict:
    if not isinstance(v, dict):
        problems.append(f"{what} should be a table of names and numbers")
        return {}
    good = {}
    for name, value in v.items():
        if not isinstance(name, str):
            problems.append(f"{what} has a name that is not text ({name!r})")
        elif not _is_number(value):
            problems.append(f"{what}: the value of '{name}' should be a finite number, not {value!r}")
        else:
            good[name] = float(value)
    return good


def _check_solver(v, problems: list[str]) -> dict:
    if not isinstance(v, dict):
        problems.append("the solver settings should be a table")
        return {}
    good = {}
    for key, value in v.items():
        if key not in SAVED:
            problems.append(f"the solver has no setting called '{key}'")
            continue
        try:
            good[key] = check_value(key, value)
        except SettingsError as problem:
            problems.append(f"the solver setting {key}: {problem.message}")
    if "t_start" in good and "t_end" in good and good["t_start"] == good["t_end"]:
        problems.append("the solver's end time equals its start time")
        del good["t_end"]
    return good


def _check_section(v, problems: list[str]) -> dict | None:
    if not isinstance(v, dict):
        problems.append("the section should be a table such as {\"plane\": \"x=0\", \"direction\": \"up\"} "
                        "or {\"strobe\": T}")
        return None
    if "strobe" in v:
        if not _is_number(v["strobe"]) or v["strobe"] <= 0:
            problems.append(f"the stroboscopic period should be a positive number, not {v['strobe']!r}")
            return None
        extra = set(v) - {"strobe", "phase"}
        if extra:
            problems.append(f"a stroboscopic section has no setting {', '.join(sorted(extra))}")
        out = {"strobe": float(v["strobe"])}
        if "phase" in v and _is_number(v["phase"]):
            out["phase"] = float(v["phase"])
        return out
    plane = v.get("plane")
    if not isinstance(plane, str) or not _PLANE.match(plane):
        problems.append(f"the section plane should read like \"x=0\" (a state, '=' and a number), not {plane!r}")
        return None
    direction = v.get("direction", "up")
    if direction not in _DIRECTIONS:
        problems.append(f"the section direction should be up, down or both, not {direction!r}")
        direction = "up"
    return {"plane": plane.replace(" ", ""), "direction": direction}


def _clean(snapshot, problems: list[str]) -> dict:
    """The parts of ``snapshot`` whose types are right; everything wrong is described in ``problems``."""
    if not isinstance(snapshot, dict):
        problems.append("the step's snapshot is not a table of settings")
        return {}
    out: dict = {}
    for key, value in snapshot.items():
        if key not in SNAPSHOT_KEYS:
            problems.append(f"the step has a setting '{key}' that OrbitDesk does not know")
        elif key == "parameters":
            out[key] = _check_numbers(value, "the step's parameter values", problems)
        elif key == "initial":
            out[key] = _check_numbers(value, "the step's initial values", problems)
        elif key == "solver":
            out[key] = _check_solver(value, problems)
        elif key == "views":
            if not isinstance(value, dict):
                problems.append("the step's views should be a table of view names and their settings")
                continue
            views = {}
            for view_id, settings in value.items():
                if not isinstance(settings, dict) or not _is_json(settings):
                    problems.append(f"the settings of the view '{view_id}' should be a table of plain values")
                else:
                    views[view_id] = copy.deepcopy(settings)
            out[key] = views
        elif key == "open_views":
            if not isinstance(value, (list, tuple)) or not all(isinstance(v, str) for v in value):
                problems.append("the step's open views should be a list of view names")
            else:
                out[key] = list(dict.fromkeys(value))
        elif key == "camera":
            if not isinstance(value, dict) or not _is_json(value):
                problems.append("the step's camera should be a table of plain values")
            else:
                out[key] = copy.deepcopy(value)
        elif key == "selected_equilibrium":
            if isinstance(value, float) and value.is_integer():
                value = int(value)
            if value is None or (isinstance(value, numbers.Integral) and not isinstance(value, bool) and value >= 0):
                out[key] = None if value is None else int(value)
            else:
                problems.append(f"the selected equilibrium should be a number from 0 up, or empty, not {value!r}")
        elif key == "section":
            section = _check_section(value, problems)
            if section is not None:
                out[key] = section
        elif key == "time_cursor":
            if _is_number(value):
                out[key] = float(value)
            else:
                problems.append(f"the time cursor should be a number, not {value!r}")
    return out


def validate_snapshot(snapshot) -> list[str]:
    """Plain-word descriptions of everything wrong with the types in ``snapshot`` (empty when it is fine)."""
    problems: list[str] = []
    _clean(snapshot, problems)
    return problems


# ---------------------------------------------------------------- record / apply

def record_step(title: str, note: str, state: dict) -> WalkthroughStep:
    """A step holding the known settings of ``state`` (deep-copied); raises ValueError if any is malformed."""
    if not isinstance(title, str) or not title.strip():
        raise ValueError("a step needs a title")
    if not isinstance(note, str):
        raise ValueError("a step's note should be text")
    if not isinstance(state, dict):
        raise ValueError("the state to record should be a table of settings")
    problems: list[str] = []
    known = {k: v for k, v in state.items() if k in SNAPSHOT_KEYS}
    snapshot = _clean(known, problems)
    if problems:
        raise ValueError("cannot record this step: " + "; ".join(problems))
    return WalkthroughStep(title.strip(), note, snapshot)


def _names(info, attr: str) -> list[str]:
    if isinstance(info, dict):
        return list(info.get(attr, ()))
    value = getattr(info, attr, ())
    return list(value.keys() if isinstance(value, dict) else value)


def _model_names(info):
    states = _names(info, "states")
    params = _names(info, "parameters")
    derived = _names(info, "derived_names") or _names(info, "derived")
    time = "n" if (info.get("kind") if isinstance(info, dict) else getattr(info, "kind", None)) == "map" else "t"
    return states, params, derived, time


def _view_problems(view_id: str, settings: dict, series: set[str], states: list[str], params: list[str]):
    """Names in a view's settings that the model no longer has (by the views' one definition of their
    settings, ``view_settings.VIEW_SETTINGS``), and the settings without them; None for the settings
    when the view's parameter is gone (its other settings belong to that parameter)."""
    problems, keep = [], dict(settings)
    where = f"the {view_id.replace('_', ' ')} view"
    known = {"series": series, "state": set(states), "parameter": set(params)}
    missing = missing_names(view_id, settings, known)
    lists = {}
    for path, kind, name in missing:
        key = path.split(".")[-1]
        if kind == "parameter":
            problems.append(f"{where} sweeps '{name}', which is no longer a parameter; that view's settings "
                            f"are left as they were")
            return problems, None
        if VIEW_SETTINGS[view_id].get(path) == "series list":
            lists.setdefault(path, []).append(name)
        elif key in _AXIS_KEYS:
            problems.append(f"{where}'s {key} axis shows '{name}', which the model no longer has; that axis is "
                            f"left as it was")
            keep = without(keep, path)
        else:
            problems.append(f"{where}'s {path.replace('.', ' ').replace('_', ' ')} names '{name}', which the "
                            f"model no longer has; that setting is left as it was")
            keep = without(keep, path)
    for path, names in lists.items():
        problems.append(f"{where}'s {path} name {', '.join(names)}, which the model no longer has; "
                        f"the {path} are left as they were")
        keep = without(keep, path)
    for path in unknown_keys(view_id, settings) if view_id in VIEW_SETTINGS else ():
        problems.append(f"{where} has no setting '{path}'; it is left out")
        keep = without(keep, path)
    return problems, keep


def apply_step(step: WalkthroughStep, model_info, current_state: dict) -> tuple[dict, list[str]]:
    """Apply ``step`` to ``current_state`` (not modified) for a model with the given names.

    ``model_info`` is a CompiledSystem, a ParsedModel, or a dict with "states", "parameters" and
    optionally "derived" and "kind". Returns the new state and a list of plain-word problems: names
    the model no longer has, wrong types. Everything that fits is applied.
    """
    problems: list[str] = []
    snapshot = _clean(getattr(step, "snapshot", None), problems)
    states, params, derived, time = _model_names(model_info)
    series = set(states) | set(derived) | {time}
    state = copy.deepcopy(current_state) if isinstance(current_state, dict) else {}

    values = snapshot.get("parameters", {})
    gone = [n for n in values if n not in params]
    if gone:
        problems.append(_gone(gone, "parameter", "parameters", "set"))
    if values:
        state.setdefault("parameters", {})
        state["parameters"] = dict(state["parameters"]) if isinstance(state["parameters"], dict) else {}
        state["parameters"].update({n: v for n, v in values.items() if n in params})

    values = snapshot.get("initial", {})
    gone = [n for n in values if n not in states]
    if gone:
        problems.append(_gone(gone, "state", "states", "start"))
    if values:
        old = state.get("initial")
        state["initial"] = dict(old) if isinstance(old, dict) else {}
        state["initial"].update({n: v for n, v in values.items() if n in states})

    if snapshot.get("solver"):
        old = state.get("solver")
        state["solver"] = {**(old if isinstance(old, dict) else {}), **snapshot["solver"]}

    if "views" in snapshot:
        old = state.get("views")
        views = {k: dict(v) for k, v in old.items()} if isinstance(old, dict) else {}
        for view_id, settings in snapshot["views"].items():
            found, keep = _view_problems(view_id, settings, series, states, params)
            problems.extend(found)
            if keep is not None:
                views[view_id] = {**views.get(view_id, {}), **keep}
        state["views"] = views

    for key in ("open_views", "camera", "selected_equilibrium", "time_cursor"):
        if key in snapshot:
            state[key] = copy.deepcopy(snapshot[key])

    if "section" in snapshot:
        section = snapshot["section"]
        m = _PLANE.match(section.get("plane", "")) if "plane" in section else None
        if m and m.group(1) not in states:
            problems.append(f"the section cuts at '{section['plane']}', but '{m.group(1)}' is not a state of the "
                            f"model; the section is left as it was")
        else:
            state["section"] = dict(section)
    return state, problems


def _gone(names: list[str], one: str, many: str, verb: str) -> str:
    quoted = ", ".join(f"'{n}'" for n in names)
    if len(names) == 1:
        return f"this step {verb}s the {one} {quoted}, which the model no longer has; the rest of the step is applied"
    return f"this step {verb}s the {many} {quoted}, which the model no longer has; the rest of the step is applied"


# ---------------------------------------------------------------- editing the list

def move_step(steps: list, i: int, j: int) -> list:
    """A new list with the step at ``i`` moved to position ``j``; raises IndexError for bad positions."""
    n = len(steps)
    if not (0 <= i < n and 0 <= j < n):
        raise IndexError(f"step positions run from 0 to {n - 1}; got {i} and {j}")
    out = list(steps)
    out.insert(j, out.pop(i))
    return out


def delete_step(steps: list, i: int) -> list:
    """A new list without the step at ``i``; raises IndexError for a bad position."""
    if not 0 <= i < len(steps):
        raise IndexError(f"there is no step {i} (the walkthrough has {len(steps)})")
    return steps[:i] + steps[i + 1:]


# ---------------------------------------------------------------- notes

_BULLET = re.compile(r"^\s{0,3}[-*]\s+(.*)$")
_NUMBERED = re.compile(r"^\s{0,3}(\d{1,9})[.)]\s+(.*)$")
_PAIRS = re.compile(r"(?=\*\*)")  # every position of "**", overlapping ("***" has two)
_STAR = re.compile(r"\*")


# Inline markup in linear time. The rules are those of the patterns
#   code    `([^`\n]+)`
#   strong  \*\*(?=\S)(.+?)(?<=\S)\*\*
#   emph    (?<![\w*])\*(?=[^\s*])(.+?)(?<=[^\s*])\*(?![\w*])
# (code spans first; strong, then emphasis, over the escaped text between them), but a backtracking
# engine tries every opening star against the whole rest of the text: quadratic in the length of
# unclosed markup. Here the possible closing positions are listed once, and each opening star looks
# up the first one after it (bisect), so the work is O(m log m) in the number m of stars.

def _is_word(c: str) -> bool:
    return c.isalnum() or c == "_"


def _wrap(text: str, openers, closers, width: int, min_content: int, tag: str) -> str:
    """Replace, left to right without overlap, each opener at i that has a closer j >= i + width +
    min_content by <tag>text[i+width:j]</tag> (the first such closer: the shortest match)."""
    out, last = [], 0
    for i in openers:
        if i < last:
            continue
        k = bisect.bisect_left(closers, i + width + min_content)
        if k == len(closers):
            break  # no closer after this opener, so none after any later one either
        j = closers[k]
        out.append(text[last:i])
        out.append(f"<{tag}>{text[i + width:j]}</{tag}>")
        last = j + width
    out.append(text[last:])
    return "".join(out)


def _strong(text: str) -> str:
    n = len(text)
    pairs = [m.start() for m in _PAIRS.finditer(text)]
    openers = [i for i in pairs if i + 2 < n and not text[i + 2].isspace()]
    closers = [j for j in pairs if j >= 1 and not text[j - 1].isspace()]
    return _wrap(text, openers, closers, 2, 1, "strong")


def _emphasis(text: str) -> str:
    n = len(text)
    stars = [m.start() for m in _STAR.finditer(text)]

    def free(c: str) -> bool:  # not a word character and not a star
        return not (_is_word(c) or c == "*")

    openers = [i for i in stars if (i == 0 or free(text[i - 1]))
               and i + 1 < n and not text[i + 1].isspace() and text[i + 1] != "*"]
    closers = [j for j in stars if j >= 1 and not text[j - 1].isspace() and text[j - 1] != "*"
               and (j + 1 == n or free(text[j + 1]))]
    return _wrap(text, openers, closers, 1, 1, "em")


def _styled(text: str) -> str:
    return _emphasis(_strong(html.escape(text, quote=False)))


def _inline(text: str) -> str:
    """Code spans (`...`, not empty, on one line), then strong and emphasis in the rest."""
    parts, last, start = [], 0, 0
    while True:
        i = text.find("`", start)
        k = text.find("`", i + 1) if i >= 0 else -1
        if k < 0:
            break
        if k == i + 1 or "\n" in text[i + 1:k]:
            start = i + 1  # no span opens here; the next try starts at the closing backtick
            continue
        parts.append(_styled(text[last:i]))
        parts.append(f"<code>{html.escape(text[i + 1:k], quote=False)}</code>")
        last = start = k + 1
    parts.append(_styled(text[last:]))
    return "".join(parts)


def render_note(text: str) -> str:
    """Light markup -> HTML: paragraphs, ``- `` bullets, ``1. `` numbered lists, *emphasis*, **strong**,
    `code`. Everything else is escaped, so no HTML in a note ever reaches the page as markup."""
    blocks: list[str] = []
    paragraph: list[str] = []
    items: list[list[str]] = []
    list_kind: str | None = None
    start = 1

    def flush_paragraph():
        if paragraph:
            blocks.append("<p>" + _inline(" ".join(s.strip() for s in paragraph)) + "</p>")
            paragraph.clear()

    def flush_list():
        nonlocal list_kind
        if items:
            body = "".join(f"<li>{_inline(' '.join(item))}</li>" for item in items)
            first = f' start="{start}"' if list_kind == "ol" and start != 1 else ""
            blocks.append(f"<{list_kind}{first}>{body}</{list_kind}>")
            items.clear()
        list_kind = None

    for line in (text or "").replace("\r\n", "\n").replace("\r", "\n").split("\n"):
        if not line.strip():
            flush_paragraph()
            flush_list()
            continue
        bullet, numbered = _BULLET.match(line), _NUMBERED.match(line)
        if bullet or numbered:
            kind = "ul" if bullet else "ol"
            flush_paragraph()
            if list_kind != kind:
                flush_list()
                list_kind = kind
                start = int(numbered.group(1)) if numbered else 1
            items.append([(bullet.group(1) if bullet else numbered.group(2)).strip()])
        elif list_kind and line[:1] in (" ", "\t"):
            items[-1].append(line.strip())
        else:
            flush_list()
            paragraph.append(line)
    flush_paragraph()
    flush_list()
    return "\n".join(blocks)


__all__ = ["SNAPSHOT_KEYS", "VIEW_IDS", "record_step", "apply_step", "validate_snapshot", "move_step",
           "delete_step", "render_note"]
