"""Growth with size: coupled chains (N masses, 2N states) and Lorenz-96 (N states, F = 8).

For each size: parse, compile (sympy trees to the compiled system and the kernels, compiled by numba
— the loops themselves are compiled once per machine and not counted), one run (t in [0, 20],
4,000 samples, rtol 1e-8), equilibria (the Newton search alone, exact=False: the exact solve is a
separate, time-limited refinement), the Lyapunov spectrum for t = 20 (all exponents), and a cycle
search (chains are damped and Lorenz-96 is chaotic at F = 8: the search must end with an answer in
plain words, not hang). The table prints each time and the growth exponent fitted by least squares
to log(time) against log(states); each line also gives the processor time of each step and the
load average (the machine is shared: wall time then overstates the work). Kernels compile into an
empty cache folder, so the compile column measures numba's work, not a load from the cache.
Checks: the chain's spectrum sums to its trace -N c (closed form) and Lorenz-96's to -N (trace of
its Jacobian, closed form).
"""

from __future__ import annotations

import math
import os
import sys
import tempfile
import time

import numpy as np

from benchmarks.harness import Row
from orbitdesk.analyses.cycles import CycleError, find_cycle
from orbitdesk.engine.runs import RunSettings, simulate
from orbitdesk.analyses.equilibria import find_equilibria
from orbitdesk.engine import compiled
from orbitdesk.analyses.lyapunov import lyapunov_spectrum
from orbitdesk.language.model import parse_model
from orbitdesk.system.compiled_system import compile_model

CHAIN_SIZES = (5, 10, 25, 50, 100)  # masses: 10 .. 200 states
L96_SIZES = (5, 10, 20, 40, 80)


def chain(n: int) -> str:
    lines = ["k = 1", "c = 0.05", "g = 0.2"]
    for i in range(n):
        left = f"x{i - 1}" if i else "0"
        right = f"x{i + 1}" if i < n - 1 else "0"
        lines.append(f"x{i}'' = k*({left} - 2*x{i} + {right}) - c*x{i}' - g*x{i}^3")
    lines.append("x0(0) = 0.5")
    return "\n".join(lines) + "\n"


def lorenz96(n: int) -> str:
    lines = ["F = 8"]
    for i in range(n):
        lines.append(f"x{i}' = (x{(i + 1) % n} - x{(i - 2) % n})*x{(i - 1) % n} - x{i} + F")
    lines.append("x0(0) = 8.01")
    lines += [f"x{i}(0) = 8" for i in range(1, n)]
    return "\n".join(lines) + "\n"


CPU: dict[str, float] = {}  # processor seconds of the last measure() per step (the machine is shared)


def _timed(fn, key=None):
    start, cpu = time.perf_counter(), time.process_time()
    value = fn()
    if key is not None:
        CPU[key] = CPU.get(key, 0.0) + time.process_time() - cpu
    return time.perf_counter() - start, value


def measure(text: str, trace) -> dict:
    row = {}
    CPU.clear()
    row["parse"], parsed = _timed(lambda: parse_model(text), "parse")
    row["compile"], system = _timed(lambda: compile_model(parsed), "compile")
    t, _ = _timed(lambda: compiled.engine_for(system, wait=True), "compile")
    row["compile"] += t
    row["run"], run = _timed(lambda: simulate(system, RunSettings(t_end=20, samples=4000)), "run")
    row["equilibria"], eqs = _timed(lambda: find_equilibria(system, exact=False, starts=20), "equilibria")
    row["spectrum"], spec = _timed(lambda: lyapunov_spectrum(system, t_end=20, transient=2), "spectrum")

    def cycle():
        try:
            return find_cycle(system, transient=20)
        except CycleError as err:
            return str(err)

    row["cycle"], _ = _timed(cycle, "cycle")
    row["cpu"] = dict(CPU)
    row["states"] = system.n_states
    row["check"] = (run.status, len(eqs), float(spec.exponents.sum()), trace(system.n_states))
    return row


def fit_exponent(sizes, times) -> float:
    return float(np.polyfit(np.log(sizes), np.log(np.maximum(times, 1e-6)), 1)[0])


def run(log=print) -> list[Row]:
    """The tables; kernels compile into an empty cache folder (the compile is measured, not a load)."""
    previous = os.environ.get("ORBITDESK_CACHE")
    with tempfile.TemporaryDirectory() as folder:
        os.environ["ORBITDESK_CACHE"] = folder
        try:
            return _tables(log)
        finally:
            if previous is None:
                os.environ.pop("ORBITDESK_CACHE", None)
            else:
                os.environ["ORBITDESK_CACHE"] = previous


def _tables(log) -> list[Row]:
    rows = []
    for title, make, sizes, trace in (
            ("chain (2N states)", chain, CHAIN_SIZES, lambda n: -0.05 * n / 2),
            ("Lorenz-96", lorenz96, L96_SIZES, lambda n: -float(n))):
        table = []
        for n in sizes:
            result = measure(make(n), trace)
            table.append(result)
            log(f"{title} {result['states']:4d} states: " + ", ".join(
                f"{k} {result[k]:.3f} s" for k in ("parse", "compile", "run", "equilibria", "spectrum", "cycle"))
                + f"  (run {result['check'][0]}, {result['check'][1]} equilibria, spectrum sum "
                  f"{result['check'][2]:.4f} vs trace {result['check'][3]:.4f}); processor time: "
                + ", ".join(f"{k} {v:.3f} s" for k, v in result["cpu"].items())
                + f"; load average {os.getloadavg()[0]:.1f}")
        states = [r["states"] for r in table]
        for key in ("parse", "compile", "run", "equilibria", "spectrum", "cycle"):
            times = [r[key] for r in table]
            exponent = fit_exponent(states, times)
            rows.append(Row(f"{title}: {key} at {states[-1]} states (fitted growth exponent {exponent:.2f})",
                            times[-1], None, " / ".join(f"{s}: {t:.3g} s" for s, t in zip(states, times)), "", ""))
        total = sum(table[-1][k] for k in ("parse", "compile", "run", "equilibria", "spectrum", "cycle"))
        rows.append(Row(f"{title}: all six at {states[-1]} states", total, None,
                        f"spectrum sum {table[-1]['check'][2]:.4f} vs trace {table[-1]['check'][3]:.4f}; "
                        f"processor time {sum(table[-1]['cpu'].values()):.2f} s", "",
                        "< 20 s at 100 states"))
    return rows


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run(log=lambda text: print(text, file=sys.stderr)))
