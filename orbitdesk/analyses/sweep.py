"""Parameter sweeps: orbit diagrams over one parameter and grids of the largest Lyapunov exponent.

All parameter values of a sweep run together as one ensemble (``ensemble.py``). After a transient
each member contributes samples of an observed quantity:

* ``plane``: crossings of ``STATE = VALUE`` in a direction, located within the RK4 step on the
  cubic Hermite interpolant through the step's end values and rates (safeguarded Newton);
* ``strobe``: the state every forcing period ``T``; the RK4 step divides ``T`` exactly;
* ``maxima``: local maxima of a state, where its rate changes sign from + to -, located on the same
  Hermite interpolant;
* ``iterate``: iterates of a map.

Optionally the largest Lyapunov exponent per value: a tangent vector evolved with
``system.jac_vec`` alongside each member and renormalised every step, or for non-smooth models
a second trajectory a small distance away, pulled back every step.

Large sweeps and two-parameter grids can be split into chunks run on any
``concurrent.futures.Executor`` (``chunks.py``); workers recompile the model text.

Exponent grids of smooth maps use the compiled loop of ``jit.map_lyapunov`` (numba, optional)
when it is installed and the work pays for compiling; the numpy ensemble is the fallback.
"""

from __future__ import annotations

import math
from concurrent.futures import ThreadPoolExecutor
from dataclasses import asdict, dataclass, field, replace
from functools import partial

import numpy as np

from orbitdesk.engine.chunks import compiled_system, run_chunks, split, worker_count
from orbitdesk.engine.ensembles import _STATUS_WIDTH, DIVERGED, OK, UNDEFINED, iterate_run, member_jac, member_rhs, rk4_run
from orbitdesk.engine.progress import Reporter
from orbitdesk.system.compiled_system import MAP

PLANE, STROBE, MAXIMA, ITERATE = "plane", "strobe", "maxima", "iterate"
MODES = (PLANE, STROBE, MAXIMA, ITERATE)
UP, DOWN, BOTH = 1, -1, 0
_SEPARATION = 1e-8  # distance of the companion trajectory (non-smooth models)


@dataclass
class SweepSettings:
    mode: str | None = None  # plane | strobe | maxima | iterate (maps: iterate, the default)
    observe: str | None = None  # a state or derived quantity (maxima: a state); default the first state
    plane: tuple[str, float] | None = None  # the section STATE = VALUE
    direction: int = UP  # crossings with the state rising (+1), falling (-1) or both (0)
    period: float | None = None  # strobe period T
    transient: float = 100.0  # time (flows; strobe: rounded up to whole periods) or iterations (maps) dropped
    samples: int = 100  # samples kept per value
    dt: float = 0.01  # RK4 step (strobe: the nearest step dividing T that is not larger)
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
            if not (math.isfinite(s.dt) and s.dt > 0):
                raise ValueError("the step dt must be positive")
            if s.mode in (PLANE, MAXIMA) and not (math.isfinite(s.duration) and s.duration > 0):
                raise ValueError("the sampling duration must be positive")
        return s


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

    def points(self, i: int) -> np.ndarray:
        """The samples of value ``i`` without padding."""
        row = self.samples[i]
        return row[np.isfinite(row)]

    def to_dict(self) -> dict:
        return {"parameter": self.parameter, "values": self.values.tolist(),
                "samples": [self.points(i).tolist() for i in range(len(self.values))],
                "observed": self.observed, "mode": self.mode,
                "lyapunov": None if self.lyapunov is None else self.lyapunov.tolist(),
                "status": [str(s) for s in self.status]}


# ---------------------------------------------------------------- Hermite pieces and root refinement
def _hermite(s, y0, y1, d0, d1):
    """Cubic Hermite value at s in [0, 1]; d0, d1 are h * rates at the ends."""
    s2 = s * s
    s3 = s2 * s
    return (2 * s3 - 3 * s2 + 1) * y0 + (s3 - 2 * s2 + s) * d0 + (3 * s2 - 2 * s3) * y1 + (s3 - s2) * d1


