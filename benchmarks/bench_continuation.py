"""Continuation against brute-force sweeps that resolve the same special points.

1. Lorenz (sigma = 10, beta = 8/3) equilibrium branches over r in [0, 30]: ours follows every branch by
   pseudo-arclength and locates the branch point (r = 1) and the two Hopf points (closed form
   r = sigma (sigma + beta + 3) / (sigma - beta - 1)). Baseline: a uniform grid of r values, Newton from
   the previous grid value's equilibrium on each of the three branches, eigenvalues at every value, the
   points located by linear interpolation of the largest real part across the grid cell where it changes
   sign. Accuracy: the error of the located Hopf value against the closed form.
2. The shaken beam's frequency response (x'' + 0.1 x' - x + x^3 = 0.05 cos(omega t), omega in [0.8, 1.8],
   about 200 points): ours continues the periodic response and locates its two folds. Baseline: stepped
   sweeps up and down over 200 values each, every value settled from the previous one's state (what a
   rig does); the folds are where the amplitude jumps, known to half a step. Accuracy: both against
   ours located on a finer curve.
"""

from __future__ import annotations

import math

import numpy as np

from benchmarks.harness import Row, timed
from orbitdesk.analyses.continuation import HOPF, StepSettings, steady_branches
from orbitdesk.analyses.continuation.response import response_curve, stepped_sweep
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.samples.models import DUFFING_REF, LORENZ_REF, model

LORENZ = model(LORENZ_REF, initial={"x(0)": None, "y(0)": None, "z(0)": None})
BEAM = model(DUFFING_REF, delta=0.1, gamma=0.05)
GRID = 3000


def _lorenz_grid(system):
    sigma, beta = 10.0, 8.0 / 3.0
    rs = np.linspace(0.0, 30.0, GRID)
    p = system.param_vector()
    k = system.parameters.index("r")
    starts = [np.zeros(3)] + [np.array([s * math.sqrt(beta * 29), s * math.sqrt(beta * 29), 29.0]) for s in (1, -1)]
    located = []
    for u in starts:
        growth, values = [], []
        for r in rs[::-1] if u.any() else rs:
            p[k] = r
            for _ in range(30):
                step = np.linalg.solve(system.jac(0, u, p), -system.rhs(0, u, p))
                u = u + step
                if np.linalg.norm(step) < 1e-12:
                    break
            if not np.all(np.isfinite(u)):
                break
            growth.append(np.max(np.linalg.eigvals(system.jac(0, u, p)).real))
            values.append(r)
        g, v = np.array(growth), np.array(values)
        for i in np.nonzero(np.sign(g[:-1]) != np.sign(g[1:]))[0]:
            located.append(v[i] + (v[i + 1] - v[i]) * g[i] / (g[i] - g[i + 1]))
    return located


def run(log=print) -> list[Row]:
    rows = []
    sigma, beta = 10.0, 8.0 / 3.0
    r_hopf = sigma * (sigma + beta + 3) / (sigma - beta - 1)
    system = compile_model(LORENZ)
    steady_branches(system, "r", 0, 30)  # warm-up: generated code
    ours_time, ours = timed(lambda: steady_branches(system, "r", 0, 30))
    hopfs = [s.value for b in ours.branches for s in b.special if s.type == HOPF]
    n_points = sum(b.size for b in ours.branches)
    grid_time, grid = timed(lambda: _lorenz_grid(system))
    grid_hopf = [v for v in grid if abs(v - r_hopf) < 1]
    rows.append(Row(f"Lorenz equilibrium branches, r in [0, 30], {n_points} points, branch point and 2 Hopf points",
                    ours_time, grid_time,
                    f"Hopf error vs closed form {r_hopf:.10f}: ours {max(abs(h - r_hopf) for h in hopfs):.1e}, "
                    f"grid {max(abs(h - r_hopf) for h in grid_hopf):.1e}; grid finds {len(grid)} stability changes",
                    f"grid of {GRID} values, Newton + eigenvalues, interpolated", "located to full precision"))

    beam = compile_model(BEAM)
    settings = StepSettings(ds=0.005, ds_min=1e-9, ds_max=0.012, max_points=400)
    response_curve(beam, "omega", 0.8, 1.8, settings=settings)  # warm-up
    ours_time, curve = timed(lambda: response_curve(beam, "omega", 0.8, 1.8, settings=settings))
    folds = sorted(s.value for s in curve.special)
    sweep_time, (up, down) = timed(lambda: (stepped_sweep(beam, "omega", 0.8, 1.8, "up", 200),
                                            stepped_sweep(beam, "omega", 0.8, 1.8, "down", 200)))
    j_up = int(np.argmax(np.diff(up.amplitudes)))
    j_down = int(np.argmin(np.diff(down.amplitudes)))
    jump_up = 0.5 * (up.values[j_up] + up.values[j_up + 1])
    jump_down = 0.5 * (down.values[j_down] + down.values[j_down + 1])
    rows.append(Row(f"shaken beam frequency response, omega in [0.8, 1.8], {len(curve.values)} points with 2 folds",
                    ours_time, sweep_time,
                    f"folds {folds[0]:.10f}, {folds[1]:.10f}; stepped sweeps jump at {jump_down:.4f} and "
                    f"{jump_up:.4f} (|difference| {abs(jump_down - folds[0]):.1e}, {abs(jump_up - folds[1]):.1e}; "
                    f"half a step is {0.5 / 199:.1e})",
                    "stepped sweeps up and down, 200 values each", "same folds, unstable part too"))
    return rows


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run())
