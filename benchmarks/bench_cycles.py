"""Limit-cycle shooting: every start in one member-loop call per run (engine/shooting.py) against the
start-by-start shooting, side by side.

Ours: ``shooting_starts`` on ``cycles._Flow.ends`` (each run of an iteration, with or without the n
tangent vectors, is one call of the member loop for every start still iterating). The baseline (written
here): the search as it ran before, start by start: ``analyses.newton.damped_newton`` on one start, its
residual a ``drivers.flow_run`` without tangent vectors, its Jacobian a ``flow_run`` with them, the
same tolerances and acceptance. Both run every start to its end (no early stop), so both do the same
Newton iterations; the check column compares their end points and statuses.

Cases: the forced two-well Duffing oscillator (samples/models.DUFFING_REF, the shaken-beam sample) at
gamma = 0.5 (chaotic) and 0.28 (a period-2 orbit), each from 2 starts (the end of a transient and the
initial values) x 8 forcing multiples = 16 searches, as a forced cycle search with a guess tries them;
Van der Pol at mu = 1 (autonomous, one start from a transient, the relaxation-circuit sample) and
from 8 points of a transient orbit at once; the damped chain of bench_growth at 100 states (one start,
no cycle: 101 x 101 Newton systems, where the baseline's LAPACK solve spins its threads). Kernels are compiled first; wall times are the fastest
of runs timed alternately (runs of milliseconds on a shared machine), processor times beside them.
"""

from __future__ import annotations

import math
import os
import time

import numpy as np

from benchmarks.bench_growth import chain
from benchmarks.harness import Row, alternate
from orbitdesk.analyses import cycles as C
from orbitdesk.analyses.newton import Singular, damped_newton
from orbitdesk.engine import compiled, drivers
from orbitdesk.engine.runs import RunSettings, simulate
from orbitdesk.engine.shooting import shooting_starts
from orbitdesk.engine.status import C_OK
from orbitdesk.samples.models import DUFFING_REF, VAN_DER_POL, model
from orbitdesk.system.compiled_system import compile_model

RTOL, ATOL, MAX_ITER = 1e-10, 1e-12, 40


class _OneByOne:
    """The runs as the search made them before: one drivers.flow_run per start and per run."""

    def __init__(self, flow):
        self.flow = flow

    def run(self, u, T, tangents):
        f, n = self.flow, self.flow.n
        z0 = np.concatenate([u, np.eye(n).ravel()]) if tangents else np.asarray(u, dtype=float)
        with np.errstate(all="ignore"):
            out = drivers.flow_run(f.engine, "dop853", 0.0, T, z0, f.p, f.rtol, f.atol, grid=[T], dt=1e-3,
                                   which=n if tangents else 0)
        end = out.states[:, -1] if out.code == 0 and out.time.size == 1 else np.full(z0.size, np.nan)
        if not np.all(np.isfinite(end)):
            raise C.CycleError("failed")
        return end[:n], end[n:].reshape(n, n) if tangents else None


def _forced_baseline(flow, pairs, Tf):
    """damped_newton on P^k(u) - u, pair by pair (the old _strobe_newton): (end points, converged)."""
    one, n, found = _OneByOne(flow), flow.n, []
    for k, u in pairs:
        scale = max(1.0, float(np.max(np.abs(u))))

        def jacobian(x, k=k):
            return one.run(x, k * Tf, True)[1] - np.eye(n)

        try:
            state = damped_newton(lambda x, k=k: one.run(x, k * Tf, False)[0] - x, jacobian, u,
                                  done=lambda s, scale=scale: s.norm <= 1e-9 * scale, max_iter=MAX_ITER,
                                  rejects=(C.CycleError,))
            found.append((state.x, state.norm <= 1e-9 * scale))
        except (Singular, C.CycleError):
            found.append((np.full(n, np.nan), False))
    return found


def _forced_ours(flow, pairs, Tf):
    U = np.array([u for _, u in pairs])
    scales = np.maximum(1.0, np.max(np.abs(U), axis=1))
    ends = shooting_starts(flow.ends, U, [k * Tf for k, _ in pairs], goal=lambda idx, X, G: 1e-9 * scales[idx],
                           max_iter=MAX_ITER, engine=flow.loops)
    return [(ends.x[i], ends.codes[i] == C_OK) for i in range(len(pairs))]


def _autonomous_baseline(flow, starts, periods, normals):
    one, n, found = _OneByOne(flow), flow.n, []
    for u_ref, T, normal in zip(starts, periods, normals):
        point = u_ref.copy()

        def residual(x):
            return np.concatenate([one.run(x[:n], x[n], False)[0] - x[:n], [normal @ (x[:n] - point)]])

        def jacobian(x):
            phi, M = one.run(x[:n], x[n], True)
            A = np.zeros((n + 1, n + 1))
            A[:n, :n] = M - np.eye(n)
            A[:n, n] = flow.rhs(x[n], phi)
            A[n, :n] = normal
            return A

        def done(state):
            return np.linalg.norm(state.residual[:n]) <= _goal(flow, state.x)

        state = damped_newton(residual, jacobian, np.append(u_ref, T), done=done, max_iter=MAX_ITER,
                              admissible=lambda x_new, x: x_new[n] > 0.05 * x[n], rejects=(C.CycleError,))
        found.append((state.x, done(state)))
    return found


