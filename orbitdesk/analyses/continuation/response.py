"""The periodic response of a periodically forced flow against a parameter: continued, or stepped.

Continued: the response is a fixed point of the stroboscopic map P(u; p) = phi(K T(p); 0, u, p), T the
forcing period (which moves with the parameter when the parameter is the forcing frequency):
dP/du is the monodromy matrix, dP/dp = d phi/dp + f(K T, P) dT/dp. The fixed-point problem and its
test functions are those of maps (fold = jump point, period doubling, torus), so the unstable middle
part of a frequency-response curve and its jump frequencies come out directly.

Stepped: what a test rig shows. The parameter steps up (or down); at each value the run starts from
the previous value's final state, settles over whole forcing periods, and the response it settles on
is measured. In a band of two stable responses the up and down sweeps differ: hysteresis.
"""

from __future__ import annotations

import math

import numpy as np
import sympy as sp

from orbitdesk.analyses.cycles import CycleError, detect_forcing_period, find_cycle
from orbitdesk.engine.progress import CancelToken, Reporter
from orbitdesk.system.compiled_system import MAP, CompiledSystem, lambdify
from orbitdesk.analyses.continuation.arclength import StepSettings, continue_curve, newton_bordered, null_tangent
from orbitdesk.analyses.continuation.branches import check_interval, default_settings, to_special
from orbitdesk.analyses.continuation.functions import ContinuationError, ModelFunctions, extreme
from orbitdesk.analyses.continuation.points import FixedPointProblem, map_stability
from orbitdesk.analyses.continuation.results import ResponseCurve
from orbitdesk.analyses.newton import Singular, damped_newton

SAMPLES = 200


class ResponseProblem(FixedPointProblem):
    """Fixed points of the stroboscopic map over ``multiple`` forcing periods."""

    def __init__(self, funcs: ModelFunctions, p_vector, k: int, multiple: int = 1):
        self.multiple = multiple
        self._periods: dict = {}
        self._omega = _single_frequency(funcs)
        super().__init__(funcs, p_vector, k, self._strobe)

    def period(self, pv) -> float:
        if self._omega is not None:
            omega = abs(float(self._omega(*pv)))
            if omega == 0 or not math.isfinite(omega):
                raise ContinuationError("the forcing frequency is zero here")
            return 2 * math.pi / omega * self.multiple
        key = tuple(np.round(pv, 15))
        if key not in self._periods:
            T = detect_forcing_period(self.funcs.system, pv)
            if T is None:
                raise ContinuationError("the forcing period could not be read off the equations here "
                                        "(is the forcing frequency zero?)")
            if len(self._periods) > 2000:
                self._periods.clear()
            self._periods[key] = T * self.multiple
        return self._periods[key]

    def _strobe(self, u, pv, k):
        T = self.period(pv)
        end, M, w = self.funcs.flow(u, pv, 0.0, T, k)
        h = 1e-5 * (1.0 + abs(pv[k]))
        up, down = pv.copy(), pv.copy()
        up[k] += h
        down[k] -= h
        dT = (self.period(up) - self.period(down)) / (2 * h)
        if dT != 0:
            w = w + self.funcs.f(end, pv, T) * dT
        return end, M, w

    def describe(self, x):
        data = super().describe(x)
        pv = self.params(x)
        _, orbit = self.funcs.orbit(x[:-1], pv, 0.0, self.period(pv), SAMPLES)
        data["max"] = np.array([extreme(row, max) for row in orbit])
        data["min"] = np.array([extreme(row, min) for row in orbit])
        return data

    def quick_describe(self, x):
        return FixedPointProblem.describe(self, x)


def _single_frequency(funcs: ModelFunctions):
    """omega(p) as a generated function when time enters only through sin/cos/tan of one omega(p) t + phase."""
    t = funcs.t
    omegas = set()
    for expr in funcs.f_exprs:
        for node in sp.preorder_traversal(expr):
            if isinstance(node, (sp.sin, sp.cos, sp.tan)) and t in node.free_symbols:
                arg = sp.expand(node.args[0])
                if not arg.is_polynomial(t) or sp.degree(arg, t) != 1:
                    return None
                omegas.add(arg.coeff(t, 1))
    if len(omegas) != 1:
        return None
    omega = omegas.pop()
    if omega.free_symbols - set(funcs.p):
        return None
    return lambdify(funcs.p, omega)


def response_settings(lo, hi, max_points=400) -> StepSettings:
    """Longer steps than for equilibria: a response curve travels far in the state as the parameter moves."""
    settings = default_settings(lo, hi, max_points)
    settings.ds_max = abs(hi - lo) / 8
    return settings


def check_forced(system: CompiledSystem, p=None):
    if system.kind == MAP or system.autonomous:
        raise ValueError("the frequency response is for periodically forced flows (equations that contain "
                         f"sin or cos of {system.time_name})")
    if detect_forcing_period(system, p) is None:
        raise ValueError(f"the equations depend on {system.time_name} but not only through sin/cos of a fixed "
                         "frequency: the forcing period cannot be read off")


def _observed(system, observe):
    if observe is None:
        return system.states[0]
    if observe not in system.states:
        raise ValueError(f"unknown state '{observe}' (states: {', '.join(system.states)})")
    return observe


