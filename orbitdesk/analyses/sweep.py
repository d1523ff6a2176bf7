"""Parameter sweeps: orbit diagrams over one parameter and grids of the largest Lyapunov exponent.

Every parameter value of a sweep is a member of one ensemble run by the engine's compiled loops
(``engine/members.py`` for flows, ``engine/maps.py`` for maps), each with its own step control.
After a transient each member contributes samples of an observed quantity:

* ``plane``: crossings of ``STATE = VALUE`` in a direction, located on the step's dense output;
* ``strobe``: the state every forcing period ``T``, read off the dense output at those times;
* ``maxima``: local maxima of a state, where its rate changes sign from + to -, located on the
  dense output;
* ``iterate``: iterates of a map.

The accuracy is set like a run's: an adaptive method (``method``, ``rtol``, ``atol``, the defaults
of a single run) unless a fixed step ``dt`` is given (classical RK4; a strobe period is divided
exactly). The method is taken like a run's: the one given, else Dormand-Prince 8(5,3), or the stiff
method when a probe run at the middle value shows the system stiff (time_scales.choose_method; the
result's note says so). Explicit methods run every value in the member loops; a stiff method runs
each value through ``sections`` (``sweep_events.sweep_value_by_value``), as models with events do.
Optionally the largest Lyapunov exponent per value, by the ``lyapunov`` command's own path
(``lyapunov.lyapunov_spectrum`` stopping on convergence, capped at the sampling time, with its
standard error): the same function, the same rule, the same number for the same settings. A map's
values run together (``lyapunov.map_exponents``: the same blocks and rule in the member loop, each
value's number that of the command to ~1e-14, and the same whatever values go with it).

Large sweeps and two-parameter grids can be split into chunks run on any
``concurrent.futures.Executor`` (``chunks.py``); workers recompile the model text. The engine is
compiled when the work pays for it (``engine.compiled.engine_for_work``); otherwise the same
loops run as plain Python.
"""

from __future__ import annotations

import math
from concurrent.futures import ThreadPoolExecutor
from dataclasses import asdict, dataclass, field, replace
from functools import partial

import numpy as np

from orbitdesk.engine.model_events import refuse_ensembles
from orbitdesk.engine.chunks import compiled_system, run_chunks, split, worker_count
from orbitdesk.engine.progress import Reporter
from orbitdesk.engine.status import OK
from orbitdesk.analyses.grids import GridAxes
from orbitdesk.system.compiled_system import MAP
from orbitdesk.engine import limits

PLANE, STROBE, MAXIMA, ITERATE = "plane", "strobe", "maxima", "iterate"
MODES = (PLANE, STROBE, MAXIMA, ITERATE)
UP, DOWN, BOTH = 1, -1, 0


