"""One Lorenz trajectory, t in [0, 100], rtol = atol = 1e-9: against solve_ivp(DOP853) on a lambdify
right-hand side, and against a plain numba DOP853 loop written here for the comparison (the
right-hand side inlined, every step stored, scipy's coefficients and error control). With 4,000
samples also against that loop reading the samples off the 7th-order dense output as scipy builds it
(what a plain loop does to give samples at the same error): ours computes the same dense output and
checks it where it may miss the tolerance (explicit_rk.interpolant_fits), the plain loop does not."""

from __future__ import annotations

import math

import numba
import numpy as np
import sympy as sp
from scipy.integrate import solve_ivp
from scipy.integrate._ivp import dop853_coefficients as D

from benchmarks.harness import Row, interleaved, interleaved_best
from orbitdesk.engine.runs import RunSettings, simulate
from orbitdesk.engine import compiled
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.samples.models import LORENZ_REF, model

LORENZ = model(LORENZ_REF, initial={'y(0)': None, 'z(0)': None})
A, B, C, E3, E5 = D.A[:12, :12].copy(), D.B.copy(), D.C[:12].copy(), D.E3.copy(), D.E5.copy()
A_ALL, C_ALL, D_ALL = D.A.copy(), D.C.copy(), D.D.copy()


@numba.njit(cache=True)
def _f(y, out):
    out[0] = 10.0 * (y[1] - y[0])
    out[1] = y[0] * (28.0 - y[2]) - y[1]
    out[2] = y[0] * y[1] - 8.0 / 3.0 * y[2]


@numba.njit(cache=True, inline="always")
def _step(y, h, K, ynew, tmp, rtol, atol):
    """One DOP853 step from y with K[0] = f(y): ynew, K[12] = f(ynew); returns the scaled error."""
    n = 3
    for s in range(1, 12):
        for i in range(n):
            acc = 0.0
            for j in range(s):
                acc += A[s, j] * K[j, i]
            tmp[i] = y[i] + h * acc
        _f(tmp, K[s])
    for i in range(n):
        acc = 0.0
        for j in range(12):
            acc += B[j] * K[j, i]
        ynew[i] = y[i] + h * acc
    _f(ynew, K[12])
    e5, e3 = 0.0, 0.0
    for i in range(n):
        sc = atol + rtol * max(abs(y[i]), abs(ynew[i]))
        a, b = 0.0, 0.0
        for j in range(13):
            a += E5[j] * K[j, i]
            b += E3[j] * K[j, i]
        e5 += (a / sc) ** 2
        e3 += (b / sc) ** 2
    return 0.0 if e5 == 0.0 and e3 == 0.0 else h * e5 / math.sqrt((e5 + 0.01 * e3) * n)


@numba.njit(cache=True)
def plain_dop853(y0, t1, rtol, atol, cap):
    """The reference loop: DOP853 steps, every accepted step kept (no dense output needed)."""
    n = 3
    K = np.zeros((13, n))
    y = y0.copy()
    ynew = np.empty(n)
    tmp = np.empty(n)
    ts = np.empty(cap)
    ys = np.empty((cap, n))
    t, h, count = 0.0, 1e-3, 0
    _f(y, K[0])
    while t < t1 and count < cap:
        h = min(h, t1 - t)
        err = _step(y, h, K, ynew, tmp, rtol, atol)
        if err <= 1.0:
            t += h
            y[:] = ynew
            K[0] = K[12]
            ts[count] = t
            ys[count] = y
            count += 1
            h *= min(10.0, 0.9 * err ** -0.125) if err > 0 else 10.0
        else:
            h *= max(0.2, 0.9 * err ** -0.125)
    return ts[:count], ys[:count]


@numba.njit(cache=True)
def plain_dop853_sampled(y0, t1, rtol, atol, grid):
    """The reference loop with samples: DOP853 steps, and on each accepted step that holds points of
    ``grid`` its 7th-order dense output as scipy builds it (three more stages, then the polynomial)
    read at those points. Returns the samples and the number of accepted steps."""
    n = 3
    K = np.zeros((16, n))
    F = np.zeros((7, n))
    y = y0.copy()
    ynew = np.empty(n)
    tmp = np.empty(n)
    out = np.empty((grid.shape[0], n))
    t, h, count, gi = 0.0, 1e-3, 0, 0
    _f(y, K[0])
    while gi < grid.shape[0] and grid[gi] <= t:
        out[gi] = y
        gi += 1
    while t < t1:
        h = min(h, t1 - t)
        err = _step(y, h, K, ynew, tmp, rtol, atol)
        if err <= 1.0:
            t_new = t + h
            if gi < grid.shape[0] and grid[gi] <= t_new:
                for s in range(13, 16):
                    for i in range(n):
                        acc = 0.0
                        for j in range(s):
                            acc += A_ALL[s, j] * K[j, i]
                        tmp[i] = y[i] + h * acc
                    _f(tmp, K[s])
                for i in range(n):
                    dy = ynew[i] - y[i]
                    F[0, i] = dy
                    F[1, i] = h * K[0, i] - dy
                    F[2, i] = 2.0 * dy - h * (K[12, i] + K[0, i])
                    for r in range(4):
                        acc = 0.0
                        for j in range(16):
                            acc += D_ALL[r, j] * K[j, i]
                        F[3 + r, i] = h * acc
                while gi < grid.shape[0] and grid[gi] <= t_new:
                    x = (grid[gi] - t) / h
                    for i in range(n):
                        acc = 0.0
                        for r in range(6, -1, -1):
                            acc += F[r, i]
                            acc *= x if (6 - r) % 2 == 0 else 1.0 - x
                        out[gi, i] = y[i] + acc
                    gi += 1
            t = t_new
            y[:] = ynew
            K[0] = K[12]
            count += 1
            h *= min(10.0, 0.9 * err ** -0.125) if err > 0 else 10.0
        else:
            h *= max(0.2, 0.9 * err ** -0.125)
    return out[:gi], count


