"""Conservative structure, recognised once and worded the same by every analysis.

A flow whose divergence (the trace of its Jacobian) is identically zero (at the parameter values in use)
keeps volumes, as every
Hamiltonian system does; so does, in a weighted sense, a flow with a Jacobi multiplier m: m f is
divergence-free (the flow keeps the volume m dx), which in the plane means a conserved quantity
(Lotka-Volterra's predator and prey: m = 1/(x y)). The multipliers tried are products of powers of the
states, m = prod x_i^k_i: div(m f) / m = div f + sum k_i f_i / x_i is linear in the k_i, which are
solved for at sample points and then checked symbolically. Where m is finite and nonzero (no state with
k_i != 0 at zero) the Jacobian of m f at an equilibrium is m J, so J is trace-free there, and the
product of a cycle's Floquet multipliers is exp(integral of div f) = exp(-sum k_i [ln |x_i|] over a
period) = 1, exactly as for divergence-free flows.
A map whose Jacobian determinant is identically +1 or -1 keeps areas (the
standard map, the Hénon map at b = -1 or 1). Their eigenvalues cannot all lie on one side: an
equilibrium with no unstable direction has every eigenvalue on the imaginary axis (a fixed point:
every multiplier on the unit circle), is surrounded by closed orbits or invariant curves and is
neither attracting nor repelling. That is normal for such systems, not a bifurcation: equilibria,
cycles and continuation call it neutral in the same words (``NEUTRAL_FLOW`` / ``NEUTRAL_MAP``).
"""

from __future__ import annotations

import numpy as np
import sympy as sp

from fractions import Fraction

from orbitdesk.system.compiled_system import MAP, CompiledSystem

NEUTRAL_FLOW = "neutral (conservative flow)"
NEUTRAL_MAP = "neutral (area-preserving map)"
CENTRE_FLOW = "centre (conservative flow)"
ELLIPTIC_MAP = "elliptic fixed point (area-preserving map)"
FLOW_REASON = "the flow is divergence-free (conservative)"
MULTIPLIER_REASON = "the flow is conservative ({m} times its vector field is divergence-free, a Jacobi multiplier{conserved})"
FLOW_NOTE = (FLOW_REASON + ": volumes are kept, so an equilibrium with no unstable "
             "direction has every eigenvalue on the imaginary axis and is neutral - neither attracting nor "
             "repelling, surrounded by closed orbits - and nothing bifurcates there")
MULTIPLIER_NOTE = ("{reason}, so where {m} is finite and nonzero an equilibrium with no unstable direction has "
                   "every eigenvalue on the imaginary axis and is neutral - neither attracting nor repelling, "
                   "surrounded by closed orbits - and nothing bifurcates there")
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
    """"flow" (divergence-free, or divergence-free once multiplied by a Jacobi multiplier: ``multiplier``),
    "map+1" / "map-1" (area-preserving, with the sign of the determinant) or ""
    at the parameter values ``p`` (default the model's), the parameters named in ``free`` left as symbols
    (a continuation's parameter: the structure must hold along the whole branch). Worked out once per
    system and values (sympy simplify of the trace or the determinant)."""
    return _found(system, p, free)[0]


def multiplier(system: CompiledSystem, p=None, free: tuple[str, ...] = ()) -> tuple:
    """The exponents k_i of the Jacobi multiplier prod x_i^k_i of a conservative flow (all zero when the flow
    is divergence-free itself); () when the flow has none of that form (or is a map)."""
    return _found(system, p, free)[1]


def _found(system, p, free):
    values = system.param_values if p is None else p
    key = (tuple(float(v) for v in np.ravel(values)), tuple(free))
    cache = system.__dict__.setdefault("_conservative_structure", {})
    if key in cache:
        return cache[key]
    found = ("", ())
    if not (system.delays or system.stochastic or system.n_states > 12):
        swap = {sym: sp.Float(v) for name, sym, v in zip(system.parameters, system.param_symbols, key[0])
                if name not in free}
        try:
            if system.kind == MAP:
                det = system.jacobian.det(method="berkowitz").subs(swap)
                kind = "map+1" if _simplified_zero(det - 1) else "map-1" if _simplified_zero(det + 1) else ""
                found = (kind, ())
            else:
                trace = system.jacobian.trace().subs(swap)
                if _simplified_zero(trace):
                    found = ("flow", (0,) * system.n_states)
                else:
                    exponents = _monomial_multiplier(system, trace, swap, key[0])
                    found = ("flow", exponents) if exponents else ("", ())
        except (TypeError, ValueError, AttributeError):
            found = ("", ())
    cache[key] = found
    return found


