"""Conservative structure, recognised once and worded the same by every analysis.

A flow whose divergence (the trace of its Jacobian) is identically zero (at the parameter values in use)
keeps volumes, as every
Hamiltonian system does; a map whose Jacobian determinant is identically +1 or -1 keeps areas (the
standard map, the Hénon map at b = -1 or 1). Their eigenvalues cannot all lie on one side: an
equilibrium with no unstable direction has every eigenvalue on the imaginary axis (a fixed point:
every multiplier on the unit circle), is surrounded by closed orbits or invariant curves and is
neither attracting nor repelling. That is normal for such systems, not a bifurcation: equilibria,
cycles and continuation call it neutral in the same words (``NEUTRAL_FLOW`` / ``NEUTRAL_MAP``).
"""

from __future__ import annotations

import numpy as np
import sympy as sp

from orbitdesk.system.compiled_system import MAP, CompiledSystem

NEUTRAL_FLOW = "neutral (conservative flow)"
NEUTRAL_MAP = "neutral (area-preserving map)"
CENTRE_FLOW = "centre (conservative flow)"
ELLIPTIC_MAP = "elliptic fixed point (area-preserving map)"
FLOW_NOTE = ("the flow is divergence-free (conservative): volumes are kept, so an equilibrium with no unstable "
             "direction has every eigenvalue on the imaginary axis and is neutral - neither attracting nor "
             "repelling, surrounded by closed orbits - and nothing bifurcates there")
MAP_NOTE = ("the map keeps areas (its Jacobian determinant is identically {det}): a fixed point with no unstable "
            "direction has every multiplier on the unit circle and is neutral - neither attracting nor "
            "repelling, surrounded by invariant curves - and nothing bifurcates there")


def _simplified_zero(expr) -> bool:
    """Whether ``expr`` is identically zero: symbolically, or a number within round-off of the parameter
    values it was given (cos(1)^2 + sin(1)^2 - 1 from decimal parameters)."""
    try:
        expr = sp.simplify(expr)
        if not expr.free_symbols:
            return abs(complex(expr)) <= 1e-12
        return bool(expr == 0)
    except (TypeError, ValueError, AttributeError, RecursionError):
        return False


def structure(system: CompiledSystem, p=None, free: tuple[str, ...] = ()) -> str:
    """"flow" (divergence-free), "map+1" / "map-1" (area-preserving, with the sign of the determinant) or ""
    at the parameter values ``p`` (default the model's), the parameters named in ``free`` left as symbols
    (a continuation's parameter: the structure must hold along the whole branch). Worked out once per
    system and values (sympy simplify of the trace or the determinant)."""
    values = system.param_values if p is None else p
    key = (tuple(float(v) for v in np.ravel(values)), tuple(free))
    cache = system.__dict__.setdefault("_conservative_structure", {})
    if key in cache:
        return cache[key]
    found = ""
    if not (system.delays or system.stochastic or system.n_states > 12):
        swap = {sym: sp.Float(v) for name, sym, v in zip(system.parameters, system.param_symbols, key[0])
                if name not in free}
        try:
            if system.kind == MAP:
                det = system.jacobian.det(method="berkowitz").subs(swap)
                found = "map+1" if _simplified_zero(det - 1) else "map-1" if _simplified_zero(det + 1) else ""
            else:
                found = "flow" if _simplified_zero(system.jacobian.trace().subs(swap)) else ""
        except (TypeError, ValueError, AttributeError):
            found = ""
    cache[key] = found
    return found


def divergence_free(system: CompiledSystem, p=None) -> bool:
    """Whether the divergence of the vector field is identically zero (the flow keeps volumes) at ``p``."""
    return structure(system, p) == "flow"


def neutral_point(system: CompiledSystem, n_unstable: int, eigenvalues, p=None) -> bool:
    """Whether an equilibrium (fixed point) with these eigenvalues (multipliers) is the neutral point of a
    conservative system: no unstable direction, every eigenvalue on the imaginary axis (unit circle), not
    all of them 0 (+1): a point with a wholly degenerate linearisation stays non-hyperbolic."""
    kind = structure(system, p)
    if not kind or n_unstable:
        return False
    values = np.asarray(eigenvalues, dtype=complex)
    if kind == "flow":
        return bool(np.any(np.abs(values) > 1e-9 * max(1.0, float(np.max(np.abs(values), initial=0.0)))))
    return bool(np.any(np.abs(values - 1.0) > 1e-9))


def neutral_words(system: CompiledSystem, p=None, free: tuple[str, ...] = ()) -> tuple[str, str, str]:
    """(the point's kind, its stability, the note) for a neutral point of this conservative system;
    ("", "", "") when it is not conservative."""
    kind = structure(system, p, free)
    if kind == "flow":
        return CENTRE_FLOW, NEUTRAL_FLOW, FLOW_NOTE
    if kind:
        return ELLIPTIC_MAP, NEUTRAL_MAP, MAP_NOTE.format(det="+1" if kind == "map+1" else "-1")
    return "", "", ""


def stability_word(stable: bool | None) -> str:
    """The stability of a point in words where no conservative structure is involved."""
    return {True: "stable", False: "unstable"}.get(stable, "undecided")


__all__ = ["structure", "divergence_free", "neutral_point", "neutral_words", "stability_word", "NEUTRAL_FLOW",
           "NEUTRAL_MAP", "CENTRE_FLOW", "ELLIPTIC_MAP", "FLOW_NOTE", "MAP_NOTE"]