def _hermite_ds(s, y0, y1, d0, d1):
    return (6 * s * s - 6 * s) * (y0 - y1) + (3 * s * s - 4 * s + 1) * d0 + (3 * s * s - 2 * s) * d1


def _hermite_ds2(s, y0, y1, d0, d1):
    return (12 * s - 6) * (y0 - y1) + (6 * s - 4) * d0 + (6 * s - 2) * d1


def bracketed_root(fn, g0, g1, iterations: int = 60, tol: float = 1e-14):
    """Roots in [0, 1] of many functions at once, ``fn(s) -> (g, dg/ds)`` with g0, g1 of opposite sign
    (or g1 = 0): Newton steps kept inside a shrinking bracket, bisection when Newton leaves it."""
    a = np.zeros_like(g0)
    b = np.ones_like(g0)
    ga = g0.copy()
    with np.errstate(all="ignore"):
        s = np.where(g0 != g1, g0 / (g0 - g1), 0.5)
        s = np.clip(np.nan_to_num(s, nan=0.5), 0.0, 1.0)
        for _ in range(iterations):
            g, dg = fn(s)
            same = np.sign(g) == np.sign(ga)
            a = np.where(same, s, a)
            ga = np.where(same, g, ga)
            b = np.where(same, b, s)
            new = s - g / dg
            outside = ~((new > a) & (new < b))
            new = np.where(outside, 0.5 * (a + b), new)
            new = np.where(g == 0, s, new)
            moved = np.max(np.abs(new - s))
            s = new
            if moved <= tol:
                break
    return s


class _Samples:
    """Up to K values per member, with the time of each."""

    def __init__(self, M, K):
        self.values = np.full((M, K), np.nan)
        self.times = np.full((M, K), np.nan)
        self.count = np.zeros(M, dtype=np.int64)
        self.K = K

    def add(self, members, t, v):
        room = self.count[members] < self.K
        m = members[room]
        c = self.count[m]
        self.values[m, c] = np.broadcast_to(v, members.shape)[room]
        self.times[m, c] = np.broadcast_to(t, members.shape)[room]
        self.count[m] += 1

    @property
    def full(self) -> bool:
        return bool(np.all(self.count >= self.K))


class _Observed:
    """The observed quantity for a subset of members: a state row, or a derived quantity."""

    def __init__(self, system, name, P):
        self.system, self.name, self.P = system, name, P
        self.row = system.states.index(name) if name in system.states else None

    def __call__(self, t, U, members):
        if self.row is not None:
            return U[self.row]
        P = self.P if self.P.ndim == 1 else self.P[:, members]
        return self.system.derived_values(t, U, P)[self.name]


class _StepSampler(_Samples):
    """Crossings within RK4 steps, refined on the cubic Hermite interpolant of the step."""

    wants_rates = True

    def __init__(self, M, K, n, h, t_keep, observed):
        super().__init__(M, K)
        self.h, self.t_keep, self.observed = h, t_keep, observed
        self.U_prev = np.empty((n, M))
        self.F_prev = np.empty((n, M))
        self.g_prev = None
        self.t_prev = None

    def _g(self, U, F):
        raise NotImplementedError

    def _root(self, members, y0, y1, d0, d1):
        raise NotImplementedError

    def __call__(self, step, t, U, F):
        g = self._g(U, F)
        if step > 0 and t > self.t_keep:
            hit = self._hits(self.g_prev, g)
            if hit.any():
                w = np.nonzero(hit)[0]
                y0, y1 = self.U_prev[:, w], U[:, w]
                d0, d1 = self.h * self.F_prev[:, w], self.h * F[:, w]
                s = self._root(w, y0, y1, d0, d1)
                tc = self.t_prev + s * self.h
                late = tc >= self.t_keep
                if late.any():
                    w, s, tc = w[late], s[late], tc[late]
                    y0, y1, d0, d1 = y0[:, late], y1[:, late], d0[:, late], d1[:, late]
                    states = _hermite(s, y0, y1, d0, d1)
                    self.add(w, tc, self.observed(tc, states, w))
        self.U_prev[...] = U
        self.F_prev[...] = F
        self.g_prev = g
        self.t_prev = t
        return self.full


