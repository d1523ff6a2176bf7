"""Time scales read from the system, and the choice of method, for analyses that integrate for a while.

Cycles, sections and spectra need a window long enough for the flow to settle and to come round.
A fixed number of time units is wrong for a system whose period is 1000; the window is read from the
system instead: the eigenvalues of the Jacobian at the equilibrium nearest the start (found by
Newton from it; the Jacobian at the start itself when none is near), the forcing period of a forced
flow, and the return times an analysis observes. The method: an explicit run that stability holds
back on a long window is handed to the stiff method (``choose_method``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

import numpy as np
import sympy as sp

from orbitdesk.analyses.newton import damped_newton
from orbitdesk.engine.methods import DEFAULT, method as method_named
from orbitdesk.engine.runs import RunSettings, simulate
from orbitdesk.engine.stiff import STIFF_STEPS, looks_stiff, spectral_radius
from orbitdesk.system.compiled_system import CompiledSystem

MIN_WINDOW = 200.0  # the shortest settling window of any analysis (time units)
MAX_WINDOW = 1e7


@dataclass
class TimeScale:
    slow: float  # the slowest time scale (a period 2 pi/|Im lambda| or a relaxation time 1/|Re lambda|)
    fast: float  # the fastest (1/|lambda| largest)
    source: str  # where it was read, in words

    def window(self, periods: float = 3.0) -> float:
        """A settling window: ``periods`` slow time scales, at least MIN_WINDOW."""
        return float(min(max(MIN_WINDOW, periods * self.slow), MAX_WINDOW))


def detect_forcing_period(system: CompiledSystem, p=None) -> float | None:
    """The common period of sin/cos/tan(omega*t + phase) terms when time enters only through them."""
    if system.autonomous:
        return None
    p = system.param_values if p is None else np.asarray(p, dtype=float)
    t = system.t_symbol
    subs = {s: sp.Float(float(v)) for s, v in zip(system.param_symbols, p)}
    periods = []
    for expr in system.f:
        expr = expr.xreplace(subs)
        replacements = {}
        for node in sp.preorder_traversal(expr):
            if isinstance(node, (sp.sin, sp.cos, sp.tan)) and t in node.free_symbols:
                arg = sp.expand(node.args[0])
                if not arg.is_polynomial(t) or sp.degree(arg, t) != 1:
                    return None
                omega = arg.coeff(t, 1)
                if omega.free_symbols or not omega.is_number:
                    return None
                omega = abs(float(omega))
                if omega == 0:
                    return None
                periods.append(2 * math.pi / omega)
                replacements[node] = sp.Dummy()
        if t in expr.xreplace(replacements).free_symbols:
            return None
    if not periods:
        return None
    common = periods[0]
    for other in periods[1:]:
        ratio = Fraction(common / other).limit_denominator(64)
        if abs(float(ratio) - common / other) > 1e-9 * common / other:
            return None  # incommensurate frequencies: quasi-periodic forcing
        common = common * ratio.denominator
    return common


def time_scale(system: CompiledSystem, p, u) -> TimeScale:
    """The slow and fast time scales near ``u``: the eigenvalues at the equilibrium Newton reaches from
    ``u`` within a few steps (it must lie within the size of ``u`` plus one), else the Jacobian at ``u``."""
    p = np.asarray(p, dtype=float)
    u = np.asarray(u, dtype=float)
    point, source = _nearest_equilibrium(system, p, u)
    try:
        values = np.linalg.eigvals(system.jac(0.0, point, p))
    except (ArithmeticError, np.linalg.LinAlgError, ValueError):
        return TimeScale(1.0, 1.0, "no Jacobian at the start: one time unit assumed")
    times = []
    for lam in values:
        if not np.isfinite(lam):
            continue
        if abs(lam.imag) > 1e-12 * max(1.0, abs(lam)):
            times.append(2 * math.pi / abs(lam.imag))
        if abs(lam.real) > 1e-12 * max(1.0, float(np.max(np.abs(values)))):
            times.append(1.0 / abs(lam.real))
    forcing = detect_forcing_period(system, p)
    if not times and forcing is None:
        return TimeScale(1.0, 1.0, f"every eigenvalue at {source} is zero: one time unit assumed")
    if forcing is not None and (not times or forcing >= max(times)):
        # a forced flow comes round with its forcing: the period bounds the window from below
        return TimeScale(forcing, min(times) if times else forcing, f"the forcing period {forcing:.6g}")
    slow, fast = max(times), min(times)
    return TimeScale(slow, fast, f"the eigenvalues at {source}")


def _nearest_equilibrium(system, p, u):
    """Newton's plain iteration (analyses/newton.py) from u, at most 30 steps."""
    def settled(state):
        return state.norm <= 1e-10 * max(1.0, float(np.linalg.norm(state.x)))

    try:
        state = damped_newton(lambda x: system.rhs(0.0, x, p), lambda x: system.jac(0.0, x, p), u, done=settled,
                              max_iter=30, min_damping=1.0, monotone=False, rejects=(ArithmeticError, ValueError))
    except (ArithmeticError, np.linalg.LinAlgError, ValueError):  # Singular is an ArithmeticError
        return u, "the start (no equilibrium found near it)"
    reach = 1.0 + float(np.max(np.abs(u), initial=0.0))
    if settled(state) and float(np.max(np.abs(state.x - u), initial=0.0)) <= 10 * reach:
        where = ", ".join(f"{s} = {v:.4g}" for s, v in zip(system.states, state.x))
        return state.x, f"the equilibrium {where}"
    return u, "the start (no equilibrium found near it)"


@dataclass
class MethodChoice:
    method: str
    note: str = ""  # why the stiff method was picked ("" when the given or default method stands)
    run: object = None  # the probe run when it covered the whole window with the method chosen (reusable)


def choose_method(system: CompiledSystem, p, u0, window: float, method: str | None = None,
                  t0: float = 0.0, cancel=None) -> MethodChoice:
    """The method for an analysis integrating about ``window`` time units from ``u0``.

    A method given stands. Otherwise the default (explicit) method runs a probe of at most 2000
    steps' worth at the fastest rate near the start; if stability held its step back
    (engine/stiff.py ``looks_stiff``) and the whole window would take more than STIFF_STEPS steps, the
    stiff method is picked and the note says why.
    """
    if method is not None:
        method_named(method)  # ValueError naming the choices
        return MethodChoice(method)
    p = np.asarray(p, dtype=float)
    u0 = np.asarray(u0, dtype=float)
    rate = spectral_radius(system, p, u0[:, None])
    probe = float(window) if rate <= 0 else min(float(window), 2000.0 / rate)
    run = simulate(system, RunSettings(method=DEFAULT, t_start=t0, t_end=t0 + probe, samples=200), u0, p,
                   cancel=cancel)
    if run.status == "cancelled" or run.steps_taken == 0:
        return MethodChoice(DEFAULT)
    covered = max(abs(float(run.time[-1]) - t0), 1e-300)
    needed = run.steps_taken * float(window) / covered
    if run.status == "step_failed" or (needed > STIFF_STEPS and looks_stiff(system, p, run, min_steps=0)):
        return MethodChoice("stiff", f"the system is stiff (the default method's step is held to "
                                     f"{covered / max(run.steps_taken, 1):.3g} by stability near the start, "
                                     f"about {needed:.3g} steps for {window:.4g} time units): the stiff "
                                     "method is used")
    return MethodChoice(DEFAULT, run=run if run.ok and probe >= float(window) else None)


__all__ = ["TimeScale", "MethodChoice", "time_scale", "choose_method", "detect_forcing_period", "MIN_WINDOW"]
