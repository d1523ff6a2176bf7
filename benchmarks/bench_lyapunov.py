"""Lyapunov spectrum of the Lorenz system (sigma = 10, r = 28, beta = 8/3) to two decimals.

Ours: ``lyapunov_spectrum`` (the compiled Dormand-Prince 8(5,3) loop on the state and tangent
matrix through the model's kernel, QR every renormalisation interval, the run's default tolerances
rtol 1e-8, atol 1e-10), t in [0, 1020] with 20 of transient; compile time excluded (warm cache). Baseline: a straightforward implementation,
scipy's solve_ivp (DOP853, rtol 1e-8, atol 1e-10) on the stacked system u' = f(u), Phi' = J(u) Phi
with numpy, restarted after each renormalisation (numpy QR) every 1 time unit, the same span.
Published values: 0.906, 0, -14.57 (Sprott, Chaos and Time-Series Analysis, 2003); the sum is
-(sigma + 1 + beta) = -13.667 exactly (trace of the Jacobian).
"""

from __future__ import annotations

import sys

import numpy as np
from scipy.integrate import solve_ivp

from benchmarks.harness import Row, timed
from orbitdesk.engine.runs import RunSettings, simulate
from orbitdesk.engine import compiled
from orbitdesk.analyses.lyapunov import lyapunov_spectrum
from orbitdesk.samples.models import LORENZ
from orbitdesk.system.compiled_system import compile_model

T_END, TRANSIENT, TAU = 1020.0, 20.0, 1.0


def baseline_spectrum(system, t_end=T_END, transient=TRANSIENT, tau=TAU):
    p = system.param_values
    n = system.n_states
    f = system.rhs_function(p)

    def stacked(t, z):
        u, phi = z[:n], z[n:].reshape(n, n)
        return np.concatenate([f(t, u), (system.jac(t, u, p) @ phi).ravel()])

    u = simulate(system, RunSettings(t_end=transient, samples=2)).final_state
    q = np.eye(n)
    sums = np.zeros(n)
    t = transient
    while t < t_end - 1e-9:
        sol = solve_ivp(stacked, (t, t + tau), np.concatenate([u, q.ravel()]), method="DOP853",
                        rtol=1e-8, atol=1e-10)
        z = sol.y[:, -1]
        u = z[:n]
        q, r = np.linalg.qr(z[n:].reshape(n, n))
        signs = np.sign(np.diag(r))
        q = q * signs
        sums += np.log(np.abs(np.diag(r)))
        t += tau
    return np.sort(sums / (t_end - transient))[::-1]


def run(log=print) -> list[Row]:
    system = compile_model(LORENZ)
    compiled.engine_for(system, wait=True)  # compile (or load) the kernels and loops first
    lyapunov_spectrum(system, t_end=30.0, transient=5.0)
    ours_time, ours = timed(lambda: lyapunov_spectrum(system, t_end=T_END, transient=TRANSIENT))
    base_time, base = timed(lambda: baseline_spectrum(system))
    fmt = lambda v: ", ".join(f"{x:.3f}" for x in v)  # noqa: E731
    log(f"ours:     {ours_time:.2f} s  exponents {fmt(ours.exponents)}  sum {ours.exponents.sum():.4f}  "
        f"D_KY {ours.kaplan_yorke_dimension:.3f}  (renormalised every {ours.renorm_interval:.3g})")
    log(f"baseline: {base_time:.2f} s  exponents {fmt(base)}  sum {base.sum():.4f}")
    log(f"ratio {base_time / ours_time:.1f}x; published 0.906, 0, -14.57 (Sprott 2003), sum -13.667")
    check = (f"ours {fmt(ours.exponents)} vs baseline {fmt(base)}; max difference "
             f"{np.max(np.abs(ours.exponents - base)):.3f}; published 0.906, 0, -14.57")
    return [Row(f"Lorenz spectrum, t = {T_END - TRANSIENT:g} after {TRANSIENT:g}", ours_time, base_time, check,
                "solve_ivp DOP853 on the stacked system", "≥ 50x")]


if __name__ == "__main__":
    from benchmarks.harness import print_table

    rows = run(log=lambda text: print(text, file=sys.stderr))
    print_table(rows)