class _PlaneSampler(_StepSampler):
    def __init__(self, M, K, n, h, t_keep, observed, row, value, direction):
        super().__init__(M, K, n, h, t_keep, observed)
        self.row, self.value, self.direction = row, value, direction

    def _g(self, U, F):
        return U[self.row] - self.value

    def _hits(self, g0, g1):
        up = (g0 < 0) & (g1 >= 0)
        down = (g0 > 0) & (g1 <= 0)
        return up if self.direction == UP else down if self.direction == DOWN else up | down

    def _root(self, members, y0, y1, d0, d1):
        k, v = self.row, self.value
        a, b, c, d = y0[k], y1[k], d0[k], d1[k]
        return bracketed_root(lambda s: (_hermite(s, a, b, c, d) - v, _hermite_ds(s, a, b, c, d)), a - v, b - v)


class _MaximaSampler(_StepSampler):
    def __init__(self, M, K, n, h, t_keep, observed, row):
        super().__init__(M, K, n, h, t_keep, observed)
        self.row = row

    def _g(self, U, F):
        return F[self.row].copy()

    def _hits(self, g0, g1):
        return (g0 > 0) & (g1 <= 0)

    def _root(self, members, y0, y1, d0, d1):
        k = self.row
        a, b, c, d = y0[k], y1[k], d0[k], d1[k]
        return bracketed_root(lambda s: (_hermite_ds(s, a, b, c, d), _hermite_ds2(s, a, b, c, d)), c, d)


class _EverySampler(_Samples):
    """Every ``every``-th step from ``first`` on: strobe samples of flows, iterates of maps."""

    wants_rates = False

    def __init__(self, M, K, first, every, observed):
        super().__init__(M, K)
        self.first, self.every, self.observed = first, every, observed
        self.all = np.arange(M)
        self.column = 0  # every member gets each sample, so one column index serves all

    def __call__(self, step, t, U, F=None):
        if step >= self.first and (step - self.first) % self.every == 0 and self.column < self.K:
            self.values[:, self.column] = self.observed(t, U, self.all)
            self.times[:, self.column] = t
            self.column += 1
            self.count[:] = self.column
        return self.column >= self.K


class _Lyapunov:
    """Largest exponent: the perturbation rows of Y (n: 2n) renormalised after every step."""

    wants_rates = True

    def __init__(self, n, M, keep_from_step, smooth, companion_rhs=None):
        self.n, self.keep_from = n, keep_from_step
        self.smooth = smooth
        self.companion_rhs = companion_rhs  # f(t, W) for the companion trajectory (non-smooth flows)
        self.total = np.zeros(M)
        self.counted = 0

    def __call__(self, step, t, Y, F):
        if step == 0:
            return False
        n = self.n
        if self.smooth:
            V = Y[n:]
            norm = np.sqrt(np.einsum("im,im->m", V, V))
            scale = 1.0 / np.where(norm > 0, norm, 1.0)
            V *= scale
            if F is not None:
                F[n:] *= scale
        else:
            U, W = Y[:n], Y[n:]
            D = W - U
            norm = np.sqrt(np.einsum("im,im->m", D, D)) / _SEPARATION
            scale = 1.0 / np.where(norm > 0, norm, 1.0)
            D *= scale
            np.add(U, D, out=W)
            if F is not None:
                F[n:] = self.companion_rhs(t, W)
        if step > self.keep_from:
            self.total += np.log(np.maximum(norm, 1e-300))
            self.counted += 1
        return False


