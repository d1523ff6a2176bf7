"""Map sweeps and grids with Lyapunov exponents in plain Python (ORBITDESK_NO_JIT=1: where numba cannot be
imported), the member loop working on the whole block per iterate (issue 11).

Case 1: ``orbitdesk sweep`` of the Hénon map over 200 values of a in [1.0, 1.4] with ``--lyapunov`` (transient
100, each value's spectrum run block after block until it settles, as the ``lyapunov`` command does). Ours:
``sweep(..., lyapunov=True, compiled=False)`` (``lyapunov.map_exponents``: all values in the member loop).
Baseline, side by side: ``lyapunov_spectrum(converge=True)`` value by value on the same plain engine (the
sweep's path before). Check: the exponents of both, and of the compiled engine (bit for bit); a = 1.4:
0.419 (Sprott, Chaos and Time-Series Analysis, 2003; from memory).

Case 2: the Hénon largest-exponent grid, 40 x 25 points (a in [1.0, 1.4], b in [0.0, 0.3]), 100 + 1000
iterations, plain engine in this process (``lyapunov_grid(..., compiled=False)``, one chunk) against the plain Python loop of
``bench_lyapunov_grid`` point by point. Check: the exponents of both; the compiled grid bit for bit.
Processor times, ours and the baseline interleaved.
"""

from __future__ import annotations

import os
import sys
import time

import numpy as np

from benchmarks.harness import Row
from benchmarks.bench_lyapunov_grid import python_exponent
from orbitdesk.analyses.lyapunov import lyapunov_spectrum
from orbitdesk.analyses.sweep import GridSettings, SweepSettings, lyapunov_grid, sweep
from orbitdesk.engine import compiled as kernels
from orbitdesk.engine.settings import RunSettings
from orbitdesk.samples.models import HENON
from orbitdesk.system.compiled_system import compile_model

VALUES = np.linspace(1.0, 1.4, 200)
XS, YS = np.linspace(1.0, 1.4, 40), np.linspace(0.0, 0.3, 25)


def _cpu(fn):
    start = time.process_time()
    value = fn()
    return time.process_time() - start, value


def run(log=print) -> list[Row]:
    before = os.environ.get("ORBITDESK_NO_JIT")
    os.environ["ORBITDESK_NO_JIT"] = "1"
    try:
        system = compile_model(HENON)
        k = system.parameters.index("a")
        settings = SweepSettings(transient=100, samples=10, lyapunov=True)

        def value_by_value():
            out = []
            for value in VALUES:
                p = system.param_values.copy()
                p[k] = value
                result = lyapunov_spectrum(system, p, system.initial, transient=100, converge=True,
                                           settings=RunSettings())
                out.append(result.largest if result.ok else np.nan)
            return np.array(out)

        ours_time, ours = _cpu(lambda: sweep(system, "a", VALUES, settings, compiled=False))
        base_time, base = _cpu(value_by_value)
        grid_settings = GridSettings(transient=100, duration=1000)
        grid_time, grid = _cpu(lambda: lyapunov_grid(system, "a", XS, "b", YS, grid_settings, compiled=False,
                                                              chunk_size=XS.size * YS.size))
        loop_time, loop = _cpu(lambda: np.array([[python_exponent(a, b) for a in XS] for b in YS]))
    finally:
        if before is None:
            os.environ.pop("ORBITDESK_NO_JIT", None)
        else:
            os.environ["ORBITDESK_NO_JIT"] = before
    same_nan = np.array_equal(np.isnan(ours.lyapunov), np.isnan(base))
    diff = float(np.nanmax(np.abs(ours.lyapunov - base)))
    compiled_same = grid_same = "numba not installed"
    if kernels.available():
        fast = sweep(compile_model(HENON), "a", VALUES, settings, compiled=True)
        compiled_same = str(np.array_equal(fast.lyapunov, ours.lyapunov, equal_nan=True))
        fast_grid = lyapunov_grid(compile_model(HENON), "a", XS, "b", YS, grid_settings, compiled=True,
                                  chunk_size=XS.size * YS.size)
        grid_same = str(np.array_equal(fast_grid.exponent, grid.exponent, equal_nan=True))
    check = (f"max |ours - value by value| = {diff:.1e}, escapes agree: {same_nan}; compiled equal bit for bit: "
             f"{compiled_same}; a = 1.4: {ours.lyapunov[-1]:.4f} (Sprott 2003: ~0.419, from memory)")
    log(f"sweep: ours {ours_time:.2f} s CPU, value by value {base_time:.2f} s CPU; {check}")
    both = np.isfinite(grid.exponent) & np.isfinite(loop)
    grid_check = (f"median |grid - loop| = {np.median(np.abs(grid.exponent - loop)[both]):.1e}, escapes agree: "
                  f"{np.array_equal(np.isnan(grid.exponent), np.isnan(loop))}; compiled equal bit for bit: {grid_same}")
    log(f"grid: ours {grid_time:.2f} s CPU, loop {loop_time:.2f} s CPU; {grid_check}")
    return [Row(f"Hénon sweep --lyapunov, {VALUES.size} values, plain Python (processor time)", ours_time, base_time,
                check, "lyapunov_spectrum(converge=True) value by value, plain engine (the sweep's path before)"),
            Row(f"Hénon exponent grid {XS.size} x {YS.size}, 100 + 1000 iterations, plain Python (processor time)",
                grid_time, loop_time, grid_check, "plain Python loop point by point (bench_lyapunov_grid)")]


if __name__ == "__main__":
    from benchmarks.harness import print_table

    rows = run(log=lambda text: print(text, file=sys.stderr))
    print_table(rows)
