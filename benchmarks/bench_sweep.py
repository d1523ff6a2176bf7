"""Orbit diagram of the forced two-well (Duffing) oscillator over 400 forcing amplitudes.

x'' + delta x' - x + x^3 = gamma cos(omega t), delta = 0.3, omega = 1.2, gamma in [0.2, 0.5]: 300 forcing
periods of transient, then 100 stroboscopic samples per amplitude. Ours: one sweep on the engine's
compiled member loop, (1) with the defaults `orbitdesk sweep` uses (adaptive DOP853 per member, a
single run's rtol 1e-8, atol 1e-10, strobe points read off the dense output) and (2) with a fixed
RK4 step dividing the period (100 steps per period). Baseline: a Python loop calling scipy's
solve_ivp (DOP853, rtol 1e-8, atol 1e-10, t_eval at the strobe times) per amplitude, timed on a
subset of the amplitudes and scaled to 400. Accuracy: for amplitudes of the subset whose response is
period-1, the sampled points of both agree. Kernels and loops are compiled before timing; the CPU
time of the process is printed beside the wall time (the machine is shared).
"""

from __future__ import annotations

import math
import sys
import time
from dataclasses import replace

import numpy as np
from scipy.integrate import solve_ivp

from benchmarks.harness import Row
from orbitdesk.analyses.sweep import STROBE, SweepSettings, sweep
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.samples.models import DUFFING_REF, model

DUFFING = model(DUFFING_REF, gamma=0.3, initial={"x'(0)": 0})
COUNT, TRANSIENT_PERIODS, SAMPLED_PERIODS, STEPS_PER_PERIOD, SUBSET = 400, 300, 100, 100, 8


def run(log=print) -> list[Row]:
    system = compile_model(DUFFING)
    period = 2 * math.pi / 1.2
    gammas = np.linspace(0.2, 0.5, COUNT)
    default = SweepSettings(mode=STROBE, period=period, transient=TRANSIENT_PERIODS * period,
                            samples=SAMPLED_PERIODS)
    fixed = replace(default, dt=period / STEPS_PER_PERIOD)
    mine = {}
    for name, settings in (("default", default), ("fixed", fixed)):
        sweep(system, "gamma", gammas[:4], replace_samples(settings, 2), compiled=True)  # compile first
        start, cpu = time.perf_counter(), time.process_time()
        result = sweep(system, "gamma", gammas, settings)
        mine[name] = (result, time.perf_counter() - start, time.process_time() - cpu)
        log(f"ours ({name}): {mine[name][1]:.2f} s wall, {mine[name][2]:.2f} s CPU")

    subset = np.linspace(0, COUNT - 1, SUBSET).round().astype(int)
    strobe_times = period * np.arange(TRANSIENT_PERIODS + 1, TRANSIENT_PERIODS + SAMPLED_PERIODS + 1)
    baseline_points = {}
    start, cpu = time.perf_counter(), time.process_time()
    for i in subset:
        rhs = system.rhs_function(system.param_vector({"gamma": gammas[i]}))
        sol = solve_ivp(rhs, (0.0, strobe_times[-1]), system.initial, method="DOP853", rtol=1e-8, atol=1e-10,
                        t_eval=strobe_times)
        baseline_points[i] = sol.y[0]
    subset_time, subset_cpu = time.perf_counter() - start, time.process_time() - cpu
    baseline_time = subset_time * COUNT / SUBSET
    log(f"baseline: solve_ivp loop measured on {SUBSET} of {COUNT} amplitudes ({subset_time:.2f} s wall, "
        f"{subset_cpu:.2f} s CPU) and scaled to {COUNT}: {baseline_time:.1f} s (CPU {subset_cpu * COUNT / SUBSET:.1f} s)")

    period_one = [i for i in subset if np.ptp(baseline_points[i]) < 1e-6]
    shown = ", ".join(f"{gammas[i]:.3f}" for i in period_one)
    rows = []
    for name, label, goal in (("default", "defaults (adaptive DOP853, rtol 1e-8)", "≥ 100x"),
                              ("fixed", f"fixed RK4 step T/{STEPS_PER_PERIOD}", "")):
        result, wall, cpu_time = mine[name]
        worst = max((np.max(np.abs(result.samples[i] - baseline_points[i])) for i in period_one),
                    default=float("nan"))
        check = (f"period-1 amplitudes of the subset (gamma = {shown}): max |ours - baseline| over the 100 strobe "
                 f"points = {worst:.1e}; CPU ours {cpu_time:.2f} s, baseline {subset_cpu * COUNT / SUBSET:.1f} s")
        log(f"{name}: ratio {baseline_time / wall:.1f}x (CPU {subset_cpu * COUNT / SUBSET / cpu_time:.1f}x); {check}")
        rows.append(Row(f"Duffing orbit diagram, {COUNT} amplitudes x {TRANSIENT_PERIODS + SAMPLED_PERIODS} periods, "
                        f"strobe, {label}", wall, baseline_time, check,
                        f"solve_ivp DOP853 loop ({SUBSET} timed, scaled)", goal))
    return rows


def replace_samples(settings, samples):
    return replace(settings, samples=samples, transient=settings.period)


if __name__ == "__main__":
    from benchmarks.harness import print_table

    rows = run(log=lambda text: print(text, file=sys.stderr))
    print_table(rows)
