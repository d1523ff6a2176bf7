"""One Lorenz trajectory, t in [0, 100], rtol = atol = 1e-9, against solve_ivp(DOP853) on a lambdify right-hand side."""

from __future__ import annotations

import numpy as np
import sympy as sp
from scipy.integrate import solve_ivp

from benchmarks.harness import Row, interleaved
from orbitdesk.core.engine import RunSettings, simulate
from orbitdesk.core.system import compile_model

LORENZ = "sigma = 10\nr = 28\nbeta = 8/3\nx' = sigma*(y - x)\ny' = x*(r - z) - y\nz' = x*y - beta*z\nx(0) = 1\n"


def run() -> list[Row]:
    system = compile_model(LORENZ)
    x, y, z = sp.symbols("x y z")
    f = sp.lambdify((x, y, z), [10 * (y - x), x * (28 - z) - y, x * y - sp.Rational(8, 3) * z])

    def baseline_rhs(t, u):
        return f(*u)

    rows = []
    for samples, label in ((0, "every step"), (4000, "4,000 samples")):
        settings = RunSettings(t_end=100, rtol=1e-9, atol=1e-9, samples=samples)
        t_eval = None if samples == 0 else np.linspace(0, 100, samples)
        out = {}

        def ours():
            out["ours"] = simulate(system, settings)

        def baseline():
            out["base"] = solve_ivp(baseline_rhs, (0, 100), [1, 0, 0], method="DOP853", rtol=1e-9,
                                    atol=1e-9, t_eval=t_eval, dense_output=samples == 0)

        a, b = interleaved(ours, baseline, repeats=5)
        # same thing computed: compare at t = 10 (before chaos amplifies tolerance-level differences)
        ref = solve_ivp(baseline_rhs, (0, 10), [1, 0, 0], method="DOP853", rtol=1e-13, atol=1e-13).y[:, -1]
        short = simulate(system, RunSettings(t_end=10, rtol=1e-9, atol=1e-9, samples=2)).final_state
        base_short = solve_ivp(baseline_rhs, (0, 10), [1, 0, 0], method="DOP853", rtol=1e-9, atol=1e-9).y[:, -1]
        check = (f"|error| at t=10 vs rtol 1e-13 reference: ours {np.abs(short - ref).max():.1e}, "
                 f"baseline {np.abs(base_short - ref).max():.1e}")
        rows.append(Row(f"Lorenz trajectory, {label}", a, b, check, "solve_ivp DOP853 + lambdify", "≥ 5x"))
    return rows


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run())