class _Observers:
    def __init__(self, lyapunov, sampler, n, stop_when_full):
        self.lyapunov, self.sampler, self.n, self.stop = lyapunov, sampler, n, stop_when_full
        self.wants_rates = bool(getattr(lyapunov, "wants_rates", False) or getattr(sampler, "wants_rates", False))

    def __call__(self, step, t, Y, F=None):
        if self.lyapunov is not None:
            self.lyapunov(step, t, Y, F)
        n = self.n
        full = False
        if self.sampler is not None:
            if self.sampler.wants_rates:
                full = self.sampler(step, t, Y[:n], F[:n])
            else:
                full = self.sampler(step, t, Y[:n])
        return full and self.stop


# ---------------------------------------------------------------- running members
def _start_vector(n):
    v = np.arange(1.0, n + 1.0)
    return v / np.linalg.norm(v)


def _augmented(system, P, U, lyapunov):
    """Initial Y and the step function, with perturbation rows when the exponent is wanted."""
    n, M = U.shape
    rhs = member_rhs(system, P)
    if not lyapunov:
        return U.copy(), rhs, None
    if system.smooth:
        jac = member_jac(system, P)
        V0 = np.repeat(_start_vector(n)[:, None], M, axis=1)

        def fun(t, Y):
            out = np.empty_like(Y)
            out[:n] = rhs(t, Y[:n])
            out[n:] = np.einsum("ijm,jm->im", jac(t, Y[:n]), Y[n:])
            return out

        return np.vstack([U, V0]), fun, None
    W0 = U + _SEPARATION * _start_vector(n)[:, None]

    def fun(t, Y):
        out = np.empty_like(Y)
        out[:n] = rhs(t, Y[:n])
        out[n:] = rhs(t, Y[n:])
        return out

    return np.vstack([U, W0]), fun, (rhs if system.kind != MAP else None)


def run_members(system, P, U0, settings: SweepSettings, cancel=None, progress=None):
    """One ensemble over the columns of P (and U0) with checked settings: (samples, exponents, EnsembleResult)."""
    s = settings
    n = system.n_states
    M = P.shape[1]
    observed = _Observed(system, s.observe, P)
    if system.kind == MAP:
        first = int(math.ceil(s.transient))
        sampler = _EverySampler(M, s.samples, first + 1, 1, observed)
        h, n_steps, keep_from, stop = 1, first + s.samples, first, False
    elif s.mode == STROBE:
        T = float(s.period)
        per = max(1, int(math.ceil(T / s.dt - 1e-9)))
        periods = int(math.ceil(s.transient / T - 1e-9))
        keep_from = periods * per
        sampler = _EverySampler(M, s.samples, keep_from + per, per, observed)
        h, n_steps, stop = T / per, (periods + s.samples) * per, False
    else:
        h = float(s.dt)
        keep_from = int(math.ceil(s.transient / h - 1e-9))
        n_steps = keep_from + int(math.ceil(s.duration / h - 1e-9))
        t_keep = float(s.t_start) + s.transient
        if s.mode == PLANE:
            name, value = s.plane
            sampler = _PlaneSampler(M, s.samples, n, h, t_keep, observed, system.states.index(name), value,
                                    s.direction)
        else:
            sampler = _MaximaSampler(M, s.samples, n, h, t_keep, observed, system.states.index(s.observe))
        stop = not s.lyapunov  # without the exponent, stop once every member has its samples
    exponents, result = _execute(system, P, U0, h, n_steps, keep_from, sampler, stop, s.lyapunov,
                                 s.t_start, s.bound, Reporter(progress, cancel))
    failed = result.status != OK
    if failed.any():  # a frozen member contributes nothing from the moment it froze
        late = failed[:, None] & ~(sampler.times < result.time[:, None])
        sampler.values[late] = np.nan
        sampler.times[late] = np.nan
    return sampler, exponents, result


