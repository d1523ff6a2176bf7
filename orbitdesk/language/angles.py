"""States declared angles (``angle theta`` in the model): values wrapped to (-pi, pi].

A phase portrait, a section or a list of equilibria shows an angle wrapped, so a pendulum turning over
and over stays in one strip of the plane, and the upright position is one equilibrium, not one per turn.
The integration itself runs on the unwrapped values.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

TWO_PI = 2 * np.pi


def wrap(values):
    """Values wrapped to (-pi, pi] (pi stays pi, -pi becomes pi)."""
    return np.pi - np.mod(np.pi - np.asarray(values, dtype=float), TWO_PI)


def angle_states(system) -> list[str]:
    """The states of a CompiledSystem or ParsedModel that the model declares angles."""
    model = getattr(system, "model", system)
    return [name for name in getattr(model, "angles", ()) if name in getattr(system, "states", ())]


def wrap_columns(system, columns: dict) -> dict:
    """``columns`` ({name: array}) with the angle states wrapped (a new dict; other columns shared)."""
    angles = angle_states(system)
    return {name: (wrap(values) if name in angles else values) for name, values in columns.items()}


def break_at_wraps(*series):
    """The series (equal length) with a NaN put between two samples wherever one of them jumped by more
    than pi (a wrapped angle going round), so a line drawn through them is broken there, not drawn across."""
    arrays = [np.asarray(s, dtype=float) for s in series]
    if not arrays or arrays[0].size < 2:
        return tuple(arrays)
    jumps = np.zeros(arrays[0].size - 1, dtype=bool)
    for a in arrays:
        with np.errstate(invalid="ignore"):
            jumps |= np.abs(np.diff(a)) > np.pi
    if not jumps.any():
        return tuple(arrays)
    where = np.flatnonzero(jumps) + 1
    return tuple(np.insert(a, where, np.nan) for a in arrays)


def wrap_equilibria(system, items: list) -> list:
    """Equilibria with their angle coordinates wrapped, each point once (theta = pi and -pi are one)."""
    angles = angle_states(system)
    if not angles:
        return list(items)
    index = [system.states.index(a) for a in angles]
    out = []
    for eq in items:
        vector = np.array(eq.vector, dtype=float)
        vector[index] = wrap(vector[index])
        state = {**eq.state, **{a: float(vector[i]) for a, i in zip(angles, index)}}
        scale = max(1.0, float(np.max(np.abs(vector))))
        if any(np.max(np.abs(_gap(vector, o.vector, index))) <= 1e-7 * scale for o in out):
            continue
        out.append(replace(eq, state=state, vector=vector))
    return out


def _gap(u, v, index):
    d = np.asarray(u, dtype=float) - np.asarray(v, dtype=float)
    d[index] = wrap(d[index])
    return d


__all__ = ["wrap", "angle_states", "wrap_columns", "break_at_wraps", "wrap_equilibria"]