@dataclass
class SweepSettings:
    mode: str | None = None  # plane | strobe | maxima | iterate (maps: iterate, the default)
    observe: str | None = None  # a state or derived quantity (maxima: a state); default the first state
    plane: tuple[str, float] | None = None  # the section STATE = VALUE
    direction: int = UP  # crossings with the state rising (+1), falling (-1) or both (0)
    period: float | None = None  # strobe period T
    transient: float = 100.0  # time (flows; strobe: rounded up to whole periods) or iterations (maps) dropped
    samples: int = 100  # samples kept per value
    dt: float | None = None  # a fixed RK4 step (strobe: the nearest step dividing T that is not larger)
    method: str | None = None  # without dt: an adaptive method of engine/methods.py; None: chosen (see above)
    rtol: float = 1e-8  # its tolerances (a single run's defaults)
    atol: float = 1e-10
    duration: float = 500.0  # plane/maxima: longest sampling time after the transient
    lyapunov: bool = False
    t_start: float = 0.0
    bound: float = 1e10  # |state| beyond this freezes a member as diverged

    def checked(self, system) -> "SweepSettings":
        """A copy with defaults filled in; ValueError with a plain message when something does not fit."""
        s = replace(self)
        if s.mode is None and system.kind == MAP:
            s.mode = ITERATE
        if s.mode not in MODES:
            if system.kind == MAP:
                raise ValueError(f"unknown sampling mode '{s.mode}'")
            raise ValueError("a flow needs a sampling mode: a plane section, a strobe period or maxima")
        if system.kind == MAP and s.mode != ITERATE:
            raise ValueError(f"a map is sampled by its iterates; {s.mode} sampling applies to flows")
        if system.kind != MAP and s.mode == ITERATE:
            raise ValueError("iterates apply to maps; sample a flow with a plane, a strobe period or maxima")
        s.observe = s.observe or system.states[0]
        if s.observe not in system.states and s.observe not in system.derived_names:
            raise ValueError(f"unknown quantity '{s.observe}' to observe "
                             f"(states: {', '.join(system.states)})")
        if s.mode == MAXIMA and s.observe not in system.states:
            raise ValueError(f"maxima are taken of a state; '{s.observe}' is a derived quantity")
        if s.mode == PLANE:
            if not s.plane:
                raise ValueError("a plane section needs STATE = VALUE")
            name, value = s.plane
            if name not in system.states:
                raise ValueError(f"the section must be on a state; '{name}' is not one "
                                 f"(states: {', '.join(system.states)})")
            if not math.isfinite(float(value)):
                raise ValueError("the section value must be a finite number")
            s.plane = (name, float(value))
            if s.direction not in (UP, DOWN, BOTH):
                raise ValueError("the crossing direction must be +1 (up), -1 (down) or 0 (both)")
        if s.mode == STROBE and not (s.period and math.isfinite(s.period) and s.period > 0):
            raise ValueError("the strobe period must be a positive number")
        if int(s.samples) < 1:
            raise ValueError("at least one sample per value is needed")
        s.samples = int(s.samples)
        if not (math.isfinite(s.transient) and s.transient >= 0):
            raise ValueError("the transient must be zero or positive")
        if system.kind != MAP:
            _check_accuracy(s)
            if s.mode in (PLANE, MAXIMA) and not (math.isfinite(s.duration) and s.duration > 0):
                raise ValueError("the sampling duration must be positive")
        return s


def accuracy_like(run) -> dict:
    """A sweep's accuracy fields from a single run's settings (``engine.settings.RunSettings``): a
    fixed-step method keeps its step, an adaptive one its name and tolerances; the default method is left
    to the sweep's own choice (None: the stiff one where the default is held back by stiffness)."""
    from orbitdesk.engine.methods import DEFAULT

    info = run.method_info
    if not info.adaptive:
        return {"dt": run.dt, "method": None, "rtol": run.rtol, "atol": run.atol}
    return {"dt": None, "method": None if run.method == DEFAULT else run.method, "rtol": run.rtol, "atol": run.atol}


def _check_accuracy(s, stiff_allowed: bool = True) -> None:
    """The step or the adaptive method and tolerances of a sweep or grid; ValueError in plain words."""
    from orbitdesk.engine.methods import NAMES, method

    if s.dt is not None:
        if not (math.isfinite(s.dt) and s.dt > 0):
            raise ValueError("the step dt must be positive")
        return
    if s.method is not None:
        info = method(s.method)
        if not info.adaptive or (info.stiff and not stiff_allowed):
            allowed = [m for m in NAMES if method(m).adaptive and (stiff_allowed or not method(m).stiff)]
            raise ValueError(f"this runs an adaptive method ({', '.join(allowed)}) or a fixed step dt; "
                             f"'{s.method}' is not one")
    if not (0 < s.rtol <= 1 and s.atol > 0 and math.isfinite(s.atol)):
        raise ValueError("the tolerances must be positive (rtol at most 1)")


