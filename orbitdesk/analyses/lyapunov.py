"""Lyapunov exponents: the full spectrum by the variational equations with QR, and the largest
exponent by two nearby trajectories.

Spectrum (Benettin, Galgani, Giorgilli, Strelcyn 1980; Wolf, Swift, Swinney, Vastano 1985): the
tangent matrix Phi is carried along the orbit - flows: dPhi/dt = J(t, u) Phi, integrated with
the state; maps: Phi -> J(u) Phi each step - and re-orthonormalised by modified Gram-Schmidt (a QR
factorisation) every renormalisation interval; the logarithms of R's diagonal, averaged over the
time after the transient, are the exponents. All of it runs in the compiled loops of
``integrators/tangent.py`` on the model's kernel (J Phi through the sparse Jacobian).

Flows step with the method given (``method``), else the run's, else the default one; or with RK4 at a
fixed ``dt`` when one is given. Explicit methods run the compiled loops; a stiff method runs the
variational equations through engine/stiff.py (``tangent_run``). When a probe run shows the system
stiff (time_scales.choose_method) the default method still integrates the spectrum, with a note: the
spectrum holds the exponent of the fastest contracting direction, which only steps shorter than one
over its rate resolve whatever the method (the implicit method would take as many steps, each far
dearer), while the explicit method is stable at that step. They are renormalised every ``dt_renorm``
(default: five over the Jacobian's largest rate along the transient, so that a tangent vector never
shrinks below its absolute tolerance between renormalisations). A forced
(non-autonomous) flow gets its n state exponents; the direction of time itself would add one zero
exponent only if the forcing phase were a state, so none is reported for it.

Models with kinks (abs, min, max, sign, heaviside, floor, mod) use the Jacobian that holds almost
everywhere (Lozi map: 0.470, -1.163, Sprott 2003), with a note that says so. The largest exponent
from two nearby trajectories stays as a cross-check that needs no Jacobian.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
import sympy as sp

from orbitdesk.engine.runs import CANCELLED, DIVERGED, OK, UNDEFINED, RunSettings, simulate
from orbitdesk.engine.progress import Cancelled, Reporter
from orbitdesk.system.compiled_system import MAP, CompiledSystem
from orbitdesk.engine import compiled, drivers, limits
from orbitdesk.engine.maps import MERGED
from orbitdesk.engine.model_events import saltation_refusal
from orbitdesk.engine.status import REFUSED
from orbitdesk.engine.status import word as status_word
from orbitdesk.analyses.time_scales import MIN_WINDOW, MethodChoice, choose_method, time_scale
from orbitdesk.engine.methods import DEFAULT as DEFAULT_METHOD
from orbitdesk.engine.methods import method as method_named
from orbitdesk.engine.stiff import tangent_run

QR, TWO_TRAJECTORY = "qr", "two-trajectory"
MAX_RUNNING = 5000  # rows of running estimates kept
STEP_TOLERANCE = 1e-5  # local RK4 error per step, relative to max(1, |u|), accepted by the dt check
RENORM_STEPS = 10  # renormalisation interval in steps of a given dt (flows)
CONVERGE_RTOL, CONVERGE_ATOL = 0.01, 0.002  # stop when each standard error <= rtol |exponent| + atol
MIN_BLOCKS = 10  # block averages needed before the spread of them is trusted
FLOW_CAP, MAP_CAP = 20000.0, 2_000_000  # the longest averaging (time units; iterations) when converging
MAP_BLOCK = 1000  # iterations per block of a map
LONE_AFTER = 2 * MIN_BLOCKS  # map_exponents: an orbit not settled after this many blocks goes on alone
NONSMOOTH_NOTE = ("the model uses {names}: the exponents use the Jacobian that holds almost everywhere "
                  "(kinks and jumps contribute nothing)")


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
    uncertainty: np.ndarray | None = None  # standard error of each exponent: spread of block averages / sqrt(blocks)
    blocks: int = 0  # block averages the uncertainty is read from
    converged: bool | None = None  # None: a fixed length was asked for; False: the cap came first
    tolerance: tuple[float, float] | None = None  # (rtol, atol) the run was to settle to
    integrator: str = ""  # the integration method of a flow (engine/methods.py name)

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
def _span(system, settings, t_end, steps, transient):
    """(start, end, transient) of a flow in time or of a map in steps; a tenth of the run by default."""
    if system.kind == MAP:
        end = int(settings.steps if steps is None else steps)
        start = 0
    else:
        end = limits.check_span(float(settings.t_end if t_end is None else t_end), "the end time")
        start = float(settings.t_start)
        if end < start:
            raise ValueError(f"Lyapunov exponents average forward in time: the end time ({end:g}) must come after "
                             f"the start ({start:g})")
    if transient is None:
        transient = settings.transient if settings.transient > 0 else 0.1 * (end - start)
    transient = int(round(transient)) if system.kind == MAP else float(transient)
    if not (math.isfinite(float(end)) and math.isfinite(float(transient)) and transient >= 0):
        raise ValueError("the run length and the transient must be finite, the transient non-negative")
    if not end - start - transient > 0:
        what = "steps" if system.kind == MAP else "the end time"
        raise ValueError(f"{what} must leave a run after the transient (run {end - start:g}, transient {transient:g})")
    if system.kind == MAP:
        limits.check_steps(float(end), f"a run of {end:,} iterations")
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


def _renorm_interval(system, p, samples, times, span):
    """Five over the largest rate of the Jacobian along the transient (at most a hundredth of the run);
    a large system reads it at fewer samples (eigenvalues cost n^3 each: at least 8, all of them
    up to about 25 states)."""
    guess = span / 100.0
    n, count = samples.shape[0], samples.shape[1]
    keep = np.unique(np.linspace(0, count - 1, min(count, max(8, int(4e6 / max(n, 1) ** 3)))).astype(int))
    with np.errstate(all="ignore"):
        jac = np.moveaxis(system.jac_vec(np.asarray(times)[keep], samples[:, keep], p), -1, 0)
    finite = np.all(np.isfinite(jac), axis=(1, 2))
    if finite.any():
        rate = float(np.max(np.abs(np.linalg.eigvals(jac[finite]))))
        if rate > 0:
            guess = min(guess, 5.0 / rate)
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
                      settings: RunSettings | None = None, cancel=None, progress=None,
                      converge: bool = False, rtol: float = CONVERGE_RTOL, atol: float = CONVERGE_ATOL,
                      cap: float | None = None, method: str | None = None) -> LyapunovResult:
    """All n exponents, in descending order, with running estimates, their uncertainty and the
    Kaplan-Yorke dimension.

    Fixed length: flows run from ``settings.t_start`` to ``t_end`` (default ``settings.t_end``); maps
    for ``steps`` iterations (default ``settings.steps``). The first ``transient`` (default
    ``settings.transient``, or a tenth of the run) is discarded. ``converge``: the run goes on in
    blocks until the standard error of every exponent (the spread of at least MIN_BLOCKS block
    averages over the square root of their number) is at most ``rtol`` |exponent| + ``atol``, or
    until the cap (``cap`` time units or iterations after the transient, default FLOW_CAP / MAP_CAP;
    or ``t_end`` / ``steps`` when given) - ``converged`` says which; the transient then defaults to the system's slow time scale (at least 200) or 1000
    iterations. ``dt_renorm``: time between re-orthonormalisations of a flow; ``dt``: a fixed RK4 step
    instead of the adaptive method; ``method``: the adaptive method of a flow (default: the settings' one;
    a stiff system keeps the default method with a warning that says why).
    """
    system.refuse_delays("the Lyapunov spectrum (QR)")
    settings = settings or RunSettings()
    p = system.param_values.copy() if p is None else np.asarray(p, dtype=float)
    u = system.initial.copy() if u0 is None else np.asarray(u0, dtype=float)
    if converge:
        if not (rtol >= 0 and atol >= 0 and rtol + atol > 0):
            raise ValueError("the convergence tolerance must be positive")
        if transient is None and settings.transient <= 0:
            transient = MAP_BLOCK if system.kind == MAP else time_scale(system, p, u).window(periods=1.0)
        lead = transient if transient is not None else settings.transient
        if system.kind == MAP and steps is None:
            steps = int(lead) + int(MAP_CAP if cap is None else math.ceil(cap))
        if system.kind != MAP and t_end is None:
            t_end = settings.t_start + float(lead) + float(FLOW_CAP if cap is None else cap)
    start, end, transient = _span(system, settings, t_end, steps, transient)
    tolerance = (float(rtol), float(atol)) if converge else None
    if saltation_refusal(system, "Lyapunov exponents"):
        return _failed("flow", QR, REFUSED, saltation_refusal(system, "Lyapunov exponents"), system.n_states)
    if system.kind == MAP:
        result = _map_spectrum(system, p, u, end, transient, settings.bound, Reporter(progress, cancel), tolerance)
    else:
        chosen = _flow_method(system, p, u, start, end, dt, settings, method, cancel)
        result = _flow_spectrum(system, p, u, start, end, transient, dt_renorm, dt, settings, cancel, progress,
                                tolerance, chosen.method)
        if chosen.note:
            result.warnings.append(chosen.note)
    if system.nonsmooth:
        result.warnings.insert(0, NONSMOOTH_NOTE.format(names=", ".join(f"{f}()" for f in system.nonsmooth)))
    if system.kind != MAP and not system.autonomous and result.kaplan_yorke_dimension is not None \
            and math.isfinite(result.kaplan_yorke_dimension):
        extended = kaplan_yorke_dimension(np.append(result.exponents, 0.0))
        result.warnings.append(f"forced flow: the exponents and the Kaplan-Yorke dimension "
                               f"{result.kaplan_yorke_dimension:.4g} are those of the {system.n_states} states; "
                               f"counting the direction of time as a state (one more zero exponent) the "
                               f"dimension is {extended:.4g}")
    return result


def _failed(kind, method, status, message, n, **extra):
    return LyapunovResult(np.full(n, np.nan), kind, method, np.empty(0), np.empty((0, n)), None, 0.0,
                          status=status, message=message, **extra)


def _flow_method(system, p, u, start, end, dt, settings, method, cancel) -> MethodChoice:
    """The adaptive method a flow's spectrum integrates with: given, the settings' own, or chosen."""
    if dt is not None:
        return MethodChoice("rk4")
    if method is not None:
        return choose_method(system, p, u, end - start, method)
    if settings.method != DEFAULT_METHOD or not settings.method_info.adaptive:
        return MethodChoice(settings.method if settings.method_info.adaptive else DEFAULT_METHOD)
    probe = choose_method(system, p, u, min(end - start, MIN_WINDOW * 10), None, t0=start, cancel=cancel)
    if probe.method == DEFAULT_METHOD:
        return probe
    # the spectrum follows the fastest contracting direction: its exponent (-|rate|) is resolved only by steps
    # shorter than 1/|rate| whatever the method, so the compiled explicit loop, stable at that step, stays
    return MethodChoice(DEFAULT_METHOD, f"{probe.note.split(':')[0]}; the spectrum resolves the fastest rate "
                                        "whatever the method, so the default method stays (--method stiff "
                                        "integrates with the stiff one)")


def _flow_spectrum(system, p, u, t0, t1, transient, dt_renorm, dt, settings, cancel, progress, tolerance=None,
                   method=DEFAULT_METHOD):
    n = system.n_states
    report = Reporter(progress, cancel)
    info = method_named(method)
    settings = replace(settings, method=method if info.adaptive else settings.method)
    u, samples, times, failed = _transient_flow(system, settings, u, p, t0, transient, cancel)
    if failed is not None:
        return _failed("flow", QR, failed.status, f"during the transient: {failed.message}", n)
    ts = t0 + transient
    interval = float(dt_renorm) if dt_renorm is not None else _renorm_interval(system, p, samples, times, t1 - ts)
    if not (math.isfinite(interval) and interval > 0):
        raise ValueError("the renormalisation interval must be positive")
    step = float(dt) if dt is not None else settings.dt
    if not (math.isfinite(step) and step > 0):
        raise ValueError("the step dt must be positive")
    if dt is not None:
        limits.check_steps(limits.steps_of(t1 - ts, step), f"a run over {t1 - ts:g} time units with dt = {step:g}")
    if dt is not None and dt_renorm is None:
        interval = RENORM_STEPS * step
    work = (t1 - ts) if tolerance is None else min(t1 - ts, 2000.0)
    engine = None if info.stiff else compiled.engine_for_work(system, work * 1500 * (n + 1) * max(1.0, n / 3))

    def block(t, t_next, u, V, rows, part):
        if info.stiff:
            return tangent_run(system, info.scipy_name, t, t_next, t, u, V, p, interval, settings.rtol,
                               settings.atol, settings.bound, rows, part)
        with np.errstate(all="ignore"):
            return drivers.flow_tangent(engine, method, t, t_next, t, u, V, p, interval, settings.rtol,
                                        settings.atol, settings.max_step, step, settings.bound, rows, part)

    if tolerance is None:
        out = block(ts, t1, u, np.eye(n), MAX_RUNNING, report)
        blocks = None
    else:
        length = min(max(100 * interval, (t1 - ts) / 2000), (t1 - ts) / MIN_BLOCKS)
        out, blocks = _in_blocks(block, ts, t1, length, u, n, tolerance, report)
    status, message = status_word(out.code), ""
    if out.code != 0:
        where = f"{system.time_name} = {out.t:.6g}"
        message = {"diverged": f"the solution blows up near {where}",
                   "undefined": (system.explain_undefined(out.t, out.y, p) or
                                 f"an expression is undefined (or the tangent vectors collapsed) near {where}"),
                   "step_failed": out.note or (f"the step size of {info.label} collapsed near {where}: it cannot follow "
                                              "the solution there at these tolerances" + (
                                                  "" if info.stiff else "; if the system is stiff there, "
                                                  "the stiff method (--method stiff) can")),
                   "cancelled": "cancelled"}[status]
    result = _sorted_result(out.sums, out.rows, out.row_t, "flow", QR, out.averaged,
                            dt=step if method == "rk4" else None, renorm_interval=interval,
                            status=status, message=message, integrator=method)
    return _with_uncertainty(result, out, ts, blocks, tolerance, "time units")


def _in_blocks(block, ts, t_cap, length, u, n, tolerance, report):
    """Runs of ``block(t, t_next, u, V, rows, report)`` one after the other from ``ts``, tangent
    vectors carried over, until the block averages settle to ``tolerance`` or ``t_cap``.
    Returns (one TangentOutput for the whole span, the block averages (B, n))."""
    rtol, atol = tolerance
    V, t = np.eye(n), ts
    sums, averaged = np.zeros(n), 0.0
    rows, row_t, averages = [], [], []
    per_block = 50
    out = None
    while (t - t_cap) * 1.0 < 0:
        t_next = min(t + length, t_cap)
        if t_cap - t_next < 1e-9 * length:
            t_next = t_cap
        out = block(t, t_next, u, V, per_block, report.part((t - ts) / (t_cap - ts), (t_next - t) / (t_cap - ts)))
        if out.row_t.size:  # the running estimates over the whole span so far
            spent = out.row_t - t
            rows.append((sums + out.rows * spent[:, None]) / (averaged + spent)[:, None])
            row_t.append(out.row_t)
        if out.code != 0:
            break
        averages.append(out.sums / out.averaged)
        sums, averaged = sums + out.sums, averaged + out.averaged
        u, V, t = out.y, out.V, t_next
        if len(averages) >= MIN_BLOCKS:
            values = np.asarray(averages)
            error = np.std(values, axis=0, ddof=1) / math.sqrt(len(values))
            if np.all(error <= rtol * np.abs(sums / averaged) + atol):
                break
    rows = np.concatenate(rows) if rows else np.empty((0, n))
    row_t = np.concatenate(row_t) if row_t else np.empty(0)
    keep = np.unique(np.append(np.arange(0, row_t.size, _stride(row_t.size)), row_t.size - 1)) if row_t.size else []
    whole = drivers.TangentOutput(sums, averaged, rows[keep], row_t[keep], out.code, out.t, out.y,
                                  getattr(out, "note", ""), V=out.V)
    return whole, np.asarray(averages).reshape(-1, n)


def _with_uncertainty(result, out, ts, blocks, tolerance, unit):
    """The standard error of each exponent, and for a converging run whether it settled, in words."""
    order = np.argsort(-(np.asarray(out.sums) / out.averaged if out.averaged > 0 else np.zeros(len(out.sums))),
                       kind="stable")
    if blocks is None:  # a fixed length: blocks read off the running estimates (ten of them)
        blocks = _blocks_from_running(np.asarray(out.rows), np.asarray(out.row_t), ts)
    else:
        blocks = np.asarray(blocks)
    if blocks.shape[0] >= 2:
        result.uncertainty = (np.std(blocks, axis=0, ddof=1) / math.sqrt(blocks.shape[0]))[order]
        result.blocks = int(blocks.shape[0])
    result.tolerance = tolerance
    if tolerance is not None and result.ok:
        rtol, atol = tolerance
        settled = result.uncertainty is not None and result.blocks >= MIN_BLOCKS and bool(
            np.all(result.uncertainty <= rtol * np.abs(result.exponents) + atol))
        result.converged = settled
        if not settled:
            result.warnings.append(f"the cap of {result.averaged_over:g} {unit} came before the estimates settled "
                                   f"to {rtol:g} x |exponent| + {atol:g}; a longer cap (--cap) or a looser "
                                   "tolerance (--tolerance) ends it")
    elif tolerance is None and result.ok and result.uncertainty is not None \
            and np.any(result.uncertainty > CONVERGE_RTOL * np.abs(result.exponents) + CONVERGE_ATOL):
        result.warnings.append(f"after {result.averaged_over:g} {unit} the estimates still wander by more than "
                               f"{CONVERGE_RTOL:g} x |exponent| + {CONVERGE_ATOL:g} (see the uncertainty); "
                               "a longer run, or a run that stops when they settle, narrows them")
    return result


def _blocks_from_running(running, times, ts, count: int = 10):
    """Block averages of a fixed-length run from its running (cumulative) estimates: ``count`` blocks."""
    if running.shape[0] < count + 1:
        return np.empty((0, running.shape[1] if running.ndim == 2 else 0))
    spent = times - ts
    totals = running * spent[:, None]
    picks = np.unique(np.linspace(0, times.size - 1, count + 1).round().astype(int))
    spans = np.diff(spent[picks])
    good = spans > 0
    return (np.diff(totals[picks], axis=0)[good] / spans[good, None])


def _map_spectrum(system, p, u, steps, transient, bound, report, tolerance=None):
    n = system.n_states
    engine = compiled.engine_for_work(system, min(steps, 10**6) * (n + 1) * max(1.0, n / 3))
    with np.errstate(all="ignore"):
        orbit, code = drivers.map_run(engine, 0, transient, u, p, bound)
        if code:
            k = orbit.shape[1] - 1
            message = (f"the orbit escapes to infinity during the transient (n = {k + 1})" if code == 1 else
                       system.explain_undefined(k, orbit[:, -1], p) or f"undefined value at n = {k}")
            return _failed("map", QR, status_word(code), message, n)

        def block(k0, k1, y, V, rows, part):
            return drivers.map_tangent(engine, int(k0), int(k1), int(k0), y, V, p, bound, rows, part)

        if tolerance is None:
            out = drivers.map_tangent(engine, transient, steps, transient, orbit[:, -1], np.eye(n), p, bound,
                                      MAX_RUNNING, report)
            blocks = None
        else:
            out, blocks = _in_blocks(block, transient, steps, MAP_BLOCK, orbit[:, -1], n, tolerance, report)
    status, message, warnings = status_word(out.code), "", []
    k = int(out.t)
    if status == "cancelled":
        message = "cancelled"
    elif status == "diverged":
        message = f"the orbit escapes to infinity at n = {k + 1}"
    elif status == "undefined":
        if _defined(system, k, out.y, p) and np.all(np.isfinite(system.rhs(k, out.y, p))):
            message = (f"the Jacobian is singular on the orbit at n = {k} (a critical point): "
                       "the exponent is minus infinity for this orbit; start elsewhere")
        else:
            message = system.explain_undefined(k, out.y, p) or f"undefined value at n = {k}"
    if status != "diverged" and _defined(system, k, out.y, p) and np.array_equal(system.rhs(k, out.y, p), out.y):
        warnings.append("the orbit sits exactly on a fixed point (round-off); the exponents are that fixed point's")
    result = _sorted_result(out.sums, out.rows, out.row_t, "map", QR, out.averaged, status=status,
                            message=message, warnings=warnings)
    return _with_uncertainty(result, out, transient, blocks, tolerance, "iterations")


def map_exponents(engine, P, U0, transient, bound=1e10, tolerance=(CONVERGE_RTOL, CONVERGE_ATOL), cap=None,
                  report=None):
    """The spectra of many orbits of a map at once - the columns of U0 (n, M) with the parameters P
    ((n_p,) shared or (n_p, M)) - each as ``lyapunov_spectrum(..., converge=True)`` finds it alone:
    ``transient`` iterations, then blocks of MAP_BLOCK iterations, tangent vectors carried over (from the
    identity), until the block averages settle to ``tolerance`` or ``cap`` iterations after the
    transient (default MAP_CAP). A block is one call of the member loop for the orbits still going
    (``maps.members_iterate``: per iterate one batched kernel call and one Gram-Schmidt over the block);
    an orbit not settled after LONE_AFTER blocks goes on alone (``drivers.map_tangent``: for the few
    slowest, in plain Python, a pass over a block costs more than it saves). That choice rests on the
    orbit's own block count, so each orbit's numbers are the same whatever orbits go with it.
    Returns (exponents (M, n) descending, their standard errors (M, n) (NaN with fewer than two blocks),
    settled (M,), status codes (M,)); an orbit that stopped early has NaN exponents."""
    from orbitdesk.engine.drivers import iterate_rows

    report = report or (lambda fraction: None)
    rtol, atol = tolerance
    U0 = np.asarray(U0, dtype=float)
    n, M = U0.shape
    t_cap = int(transient) + int(MAP_CAP if cap is None else math.ceil(cap))
    first = drivers.members_iterate(engine, 0, int(transient), int(transient), U0, P, bound=bound)
    codes = first.codes.copy()
    Z, rows, _, m = drivers._member_rows(first.states, P, n)  # each orbit with the identity as its V
    sums, averaged = np.zeros((M, n)), np.zeros(M)
    averages = [[] for _ in range(M)]
    settled = np.zeros(M, dtype=bool)
    going, k = np.flatnonzero(codes == 0), int(transient)
    while going.size and k < t_cap:
        k_next = min(k + MAP_BLOCK, t_cap)
        share = np.ones(M)  # progress: an orbit still going is counted by its blocks against twice the fewest
        share[going] = np.minimum(1.0, np.array([len(averages[i]) for i in going.tolist()]) / (2 * MIN_BLOCKS))
        done = float(share.mean())
        report(done)  # progress, and a cancel taken, once a block (the loop's own pauses are rarer for a few orbits)
        got, logs = np.zeros(going.size, dtype=np.int64), np.zeros((going.size, m + 1))
        lone = np.array([len(averages[i]) >= LONE_AFTER for i in going.tolist()], dtype=bool)
        crowd = going[~lone]
        if crowd.size:  # one call of the member loop for the orbits in their first LONE_AFTER blocks
            block = np.ascontiguousarray(Z[crowd])
            crowd_rows = rows if rows.shape[0] == 1 else np.ascontiguousarray(rows[crowd])
            got[~lone], _, logs[~lone], _ = iterate_rows(engine, k, k_next, k, block, crowd_rows, m, bound,
                                                         lambda fraction: report(done))
            Z[crowd] = block
        for c in np.flatnonzero(lone).tolist():  # the slow to settle each alone
            i = int(going[c])
            out = drivers.map_tangent(engine, k, k_next, k, Z[i, :n], Z[i, n:].reshape(n, m),
                                      rows[0 if rows.shape[0] == 1 else i], bound, max_rows=1,
                                      report=lambda f: report(done))  # no running estimates: one row a block
            got[c], logs[c, :m], logs[c, m] = out.code, out.sums, out.averaged
            Z[i, :n], Z[i, n:] = out.y, out.V.ravel()
        for c, i in enumerate(going.tolist()):
            if got[c] != 0:
                codes[i] = got[c]
                continue
            averages[i].append(logs[c, :m] / logs[c, m])
            sums[i], averaged[i] = sums[i] + logs[c, :m], averaged[i] + logs[c, m]
            if len(averages[i]) >= MIN_BLOCKS:
                values = np.asarray(averages[i])
                error = np.std(values, axis=0, ddof=1) / math.sqrt(len(values))
                settled[i] = bool(np.all(error <= rtol * np.abs(sums[i] / averaged[i]) + atol))
        going = going[(codes[going] == 0) & ~settled[going]]
        k = k_next
    exponents, errors = np.full((M, n), np.nan), np.full((M, n), np.nan)
    for i in np.flatnonzero((codes == 0) & (averaged > 0)).tolist():
        values = sums[i] / averaged[i]
        order = np.argsort(-values, kind="stable")
        exponents[i] = values[order]
        if len(averages[i]) >= 2:
            blocks = np.asarray(averages[i])
            errors[i] = (np.std(blocks, axis=0, ddof=1) / math.sqrt(blocks.shape[0]))[order]
        settled[i] = len(averages[i]) >= MIN_BLOCKS and bool(np.all(errors[i] <= rtol * np.abs(exponents[i]) + atol))
    return exponents, errors, settled, codes


def _defined(system, k, y, p) -> bool:
    try:
        system.rhs(k, y, p)
    except ArithmeticError:
        return False
    return True


# ---------------------------------------------------------------- two trajectories
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
    if saltation_refusal(system, "Lyapunov exponents"):
        return _failed("flow", TWO_TRAJECTORY, REFUSED, saltation_refusal(system, "Lyapunov exponents"), 1)
    report = Reporter(progress, cancel)
    direction = [1.0 / math.sqrt(n)] * n
    if system.delays:  # the state is a segment of the solution: two nearby histories
        from orbitdesk.analyses.delay_lyapunov import largest_delay_exponent

        return largest_delay_exponent(system, p, u, start, end, transient, d0, renorm_every, settings, cancel,
                                      progress)
    if system.kind == MAP:
        return _map_pair(system, p, u, end, transient, d0, renorm_every, direction, settings.bound, report)
    u, samples, times, failed = _transient_flow(system, settings, u, p, start, transient, cancel)
    if failed is not None:
        return _failed("flow", TWO_TRAJECTORY, failed.status, f"during the transient: {failed.message}", 1)
    ts = start + transient
    if dt is None:
        dt = min(_renorm_interval(system, p, samples, times, end - ts) / RENORM_STEPS, (end - ts) / 1000.0)
    if not (math.isfinite(dt) and dt > 0):
        raise ValueError("the step dt must be positive")
    n_steps = max(1, math.ceil(limits.check_steps((end - ts) / dt - 1e-9, f"the run with dt = {dt:g}")))
    dt = (end - ts) / n_steps
    every = RENORM_STEPS if renorm_every is None else max(1, int(round(float(renorm_every) / dt)))
    engine = compiled.engine_for_work(system, 8 * n_steps * max(1.0, n / 3))
    pull_back = engine.entry("pull_back")
    a = np.asarray(u, dtype=float)
    b = a + d0 * np.asarray(direction)
    total, done, renorms = 0.0, 0, 0
    rows, row_times = [], []
    stride = _stride(math.ceil(n_steps / every))
    status, message = OK, ""
    while done < n_steps and status == OK:
        block = min(every, n_steps - done)
        t, t_next = ts + done * dt, ts + (done + block) * dt
        pair = drivers.members_run(engine, "rk4", t, t_next, np.column_stack([a, b]), p, dt=dt, bound=settings.bound)
        codes = [int(c) for c in pair.codes]  # the two as members of one compiled call
        if any(codes):
            status = status_word(max(codes))
            where = f"{system.time_name} = {t:.6g}"
            message = (f"the solution blows up near {where}" if status == DIVERGED else
                       system.explain_undefined(t, a, p) or f"an expression is undefined near {where}")
            break
        done += block
        a, b = pair.states[:, 0].copy(), pair.states[:, 1].copy()
        growth = pull_back(a, b, float(d0))  # the maps' own pull-back (tangent.pull_back), b in place
        if growth != growth:
            status, message = UNDEFINED, f"the two trajectories merged near {system.time_name} = {t_next:.6g}"
            break
        total += growth
        renorms += 1
        if renorms % stride == 0 or done == n_steps:
            rows.append([total / (t_next - ts)])
            row_times.append(t_next)
        if renorms % 50 == 0:
            try:
                report(done / n_steps)
            except Cancelled:
                status, message = CANCELLED, "cancelled"
    averaged = done * dt if status == OK else (row_times[-1] - ts if row_times else 0.0)
    if status != OK and row_times:
        total = rows[-1][0] * averaged
    return _sorted_result([total], rows, row_times, "flow", TWO_TRAJECTORY, averaged, dt=dt,
                          renorm_interval=every * dt, status=status, message=message)


def _map_pair(system, p, u, steps, transient, d0, renorm_every, direction, bound, report):
    """Two nearby orbits of a map in the compiled map loop (``engine/maps.map_pair``)."""
    every = 1 if renorm_every is None else max(1, int(round(renorm_every)))
    engine = compiled.engine_for_work(system, 2.0 * steps * max(1.0, system.n_states / 3))
    with np.errstate(all="ignore"):
        out = drivers.map_pair(engine, 0, steps, transient, u, direction, p, d0, every, bound,
                               report=report)
    k = int(out.t)
    status, message = OK, ""
    if out.code == MERGED:
        status, message = UNDEFINED, f"the two orbits merged at n = {k}: no separation is left to measure"
    elif out.code:
        status = status_word(out.code)
        if status == CANCELLED:
            message = "cancelled"
        elif status == DIVERGED:
            message = f"the orbit escapes to infinity at n = {k + 1}"
        else:
            message = system.explain_undefined(k, out.y, p) or f"undefined value at n = {k}"
    rows = out.rows if out.rows.size else np.empty((0, 1))
    return _sorted_result(out.sums, rows, out.row_t, "map", TWO_TRAJECTORY, out.averaged, status=status,
                          message=message)
