"""A stiff 100-state run: the Brusselator with diffusion (Hairer & Wanner, Solving ODEs II, sec. IV.1,
problem BRUSS: alpha = 1/50, N = 50 grid points, u = 1 and v = 3 at both ends, u(0) = 1 + sin(2 pi x)),
t in [0, 10], rtol 1e-6, atol 1e-8, 201 samples, by the stiff method (Radau IIA) and BDF. Ours: scipy's
steppers on the model's compiled right-hand side and its sparse Jacobian (SuperLU); the baseline is the
engine's way before: the same checked stepper (``stiff.solve_at``) on a lambdified right-hand side and the
dense lambdified Jacobian, timed alternately. Where the baseline's dense LU runs on a multi-threaded BLAS
of a loaded machine, each of its factorisations can wait for a time slice: that is part of what it cost."""

from __future__ import annotations

import math

import numpy as np
from benchmarks.harness import Row, interleaved
from orbitdesk.engine import compiled
from orbitdesk.engine.runs import RunSettings, simulate
from orbitdesk.engine.stiff import solve_at
from orbitdesk.system.compiled_system import compile_model

N = 50


def brusselator_line(n: int = N) -> str:
    lines = [f"d = {(n + 1) ** 2 / 50!r}"]
    for i in range(1, n + 1):
        ul, ur = (f"u{i - 1}" if i > 1 else "1"), (f"u{i + 1}" if i < n else "1")
        vl, vr = (f"v{i - 1}" if i > 1 else "3"), (f"v{i + 1}" if i < n else "3")
        lines += [f"u{i}' = 1 + u{i}^2*v{i} - 4*u{i} + d*({ul} - 2*u{i} + {ur})",
                  f"v{i}' = 3*u{i} - u{i}^2*v{i} + d*({vl} - 2*v{i} + {vr})",
                  f"u{i}(0) = {1 + math.sin(2 * math.pi * i / (n + 1))!r}", f"v{i}(0) = 3"]
    return "\n".join(lines) + "\n"


def run(log=print) -> list[Row]:
    system = compile_model(brusselator_line())
    compiled.engine_for(system, wait=True)  # compile time is not part of the run
    p = system.param_values
    f = system.rhs_function(p)
    times = np.linspace(0, 10, 201)
    rows = []
    for method, scipy_name in (("stiff", "Radau"), ("bdf", "BDF")):
        settings = RunSettings(t_end=10, rtol=1e-6, atol=1e-8, samples=201, method=method)
        found = {}

        def ours():
            found["ours"] = simulate(system, settings)

        def baseline():
            found["base"] = solve_at(scipy_name, lambda t, y: np.asarray(f(t, y), dtype=float),
                                     lambda t, y: system.jac(t, y, p), 0.0, system.initial, 10.0, 1e-6, 1e-8,
                                     times[1:])[0]

        a, b = interleaved(ours, baseline, repeats=1)
        run_ = found["ours"]
        diff = float(np.abs(run_.states[:, 1:] - found["base"]).max())
        log(f"{method}: ours {a:.2f} s ({run_.steps_taken} steps), baseline {b:.2f} s; max difference {diff:.1e}")
        rows.append(Row(f"Brusselator with diffusion, 100 states, t in [0, 10], {method} ({scipy_name})", a, b,
                        f"samples: max |ours - baseline| = {diff:.1e} (rtol 1e-6); u1(10) = {run_.states[0, -1]:.6f}",
                        f"the same checked {scipy_name} on a lambdified f and the dense Jacobian", "faster than before"))
    return rows


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run())