@dataclass
class SweepResult:
    parameter: str
    values: np.ndarray  # (M,)
    samples: np.ndarray  # (M, K), NaN where a value has fewer than K samples
    observed: str
    mode: str
    lyapunov: np.ndarray | None = None  # (M,), NaN for members that diverged
    status: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=str))  # (M,) per value
    times: np.ndarray | None = None  # (M, K) time (or step) of each sample
    lyapunov_error: np.ndarray | None = None  # (M,) the standard error of each exponent (lyapunov.py)
    method: str = ""  # the integration method of a flow's sweep ("rk4" with a fixed step)
    notes: list[str] = field(default_factory=list)  # the stiff method chosen, exponents capped before settling

    def points(self, i: int) -> np.ndarray:
        """The samples of value ``i`` without padding."""
        row = self.samples[i]
        return row[np.isfinite(row)]

    def to_dict(self) -> dict:
        return {"parameter": self.parameter, "values": self.values.tolist(),
                "samples": [self.points(i).tolist() for i in range(len(self.values))],
                "observed": self.observed, "mode": self.mode,
                "lyapunov": None if self.lyapunov is None else self.lyapunov.tolist(),
                "status": [str(s) for s in self.status], "requested": int(self.samples.shape[1]),
                "found": self.found().tolist(), "method": self.method, "notes": list(self.notes),
                "lyapunov_error": None if self.lyapunov_error is None else self.lyapunov_error.tolist()}

    def found(self) -> np.ndarray:
        """How many samples each value got (fewer than asked when the sampling time ran out first)."""
        return np.sum(np.isfinite(self.samples), axis=1).astype(int)

    def shortfall(self, duration: float | None = None) -> str:
        """In words, which values got fewer samples than asked and why; "" when none did."""
        found, wanted = self.found(), int(self.samples.shape[1])
        short = np.flatnonzero(found < wanted)
        if short.size == 0:
            return ""
        ok = [i for i in short if str(self.status[i]) == "ok"] if len(self.status) else list(short)
        fewest = int(short[np.argmin(found[short])])
        text = (f"{short.size} of {len(self.values)} values got fewer than the {wanted} samples asked for "
                f"(fewest: {found[fewest]} at {self.parameter} = {self.values[fewest]:.6g})")
        if ok and self.mode in ("plane", "maxima"):
            span = f" of {duration:g} time units" if duration is not None else ""
            text += (f"; {len(ok)} of them ran to the end of the sampling time{span} after the transient "
                     "(--duration lengthens it; an orbit settling to an equilibrium has no more)")
        if len(ok) < short.size:
            text += f"; {short.size - len(ok)} stopped early (see status)"
        return text


# ---------------------------------------------------------------- running members
def _start_vector(n):
    v = np.arange(1.0, n + 1.0)
    return v / np.linalg.norm(v)


def _engine(system, evaluations: float, compiled: bool | None = None):
    """The engine for this much work: compiled when it pays (``compiled`` None), now (True) or never (False)."""
    from orbitdesk.engine import compiled as kernels

    if compiled is False:
        return kernels.python_engine(system)
    if compiled:
        return kernels.engine_for(system, wait=True)
    return kernels.engine_for_work(system, evaluations)


@dataclass
class MemberSamples:
    values: np.ndarray  # (M, K) the observed quantity, NaN where a member has fewer than K samples
    times: np.ndarray  # (M, K) time (or step) of each sample
    states: np.ndarray  # (n, M, K) the states there


@dataclass
class MemberRun:
    status: np.ndarray  # (M,) status words
    time: np.ndarray  # (M,) where each member ended (a stopped member: when it stopped)
    states: np.ndarray | None = None  # (n, M) the state there (period maps: has a flow's orbit settled?)


def _observed(system, name, t, states, P):
    """The observed quantity at samples ``states`` (n, M, K) taken at ``t`` (M, K)."""
    if name in system.states:
        return states[system.states.index(name)].copy()
    n, M, K = states.shape
    flat_P = np.repeat(P, K, axis=1) if P.ndim == 2 else P
    with np.errstate(all="ignore"):
        values = system.derived_values(t.reshape(-1), states.reshape(n, M * K), flat_P)[name]
    return np.broadcast_to(np.asarray(values, dtype=float), (M * K,)).reshape(M, K).copy()


def _fixed_step(s: SweepSettings, period: float | None = None) -> float | None:
    """The RK4 step of a sweep given ``dt`` (a strobe period divided exactly), None when adaptive."""
    if s.dt is None:
        return None
    if period is None:
        return float(s.dt)
    return period / max(1, int(math.ceil(period / s.dt - 1e-9)))