def _execute(system, P, U0, h, n_steps, keep_from, sampler, stop, lyapunov, t_start, bound, report):
    n = system.n_states
    M = P.shape[1]
    U0 = np.array(U0, dtype=float)
    if U0.ndim == 1:
        U0 = np.repeat(U0[:, None], M, axis=1)
    Y, fun, companion = _augmented(system, P, U0, lyapunov)
    lyap = _Lyapunov(n, M, keep_from, system.smooth, companion) if lyapunov else None
    observer = _Observers(lyap, sampler, n, stop)
    if system.kind == MAP:
        result = iterate_run(fun, Y, int(t_start), n_steps, observer, report, bound, n)
    else:
        result = rk4_run(fun, Y, float(t_start), h, n_steps, observer, report, bound, n)
    exponents = None
    if lyap is not None:
        span = lyap.counted * h
        exponents = lyap.total / span if span > 0 else np.full(M, np.nan)
        exponents = np.where(result.status == OK, exponents, np.nan)
    report(1.0)
    return exponents, result


def sweep(system, parameter: str, values, settings: SweepSettings | None = None, u0=None, p=None,
          cancel=None, progress=None, executor=None, chunk_size: int | None = None) -> SweepResult:
    """Orbit diagram over ``values`` of ``parameter``: all values run together as one ensemble.

    ``u0`` is one starting state for every value (n,) or one per value (n, M); ``p`` the other parameters.

    With an ``executor`` or a ``chunk_size`` the values are split into chunks (default size 64)
    run by ``chunks.run_chunks`` (default executor: a local process pool); the model text and plain
    settings travel to the workers. ``Cancelled`` is raised when ``cancel`` is set."""
    settings = (settings or SweepSettings()).checked(system)
    if parameter not in system.parameters:
        raise ValueError(f"unknown parameter '{parameter}' (parameters: {', '.join(system.parameters) or 'none'})")
    values = np.asarray(values, dtype=float).ravel()
    if values.size == 0 or not np.all(np.isfinite(values)):
        raise ValueError("the parameter values must be finite numbers")
    base_p = system.param_values.astype(float) if p is None else np.asarray(p, dtype=float)
    u0 = system.initial.astype(float) if u0 is None else np.asarray(u0, dtype=float)
    if executor is not None or chunk_size is not None:
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
                                                     cancel, progress)
    return SweepResult(parameter, values, samples, settings.observe, settings.mode, lyap, status, times)


def _sweep_arrays(system, parameter, values, settings, u0, base_p, cancel=None, progress=None):
    P = np.repeat(base_p[:, None], values.size, axis=1)
    P[system.parameters.index(parameter)] = values
    sampler, exponents, result = run_members(system, P, u0, settings, cancel, progress)
    return sampler.values, sampler.times, exponents, result.status


def _sweep_chunk(text, parameter, values, settings, u0, base_p):
    return _sweep_arrays(compiled_system(text), parameter, values, settings, u0, base_p)


# ---------------------------------------------------------------- two-parameter grids of the exponent
@dataclass
class GridSettings:
    transient: float = 100.0  # time (flows) or iterations (maps) before averaging
    duration: float = 1000.0  # averaging time (flows) or iterations (maps)
    dt: float = 0.01  # RK4 step of flows
    t_start: float = 0.0
    bound: float = 1e10


@dataclass
class LyapunovGrid:
    x_name: str
    xs: np.ndarray  # (nx,)
    y_name: str
    ys: np.ndarray  # (ny,)
    exponent: np.ndarray  # (ny, nx); NaN where the orbit diverged
    status: np.ndarray  # (ny, nx)

    def to_dict(self) -> dict:
        return {"x": {"parameter": self.x_name, "values": self.xs.tolist()},
                "y": {"parameter": self.y_name, "values": self.ys.tolist()},
                "lyapunov": self.exponent.tolist(), "status": self.status.tolist()}