def _goal(flow, x):
    n = flow.n
    return 1e-10 * C._travel(flow, x[:n], x[n]) + C._resolution(flow, x[:n])


def _autonomous_ours(flow, starts, periods, normals):
    ends = shooting_starts(flow.ends, starts, periods, sections=(normals, starts), rhs=flow.rates,
                           goal=lambda idx, X, G: np.array([_goal(flow, x) for x in X]), max_iter=MAX_ITER,
                           engine=flow.loops)
    return [(ends.x[i], ends.codes[i] == C_OK) for i in range(len(starts))]


def _forced_case(gamma):
    system = compile_model(model(DUFFING_REF, gamma=gamma))
    p = system.param_values.astype(float)
    Tf = 2 * math.pi / system.param_dict(p)["omega"]
    run = simulate(system, RunSettings(t_end=200 * Tf, samples=201), system.initial, p)
    starts = [run.final_state, system.initial.astype(float)]
    pairs = [(k, u) for k in range(1, C.MAX_FORCING_MULTIPLE + 1) for u in starts]
    return system, p, pairs, Tf


def _autonomous_case(count, text=VAN_DER_POL, t_end=100):
    system = compile_model(text)
    p = system.param_values.astype(float)
    run = simulate(system, RunSettings(t_end=t_end, samples=2001), system.initial, p)
    picks = run.states[:, -1 - 37 * np.arange(count)].T.copy()  # points round the settled orbit
    normals = np.array([system.rhs(0.0, u, p) for u in picks])
    normals /= np.linalg.norm(normals, axis=1)[:, None]
    periods = np.full(count, 6.5)  # a rough guess; the first return would be nearer
    return system, p, picks, periods, normals


def _compare(name, ours, base, repeats, log):
    cpu = {}

    def clock(fn, key):
        def timed():
            start = time.process_time()
            value = fn()
            cpu[key] = min(cpu.get(key, math.inf), time.process_time() - start)
            return value
        return timed

    a, b = alternate(clock(ours, "ours"), clock(base, "base"), repeats)
    mine, theirs = ours(), base()
    same = all((not o[1] and not t[1]) or (o[1] and t[1] and np.allclose(o[0], t[0], atol=1e-7))
               for o, t in zip(mine, theirs))
    converged = sum(bool(o[1]) for o in mine), sum(bool(t[1]) for t in theirs)
    check = (f"converged {converged[0]} / {converged[1]} of {len(mine)}; ends agree to 1e-7: {same}; "
             f"processor {cpu['ours'] * 1e3:.1f} / {cpu['base'] * 1e3:.1f} ms; load {os.getloadavg()[0]:.1f}")
    log(f"{name}: ours {min(a) * 1e3:.1f} ms, start by start {min(b) * 1e3:.1f} ms, ratio "
        f"{min(b) / min(a):.2f}x; {check}")
    return Row(name, min(a), min(b), check, "start-by-start damped Newton on flow_run", "")


def run(log=print, repeats: int = 7) -> list[Row]:
    rows = []
    for gamma in (0.5, 0.28):
        system, p, pairs, Tf = _forced_case(gamma)
        compiled.engine_for(system, wait=True)
        flow = C._Flow(system, p, RTOL, ATOL, None)
        rows.append(_compare(f"forced Duffing gamma = {gamma}: 2 starts x 8 multiples", lambda: _forced_ours(
            flow, pairs, Tf), lambda: _forced_baseline(flow, pairs, Tf), repeats, log))
    for count in (1, 8):
        system, p, starts, periods, normals = _autonomous_case(count)
        compiled.engine_for(system, wait=True)
        flow = C._Flow(system, p, RTOL, ATOL, None)
        rows.append(_compare(f"Van der Pol mu = 1: {count} start(s)", lambda: _autonomous_ours(
            flow, starts, periods, normals), lambda: _autonomous_baseline(flow, starts, periods, normals), repeats,
            log))
    # the damped chain of benchmarks/bench_growth at 100 states: no cycle (the search must say so); its Newton
    # systems are 101 x 101
    system, p, starts, periods, normals = _autonomous_case(1, chain(50), 20)
    compiled.engine_for(system, wait=True)
    flow = C._Flow(system, p, RTOL, ATOL, None)
    rows.append(_compare("damped chain, 100 states: 1 start (no cycle)", lambda: _autonomous_ours(
        flow, starts, periods, normals), lambda: _autonomous_baseline(flow, starts, periods, normals), 3, log))
    return rows


if __name__ == "__main__":
    run()