def run_members(system, P, U0, settings: SweepSettings, cancel=None, progress=None, compiled: bool | None = None):
    """One ensemble over the columns of P (and U0) with checked settings: (MemberSamples, exponents or
    None, MemberRun). Every member runs the engine's compiled loops (``drivers.members_run``, maps
    ``drivers.members_iterate``): samples at the strobe times off the dense output, crossings and
    maxima located on it, the largest exponent from one tangent vector renormalised as it goes."""
    from orbitdesk.engine import drivers
    from orbitdesk.engine.explicit_rk import TURNS_DOWN
    from orbitdesk.engine.status import words

    s = settings
    n, M, K = system.n_states, P.shape[1], s.samples
    U0 = np.array(U0, dtype=float)
    if U0.ndim == 1:
        U0 = np.repeat(U0[:, None], M, axis=1)
    report = Reporter(progress, cancel)
    tangents = _start_vector(n)[:, None] if s.lyapunov else 0
    width = n * (2 if s.lyapunov else 1)
    with np.errstate(all="ignore"):
        if system.kind == MAP:
            first = int(math.ceil(s.transient))
            n0 = int(s.t_start)
            engine = _engine(system, M * (first + K) * width, compiled)
            out = drivers.members_iterate(engine, n0, n0 + first + K, n0 + first, U0, P, samples=K, bound=s.bound,
                                          tangents=tangents, report=report)
            states = out.samples
            times = np.broadcast_to(n0 + first + 1.0 + np.arange(K), (M, K)).copy()
            times[np.isnan(states[0])] = np.nan
        else:
            t0 = float(s.t_start)
            grid = planes = None
            events = 0
            if s.mode == STROBE:
                T = float(s.period)
                t_keep = t0 + T * int(math.ceil(s.transient / T - 1e-9))
                grid = t_keep + T * np.arange(1, K + 1)
                t_end = grid[-1]
                h = _fixed_step(s, T)
                interval = T if h is None else h * max(1, round(min(T, 1.0) / h))
            else:
                t_keep = t0 + s.transient
                h = _fixed_step(s)
                t_end = t_keep + s.duration
                interval = 1.0 if h is None else h * max(1, round(1.0 / h))
                row = np.zeros((1, n + 1))
                if s.mode == PLANE:
                    name, value = s.plane
                    row[0, system.states.index(name)], row[0, n] = 1.0, value
                    direction = s.direction
                else:
                    row[0, system.states.index(s.observe)] = 1.0
                    direction = TURNS_DOWN
                planes = (row, np.array([direction]), np.zeros(1, dtype=bool))
                events = K
            steps = abs(t_end - t0) / (h or 0.05)
            engine = _engine(system, M * steps * (4 if h else 12) * (2 if s.lyapunov else 1), compiled)
            method = "rk4" if h else (s.method or "dop853")
            out = drivers.members_run(engine, method, t0, t_end, U0, P, rtol=s.rtol, atol=s.atol, dt=h or 0.01,
                                      bound=s.bound, grid=grid, planes=planes, max_events=events, report=report,
                                      t_keep=t_keep, tangents=tangents, interval=interval,
                                      keep_going=bool(s.lyapunov))
            if s.mode == STROBE:
                states = out.samples
                times = np.broadcast_to(grid, (M, K)).copy()
                times[np.isnan(states[0])] = np.nan
            else:
                states, times = out.event_y, out.event_t
        values = _observed(system, s.observe, times, states, P)
    status = words(out.codes)
    exponents = _exponents(out, status) if s.lyapunov else None
    report(1.0)
    return MemberSamples(values, times, states), exponents, MemberRun(status, out.t, out.states)