def lyapunov_grid(system, pname_x: str, xs, pname_y: str, ys, settings: GridSettings | None = None,
                  u0=None, p=None, executor=None, chunk_size: int = 256, cancel=None,
                  progress=None, compiled: bool | None = None) -> LyapunovGrid:
    """Largest Lyapunov exponent over the grid ``ys x xs`` (rows: y), in chunks of ``chunk_size`` points.

    Chunks run on ``executor`` (default: a local process pool over the machine's cores; a grid that
    fits one chunk runs in this thread). Results do not depend on the executor.

    Smooth maps use the compiled exponent loop (``jit``) with ``compiled`` None when the whole grid's
    work pays for compiling, True whenever numba is there, False never; the choice is made once for
    the grid. Compiled chunks run on threads of this process by default (the loop releases the GIL)."""
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
    if system.kind != MAP and not (settings.dt > 0 and settings.duration > 0):
        raise ValueError("the step and the averaging duration must be positive")
    base_p = system.param_values.astype(float) if p is None else np.asarray(p, dtype=float)
    u0 = system.initial.astype(float) if u0 is None else np.asarray(u0, dtype=float)
    gx, gy = np.meshgrid(xs, ys)
    points = np.vstack([gx.ravel(), gy.ravel()])
    pieces = split(points.shape[1], chunk_size)
    use_jit = _use_compiled(system, points.shape[1] * _grid_steps(system, settings)[1], compiled)
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


def _grid_chunk(text, pname_x, pname_y, points, settings, u0, base_p, compiled=False):
    system = compiled_system(text)
    P = _grid_params(system, pname_x, pname_y, points, base_p)
    return grid_exponents(system, P, u0, GridSettings(**settings), compiled=compiled)


def _grid_chunk_local(system, pname_x, pname_y, points, settings, u0, base_p):
    P = _grid_params(system, pname_x, pname_y, points, base_p)
    return grid_exponents(system, P, u0, settings, compiled=True)


def _grid_steps(system, grid: GridSettings) -> tuple[float, int, int]:
    """(step h, total steps, steps before averaging) of a grid run."""
    if system.kind == MAP:
        keep_from = int(math.ceil(grid.transient))
        return 1, keep_from + max(1, int(math.ceil(grid.duration))), keep_from
    h = float(grid.dt)
    keep_from = int(math.ceil(grid.transient / h - 1e-9))
    return h, keep_from + max(1, int(math.ceil(grid.duration / h - 1e-9))), keep_from


def _use_compiled(system, member_steps: float, compiled: bool | None) -> bool:
    """The compiled exponent loop applies (smooth maps), numba is there, and it is wanted or pays."""
    if compiled is False or system.kind != MAP or not system.smooth:
        return False
    from orbitdesk.engine import jit

    return jit.available() if compiled else jit.worth_it(system, member_steps)


def grid_exponents(system, P, u0, grid: GridSettings, cancel=None, progress=None, compiled: bool | None = None):
    """Largest exponent for each column of P: (exponents (M,), status (M,)).

    ``compiled`` as in ``lyapunov_grid``: the numba loop for smooth maps (None: when the work pays)."""
    h, n_steps, keep_from = _grid_steps(system, grid)
    M = P.shape[1]
    if _use_compiled(system, M * n_steps, compiled):
        return _compiled_exponents(system, P, u0, n_steps, keep_from, grid, Reporter(progress, cancel))
    exponents, result = _execute(system, P, u0, h, n_steps, keep_from, None, False, True, grid.t_start,
                                 grid.bound, Reporter(progress, cancel))
    return exponents, result.status


def _compiled_exponents(system, P, u0, n_steps, keep_from, grid, report):
    """``grid_exponents`` of a smooth map by ``jit.map_lyapunov``: the same tangent-vector start,
    renormalisation and averaging as the numpy path."""
    from orbitdesk.engine import jit

    n, M = system.n_states, P.shape[1]
    U = np.array(u0, dtype=float)
    U = np.repeat(U[:, None], M, axis=1) if U.ndim == 1 else np.ascontiguousarray(U)
    total, codes = jit.map_lyapunov(system, U, P, int(grid.t_start), keep_from, n_steps, float(grid.bound),
                                    _start_vector(n), report)
    counted = n_steps - keep_from
    exponents = np.where(codes == jit.STATUS_OK, total / counted, np.nan)
    status = np.full(M, OK, dtype=_STATUS_WIDTH)
    status[codes == jit.STATUS_DIVERGED] = DIVERGED
    status[codes == jit.STATUS_UNDEFINED] = UNDEFINED
    report(1.0)
    return exponents, status
