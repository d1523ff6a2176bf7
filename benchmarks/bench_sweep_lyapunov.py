"""A sweep's Lyapunov exponents against the lyapunov command's for the same work (issue 13).

The sweep's ``--lyapunov`` on flows once ran its own tangent loop and took about six times what the
``lyapunov`` command took for the same values. It now calls the command's own function
(``analyses.sweep.sweep_exponents`` -> ``lyapunov_spectrum`` with converge=True, capped at the sweep's
sampling time), so the exponents are the command's numbers and the extra cost is the orbit diagram
itself. Case: the Lorenz system (sigma = 10, beta = 8/3) at r = 28, 32, 40, 45 (chaotic), maxima of z,
50 per value after a transient of 100, sampling at most 2,000 time units; the exponents stop when their
standard errors settle (the command's default tolerance). Ours: ``sweep(..., lyapunov=True)``.
Times are processor times (best of two, interleaved). Baseline: ``lyapunov_spectrum`` value by value, exactly as ``orbitdesk lyapunov --transient 100
--cap 2000`` runs it, plus (printed apart) the sweep without exponents. Published: the largest
exponent at r = 28 is 0.9056 (Sprott, Chaos and Time-Series Analysis, 2003; from memory).
"""

from __future__ import annotations

import sys
import time
from dataclasses import replace

import numpy as np

from benchmarks.harness import Row
from orbitdesk.analyses.lyapunov import lyapunov_spectrum
from orbitdesk.analyses.sweep import MAXIMA, SweepSettings, sweep
from orbitdesk.engine import compiled
from orbitdesk.engine.settings import RunSettings
from orbitdesk.samples.models import LORENZ
from orbitdesk.system.compiled_system import compile_model

VALUES = np.array([28.0, 32.0, 40.0, 45.0])
TRANSIENT, DURATION, SAMPLES = 100.0, 2000.0, 50


def run(log=print) -> list[Row]:
    system = compile_model(LORENZ)
    compiled.engine_for(system, wait=True)
    k = system.parameters.index("r")
    settings = SweepSettings(mode=MAXIMA, observe="z", samples=SAMPLES, transient=TRANSIENT, duration=DURATION)
    sweep(system, "r", VALUES[:1], settings, compiled=True)  # loops and batched kernel loaded first

    def command():
        out = []
        for value in VALUES:
            p = system.param_values.copy()
            p[k] = value
            out.append(lyapunov_spectrum(system, p, system.initial, transient=TRANSIENT, converge=True,
                                         cap=DURATION, settings=RunSettings(rtol=settings.rtol, atol=settings.atol)))
        return out

    def cpu(fn):
        start = time.process_time()
        value = fn()
        return time.process_time() - start, value

    # wall and processor time of each, interleaved twice (the machine is shared: the processor time is what
    # the same work costs on an idle machine)
    diagram_cpu, _ = cpu(lambda: sweep(system, "r", VALUES, settings, compiled=True))
    walls, cpus = {"ours": [], "base": []}, {"ours": [], "base": []}
    for _ in range(2):
        start = time.perf_counter()
        ours_cpu, ours = cpu(lambda: sweep(system, "r", VALUES, replace(settings, lyapunov=True), compiled=True))
        walls["ours"].append(time.perf_counter() - start)
        cpus["ours"].append(ours_cpu)
        start = time.perf_counter()
        base_cpu, base = cpu(command)
        walls["base"].append(time.perf_counter() - start)
        cpus["base"].append(base_cpu)
    ours_time, base_time = min(cpus["ours"]), min(cpus["base"])
    diagram_time = diagram_cpu
    log(f"wall: sweep {min(walls['ours']):.2f} s, command {min(walls['base']):.2f} s (load shared)")
    largest = np.array([r.largest for r in base])
    same = bool(np.array_equal(ours.lyapunov, largest))
    log(f"processor time: sweep with exponents {ours_time:.2f} s (orbit diagram alone {diagram_time:.2f} s); the "
        f"command's function value by value {base_time:.2f} s; ratio sweep / command {ours_time / base_time:.2f}")
    log(f"exponents {np.round(ours.lyapunov, 4)} vs {np.round(largest, 4)}: identical {same}; r = 28: "
        f"{largest[0]:.4f} +- {base[0].uncertainty[0]:.4f} (Sprott 2003: 0.9056)")
    check = (f"exponents identical: {same}; r = 28: {largest[0]:.4f} +- {base[0].uncertainty[0]:.4f} "
             f"(published 0.9056); orbit diagram alone {diagram_time:.2f} s")
    return [Row(f"Lorenz sweep --lyapunov, r = {', '.join(f'{v:g}' for v in VALUES)}, maxima after {TRANSIENT:g}, "
                f"cap {DURATION:g} (processor time, best of 2 interleaved)", ours_time, base_time, check,
                "the lyapunov command's function value by value", "about 1x (was 6x slower)")]


if __name__ == "__main__":
    from benchmarks.harness import print_table

    rows = run(log=lambda text: print(text, file=sys.stderr))
    print_table(rows)