def sweep(system, parameter: str, values, settings: SweepSettings | None = None, u0=None, p=None,
          cancel=None, progress=None, executor=None, chunk_size: int | None = None,
          compiled: bool | None = None) -> SweepResult:
    """Orbit diagram over ``values`` of ``parameter``: all values run together as one ensemble.

    ``u0`` is one starting state for every value (n,) or one per value (n, M); ``p`` the other parameters.

    With an ``executor`` or a ``chunk_size`` the values are split into chunks (default size 64)
    run by ``chunks.run_chunks`` (default executor: a local process pool); the model text and plain
    settings travel to the workers. ``Cancelled`` is raised when ``cancel`` is set. ``compiled``: None
    compiles the engine when the work pays for it, True always, False never (plain Python)."""
    settings = (settings or SweepSettings()).checked(system)
    check_sweep_size(system, len(np.ravel(values)), settings)
    wanted = settings
    if parameter not in system.parameters:
        raise ValueError(f"unknown parameter '{parameter}' (parameters: {', '.join(system.parameters) or 'none'})")
    values = np.asarray(values, dtype=float).ravel()
    if values.size == 0 or not np.all(np.isfinite(values)):
        raise ValueError("the parameter values must be finite numbers")
    base_p = system.param_values.astype(float) if p is None else np.asarray(p, dtype=float)
    u0 = system.initial.astype(float) if u0 is None else np.asarray(u0, dtype=float)
    notes = []
    if system.kind != MAP and not system.delays:
        choice = _sweep_method(system, parameter, values, settings, u0, base_p, cancel)
        settings = replace(settings, method=choice.method)
        notes += [choice.note] if choice.note else []
    report = Reporter(progress, cancel)
    exponents_after = settings.lyapunov and not system.delays  # by the lyapunov command's path, below
    if exponents_after:
        if system.model.events:
            from orbitdesk.analyses.sweep_events import refuse_exponents

            refuse_exponents(system)
        settings, progress = replace(settings, lyapunov=False), report.part(0.0, 0.5)
    if system.model.events or (settings.dt is None and settings.method and _is_stiff(settings.method)):
        # each value on its own through sections: they follow the model's events and take the stiff method
        from orbitdesk.analyses.sweep_events import sweep_value_by_value

        samples, times, lyap, status = sweep_value_by_value(system, parameter, values, settings, u0, base_p,
                                                            cancel, progress)
    elif executor is not None or chunk_size is not None:
        pieces = split(values.size, chunk_size or 64)
        text = system.model.text
        args = [(text, parameter, values[piece], settings, u0 if u0.ndim == 1 else u0[:, piece], base_p)
                for piece in pieces]
        parts = run_chunks(_sweep_chunk, args, executor=executor, cancel=cancel, progress=progress)
        samples = np.concatenate([part[0] for part in parts])
        times = np.concatenate([part[1] for part in parts])
        lyap = None if not settings.lyapunov else np.concatenate([part[2] for part in parts])
        status = np.concatenate([part[3] for part in parts])
    else:
        samples, times, lyap, status = _sweep_arrays(system, parameter, values, settings, u0, base_p,
                                                     cancel, progress, compiled)
    error = None
    if exponents_after:
        lyap, error, capped = sweep_exponents(system, parameter, values, wanted, u0, base_p, wanted.method,
                                              cancel, report.part(0.5, 0.5), compiled)
        notes += [capped] if capped else []
    report(1.0)
    method = "" if system.kind == MAP else "rk4" if settings.dt else settings.method
    return SweepResult(parameter, values, samples, settings.observe, settings.mode, lyap, status, times, error,
                       method, notes)


def _is_stiff(name: str) -> bool:
    from orbitdesk.engine.methods import method

    return method(name).stiff


def _sweep_method(system, parameter, values, settings, u0, base_p, cancel):
    """The method of a flow's sweep: the one given (or RK4 with a fixed step), else the default or, when a
    probe run at the middle value shows stiffness, the stiff one (time_scales.choose_method)."""
    from orbitdesk.analyses.time_scales import MethodChoice, choose_method

    if settings.dt is not None or settings.method is not None:
        return MethodChoice(settings.method)
    i = len(values) // 2
    p = np.array(base_p, dtype=float)
    p[system.parameters.index(parameter)] = values[i]
    start = u0 if u0.ndim == 1 else u0[:, i]
    length = settings.transient + (settings.samples * settings.period if settings.mode == STROBE
                                   else settings.duration)
    choice = choose_method(system, p, start, length, None, t0=settings.t_start, cancel=cancel)
    if choice.note:
        choice.note = f"at {parameter} = {values[i]:.6g}, {choice.note} for every value"
    return choice


