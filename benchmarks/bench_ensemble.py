"""10,000 Lorenz trajectories, 10,000 fixed RK4 steps (dt = 0.01), against a tiny C loop compiled here.

The C program (written to a temporary directory, ``cc -O2``) runs the same RK4 arithmetic in two
loop orders — all steps of one trajectory at a time, and one step of every trajectory at a time —
and the faster counts as the baseline. Ours: ``rk4_ensemble`` on numpy (measured on fewer steps and
scaled to 10,000, said in the row) and, when numba is installed, its compiled loop, timed from an
empty cache so the compile time is included. Without a C compiler the baseline column is empty.
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
from orbitdesk.core import jit
from orbitdesk.core.ensemble import rk4_ensemble
from orbitdesk.core.system import compile_model

LORENZ = "sigma = 10\nr = 28\nbeta = 8/3\nx' = sigma*(y - x)\ny' = x*(r - z) - y\nz' = x*y - beta*z\nx(0) = 1\n"
MEMBERS, STEPS, NUMPY_STEPS, CHECK_STEPS, DT = 10_000, 10_000, 300, 200, 0.01

C_SOURCE = r"""
#include <stdio.h>
#include <stdlib.h>
#include <time.h>
#define F(x, y, z, a, b, c) a = 10.0 * ((y) - (x)); b = (x) * (28.0 - (z)) - (y); c = (x) * (y) - (8.0 / 3.0) * (z);
static double now(void) { struct timespec t; clock_gettime(CLOCK_MONOTONIC, &t); return t.tv_sec + 1e-9 * t.tv_nsec; }
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


def run(log=print) -> list[Row]:
    system = compile_model(LORENZ)
    U0 = starts(MEMBERS)
    work = MEMBERS * STEPS
    rows = []
    with tempfile.TemporaryDirectory() as folder:
        program = c_loop(folder)
        c_time, c_check = None, ""
        if program is None:
            log("no C compiler (cc/gcc): the C column is skipped")
        else:
            times = {order: run_c(program, MEMBERS, STEPS, order)[0] for order in (0, 1)}
            c_time = min(times.values())
            short = run_c(program, MEMBERS, CHECK_STEPS, 1)[1]
            log(f"C loop, -O2: {times[0]:.2f} s one trajectory at a time, {times[1]:.2f} s one step of all at a time")

        rk4_ensemble(system, U0[:, :100], dt=DT, n_steps=10, compiled=False)  # warm-up: lambdify
        start = time.perf_counter()
        rk4_ensemble(system, U0, dt=DT, n_steps=NUMPY_STEPS, compiled=False)
        numpy_time = (time.perf_counter() - start) * STEPS / NUMPY_STEPS
        ours_short = rk4_ensemble(system, U0, dt=DT, n_steps=CHECK_STEPS, compiled=False).states[:, -1]
        check = "C loop not run" if program is None else (
            f"member {MEMBERS} after {CHECK_STEPS} steps: max |ours - C| = {np.abs(ours_short - short).max():.1e}")
        per = 1e9 / work
        log(f"numpy: {numpy_time * per:.1f} ns per trajectory-step" +
            ("" if c_time is None else f", C {c_time * per:.1f} ns"))
        rows.append(Row(f"Lorenz ensemble RK4, {MEMBERS:,} x {STEPS:,} steps, numpy "
                        f"(measured on {NUMPY_STEPS} steps, scaled; {numpy_time * per:.1f} ns per trajectory-step)",
                        numpy_time, c_time, check, "C loop -O2 (faster loop order)", "within 2x of C"))

        if jit.available():
            env = dict(os.environ, ORBITDESK_CACHE=os.path.join(folder, "cache"))
            code = ("import sys, time, numpy as np\n"
                    "from benchmarks.bench_ensemble import LORENZ, starts, MEMBERS, STEPS, DT\n"
                    "from orbitdesk.core.system import compile_model\n"
                    "from orbitdesk.core.ensemble import rk4_ensemble\n"
                    "s = compile_model(LORENZ); U0 = starts(MEMBERS)\n"
                    "a = time.perf_counter(); r = rk4_ensemble(s, U0, dt=DT, n_steps=STEPS, compiled=True)\n"
                    "b = time.perf_counter(); rk4_ensemble(s, U0, dt=DT, n_steps=STEPS, compiled=True)\n"
                    "c = time.perf_counter(); print(b - a, c - b)\n")
            out = subprocess.run([sys.executable, "-c", code], check=True, capture_output=True, text=True, env=env,
                                 cwd=os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
            cold, warm = (float(v) for v in out.stdout.split())
            jit_short = rk4_ensemble(system, U0, dt=DT, n_steps=CHECK_STEPS, compiled=True).states[:, -1]
            check = (f"same members as numpy after {CHECK_STEPS} steps: max |compiled - numpy| = "
                     f"{np.abs(jit_short - ours_short).max():.1e}")
            log(f"numba: {cold:.2f} s from an empty cache (compile included), {warm:.2f} s compiled")
            rows.append(Row(f"same, numba loop, compile included (empty cache); compiled: {warm * per:.1f} ns per "
                            f"trajectory-step", cold, c_time, check, "C loop -O2 (faster loop order)",
                            "within 2x of C"))
        else:
            log("numba is not installed: the compiled row is skipped")
    return rows


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run(log=lambda text: print(text, file=sys.stderr)))