def run() -> list[Row]:
    system = compile_model(LORENZ)
    compiled.engine_for(system, wait=True)  # compile time is not part of the run (reported by bench_growth)
    x, y, z = sp.symbols("x y z")
    f = sp.lambdify((x, y, z), [10 * (y - x), x * (28 - z) - y, x * y - sp.Rational(8, 3) * z])

    def baseline_rhs(t, u):
        return f(*u)

    y0 = np.array([1.0, 0.0, 0.0])
    plain_dop853(y0, 1.0, 1e-9, 1e-9, 100000)
    ref = solve_ivp(baseline_rhs, (0, 10), y0, method="DOP853", rtol=1e-13, atol=1e-13).y[:, -1]
    short = simulate(system, RunSettings(t_end=10, rtol=1e-9, atol=1e-9, samples=2)).final_state
    base_short = solve_ivp(baseline_rhs, (0, 10), y0, method="DOP853", rtol=1e-9, atol=1e-9).y[:, -1]
    plain_t, plain_y = plain_dop853(y0, 10.0, 1e-9, 1e-9, 100000)
    check = (f"|error| at t=10 vs rtol 1e-13 reference: ours {np.abs(short - ref).max():.1e}, "
             f"solve_ivp {np.abs(base_short - ref).max():.1e}, plain numba {np.abs(plain_y[-1] - ref).max():.1e}")
    # the samples' error on [0, 10] (before the chaos makes every run's error grow to the attractor's size)
    # against a run at rtol = atol = 1e-13, read at the same 400 times
    g10 = np.linspace(0, 10, 400)
    tight = simulate(system, RunSettings(t_end=10, rtol=1e-13, atol=1e-13, samples=400)).states
    ours_10 = simulate(system, RunSettings(t_end=10, rtol=1e-9, atol=1e-9, samples=400)).states
    plain_10 = plain_dop853_sampled(y0, 10.0, 1e-9, 1e-9, g10)[0].T
    sampled_check = (f"|error| at 400 samples on [0, 10] vs rtol 1e-13: ours {np.abs(ours_10 - tight).max():.1e}, "
                     f"plain numba {np.abs(plain_10 - tight).max():.1e}")
    grid = np.linspace(0, 100, 4000)
    plain_dop853_sampled(y0, 1.0, 1e-9, 1e-9, grid)
    steps = simulate(system, RunSettings(t_end=100, rtol=1e-9, atol=1e-9, samples=0)).steps_taken
    plain_steps = plain_dop853(y0, 100.0, 1e-9, 1e-9, 100000)[0].size
    rows = []
    for samples, label in ((0, "every step"), (4000, "4,000 samples")):
        settings = RunSettings(t_end=100, rtol=1e-9, atol=1e-9, samples=samples)
        t_eval = None if samples == 0 else np.linspace(0, 100, samples)

        def ours():
            simulate(system, settings)

        def baseline():
            solve_ivp(baseline_rhs, (0, 100), y0, method="DOP853", rtol=1e-9, atol=1e-9, t_eval=t_eval,
                      dense_output=samples == 0)

        def plain():
            plain_dop853(y0, 100.0, 1e-9, 1e-9, 100000)

        def plain_sampled():
            plain_dop853_sampled(y0, 100.0, 1e-9, 1e-9, grid)

        a, b = interleaved(ours, baseline, repeats=5)
        rows.append(Row(f"Lorenz trajectory, {label}", a, b, check, "solve_ivp DOP853 + lambdify", "≥ 30x"))
        a, c = interleaved_best(ours, plain, repeats=41)
        rows.append(Row(f"same, {label}, against a plain numba loop (fastest of 41 each)", a, c,
                        "the plain loop stores every step: no samples, bound or NaN checks, events, progress; "
                        + _per_step(a, c, steps, plain_steps), "plain numba DOP853 loop", "within 2x (ratio ≥ 0.5)"))
        if samples:
            a, c = interleaved_best(ours, plain_sampled, repeats=41)
            rows.append(Row(f"same, {label}, against the plain loop reading them off its dense output (fastest "
                            "of 41 each)", a, c, sampled_check + "; the plain loop checks nothing between step ends; "
                            + _per_step(a, c, steps, plain_steps),
                            "plain numba DOP853 loop with scipy's dense output", "within 2x (ratio ≥ 0.5)"))
    return rows


def _per_step(ours, plain, steps, plain_steps) -> str:
    """The two times per accepted step and their ratio to two digits (the table rounds it to one)."""
    return (f"{ours / steps * 1e9:.0f} ns a step ({steps:,} steps, the whole run from Python) against "
            f"{plain / plain_steps * 1e9:.0f} ns ({plain_steps:,}): ratio {plain / ours:.2f}")


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run())