def sweep_exponents(system, parameter, values, settings, u0, base_p, method=None, cancel=None, progress=None,
                    compiled: bool | None = None):
    """The largest Lyapunov exponent of each value by the ``lyapunov`` command's path: ``lyapunov_spectrum``
    stopping on convergence (its tolerance; capped at the sweep's sampling time for flows) after the
    sweep's transient, with the sweep's method (None: as the command without --method), step and
    tolerances; a map's values all at once by the same steps (``lyapunov.map_exponents``: the member
    loop, one batched call per iterate). (exponents (M,), standard errors (M,), a note on values capped
    before settling.) ``compiled`` as ``sweep``'s (maps)."""
    from orbitdesk.analyses.lyapunov import lyapunov_spectrum
    from orbitdesk.engine.settings import RunSettings

    report = Reporter(progress, cancel)
    M = len(values)
    exponents, errors, capped = np.full(M, np.nan), np.full(M, np.nan), []
    if system.kind == MAP:
        return _map_sweep_exponents(system, parameter, values, settings, u0, base_p, report, compiled)
    run = RunSettings(rtol=settings.rtol, atol=settings.atol, bound=settings.bound, t_start=settings.t_start)
    # the longest averaging: a flow's sampling time (the lyapunov command's default cap for maps)
    cap = None if system.kind == MAP else (settings.samples * settings.period if settings.mode == STROBE
                                           else settings.duration)
    for i, value in enumerate(values):
        p = np.array(base_p, dtype=float)
        p[system.parameters.index(parameter)] = value
        start = u0 if np.ndim(u0) == 1 else u0[:, i]
        result = lyapunov_spectrum(system, p, start, transient=settings.transient, dt=settings.dt, settings=run,
                                   converge=True, cap=cap, cancel=cancel, progress=report.part(i / M, 1 / M),
                                   method=None if settings.dt or system.kind == MAP else method)
        if result.status == "cancelled":
            from orbitdesk.engine.progress import Cancelled

            raise Cancelled("cancelled")
        if result.ok:
            exponents[i] = result.largest
            if result.uncertainty is not None:
                errors[i] = float(result.uncertainty[0])
            if result.converged is False:
                capped.append(value)
    note = ""
    if capped:
        note = (f"the exponent of {len(capped)} of {M} values reached the cap before its estimate settled (first at "
                f"{parameter} = {capped[0]:.6g}); their standard errors say how far")
    return exponents, errors, note


def _map_sweep_exponents(system, parameter, values, settings, u0, base_p, report, compiled):
    from orbitdesk.analyses.lyapunov import MAP_BLOCK, MIN_BLOCKS, map_exponents

    M, n = len(values), system.n_states
    P = np.repeat(np.asarray(base_p, dtype=float)[:, None], M, axis=1)
    P[system.parameters.index(parameter)] = values
    transient = int(round(settings.transient))
    engine = _engine(system, M * (transient + 2 * MIN_BLOCKS * MAP_BLOCK) * (n + 1) * max(1.0, n / 3), compiled)
    with np.errstate(all="ignore"):
        exponents, errors, settled, codes = map_exponents(engine, P, np.broadcast_to(
            np.asarray(u0, dtype=float).reshape(n, -1), (n, M)), transient, settings.bound, report=report)
    capped = values[(codes == 0) & ~settled & np.isfinite(exponents[:, 0])]
    note = ""
    if capped.size:
        note = (f"the exponent of {capped.size} of {M} values reached the cap before its estimate settled (first at "
                f"{parameter} = {capped[0]:.6g}); their standard errors say how far")
    return exponents[:, 0], errors[:, 0], note


def check_sweep_size(system, count: int, s: SweepSettings) -> None:
    """Refuse a sweep of ``count`` values beyond the limits (limits.py) before anything is allocated;
    ``s`` as returned by ``SweepSettings.checked``."""
    # a value and a time per sample, and the states, parameters and working arrays of each member
    limits.check_memory(16.0 * count * max(s.samples, 1) + 8.0 * count * (8 + 6 * system.n_states),
                        f"a sweep of {count:,} values with {s.samples:,} samples each")
    if system.kind == MAP:
        per_member = float(s.transient) + s.samples
    else:
        limits.check_span(float(s.transient), "the transient")
        limits.check_span(float(s.duration), "the duration")
        strobe = s.mode == STROBE and s.period
        length = float(s.transient) + (s.samples * s.period if strobe else s.duration)
        if s.dt:  # fixed RK4 steps
            per_member = limits.steps_of(length, min(s.dt, s.period) if strobe else s.dt)
        else:  # adaptive: at least one step per strobe period (the pace of each member is judged as it runs)
            per_member = limits.steps_of(length, s.period) if strobe else 0.0
    limits.check_steps(per_member * count, f"a sweep of {count:,} values")


