"""Lyapunov exponents: the full spectrum by the variational equations with QR, and the largest
exponent by two nearby trajectories.

Spectrum (Benettin, Galgani, Giorgilli, Strelcyn 1980; Wolf, Swift, Swinney, Vastano 1985): the
tangent matrix Phi is carried along the orbit - flows: dPhi/dt = J(t, u) Phi, integrated with
the state by a generated fixed-step RK4; maps: Phi -> J(u) Phi each step - and re-orthonormalised
by Gram-Schmidt (a QR factorisation) every renormalisation interval; the logarithms of R's
diagonal, averaged over the time after the transient, are the exponents.

Flows step with a fixed dt chosen from the Jacobian's largest rate along the transient and
checked by step doubling, unless dt is given. A forced (non-autonomous) flow gets its n state
exponents; the direction of time itself would add one zero exponent only if the forcing phase
were a state, so none is reported for it.

Models with non-smooth functions have no Jacobian where they switch; their spectrum is replaced
by the largest exponent from two trajectories, with a warning.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
import sympy as sp

from .engine import CANCELLED, DIVERGED, OK, UNDEFINED, RunSettings, simulate
from .progress import Cancelled, Reporter
from .system import MAP, CompiledSystem
from .variational import map_variational_step, rk4_step_function, variational_rk4_step

QR, TWO_TRAJECTORY = "qr", "two-trajectory"
MAX_RUNNING = 5000  # rows of running estimates kept
STEP_TOLERANCE = 1e-5  # local RK4 error per step, relative to max(1, |u|), accepted by the dt check
RENORM_STEPS = 10  # default renormalisation interval in steps of dt (flows)


@dataclass
class LyapunovResult:
    exponents: np.ndarray  # descending
    kind: str
    method: str  # "qr" or "two-trajectory"
    times: np.ndarray  # (K,) time (flows) or step (maps) of each running estimate
    running: np.ndarray  # (K, m) the estimates after each renormalisation, columns as exponents
    kaplan_yorke_dimension: float | None
    averaged_over: float  # time (flows) or steps (maps) after the transient
    dt: float | None = None  # fixed step of a flow
    renorm_interval: float | None = None
    status: str = OK
    message: str = ""
    warnings: list[str] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return self.status == OK

    @property
    def largest(self) -> float:
        return float(self.exponents[0]) if self.exponents.size else math.nan


def kaplan_yorke_dimension(exponents) -> float:
    """D = j + (l_1 + ... + l_j) / |l_{j+1}|, j the largest index with a non-negative partial sum."""
    values = np.sort(np.asarray(exponents, dtype=float))[::-1]
    if values.size == 0 or not np.all(np.isfinite(values)):
        return math.nan
    sums = np.cumsum(values)
    nonneg = np.nonzero(sums >= 0)[0]
    if nonneg.size == 0:
        return 0.0
    j = int(nonneg[-1]) + 1
    if j == values.size:
        return float(j)
    return j + float(sums[j - 1]) / abs(float(values[j]))


# ---------------------------------------------------------------- shared pieces
def _orthonormalise(flat, n):
    """Gram-Schmidt on the columns of a row-major n x n list: (Q row-major, log of R's diagonal)."""
    cols = [[flat[i * n + j] for i in range(n)] for j in range(n)]
    logs = []
    for j in range(n):
        v = cols[j]
        before = math.sqrt(sum(a * a for a in v))
        for _ in range(2):  # a second pass only when the first cancelled most of v
            for q in cols[:j]:
                d = sum(a * b for a, b in zip(q, v))
                v = [a - d * b for a, b in zip(v, q)]
            norm = math.sqrt(sum(a * a for a in v))
            if norm > 0.5 * before or norm == 0:
                break
            before = norm
        if not norm > 0:
            raise ZeroDivisionError("the tangent vectors collapsed")
        logs.append(math.log(norm))
        cols[j] = [a / norm for a in v]
    return [cols[j][i] for i in range(n) for j in range(n)], logs


def _identity(n):
    return [1.0 if i == j else 0.0 for i in range(n) for j in range(n)]


def _span(system, settings, t_end, steps, transient):
    """(start, end, transient) of a flow in time or of a map in steps; a tenth of the run by default."""
    if system.kind == MAP:
        end = int(settings.steps if steps is None else steps)
        start = 0
    else:
        end = float(settings.t_end if t_end is None else t_end)
        start = float(settings.t_start)
    if transient is None:
        transient = settings.transient if settings.transient > 0 else 0.1 * (end - start)
    transient = int(round(transient)) if system.kind == MAP else float(transient)
    if not (math.isfinite(float(end)) and math.isfinite(float(transient)) and transient >= 0):
        raise ValueError("the run length and the transient must be finite, the transient non-negative")
    if not end - start - transient > 0:
        what = "steps" if system.kind == MAP else "the end time"
        raise ValueError(f"{what} must leave a run after the transient (run {end - start:g}, transient {transient:g})")
    return start, end, transient


def _transient_flow(system, settings, u, p, t0, transient, cancel):
    """The state after the transient and states along it (for choosing dt)."""
    if transient <= 0:
        return u, u.reshape(-1, 1), np.array([t0]), None
    run = simulate(system, replace(settings, t_start=t0, t_end=t0 + transient, samples=200, transient=0.0),
                   u, p, cancel=cancel)
    if not run.ok:
        return None, None, None, run
    return run.final_state.copy(), run.states, run.time, None


def _choose_dt(system, p, samples, times, span, dt, smooth):
    """A fixed RK4 step: half the inverse of the Jacobian's largest rate, halved until step
    doubling shows a local error below STEP_TOLERANCE at states along the transient."""
    t, u, ps, _ = system._plain
    if dt is not None:
        return float(dt)
    guess = span / 1000.0
    if smooth:
        with np.errstate(all="ignore"):
            jac = np.moveaxis(system.jac_vec(times, samples, p), -1, 0)
        finite = np.all(np.isfinite(jac), axis=(1, 2))
        if finite.any():
            rate = float(np.max(np.abs(np.linalg.eigvals(jac[finite]))))
            if rate > 0:
                guess = min(guess, 0.5 / rate)
    step = rk4_step_function(t, u, ps, system.plain(system.f), p)
    picks = np.unique(np.linspace(0, samples.shape[1] - 1, min(40, samples.shape[1])).astype(int))
    for _ in range(30):
        worst = 0.0
        for k in picks:
            y, tk = [float(v) for v in samples[:, k]], float(times[k])
            try:
                one = np.array(step(tk, guess, y))
                two = np.array(step(tk + guess / 2, guess / 2, step(tk, guess / 2, y)))
            except (ValueError, ZeroDivisionError, OverflowError):
                worst = math.inf
                break
            worst = max(worst, float(np.max(np.abs(one - two) / np.maximum(1.0, np.abs(two)))))
        if worst <= STEP_TOLERANCE:
            break
        guess /= 2
    return guess


def _stride(count):
    return max(1, math.ceil(count / MAX_RUNNING))


def _sorted_result(sums, rows, row_times, kind, method, averaged, **extra):
    exponents = np.asarray(sums, dtype=float) / averaged if averaged > 0 else np.full(len(sums), np.nan)
    order = np.argsort(-exponents, kind="stable")
    running = np.asarray(rows, dtype=float).reshape(-1, len(sums))[:, order]
    exponents = exponents[order]
    dimension = kaplan_yorke_dimension(exponents) if method == QR else None
    return LyapunovResult(exponents, kind, method, np.asarray(row_times, dtype=float), running, dimension,
                          averaged, **extra)


# ---------------------------------------------------------------- spectrum
def lyapunov_spectrum(system: CompiledSystem, p=None, u0=None, t_end: float | None = None,
                      steps: int | None = None, transient: float | None = None,
                      dt_renorm: float | None = None, dt: float | None = None,
                      settings: RunSettings | None = None, cancel=None, progress=None) -> LyapunovResult:
    """All n exponents, in descending order, with running estimates and the Kaplan-Yorke dimension.

    Flows run from ``settings.t_start`` to ``t_end`` (default ``settings.t_end``); maps for
    ``steps`` iterations (default ``settings.steps``). The first ``transient`` (default
    ``settings.transient``, or a tenth of the run) is discarded. ``dt_renorm``: time between
    re-orthonormalisations of a flow (default 10 steps of dt). A non-smooth model gets the
    two-trajectory largest exponent instead, with a warning.
    """
    settings = settings or RunSettings()
    if system.nonsmooth:
        result = largest_lyapunov_two_trajectory(system, p, u0, t_end=t_end, steps=steps, transient=transient,
                                                 dt=dt, settings=settings, cancel=cancel, progress=progress)
        result.warnings.insert(0, f"the model uses {', '.join(system.nonsmooth)}(), where the Jacobian is "
                                  "undefined; only the largest exponent is given, from two nearby trajectories")
        return result
    p = system.param_values.copy() if p is None else np.asarray(p, dtype=float)
    u = system.initial.copy() if u0 is None else np.asarray(u0, dtype=float)
    start, end, transient = _span(system, settings, t_end, steps, transient)
    if system.kind == MAP:
        return _map_spectrum(system, p, u, end, transient, settings.bound, Reporter(progress, cancel))
    return _flow_spectrum(system, p, u, start, end, transient, dt_renorm, dt, settings, cancel, progress)


def _failed(kind, method, status, message, n, **extra):
    return LyapunovResult(np.full(n, np.nan), kind, method, np.empty(0), np.empty((0, n)), None, 0.0,
                          status=status, message=message, **extra)


def _flow_spectrum(system, p, u, t0, t1, transient, dt_renorm, dt, settings, cancel, progress):
    n = system.n_states
    report = Reporter(progress, cancel)
    u, samples, times, failed = _transient_flow(system, settings, u, p, t0, transient, cancel)
    if failed is not None:
        return _failed("flow", QR, failed.status, f"during the transient: {failed.message}", n)
    ts = t0 + transient
    dt = _choose_dt(system, p, samples, times, t1 - ts, dt, True)
    if not (math.isfinite(dt) and dt > 0):
        raise ValueError("the step dt must be positive")
    n_steps = max(1, math.ceil((t1 - ts) / dt - 1e-9))
    dt = (t1 - ts) / n_steps
    every = RENORM_STEPS if dt_renorm is None else max(1, int(round(float(dt_renorm) / dt)))
    step = variational_rk4_step(system, p)
    z = [float(v) for v in u] + _identity(n)
    sums = [0.0] * n
    rows, row_times = [], []
    stride = _stride(math.ceil(n_steps / every))
    status, message, warnings = OK, "", []
    done, renorms, bound = 0, 0, settings.bound
    try:
        while done < n_steps:
            block = min(every, n_steps - done)
            t = ts + done * dt
            for _ in range(block):
                z = step(t, dt, z)
                done += 1
                t = ts + done * dt
            state = z[:n]
            if not all(abs(v) <= bound for v in state):  # also catches nan
                status, message = DIVERGED, (f"the solution blows up near {system.time_name} = {t:.6g}; "
                                             f"try a smaller step than dt = {dt:.3g}")
                break
            q, logs = _orthonormalise(z[n:], n)
            if max(logs) - min(logs) > 30:
                warnings.append("the tangent vectors grew apart by more than e^30 between renormalisations; "
                                "renormalise more often")
            sums = [a + b for a, b in zip(sums, logs)]
            z = state + q
            renorms += 1
            if renorms % stride == 0 or done == n_steps:
                rows.append([s / (t - ts) for s in sums])
                row_times.append(t)
            if renorms % 50 == 0:
                report(done / n_steps)
    except OverflowError:
        status, message = DIVERGED, (f"the solution blows up near {system.time_name} = {ts + done * dt:.6g}; "
                                     f"try a smaller step than dt = {dt:.3g}")
    except (ValueError, ZeroDivisionError, TypeError):
        status = UNDEFINED
        message = (system.explain_undefined(ts + done * dt, z[:n], p)
                   or f"an expression is undefined near {system.time_name} = {ts + done * dt:.6g}")
    except Cancelled:
        status, message = CANCELLED, "cancelled"
    averaged = done * dt if status == OK else (row_times[-1] - ts if row_times else 0.0)
    if status != OK and row_times:
        sums = [r * averaged for r in rows[-1]]
    return _sorted_result(sums, rows, row_times, "flow", QR, averaged, dt=dt, renorm_interval=every * dt,
                          status=status, message=message, warnings=sorted(set(warnings)))


def _map_spectrum(system, p, u, steps, transient, bound, report):
    n = system.n_states
    f = system.rhs_function(p)
    state = [float(v) for v in u]
    k = 0
    status, message, warnings = OK, "", []
    try:
        for k in range(transient):
            state = list(f(k, state))
            if not all(abs(v) <= bound for v in state):
                raise OverflowError
    except OverflowError:
        return _failed("map", QR, DIVERGED, f"the orbit escapes to infinity during the transient (n = {k + 1})", n)
    except (ValueError, ZeroDivisionError, TypeError):
        return _failed("map", QR, UNDEFINED, system.explain_undefined(k, state, p) or f"undefined value at n = {k}", n)
    step = map_variational_step(system, p)
    z = state + _identity(n)
    sums = [0.0] * n
    rows, row_times = [], []
    total = steps - transient
    stride = _stride(total)
    done = 0  # iterations whose logarithms are in sums
    try:
        for k in range(transient, steps):
            new = step(k, z)
            if not all(abs(v) <= bound for v in new[:n]):
                status, message = DIVERGED, f"the orbit escapes to infinity at n = {k + 1}"
                break
            if new[:n] == z[:n] and not warnings:
                warnings.append(f"the orbit sits exactly on a fixed point at n = {k} (round-off); "
                                "the exponents are that fixed point's")
            try:
                q, logs = _orthonormalise(new[n:], n)
            except ZeroDivisionError:
                status = UNDEFINED
                message = (f"the Jacobian is singular on the orbit at n = {k} (a critical point): "
                           "the exponent is minus infinity for this orbit; start elsewhere")
                break
            sums = [a + b for a, b in zip(sums, logs)]
            done += 1
            z = list(new[:n]) + q
            if done % stride == 0 or done == total:
                rows.append([s / done for s in sums])
                row_times.append(k + 1)
            if done % 2000 == 0:
                report(done / total)
    except OverflowError:
        status, message = DIVERGED, f"the orbit escapes to infinity at n = {k + 1}"
    except (ValueError, ZeroDivisionError, TypeError):
        status = UNDEFINED
        message = system.explain_undefined(k, z[:n], p) or f"undefined value at n = {k}"
    except Cancelled:
        status, message = CANCELLED, "cancelled"
    return _sorted_result(sums, rows, row_times, "map", QR, float(done), status=status,
                          message=message, warnings=warnings)


# ---------------------------------------------------------------- two trajectories
def _pair_step(system, p):
    """A generated RK4 step of two copies of the flow, z = (u, v)."""
    t, u, ps, _ = system._plain
    v = [sp.Symbol(f"_v{i}", real=True) for i in range(len(u))]
    f = system.plain(system.f)
    f_v = [e.xreplace(dict(zip(u, v))) for e in f]
    return rk4_step_function(t, list(u) + v, ps, f + f_v, p)


def largest_lyapunov_two_trajectory(system: CompiledSystem, p=None, u0=None, t_end: float | None = None,
                                    steps: int | None = None, transient: float | None = None,
                                    d0: float = 1e-8, renorm_every: float | None = None,
                                    dt: float | None = None, settings: RunSettings | None = None,
                                    cancel=None, progress=None) -> LyapunovResult:
    """The largest exponent from a reference orbit and a companion started ``d0`` away, pulled back
    to distance ``d0`` along their separation every ``renorm_every`` (Benettin et al. 1976/1980).

    Needs no Jacobian, so it serves non-smooth models. Flows: ``renorm_every`` is a time (default
    10 steps of dt); maps: a number of steps (default 1). Distances are Euclidean in the states.
    """
    settings = settings or RunSettings()
    if not (math.isfinite(d0) and d0 > 0):
        raise ValueError("d0 must be a small positive distance")
    p = system.param_values.copy() if p is None else np.asarray(p, dtype=float)
    u = system.initial.copy() if u0 is None else np.asarray(u0, dtype=float)
    start, end, transient = _span(system, settings, t_end, steps, transient)
    n = system.n_states
    report = Reporter(progress, cancel)
    direction = [1.0 / math.sqrt(n)] * n
    if system.kind == MAP:
        return _map_pair(system, p, u, end, transient, d0, renorm_every, direction, settings.bound, report)
    u, samples, times, failed = _transient_flow(system, settings, u, p, start, transient, cancel)
    if failed is not None:
        return _failed("flow", TWO_TRAJECTORY, failed.status, f"during the transient: {failed.message}", 1)
    ts = start + transient
    dt = _choose_dt(system, p, samples, times, end - ts, dt, system.smooth)
    n_steps = max(1, math.ceil((end - ts) / dt - 1e-9))
    dt = (end - ts) / n_steps
    every = RENORM_STEPS if renorm_every is None else max(1, int(round(float(renorm_every) / dt)))
    step = _pair_step(system, p)
    ref = [float(v) for v in u]
    z = ref + [a + d0 * b for a, b in zip(ref, direction)]
    total, done, renorms = 0.0, 0, 0
    rows, row_times = [], []
    stride = _stride(math.ceil(n_steps / every))
    status, message = OK, ""
    try:
        while done < n_steps:
            block = min(every, n_steps - done)
            for _ in range(block):
                z = step(ts + done * dt, dt, z)
                done += 1
            a, b = z[:n], z[n:]
            if not all(abs(v) <= settings.bound for v in a):
                status, message = DIVERGED, f"the solution blows up near {system.time_name} = {ts + done * dt:.6g}"
                break
            sep = [y - x for x, y in zip(a, b)]
            dist = math.sqrt(sum(s * s for s in sep))
            if not dist > 0:
                raise ZeroDivisionError("the two trajectories merged")
            total += math.log(dist / d0)
            z = a + [x + d0 * s / dist for x, s in zip(a, sep)]
            renorms += 1
            t = ts + done * dt
            if renorms % stride == 0 or done == n_steps:
                rows.append([total / (t - ts)])
                row_times.append(t)
            if renorms % 50 == 0:
                report(done / n_steps)
    except OverflowError:
        status, message = DIVERGED, f"the solution blows up near {system.time_name} = {ts + done * dt:.6g}"
    except (ValueError, ZeroDivisionError, TypeError) as err:
        status = UNDEFINED
        message = (system.explain_undefined(ts + done * dt, z[:n], p)
                   or f"{err} near {system.time_name} = {ts + done * dt:.6g}")
    except Cancelled:
        status, message = CANCELLED, "cancelled"
    averaged = done * dt if status == OK else (row_times[-1] - ts if row_times else 0.0)
    if status != OK and row_times:
        total = rows[-1][0] * averaged
    return _sorted_result([total], rows, row_times, "flow", TWO_TRAJECTORY, averaged, dt=dt,
                          renorm_interval=every * dt, status=status, message=message)


def _map_pair(system, p, u, steps, transient, d0, renorm_every, direction, bound, report):
    f = system.rhs_function(p)
    every = 1 if renorm_every is None else max(1, int(round(renorm_every)))
    a = [float(v) for v in u]
    k, total, measured = 0, 0.0, 0  # measured: iterations whose growth is in total
    rows, row_times = [], []
    run = steps - transient
    stride = _stride(math.ceil(run / every))
    status, message = OK, ""
    try:
        for k in range(transient):
            a = list(f(k, a))
        b = [x + d0 * s for x, s in zip(a, direction)]
        renorms = 0
        for k in range(transient, steps):
            a, b = list(f(k, a)), list(f(k, b))
            if not all(abs(v) <= bound for v in a):
                status, message = DIVERGED, f"the orbit escapes to infinity at n = {k + 1}"
                break
            done = k + 1 - transient
            if done % every == 0 or done == run:
                sep = [y - x for x, y in zip(a, b)]
                dist = math.sqrt(sum(s * s for s in sep))
                if not dist > 0:
                    raise ZeroDivisionError("the two orbits merged")
                total += math.log(dist / d0)
                measured = done
                b = [x + d0 * s / dist for x, s in zip(a, sep)]
                renorms += 1
                if renorms % stride == 0 or done == run:
                    rows.append([total / done])
                    row_times.append(k + 1)
            if done % 2000 == 0:
                report(done / run)
    except OverflowError:
        status, message = DIVERGED, f"the orbit escapes to infinity at n = {k + 1}"
    except (ValueError, ZeroDivisionError, TypeError) as err:
        status = UNDEFINED
        message = system.explain_undefined(k, a, p) or f"{err} at n = {k}"
    except Cancelled:
        status, message = CANCELLED, "cancelled"
    return _sorted_result([total], rows, row_times, "map", TWO_TRAJECTORY, float(measured), status=status,
                          message=message)
