"""Periodic orbits: limit cycles of flows by shooting, cycles of maps by Newton on f^k(u) - u.

Autonomous flows: Newton on the unknowns (u0, T) with phi_T(u0) = u0 and the phase condition that
u0 lies on a hyperplane section through the guess, normal to the flow there. Periodically forced
flows: Newton on the stroboscopic map P^k(u) = u, P advancing one forcing period, from every pair of
forcing multiple and start together. Both run on engine/shooting.py (all starts of an iteration in one
call of the member loop, a status per start). The monodromy matrix comes from the variational
equations dPhi/dt = J(t, u) Phi integrated alongside; its eigenvalues are the Floquet multipliers.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.stats import qmc

from orbitdesk.analyses.conservative import NEUTRAL_FLOW, flow_reason, holds_at, structure
from orbitdesk.engine.runs import Event, RunSettings, simulate
from orbitdesk.analyses.equilibria import NONSMOOTH_WARNING
from orbitdesk.analyses.newton import newton_starts
from orbitdesk.engine import compiled, drivers
from orbitdesk.engine.model_events import saltation_refusal
from orbitdesk.engine.methods import DEFAULT as DEFAULT_METHOD
from orbitdesk.engine.methods import method as method_named
from orbitdesk.engine.shooting import flow_ends, shooting_starts
from orbitdesk.engine.status import C_CANCELLED, C_SINGULAR, C_UNDEFINED
from orbitdesk.engine.stiff import model_functions, solve_at
from orbitdesk.analyses.time_scales import MIN_WINDOW, choose_method, detect_forcing_period, time_scale
from orbitdesk.engine.status import word as status_word
from orbitdesk.engine.progress import CancelToken, Cancelled, Reporter
from orbitdesk.system.compiled_system import MAP, CompiledSystem
from orbitdesk.engine import limits

MAX_FORCING_MULTIPLE = 8


class CycleError(ValueError):
    """No periodic orbit was found; the message says why in plain words."""


@dataclass
class Cycle:
    period: float
    state: dict[str, float]  # a point on the orbit
    vector: np.ndarray
    time: np.ndarray  # (K,) from 0 to period
    orbit: np.ndarray  # (n, K) one period
    amplitude: dict[str, float]  # max - min of each state over the orbit
    multipliers: np.ndarray  # Floquet multipliers (complex), sorted by modulus, descending
    trivial_index: int | None  # the multiplier along the flow (autonomous flows), else None
    stable: bool
    monodromy: np.ndarray
    forcing_period: float | None = None
    forcing_multiple: int | None = None
    iterations: int = 0
    residual: float = 0.0
    warnings: list[str] = field(default_factory=list)
    resolution: float = 0.0  # multipliers smaller than this are zero to within the integrator's accuracy
    stability: str = ""  # in words: stable, unstable, or neutral for a divergence-free (conservative) flow

    @property
    def nontrivial_multipliers(self) -> np.ndarray:
        if self.trivial_index is None:
            return self.multipliers
        return np.delete(self.multipliers, self.trivial_index)

    def to_dict(self) -> dict:
        data = {"period": self.period, "state": dict(self.state), "amplitude": dict(self.amplitude),
                "multipliers": [{"re": float(m.real), "im": float(m.imag),
                                 "below_resolution": bool(k != self.trivial_index and abs(m) < self.resolution)}
                                for k, m in enumerate(self.multipliers)],
                "resolution": self.resolution, "stable": self.stable, "stability": self.stability or
                ("stable" if self.stable else "unstable"), "warnings": list(self.warnings)}
        if self.forcing_period is not None:
            data["forcing_period"] = self.forcing_period
            data["forcing_multiple"] = self.forcing_multiple
        return data


@dataclass
class MapCycle:
    period: int
    points: np.ndarray  # (n, k): the cycle's points in orbit order
    states: list[dict[str, float]]
    multipliers: np.ndarray  # eigenvalues of the Jacobian of f^k along the cycle
    stable: bool
    warnings: list[str] = field(default_factory=list)

    def to_dict(self) -> dict:
        return {"period": self.period, "points": [dict(s) for s in self.states],
                "multipliers": [{"re": float(m.real), "im": float(m.imag)} for m in self.multipliers],
                "stable": self.stable, "warnings": list(self.warnings)}


# ---------------------------------------------------------------- forcing period
# ---------------------------------------------------------------- variational equations
class _Flow:
    """phi_T(u0) and its monodromy matrix: the state with n tangent vectors, in the compiled loop
    (Dormand-Prince 8(5,3), the model's kernel with its sparse Jacobian) or, for a stiff method, by
    scipy's implicit stepper with its interpolant checked (engine/stiff.py)."""

    def __init__(self, system: CompiledSystem, p, rtol, atol, cancel, method: str = DEFAULT_METHOD):
        self.system, self.n = system, system.n_states
        self.p = np.asarray(p, dtype=float)
        self.rtol, self.atol = rtol, atol
        self.report = Reporter(None, cancel)
        self.info = method_named(method)
        if self.info.stiff:  # an implicit method's error control is costly below 1e-9
            self.rtol, self.atol = max(rtol, 1e-9), max(atol, 1e-11)
        self.engine = None if self.info.stiff else compiled.engine_for_work(system, 1e6)
        self.loops = self.engine or compiled.engine_for(system)  # the Newton systems' solves (shooting.py)
        self.scale = None  # the system's time scales (time_scales.TimeScale), set by find_cycle
        self.probe = None  # the run that chose the method, when it covered the transient

    def rhs(self, t, u) -> np.ndarray:
        try:
            return self.system.rhs(t, u, self.p)
        except ArithmeticError as err:  # UndefinedValue
            raise CycleError(str(err)) from None

    def _run(self, z0, t0, t1, grid, which) -> np.ndarray:
        if self.info.stiff:
            return self._run_stiff(z0, t0, t1, grid, which)
        with np.errstate(all="ignore"):
            out = drivers.flow_run(self.engine, self.info.name if self.info.family == "explicit_rk" else "dop853",
                                   t0, t1, z0, self.p, self.rtol, self.atol, grid=grid, dt=1e-3, which=which,
                                   report=self.report)
        if out.code == C_CANCELLED:
            raise Cancelled("cancelled")
        if out.code != 0 or out.time.size != len(grid):
            where = f"{self.system.time_name} = {out.t:.6g}"
            raise CycleError(f"the integration over one period failed ({status_word(out.code)} near {where})")
        return out.states

    def _run_stiff(self, z0, t0, t1, grid, which) -> np.ndarray:
        fun, jac = model_functions(self.system, self.p, which)

        def report(_fraction):
            self.report(0.0)  # cancel polling

        try:
            with np.errstate(all="ignore"):
                states, _, failure = solve_at(self.info.scipy_name, fun, jac, t0, z0, t1, self.rtol, self.atol, grid,
                                              report)
        except ArithmeticError as err:  # UndefinedValue
            raise CycleError(str(err)) from None
        if failure is not None or states.shape[1] != len(grid):
            raise CycleError(f"the integration over one period failed ({failure or 'stopped early'})")
        return states

    def ends(self, U, T, tangents):
        """phi_T(u) of every row of U (m x n), each over its own T[j] from 0, with (``tangents``) the
        monodromy matrices: (ends, M or None, ok), engine/shooting.flow_ends's form. The explicit
        methods run every row in one call of the member loop; a stiff method runs them one by one."""
        if not self.info.stiff:
            name = self.info.name if self.info.family == "explicit_rk" else "dop853"
            return flow_ends(self.engine, name, U, T, self.p, self.rtol, self.atol, tangents, report=self.report)
        U = np.atleast_2d(np.asarray(U, dtype=float))
        m, n = U.shape
        rows = np.full((m, n * (n + 1) if tangents else n), np.nan)
        for j in range(m):
            z0 = np.concatenate([U[j], np.eye(n).ravel()]) if tangents else U[j]
            try:
                rows[j] = self._run_stiff(z0, 0.0, float(T[j]), [float(T[j])], n if tangents else 0)[:, -1]
            except CycleError:
                pass
        ok = np.all(np.isfinite(rows), axis=1)
        return rows[:, :n], rows[:, n:].reshape(m, n, n) if tangents else None, ok

    def rates(self, T, U) -> np.ndarray:
        """f at each row of U (times T)."""
        return np.array([self.rhs(float(t), u) for t, u in zip(T, U)]).reshape(len(U), self.n)

    def monodromy(self, u0, T):
        """phi_T(u0) from time 0 and its monodromy matrix."""
        ends, M, ok = self.ends(np.asarray(u0, dtype=float)[None, :], [T], True)
        if not ok[0]:
            raise CycleError("the integration over one period failed (not a number)")
        return ends[0], M[0]

    def sample(self, u0, t0, T, samples):
        times = np.linspace(t0, t0 + T, samples)
        tolerances = self.rtol, self.atol
        if self.info.stiff:  # the orbit drawn: samples held to 1e-6 (the monodromy keeps the tight tolerance)
            self.rtol, self.atol = max(self.rtol, 1e-6), max(self.atol, 1e-8)
        try:
            states = self._run(np.asarray(u0, dtype=float), t0, t0 + T, times[1:], 0)
        finally:
            self.rtol, self.atol = tolerances
        return times - t0, np.concatenate([np.asarray(u0, float)[:, None], states], axis=1)


# ---------------------------------------------------------------- flows
def find_cycle(system: CompiledSystem, p=None, guess=None, period_guess: float | None = None,
               section=None, forcing_period: float | None = None, forcing_multiple: int | None = None,
               transient: float | None = None, rtol: float = 1e-10, atol: float = 1e-12,
               max_iter: int = 40, samples: int = 2001, initial=None, cancel: CancelToken | None = None,
               progress=None, method: str | None = None) -> Cycle:
    """A periodic orbit of a flow near ``guess`` (state dict or vector; default: the end of a transient run).

    Autonomous flows: ``period_guess`` (default: the first return to the section) and ``section``
    ((normal, point) of a hyperplane; default through the guess, normal to the flow). Forced flows:
    ``forcing_period`` (default: detected from sin/cos(omega t) terms) and optionally
    ``forcing_multiple`` k (default: tried from the transient's stroboscopic points). Raises
    CycleError when no orbit is found, ValueError for bad input. ``initial`` is where the transient
    run starts (default: the model's initial values). ``method``: an adaptive method of
    engine/methods.py; default: the default method, or the stiff one when a probe run shows the
    system stiff (time_scales.choose_method; the cycle's warnings say so). The transient defaults to
    three slow time scales of the system (time_scales.time_scale), at least 200.
    """
    system.refuse_delays("the limit-cycle search")
    if system.kind == MAP:
        raise ValueError("this is a map: look for its cycles with a period K (find_map_cycle)")
    if system.model.events:
        raise ValueError(saltation_refusal(system, "Limit cycles (by shooting, with Floquet multipliers)")
                         + "; a run shows a periodic orbit's events, and a Poincaré section its period")
    p = system.param_values.astype(float) if p is None else np.asarray(p, dtype=float)
    if method is not None and not method_named(method).adaptive:
        raise ValueError(f"cycles need an adaptive method; {method} has a fixed step")
    report = Reporter(progress, cancel)
    u_guess = _guess_vector(system, guess)
    start = system.initial if initial is None else np.asarray(initial, dtype=float)
    warnings = []
    scale = time_scale(system, p, start if u_guess is None else u_guess)
    window = scale.window() if transient is None else max(float(transient), 1.0)
    if forcing_period is not None:
        window = max(window, 50 * float(forcing_period))
    choice = choose_method(system, p, start if u_guess is None else u_guess, window, method, cancel=cancel)
    if choice.note:
        warnings.append(choice.note)
    flow = _Flow(system, p, rtol, atol, cancel, choice.method)
    flow.scale = scale
    flow.probe = choice.run  # the default method's run over the whole window, when it was made
    if system.nonsmooth:
        warnings.append(NONSMOOTH_WARNING.format(names=", ".join(system.nonsmooth)))
    if system.autonomous and forcing_period is not None:
        raise ValueError(f"the equations do not depend on {system.time_name}: there is no forcing period")
    if forcing_period is not None or not system.autonomous_at(p):  # a forcing switched off counts as absent
        if forcing_period is None:
            forcing_period = detect_forcing_period(system, p)
            if forcing_period is None:
                raise ValueError(f"the equations depend on {system.time_name} but not only through "
                                 "sin/cos of a fixed frequency: give the forcing period")
        forcing_period = float(forcing_period)
        if not (math.isfinite(forcing_period) and forcing_period > 0):
            raise ValueError("the forcing period must be a positive number")
        cycle = _forced_cycle(system, p, flow, u_guess, start, forcing_period, forcing_multiple, transient,
                              max_iter, samples, report, cancel)
    else:
        if period_guess is not None and not (math.isfinite(period_guess) and period_guess > 0):
            raise ValueError("the period guess must be a positive number")
        cycle = _autonomous_cycle(system, p, flow, u_guess, start, period_guess, section, transient, max_iter,
                                  samples, report, cancel)
    cycle.warnings = warnings + cycle.warnings
    report(1.0)
    return cycle


def _guess_vector(system, guess):
    if guess is None:
        return None
    if isinstance(guess, dict):
        return system.initial_vector(guess)
    u = np.asarray(guess, dtype=float).reshape(-1)
    if u.size != system.n_states:
        raise ValueError(f"the guess needs {system.n_states} values ({', '.join(system.states)})")
    return u


def _run(system, p, u0, t_end, samples, cancel, report, events=(), method=DEFAULT_METHOD, rtol=1e-8):
    settings = RunSettings(method=method, t_start=0.0, t_end=t_end, samples=samples, rtol=rtol, atol=1e-2 * rtol)
    run = simulate(system, settings, u0, p, events=list(events), cancel=cancel, progress=report)
    if run.status == "cancelled":
        raise Cancelled("cancelled")
    if not run.ok:
        raise CycleError(f"the run towards the cycle stopped: {run.message}")
    return run


def _autonomous_cycle(system, p, flow, u_guess, start, period_guess, section, transient, max_iter, samples,
                      report, cancel) -> Cycle:
    n = system.n_states
    if transient is None:
        transient = flow.scale.window()
        why = (f"{transient:.4g} = three times the slowest time scale {flow.scale.slow:.4g} of {flow.scale.source}"
               if transient > MIN_WINDOW else f"{transient:.4g}, the shortest window")
    else:
        transient, why = float(transient), "the transient given"
    if period_guess is not None and 30 * period_guess > transient:
        transient, why = 30 * period_guess, "30 times the period guess"
    if u_guess is None:
        if flow.probe is not None and flow.probe.time[-1] == transient:
            run = flow.probe  # the probe that chose the method already ran this transient
        else:
            run = _run(system, p, start, transient, 2, cancel, report.part(0.0, 0.3), method=flow.info.name)
        u_ref, where = run.final_state.copy(), "the run from the initial values settles"
    else:
        u_ref, where = u_guess, "the guess is"
    f_ref = flow.rhs(0.0, u_ref)
    if np.linalg.norm(f_ref) <= 1e-9 * max(1.0, float(np.linalg.norm(u_ref))):
        raise CycleError(f"{where} at an equilibrium (the vector field vanishes there): no periodic orbit "
                         "found; give a guess on the cycle")
    if section is None:
        normal, point = f_ref / np.linalg.norm(f_ref), u_ref.copy()
    else:
        normal, point = (np.asarray(v, dtype=float).reshape(n) for v in section)
        normal = normal / np.linalg.norm(normal)

    T = period_guess
    if T is None:
        T = _return_time(system, p, u_ref, normal, point, transient, why, flow.info.name, cancel,
                         report.part(0.3, 0.1))

    newton = report.part(0.4, 0.5)

    def goal(_idx, X, _G):
        return np.array([1e-10 * _travel(flow, x[:n], x[n]) + _resolution(flow, x[:n]) for x in X])

    # the shooting Newton (engine/shooting.py; the monodromy from the run with the n tangent vectors)
    ends = shooting_starts(flow.ends, u_ref[None, :], [T], goal=goal, sections=(normal[None, :], point[None, :]),
                           rhs=flow.rates, max_iter=max_iter, report=newton, engine=flow.loops)
    if ends.codes[0] == C_SINGULAR:
        raise CycleError("the shooting equations are singular here (a non-hyperbolic cycle or a "
                         "family of cycles?); no isolated periodic orbit found")
    if ends.codes[0] == C_UNDEFINED:
        raise CycleError("the integration over one period failed (not a number)")
    u0, T, it = ends.x[0, :n], float(ends.x[0, n]), int(ends.iterations[0])
    scale = max(1.0, float(np.max(np.abs(u_ref))))
    gap = float(ends.gap[0])
    if np.linalg.norm(flow.rhs(0.0, u0)) <= 1e-9 * scale:
        raise CycleError("the shooting converged to an equilibrium, not a periodic orbit")
    if not gap <= 1e-8 * _travel(flow, u0, T) + 10 * _resolution(flow, u0):
        raise CycleError(f"no periodic orbit found near the guess: the shooting did not converge "
                         f"(return gap {gap:.3g} after {it} Newton steps)")
    M = ends.monodromy[0] if np.all(np.isfinite(ends.monodromy[0])) else flow.monodromy(u0, T)[1]

    multipliers = _sorted_multipliers(M)
    trivial = int(np.argmin(np.abs(multipliers - 1)))
    others = np.delete(multipliers, trivial)
    warnings = []
    if abs(multipliers[trivial] - 1) > 1e-4:
        warnings.append(f"the trivial multiplier is {abs(multipliers[trivial]):.6g}, not 1: the monodromy "
                        "matrix is inaccurate (try a tighter tolerance)")
    stable = bool(np.all(np.abs(others) < 1))
    if np.any(np.abs(np.abs(others) - 1) < 1e-6):
        warnings.append("a multiplier lies on the unit circle: the cycle is at a bifurcation")
    report(0.9)
    time, orbit = flow.sample(u0, 0.0, T, samples)
    return _cycle(system, T, u0, time, orbit, multipliers, trivial, stable, M, None, None, it, gap, warnings,
                  flow.rtol, p)


def _travel(flow, u0, T) -> float:
    """A length scale of the orbit: speed at u0 times the period (its length if the speed were uniform)."""
    return float(np.linalg.norm(flow.rhs(0.0, u0))) * T


def _resolution(flow, u0) -> float:
    """How closely a run over one period can return at all: the tolerances at the state's size (a small
    cycle far from the origin, say round a centre at (3, 2), travels less than the runs' error allows)."""
    return 10 * (flow.rtol * float(np.max(np.abs(u0), initial=0.0)) + flow.atol)


def _return_time(system, p, u_ref, normal, point, t_max, why, method, cancel, report) -> float:
    """The first time the run from u_ref crosses the section again, near u_ref, in the same direction."""
    event = Event.on_plane(normal, float(normal @ point), direction=1)
    # a first estimate for Newton: an implicit method's crossings need no more than 1e-6
    run = _run(system, p, u_ref, t_max, 2000, cancel, report, events=[event], method=method,
               rtol=1e-6 if method_named(method).stiff else 1e-8)
    size = float(np.linalg.norm(np.ptp(run.states, axis=1))) if run.states.size else 0.0
    times, states = run.event_times[0], run.event_states[0]
    if times.size == 0:
        raise CycleError(f"the run from the guess did not return to the section through it within "
                         f"{t_max:.4g} time units ({why}); a longer transient (--transient) or a period "
                         "guess (--period-guess) lengthens the search")
    distances = np.linalg.norm(states - u_ref[:, None], axis=0)
    near = np.flatnonzero(distances <= 0.1 * max(size, 1e-12))
    return float(times[near[0]] if near.size else times[int(np.argmin(distances))])


def _forced_cycle(system, p, flow, u_guess, start, Tf, k_given, transient, max_iter, samples, report,
                  cancel) -> Cycle:
    n = system.n_states
    transient = max(200.0, 50 * Tf) if transient is None else float(transient)
    periods = max(int(math.ceil(transient / Tf)), 2 * MAX_FORCING_MULTIPLE)
    per = 8
    start = start if u_guess is None else u_guess
    run = _run(system, p, start, periods * Tf, periods * per + 1, cancel, report.part(0.0, 0.3),
               method=flow.info.name)
    strobe = run.states[:, ::per]
    if k_given is not None:
        if int(k_given) < 1:
            raise ValueError("the forcing multiple must be at least 1")
        order = [int(k_given)]
    else:
        gaps = [float(np.max(np.linalg.norm(strobe[:, -1 - 2 * MAX_FORCING_MULTIPLE:][:, k:]
                                            - strobe[:, -1 - 2 * MAX_FORCING_MULTIPLE:][:, :-k], axis=0)))
                for k in range(1, MAX_FORCING_MULTIPLE + 1)]
        scale = max(1.0, float(np.max(np.abs(strobe[:, -1]))))
        settled = [k for k, g in zip(range(1, MAX_FORCING_MULTIPLE + 1), gaps) if g <= 1e-3 * scale]
        order = settled[:1] + [k for k in range(1, MAX_FORCING_MULTIPLE + 1) if k not in settled[:1]]
    # the phase of the section: the transient ends at t_end, a whole number of forcing periods
    starts = [u_guess] if u_guess is not None else []
    starts.append(strobe[:, -1])
    # every (multiple, start) pair in the order they are wanted; the first multiple's pairs are shot first,
    # then all the others together (engine/shooting.py: one member loop call per run for all of them)
    pairs = [(k, u) for k in order for u in starts]
    groups = [pairs[:len(starts)], pairs[len(starts):]]
    newton = report.part(0.3, 0.6)
    failure = ["the Newton iteration on the stroboscopic map did not converge"]
    judged: dict[int, tuple | None] = {}

    def judge(ends, group, i):
        """The orbit of pair i of the group (u0, M, k, iterations, gap) when it is one, else None."""
        if i not in judged:
            judged[i] = _strobe_orbit(flow, ends, i, group[i][0], Tf, k_given, scales[i], failure)
        return judged[i]

    for number, group in enumerate(groups):
        if not group:
            continue
        judged.clear()
        U = np.array([u for _, u in group], dtype=float)
        scales = np.maximum(1.0, np.max(np.abs(U), axis=1))

        def enough(ends):  # the first pair in order that ends on an orbit decides; the later ones need not finish
            for i in range(len(group)):
                if ends.codes[i] < 0:
                    return False
                if judge(ends, group, i) is not None:
                    return True
            return False

        ends = shooting_starts(flow.ends, U, [k * Tf for k, _ in group], goal=lambda idx, X, G: 1e-9 * scales[idx],
                               max_iter=max_iter, enough=enough, report=newton.part(0.5 * number, 0.5),
                               engine=flow.loops)
        for i in range(len(group)):
            if ends.codes[i] < 0:
                break
            found = judge(ends, group, i)
            if found is not None:
                u0, M, k, it, gap = found
                multipliers = _sorted_multipliers(M)
                stable = bool(np.all(np.abs(multipliers) < 1))
                warnings = []
                if np.any(np.abs(np.abs(multipliers) - 1) < 1e-6):
                    warnings.append("a multiplier lies on the unit circle: the orbit is at a bifurcation")
                report(0.9)
                time, orbit = flow.sample(u0, 0.0, k * Tf, samples)
                return _cycle(system, k * Tf, u0, time, orbit, multipliers, None, stable, M, Tf, k, it, gap,
                              warnings, flow.rtol, p)
    raise CycleError(f"no periodic orbit found with a period of up to {MAX_FORCING_MULTIPLE} forcing "
                     f"periods ({failure[0]})")


def _strobe_orbit(flow, ends, i, k, Tf, k_given, scale, failure):
    """(u0, M, k, iterations, gap) of start i of a stroboscopic shooting when it ended on an orbit of
    minimal multiple k (or, with no multiple given, of a divisor of k: then k is that), else None with
    the reason in failure[0]. ``scale``: max(1, |start|_inf)."""
    code = int(ends.codes[i])
    if code == C_SINGULAR:
        failure[0] = "the stroboscopic map has a multiplier 1 here; no isolated orbit"
        return None
    if code == C_UNDEFINED:
        failure[0] = "the integration over one period failed (not a number)"
        return None
    u0 = ends.x[i]
    gap = float(ends.gap[i])
    if not gap <= 1e-7 * scale:
        failure[0] = f"the Newton iteration on P^{k} did not converge (gap {gap:.3g})"
        return None
    M = ends.monodromy[i]
    if not np.all(np.isfinite(M)):
        _, M = flow.monodromy(u0, k * Tf)
    k_min = _minimal_multiple(flow, u0, Tf, k)
    if k_min != k:
        if k_given is not None:
            failure[0] = f"the orbit found repeats after {k_min} forcing periods, not {k}"
            return None
        k = k_min
        _, M = flow.monodromy(u0, k * Tf)
    return u0, M, k, int(ends.iterations[i]), gap


def _minimal_multiple(flow, u0, Tf, k):
    scale = max(1.0, float(np.max(np.abs(u0))))
    for d in range(1, k):
        if k % d == 0:
            phi, _ = flow.monodromy(u0, d * Tf)
            if np.linalg.norm(phi - u0) <= 1e-6 * scale:
                return d
    return k


def _sorted_multipliers(M):
    values = np.linalg.eigvals(M).astype(complex)
    return values[np.lexsort((-values.imag, -np.abs(values)))]


CONSERVATIVE_NOTE = ("{why}: its Floquet multipliers stay on the unit circle and its periodic orbits come in "
                     "families, so the orbit is neutral - neither attracting nor repelling - and nothing "
                     "bifurcates here")


def _cycle(system, T, u0, time, orbit, multipliers, trivial, stable, M, Tf, k, it, gap, warnings,
           rtol: float = 1e-10, p=None) -> Cycle:
    amplitude = {name: float(np.ptp(orbit[i])) for i, name in enumerate(system.states)}
    state = {name: float(v) for name, v in zip(system.states, u0)}
    # the monodromy matrix is accurate to about the tolerance times its size: smaller multipliers are noise
    resolution = 100 * rtol * max(1.0, float(np.linalg.norm(M, 2)))
    tiny = [j for j, m in enumerate(multipliers) if j != trivial and abs(m) < resolution]
    if tiny:
        warnings.append(f"{len(tiny)} Floquet multiplier(s) below the integrator's resolution (|m| < "
                        f"{resolution:.1g}): zero to within the accuracy of the monodromy matrix (a strongly "
                        "contracting direction); their printed values mean nothing")
    stability = "stable" if stable else "unstable"
    if structure(system, p) == "flow" and holds_at(system, orbit, p):
        warnings = [w for w in warnings if "at a bifurcation" not in w] + [
            CONSERVATIVE_NOTE.format(why=flow_reason(system, p))]
        stable, stability = False, NEUTRAL_FLOW
    return Cycle(float(T), state, np.asarray(u0, dtype=float), time, orbit, amplitude, multipliers, trivial,
                 stable, M, Tf, k, it, gap, warnings, resolution, stability)


# ---------------------------------------------------------------- maps
def find_map_cycle(system: CompiledSystem, p=None, period_k: int = 1, guess=None, transient: int = 1000,
                   starts: int = 40, max_iter: int = 60, initial=None, cancel: CancelToken | None = None,
                   progress=None) -> MapCycle:
    """A cycle of minimal period ``period_k`` of a map, by Newton on f^k(u) - u.

    Starts: the guess, then points of a transient orbit from the guess (or the initial values), then
    quasi-random points in that orbit's bounding box (the orbit starts at ``initial``, default the
    model's initial values, when no guess is given), all in the multi-start Newton loop (blocks of
    starts, in this order, until one ends on a cycle of minimal period k: the first such start gives
    the cycle). Raises CycleError when none converges.
    """
    if system.kind != MAP:
        raise ValueError("this is a flow: look for its periodic orbits with find_cycle")
    if not system.autonomous:
        raise ValueError("the map depends on the step n, so its cycles are not defined in the usual sense")
    k = int(period_k)
    if k < 1:
        raise ValueError("the period of a map cycle must be a whole number of at least 1")
    # every Newton iteration of every start follows the orbit k steps
    limits.check_steps(float(k) * starts * max_iter + transient, f"a period-{k:,} cycle ({starts} starts of "
                                                                 f"up to {max_iter} Newton iterations)")
    p = system.param_values.astype(float) if p is None else np.asarray(p, dtype=float)
    report = Reporter(progress, cancel)
    n = system.n_states
    u_guess = _guess_vector(system, guess)
    start = system.initial if initial is None else np.asarray(initial, dtype=float)
    run = simulate(system, RunSettings(steps=int(transient)), start if u_guess is None else u_guess,
                   p, cancel=cancel)
    if run.status == "cancelled":
        raise Cancelled("cancelled")
    orbit = run.states[:, np.all(np.isfinite(run.states), axis=0)]
    candidates = [] if u_guess is None else [u_guess]
    tail = orbit[:, -min(starts, orbit.shape[1]):]
    candidates += [tail[:, j] for j in range(tail.shape[1] - 1, -1, -1)]
    if orbit.size:
        lo, hi = orbit.min(axis=1), orbit.max(axis=1)
        pad = np.maximum(0.1 * (hi - lo), 1e-3)
        points = qmc.scale(qmc.LatinHypercube(d=n, seed=7).random(starts), lo - pad, hi + pad)
        candidates += list(points)
    f = system.rhs_function(p)
    accepted: dict[int, tuple] = {}  # start -> (orbit points, product of Jacobians, minimal period) or None

    def enough(ends) -> bool:  # the first start in order that ends on a cycle of minimal period k
        scale = np.maximum(1.0, np.max(np.abs(ends.x), axis=1))
        for i in np.flatnonzero((ends.codes >= 0) & (ends.norm <= 1e-10 * scale)):  # converged, or stalled there
            if int(i) not in accepted:
                accepted[int(i)] = _map_orbit(system, f, p, ends.x[i], k)
        return any(found is not None and found[2] == k for found in accepted.values())

    # every start in the compiled multi-start Newton loop (engine/newton_starts.py) on f^k(u) - u
    newton_starts(system, np.array(candidates, dtype=float).reshape(-1, n), p, iterate=k, max_iter=max_iter,
                  frel=1e-13, xtol=0.0, slow=0, report=report, enough=enough)
    lower = None
    for i in sorted(accepted):
        found = accepted[i]
        if found is None:
            continue
        points, product, m = found
        if m != k:
            lower = m
            continue
        points = np.roll(points, -int(np.lexsort(points[::-1])[0]), axis=1)
        multipliers = _sorted_multipliers(product)
        warnings = []
        if np.any(np.abs(np.abs(multipliers) - 1) < 1e-6):
            warnings.append("a multiplier lies on the unit circle: the cycle is at a bifurcation")
        if system.nonsmooth:
            warnings.append(NONSMOOTH_WARNING.format(names=", ".join(system.nonsmooth)))
        report(1.0)
        states = [{s: float(v) for s, v in zip(system.states, points[:, j])} for j in range(k)]
        return MapCycle(k, points, states, multipliers, bool(np.all(np.abs(multipliers) < 1)), warnings)
    extra = f" (only cycles of period {lower} were found)" if lower is not None else ""
    raise CycleError(f"no cycle of minimal period {k} found{extra}")


def _map_orbit(system, f, p, u, k):
    """(the k points of the orbit from u, the product of the Jacobians along it, its minimal period) when
    the orbit returns to u (|f^k(u) - u| <= 1e-10 max(1, |u|_inf)) with finite values, else None."""
    n = system.n_states
    points, product = [np.asarray(u, dtype=float)], np.eye(n)
    try:
        with np.errstate(all="ignore"):
            for _ in range(k):
                product = system.jac(0.0, points[-1], p) @ product
                points.append(np.asarray(f(0, points[-1]), dtype=float))
    except (ArithmeticError, ValueError, TypeError):
        return None
    pts = np.column_stack(points)
    scale = max(1.0, float(np.max(np.abs(pts[:, 0]))))
    if not (np.all(np.isfinite(pts)) and np.all(np.isfinite(product))
            and np.linalg.norm(pts[:, -1] - pts[:, 0]) <= 1e-10 * scale):
        return None
    return pts[:, :-1], product, _map_minimal_period(pts[:, :-1])


def _map_minimal_period(points):
    k = points.shape[1]
    scale = max(1.0, float(np.max(np.abs(points))))
    for d in range(1, k):
        if k % d == 0 and np.linalg.norm(points[:, d] - points[:, 0]) <= 1e-8 * scale:
            return d
    return k


__all__ = ["Cycle", "MapCycle", "CycleError", "find_cycle", "find_map_cycle", "detect_forcing_period"]