def response_curve(system: CompiledSystem, param: str, lo: float, hi: float, p=None, observe=None, guess=None,
                   initial=None, settings: StepSettings | None = None, cancel: CancelToken | None = None,
                   progress=None) -> ResponseCurve:
    """The continued periodic response (one forcing period, or the multiple the search finds) against ``param``."""
    system.refuse_delays("the frequency response")
    lo, hi = check_interval(system, param, lo, hi)
    observe = _observed(system, observe)
    funcs = ModelFunctions(system)
    k = funcs.param_index(param)
    pv = (system.param_values if p is None else np.asarray(p, dtype=float)).astype(float).copy()
    pv[k] = min(max(pv[k], lo), hi)
    check_forced(system, pv)
    report = Reporter(progress, cancel)
    try:
        cycle = find_cycle(system, pv, guess=guess, initial=initial, cancel=cancel)
    except CycleError as err:
        raise ContinuationError(f"no periodic response to start from at {param} = {pv[k]:.6g}: {err}") from None
    problem = ResponseProblem(funcs, pv, k, cycle.forcing_multiple or 1)
    x0 = np.append(cycle.vector, pv[k])
    fixed = np.zeros(len(x0))
    fixed[-1] = 1.0
    settings = settings or response_settings(lo, hi)
    x0c, _ = newton_bordered(problem, x0, fixed, settings)
    if x0c is None:
        raise ContinuationError("the periodic response found could not be corrected")
    curve = continue_curve(problem, x0c, null_tangent(problem, x0c), lo, hi, settings, both=True, cancel=cancel,
                           progress=report.part(0.05, 0.95))
    xs = np.array(curve.xs)
    i = system.states.index(observe)
    amplitudes = np.array([(d["max"][i] - d["min"][i]) / 2 for d in curve.data])
    special = [to_special(system, s) for s in curve.special]
    for s in special:  # the response amplitude at the special point itself
        data = problem.describe(s.internal["x"])
        s.amplitude = float((data["max"][i] - data["min"][i]) / 2)
    report(1.0)
    return ResponseCurve(param, observe, xs[:, -1], amplitudes, [d["stable"] for d in curve.data],
                         list(system.states), xs[:, :-1].T, special, list(curve.reasons))


def stepped_sweep(system: CompiledSystem, param: str, lo: float, hi: float, direction: str = "up",
                  count: int = 60, p=None, observe=None, initial=None, max_periods: int = 400,
                  cancel: CancelToken | None = None, progress=None) -> ResponseCurve:
    """Step the parameter up or down; each value starts from the previous value's final state."""
    system.refuse_delays("the stepped sweep")
    lo, hi = check_interval(system, param, lo, hi)
    if direction not in ("up", "down"):
        raise ValueError("a stepped sweep goes up or down")
    if count < 2:
        raise ValueError("a stepped sweep needs at least 2 values")
    observe = _observed(system, observe)
    funcs = ModelFunctions(system)
    k = funcs.param_index(param)
    pv = (system.param_values if p is None else np.asarray(p, dtype=float)).astype(float).copy()
    check_forced(system, pv)
    report = Reporter(progress, cancel)
    values = np.linspace(lo, hi, count)
    if direction == "down":
        values = values[::-1]
    u = (system.initial if initial is None else np.asarray(initial, dtype=float)).astype(float)
    i_obs = system.states.index(observe)
    points, amplitudes, stable = [], [], []
    for j, value in enumerate(values):
        report(j / count)
        pv[k] = value
        problem = ResponseProblem(funcs, pv, k, 1)
        u = _settle(funcs, problem, u, pv, max_periods, cancel)
        T = problem.period(pv)
        _, orbit = funcs.orbit(u, pv, 0.0, T, SAMPLES)
        amplitudes.append((extreme(orbit[i_obs], max) - extreme(orbit[i_obs], min)) / 2)
        points.append(u.copy())
        M = funcs.flow(u, pv, 0.0, T)[1]
        stable.append(map_stability(np.linalg.eigvals(M)))
    report(1.0)
    return ResponseCurve(param, observe, values, np.array(amplitudes), stable, list(system.states),
                         np.array(points).T, stepped=direction)


def _settle(funcs, problem, u, pv, max_periods, cancel, tol=1e-9):
    """Run whole forcing periods from u until the stroboscopic point stops moving (Newton to finish)."""
    T = problem.period(pv)
    for period in range(max_periods):
        if cancel is not None and period % 10 == 0:
            cancel.check()
        try:
            nxt = funcs.end(u, pv, 0.0, T)
        except ContinuationError:
            raise ContinuationError(f"the run blew up at {funcs.system.parameters[problem.k]} = {pv[problem.k]:.6g}") \
                from None
        gap = float(np.linalg.norm(nxt - u))
        u = nxt
        scale = 1.0 + float(np.linalg.norm(u))
        if gap < tol * scale:
            return u
        if period >= 20 and period % 10 == 0 and gap < 1e-2 * scale:
            polished = _newton_strobe(problem, u, pv)
            if polished is not None:
                return polished
    return u


def _newton_strobe(problem, u, pv, iterations=8):
    """Newton on P(u) = u (plain steps, analyses/newton.py), accepted only when it converges to a
    stable response (the one the run approaches)."""
    maps = {}

    def residual(v):
        P, maps["M"], _ = problem.mapping(v, pv, problem.k)
        return P - v

    def small(state):
        return state.steps > 0 and state.step_norm < 1e-11 * (1 + np.linalg.norm(state.x))

    try:
        state = damped_newton(residual, lambda v: maps["M"] - np.eye(len(u)), np.array(u, dtype=float),
                              done=lambda state: small(state) or state.steps >= iterations,
                              max_iter=iterations + 1, min_damping=1.0, monotone=False, rejects=())
    except Singular:
        return None
    if small(state) and map_stability(np.linalg.eigvals(maps["M"])) \
            and np.linalg.norm(state.x - u) < 0.1 * (1 + np.linalg.norm(u)):
        return state.x
    return None
