"""What differs between two versions of a project, in plain words (shown before one overwrites the other)."""

from __future__ import annotations

import difflib

from orbitdesk.engine.settings import SAVED
from orbitdesk.document.project import Project


def _num(x) -> str:
    return "none" if x is None else f"{x:g}" if isinstance(x, float) else str(x)


def _table(label: str, a: dict, b: dict, show) -> list[str]:
    out = []
    for name in sorted(set(a) | set(b)):
        if name not in b:
            out.append(f"{label} {name}: only in this window ({show(a[name])})")
        elif name not in a:
            out.append(f"{label} {name}: only on disk ({show(b[name])})")
        elif show(a[name]) != show(b[name]):
            out.append(f"{label} {name}: {show(a[name])} here, {show(b[name])} on disk")
    return out


def _setting(p) -> str:
    rng = "" if p.lo is None and p.hi is None else f" in [{_num(p.lo)}, {_num(p.hi)}]"
    return _num(p.value) + rng


def model_diff(mine: Project, theirs: Project) -> list[str]:
    """Unified diff lines of the model text (this window's version first, the file on disk second)."""
    return list(difflib.unified_diff(mine.model.splitlines(), theirs.model.splitlines(),
                                     "this window", "on disk", lineterm="", n=1))


def describe_changes(mine: Project, theirs: Project) -> list[str]:
    """One line per difference between ``mine`` (this window) and ``theirs`` (the file on disk)."""
    out = []
    if mine.name != theirs.name:
        out.append(f"Name: “{mine.name}” here, “{theirs.name}” on disk")
    diff = model_diff(mine, theirs)
    if diff:
        added = sum(1 for line in diff if line.startswith("+") and not line.startswith("+++"))
        removed = sum(1 for line in diff if line.startswith("-") and not line.startswith("---"))
        out.append(f"Model text: {removed} line(s) here differ from {added} line(s) on disk")
    out += _table("Parameter", mine.parameters, theirs.parameters, _setting)
    out += _table("Initial value", mine.initial, theirs.initial, _num)
    for key in SAVED:
        a, b = getattr(mine.solver, key), getattr(theirs.solver, key)
        if a != b:
            out.append(f"Solver {key.replace('_', ' ')}: {_num(a)} here, {_num(b)} on disk")
    steps_a, steps_b = [w.title for w in mine.walkthrough], [w.title for w in theirs.walkthrough]
    if [(w.title, w.note, w.snapshot) for w in mine.walkthrough] != \
            [(w.title, w.note, w.snapshot) for w in theirs.walkthrough]:
        out.append(f"Walkthrough: {len(steps_a)} step(s) here, {len(steps_b)} on disk"
                   + ("" if steps_a != steps_b else " (same titles, different notes or snapshots)"))
    if mine.notes != theirs.notes:
        out.append("Notes differ")
    if mine.views != theirs.views:
        out.append("View settings differ")
    return out