def _sweep_arrays(system, parameter, values, settings, u0, base_p, cancel=None, progress=None, compiled=None):
    P = np.repeat(base_p[:, None], values.size, axis=1)
    P[system.parameters.index(parameter)] = values
    if system.delays:  # one method-of-steps run per value
        from orbitdesk.analyses.delay_sweep import delay_sweep_arrays

        return delay_sweep_arrays(system, P, u0, settings, cancel, progress)
    sampler, exponents, result = run_members(system, P, u0, settings, cancel, progress, compiled)
    return sampler.values, sampler.times, exponents, result.status


def _sweep_chunk(text, parameter, values, settings, u0, base_p):
    return _sweep_arrays(compiled_system(text), parameter, values, settings, u0, base_p)


# ---------------------------------------------------------------- two-parameter grids of the exponent
@dataclass
class GridSettings:
    transient: float = 100.0  # time (flows) or iterations (maps) before averaging
    duration: float = 1000.0  # averaging time (flows) or iterations (maps)
    dt: float | None = None  # a fixed RK4 step of flows; None: adaptive, as a single run
    t_start: float = 0.0
    bound: float = 1e10
    method: str = "dop853"
    rtol: float = 1e-8
    atol: float = 1e-10


@dataclass
class LyapunovGrid(GridAxes):  # x_name, xs, y_name, ys: the two parameters
    exponent: np.ndarray  # (ny, nx); NaN where the orbit diverged
    status: np.ndarray  # (ny, nx)

    def to_dict(self) -> dict:
        return {**self.axes_dict("parameter"), "lyapunov": self.exponent.tolist(), "status": self.status.tolist()}


def lyapunov_grid(system, pname_x: str, xs, pname_y: str, ys, settings: GridSettings | None = None,
                  u0=None, p=None, executor=None, chunk_size: int = 256, cancel=None,
                  progress=None, compiled: bool | None = None) -> LyapunovGrid:
    """Largest Lyapunov exponent over the grid ``ys x xs`` (rows: y), in chunks of ``chunk_size`` points.

    Chunks run on ``executor`` (default: a local process pool over the machine's cores; a grid that
    fits one chunk runs in this thread). Results do not depend on the executor.

    The engine is compiled with ``compiled`` None when the whole grid's work pays for compiling, True
    whenever numba is there, False never; the choice is made once for the grid. Compiled chunks run
    on threads of this process by default (the loops release the GIL)."""
    system.refuse_delays("the two-parameter map of exponents")
    refuse_ensembles(system, "Maps of the largest Lyapunov exponent")
    settings = settings or GridSettings()
    for name in (pname_x, pname_y):
        if name not in system.parameters:
            raise ValueError(f"unknown parameter '{name}' (parameters: {', '.join(system.parameters) or 'none'})")
    if pname_x == pname_y:
        raise ValueError("the grid needs two different parameters")
    xs = np.asarray(xs, dtype=float).ravel()
    ys = np.asarray(ys, dtype=float).ravel()
    if xs.size == 0 or ys.size == 0 or not (np.all(np.isfinite(xs)) and np.all(np.isfinite(ys))):
        raise ValueError("the grid values must be finite numbers")
    if system.kind != MAP:
        _check_accuracy(settings, stiff_allowed=False)
        if not (settings.duration > 0):
            raise ValueError("the averaging duration must be positive")
    base_p = system.param_values.astype(float) if p is None else np.asarray(p, dtype=float)
    u0 = system.initial.astype(float) if u0 is None else np.asarray(u0, dtype=float)
    gx, gy = np.meshgrid(xs, ys)
    points = np.vstack([gx.ravel(), gy.ravel()])
    pieces = split(points.shape[1], chunk_size)
    use_jit = _engine(system, points.shape[1] * _grid_work(system, settings), compiled).compiled
    if use_jit and executor is None and len(pieces) > 1:
        # the compiled loop runs without the GIL: threads here, no worker processes to start
        chunk = partial(_grid_chunk_local, system)
        args = [(pname_x, pname_y, points[:, piece], settings, u0, base_p) for piece in pieces]
        with ThreadPoolExecutor(max_workers=min(worker_count(), len(pieces))) as pool:
            parts = run_chunks(chunk, args, executor=pool, cancel=cancel, progress=progress)
    else:
        text = system.model.text
        args = [(text, pname_x, pname_y, points[:, piece], asdict(settings), u0, base_p, use_jit)
                for piece in pieces]
        parts = run_chunks(_grid_chunk, args, executor=executor, cancel=cancel, progress=progress)
    exponent = np.concatenate([part[0] for part in parts]).reshape(ys.size, xs.size)
    status = np.concatenate([part[1] for part in parts]).reshape(ys.size, xs.size)
    return LyapunovGrid(pname_x, xs, pname_y, ys, exponent, status)