def _monomial_multiplier(system, trace, swap, p_values) -> tuple:
    """Exponents k (small fractions, not all zero) with div f + sum k_i f_i / x_i identically zero, or ()."""
    n = system.n_states
    if n > 6:
        return ()
    terms = [sp.expand(f.subs(swap) / x) for f, x in zip(system.f, system.state_symbols)]
    # the k_i by least squares at sample points (states away from zero), then checked symbolically
    rng = np.random.default_rng(5)
    fixed = {sym: sp.Float(v) for sym, v in zip(system.param_symbols, p_values)}
    rows, rhs = [], []
    for _ in range(3 * n + 4):
        point = {x: sp.Float(float(v)) for x, v in zip(system.state_symbols, rng.uniform(0.3, 2.7, n))}
        point.update(fixed)
        point[system.t_symbol] = sp.Float(float(rng.uniform(0.0, 7.0)))
        try:
            row = [complex(g.xreplace(point).evalf()) for g in terms]
            value = complex(trace.xreplace(point).evalf())
        except (TypeError, ValueError, ZeroDivisionError):
            return ()
        if not (np.all(np.isfinite(row)) and np.isfinite(value)) or any(abs(v.imag) > 0 for v in row + [value]):
            return ()
        rows.append([v.real for v in row])
        rhs.append(-value.real)
    A, b = np.array(rows), np.array(rhs)
    k, *_ = np.linalg.lstsq(A, b, rcond=None)
    if not np.all(np.isfinite(k)) or np.linalg.norm(A @ k - b) > 1e-8 * max(1.0, np.linalg.norm(b)):
        return ()
    fractions = [Fraction(float(v)).limit_denominator(12) for v in k]
    if not any(fractions) or any(abs(float(q) - v) > 1e-6 for q, v in zip(fractions, k)):
        return ()
    rational = [sp.Rational(q.numerator, q.denominator) for q in fractions]
    if not _simplified_zero(trace + sum(r * g for r, g in zip(rational, terms))):
        return ()
    return tuple(fractions)


def multiplier_text(system: CompiledSystem, exponents) -> str:
    """The multiplier prod x_i^k_i in the model's names: 1/(x*y), x^2/y."""
    def power(name, k):
        k = abs(k)
        return name if k == 1 else f"{name}^{k}" if k.denominator == 1 else f"{name}^({k})"

    up = [power(s, k) for s, k in zip(system.states, exponents) if k > 0]
    down = [power(s, k) for s, k in zip(system.states, exponents) if k < 0]
    top = "*".join(up) or "1"
    if not down:
        return top
    return f"{top}/{down[0]}" if len(down) == 1 else f"{top}/({'*'.join(down)})"


def holds_at(system: CompiledSystem, points, p=None, free: tuple[str, ...] = ()) -> bool:
    """Whether the conservative structure holds at every one of ``points`` (states in rows, one point a
    column): a flow's Jacobi multiplier finite and nonzero there (no state with k_i != 0 at or through
    zero: the orbit keeps each such state's sign). Always true for divergence-free flows and maps."""
    exponents = multiplier(system, p, free)
    values = np.asarray(points, dtype=float).reshape(system.n_states, -1)
    for k, row in zip(exponents, values):
        if k and not (np.all(row > 0) or np.all(row < 0)):
            return False
    return True


def divergence_free(system: CompiledSystem, p=None) -> bool:
    """Whether the divergence of the vector field is identically zero (the flow keeps volumes) at ``p``."""
    return structure(system, p) == "flow" and not any(multiplier(system, p))


def neutral_point(system: CompiledSystem, n_unstable: int, eigenvalues, p=None, point=None) -> bool:
    """Whether an equilibrium (fixed point) with these eigenvalues (multipliers) is the neutral point of a
    conservative system: no unstable direction, every eigenvalue on the imaginary axis (unit circle), not
    all of them 0 (+1): a point with a wholly degenerate linearisation stays non-hyperbolic. ``point``:
    the equilibrium, where a Jacobi multiplier must be finite and nonzero."""
    kind = structure(system, p)
    if not kind or n_unstable or (point is not None and not holds_at(system, point, p)):
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
        return CENTRE_FLOW, NEUTRAL_FLOW, flow_note(system, p, free)
    if kind:
        return ELLIPTIC_MAP, NEUTRAL_MAP, MAP_NOTE.format(det="+1" if kind == "map+1" else "-1")
    return "", "", ""


def flow_reason(system: CompiledSystem, p=None, free: tuple[str, ...] = ()) -> str:
    """What makes this flow conservative, in words: divergence-free, or its Jacobi multiplier."""
    exponents = multiplier(system, p, free)
    if not any(exponents):
        return FLOW_REASON
    return MULTIPLIER_REASON.format(m=multiplier_text(system, exponents),
                                    conserved="; in the plane that means a quantity is kept along every orbit"
                                    if system.n_states == 2 else "")


def flow_note(system: CompiledSystem, p=None, free: tuple[str, ...] = ()) -> str:
    """Why a conservative flow's neutral points are normal for it: divergence-free, or by its multiplier."""
    exponents = multiplier(system, p, free)
    if not any(exponents):
        return FLOW_NOTE
    return MULTIPLIER_NOTE.format(reason=flow_reason(system, p, free), m=multiplier_text(system, exponents))


def stability_word(stable: bool | None) -> str:
    """The stability of a point in words where no conservative structure is involved."""
    return {True: "stable", False: "unstable"}.get(stable, "undecided")


__all__ = ["structure", "multiplier", "multiplier_text", "holds_at", "flow_note", "flow_reason", "divergence_free", "neutral_point", "neutral_words", "stability_word", "NEUTRAL_FLOW",
           "NEUTRAL_MAP", "CENTRE_FLOW", "ELLIPTIC_MAP", "FLOW_NOTE", "MAP_NOTE", "FLOW_REASON"]
