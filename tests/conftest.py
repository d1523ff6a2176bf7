"""Settings for the whole test suite.

The engine's compiled loops are compiled once per machine (numba's cache). On a fresh clone the first run
compiles them, which takes minutes on a loaded machine and cannot be interrupted; if that happened inside a
test's background job, the test's teardown would have to wait for it. So the loops are compiled here, once,
before any test starts: the compiled engines of a flow and a map (``engine_for(..., wait=True)``; a short run
alone would be served by the plain-Python engine while the compiler works in the background, compiling
nothing here), then short sweeps that use them.
"""

import os

import orbitdesk  # noqa: F401  (sets the BLAS thread count before numpy loads)

import pytest


@pytest.fixture(scope="session", autouse=True)
def compiled_loops_ready():
    if os.environ.get("ORBITDESK_NO_JIT") == "1":
        return
    from orbitdesk.engine.runs import simulate
    from orbitdesk.engine.settings import RunSettings
    from orbitdesk.samples.models import HENON, LORENZ
    from orbitdesk.system.compiled_system import compile_model

    from orbitdesk.analyses.sweep import SweepSettings, sweep

    from orbitdesk.engine.compiled import engine_for

    lorenz, henon = compile_model(LORENZ), compile_model(HENON)
    for system in (lorenz, henon):
        engine_for(system, wait=True).batch  # noqa: B018  (the batched kernel compiles when first read)
    simulate(lorenz, RunSettings(t_end=0.1, samples=11))
    simulate(henon, RunSettings(t_end=10, samples=11))
    # the member loops (adaptive, fixed step, maps) and the batched kernels, used by sweeps, ensembles and grids
    sweep(lorenz, "r", [20.0, 28.0], SweepSettings(mode="maxima", observe="z", transient=0.5, duration=1.0,
                                                   samples=2, method="dop853"))
    sweep(lorenz, "r", [20.0, 28.0], SweepSettings(mode="maxima", observe="z", transient=0.5, duration=1.0,
                                                   samples=2, dt=0.01))
    sweep(henon, henon.parameters[0], [1.0, 1.4], SweepSettings(transient=10, samples=5, lyapunov=True))