def _grid_params(system, pname_x, pname_y, points, base_p):
    P = np.repeat(base_p[:, None], points.shape[1], axis=1)
    P[system.parameters.index(pname_x)] = points[0]
    P[system.parameters.index(pname_y)] = points[1]
    return P


def _grid_chunk(text, pname_x, pname_y, points, settings, u0, base_p, compiled=None):
    system = compiled_system(text)
    P = _grid_params(system, pname_x, pname_y, points, base_p)
    return grid_exponents(system, P, u0, GridSettings(**settings), compiled=compiled)


def _grid_chunk_local(system, pname_x, pname_y, points, settings, u0, base_p):
    P = _grid_params(system, pname_x, pname_y, points, base_p)
    return grid_exponents(system, P, u0, settings, compiled=True)


def _grid_work(system, grid: GridSettings) -> float:
    """Kernel calls per grid point (the state and one tangent vector)."""
    if system.kind == MAP:
        return 2.0 * (math.ceil(grid.transient) + max(1, math.ceil(grid.duration)))
    return 2.0 * (grid.transient + grid.duration) / (grid.dt or 0.05) * (4 if grid.dt else 12)


def grid_exponents(system, P, u0, grid: GridSettings, cancel=None, progress=None, compiled: bool | None = None):
    """Largest exponent for each column of P: (exponents (M,), status (M,)), the members on the
    engine's compiled loops with one tangent vector each (``compiled`` None: when the work pays,
    True: always, False: plain Python)."""
    from orbitdesk.engine import drivers
    from orbitdesk.engine.status import words

    n, M = system.n_states, P.shape[1]
    U0 = np.array(u0, dtype=float)
    if U0.ndim == 1:
        U0 = np.repeat(U0[:, None], M, axis=1)
    report = Reporter(progress, cancel)
    v0 = _start_vector(n)[:, None]
    with np.errstate(all="ignore"):
        if system.kind == MAP:
            first, length = int(math.ceil(grid.transient)), max(1, int(math.ceil(grid.duration)))
            n0 = int(grid.t_start)
            engine = _engine(system, M * _grid_work(system, grid), compiled)
            out = drivers.members_iterate(engine, n0, n0 + first + length, n0 + first, U0, P, bound=grid.bound,
                                          tangents=v0, report=report)
        else:
            t0 = float(grid.t_start)
            h = grid.dt
            span = grid.transient + grid.duration
            engine = _engine(system, M * _grid_work(system, grid), compiled)
            out = drivers.members_run(engine, "rk4" if h else (grid.method or "dop853"), t0, t0 + span, U0, P,
                                      rtol=grid.rtol,
                                      atol=grid.atol, dt=h or 0.01, bound=grid.bound, report=report,
                                      t_keep=t0 + grid.transient, tangents=v0,
                                      interval=1.0 if h is None else h * max(1, round(1.0 / h)), keep_going=True)
    status = words(out.codes)
    report(1.0)
    return _exponents(out, status), status


def _exponents(out, status):
    """The largest exponent of each member from its log sums (NaN where it stopped early)."""
    with np.errstate(all="ignore"):
        return np.where((status == OK) & (out.log_span > 0), out.log_sums[:, 0] / out.log_span, np.nan)
