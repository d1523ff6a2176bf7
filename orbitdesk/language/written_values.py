"""Values written into model text: a parameter's line or a state's initial-value line given a new value,
its range and comment kept. Used for a family's size (the model itself changes) and for the export of
the model with the values now set (File > Export > Model with These Values, ``orbitdesk export --model``).
Only numbers we format are written; the rest of each line is the user's own text, untouched.
"""

from __future__ import annotations

import math
import re


def number_text(value: float) -> str:
    """The shortest text that reads back as ``value`` (whole numbers without a decimal point)."""
    value = float(value)
    if not math.isfinite(value):
        raise ValueError(f"{value} cannot be written into a model")
    if value.is_integer() and abs(value) < 1e15:
        return str(int(value))
    return repr(value)


def with_line_value(text: str, line: int, left: str, value_text: str) -> str:
    """``text`` with the value on ``line`` (whose left side is ``left``: ``k``, ``x(0)``, ``x[0]``) replaced
    by ``value_text``, keeping a range ``in [lo, hi]`` and a comment; unchanged when the line does not
    have that shape."""
    lines = text.split("\n")
    if not 1 <= line <= len(lines):
        return text
    code, hash_, comment = lines[line - 1].partition("#")
    m = re.match(rf"^(\s*{_left_pattern(left)}\s*=\s*)(.*?)(\s+in\s*\[.*\])?(\s*)$", code)
    if not m:
        return text
    lines[line - 1] = f"{m.group(1)}{value_text}{m.group(3) or ''}{m.group(4)}{hash_}{comment}"
    return "\n".join(lines)


def _left_pattern(left: str) -> str:
    name, _, rest = left.partition("(") if "(" in left else left.partition("[")
    if not rest:
        return re.escape(left)
    opening = "\\(" if "(" in left else "\\["
    closing = "\\)" if "(" in left else "\\]"
    return rf"{re.escape(name)}\s*{opening}\s*0\s*{closing}"


def with_values(text: str, parsed, params: dict, initial: dict) -> str:
    """The model ``text`` (parsed as ``parsed``) with the parameter values ``params`` written into their
    lines and the initial values ``initial`` into theirs; a state without an initial-value line gets one
    at the end. Names the model does not have are left out."""
    for name, info in parsed.parameters.items():
        if name in params and info.line:
            text = with_line_value(text, info.line, name, number_text(params[name]))
    brackets = "[0]" if parsed.kind == "map" else "(0)"
    added = []
    for state in parsed.states:
        if state not in initial:
            continue
        left = f"{state}{brackets}"
        line = _initial_line(text, left)
        if line:
            text = with_line_value(text, line, left, number_text(initial[state]))
        elif float(initial[state]) != 0.0 or state in parsed.initial:
            added.append(f"{left} = {number_text(initial[state])}")
    if added:
        text = text.rstrip("\n") + "\n" + "\n".join(added) + "\n"
    return text


def _initial_line(text: str, left: str) -> int:
    pattern = re.compile(rf"^\s*{_left_pattern(left)}\s*=")
    for number, raw in enumerate(text.split("\n"), start=1):
        if pattern.match(raw.partition("#")[0]):
            return number
    return 0
