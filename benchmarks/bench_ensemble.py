"""Ensembles of 10 to 10,000 Lorenz trajectories, fixed RK4 steps (dt = 0.01), against a tiny C loop
compiled here.

The C program (written to a temporary directory, ``cc -O2``) runs the same RK4 arithmetic in two
loop orders — all steps of one trajectory at a time, and one step of every trajectory at a time —
and the faster counts as the baseline. Ours: ``rk4_ensemble`` on the compiled lean member loop
(engine/members_fixed.py: one step and one end for every member), the model's kernels compiled first
(warm cache; the compile time is logged, not counted). Both sides are timed in processor time of
their own process (the C loop by CLOCK_PROCESS_CPUTIME_ID, ours by time.process_time), fastest of
three, so other work on a shared machine does not count. Without a C compiler the baseline column
is empty.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tempfile
import time

import numpy as np

from benchmarks.harness import Row
from orbitdesk.engine import compiled
from orbitdesk.engine.ensembles import rk4_ensemble
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.samples.models import LORENZ_REF, model

LORENZ = model(LORENZ_REF, initial={'y(0)': None, 'z(0)': None})
CHECK_STEPS, DT = 200, 0.01

C_SOURCE = r"""
#include <stdio.h>
#include <stdlib.h>
#include <time.h>
#define F(x, y, z, a, b, c) a = 10.0 * ((y) - (x)); b = (x) * (28.0 - (z)) - (y); c = (x) * (y) - (8.0 / 3.0) * (z);
static double now(void) { struct timespec t; clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &t); return t.tv_sec + 1e-9 * t.tv_nsec; }
static void step(double *X, double *Y, double *Z, int i, double dt) {
    double h = dt / 2, s6 = dt / 6, x = X[i], y = Y[i], z = Z[i], a1, b1, c1, a2, b2, c2, a3, b3, c3, a4, b4, c4;
    F(x, y, z, a1, b1, c1)
    F(x + h * a1, y + h * b1, z + h * c1, a2, b2, c2)
    F(x + h * a2, y + h * b2, z + h * c2, a3, b3, c3)
    F(x + dt * a3, y + dt * b3, z + dt * c3, a4, b4, c4)
    X[i] = x + s6 * (a1 + 2 * a2 + 2 * a3 + a4); Y[i] = y + s6 * (b1 + 2 * b2 + 2 * b3 + b4);
    Z[i] = z + s6 * (c1 + 2 * c2 + 2 * c3 + c4);
}
int main(int argc, char **argv) {
    int N = atoi(argv[1]), S = atoi(argv[2]), order = atoi(argv[3]);
    double *X = malloc(N * sizeof(double)), *Y = malloc(N * sizeof(double)), *Z = malloc(N * sizeof(double));
    for (int i = 0; i < N; i++) { X[i] = 1.0 + 1e-3 * i / N; Y[i] = 0.0; Z[i] = 0.0; }
    double start = now();
    if (order == 0) { for (int i = 0; i < N; i++) for (int s = 0; s < S; s++) step(X, Y, Z, i, 0.01); }
    else { for (int s = 0; s < S; s++) for (int i = 0; i < N; i++) step(X, Y, Z, i, 0.01); }
    printf("%.9f %.17g %.17g %.17g\n", now() - start, X[N - 1], Y[N - 1], Z[N - 1]);
    return 0;
}
"""


def starts(members):
    return np.vstack([1.0 + 1e-3 * np.arange(members) / members, np.zeros(members), np.zeros(members)])


def c_loop(folder):
    """Path of the compiled C program, or None without a C compiler."""
    compiler = shutil.which("cc") or shutil.which("gcc")
    if compiler is None:
        return None
    source = os.path.join(folder, "rk4.c")
    with open(source, "w") as handle:
        handle.write(C_SOURCE)
    program = os.path.join(folder, "rk4")
    subprocess.run([compiler, "-O2", "-o", program, source], check=True, capture_output=True)
    return program


def run_c(program, members, steps, order):
    out = subprocess.run([program, str(members), str(steps), str(order)], check=True, capture_output=True,
                         text=True).stdout.split()
    return float(out[0]), np.array([float(v) for v in out[1:]])


SIZES = ((10, 20_000), (100, 20_000), (400, 10_000), (10_000, 2_000))  # members, steps


def run(log=print) -> list[Row]:
    """Per member-step against the C loop for 10 to 10,000 members (kernels compiled first: warm cache)."""
    system = compile_model(LORENZ)
    start = time.perf_counter()
    compiled.engine_for(system, wait=True)
    log(f"kernels compiled (or loaded) in {time.perf_counter() - start:.2f} s; not part of the rows")
    rows = []
    with tempfile.TemporaryDirectory() as folder:
        program = c_loop(folder)
        if program is None:
            log("no C compiler (cc/gcc): the C column is skipped")
        for members, steps in SIZES:
            U0 = starts(members)
            rk4_ensemble(system, U0, dt=DT, n_steps=10, compiled=True)
            ours = []
            for _ in range(3):
                start = time.process_time()
                rk4_ensemble(system, U0, dt=DT, n_steps=steps, compiled=True)
                ours.append(time.process_time() - start)
            ours_time = min(ours)
            per = 1e9 / (members * steps)
            c_time, check = None, "C loop not run"
            if program is not None:
                c_time = min(min(run_c(program, members, steps, order)[0] for order in (0, 1)) for _ in range(3))
                short = run_c(program, members, CHECK_STEPS, 1)[1]
                mine = rk4_ensemble(system, U0, dt=DT, n_steps=CHECK_STEPS, compiled=True).states[:, -1]
                check = f"member {members} after {CHECK_STEPS} steps: max |ours - C| = {np.abs(mine - short).max():.1e}"
            log(f"{members} members: ours {ours_time * per:.1f} ns per member-step"
                + ("" if c_time is None else f", C {c_time * per:.1f} ns"))
            rows.append(Row(f"Lorenz ensemble RK4, {members:,} members x {steps:,} steps "
                            f"({ours_time * per:.1f} ns CPU per member-step; fastest of 3)", ours_time, c_time, check,
                            "C loop -O2 (faster loop order), CPU time",
                            "under 100 ns per member-step" if members == 10 else "within 1.5x of C (ratio ≥ 0.67)"))
    return rows


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run(log=lambda text: print(text, file=sys.stderr)))
