"""Settings for the whole test suite.

The engine's compiled loops are compiled once per machine (numba's cache). On a fresh clone the first run
compiles them, which takes minutes on a loaded machine and cannot be interrupted; if that happened inside a
test's background job, the test's teardown would have to wait for it. So the loops are compiled here, once,
before any test starts, by one short run of a flow and one of a map.
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

    lorenz, henon = compile_model(LORENZ), compile_model(HENON)
    simulate(lorenz, RunSettings(t_end=0.1, samples=11))
    simulate(henon, RunSettings(t_end=10, samples=11))
    # the member loops (adaptive, fixed step, maps) and the batched kernels, used by sweeps, ensembles and grids
    sweep(lorenz, "r", [20.0, 28.0], SweepSettings(mode="maxima", observe="z", transient=0.5, duration=1.0,
                                                   samples=2, method="dop853"))
    sweep(lorenz, "r", [20.0, 28.0], SweepSettings(mode="maxima", observe="z", transient=0.5, duration=1.0,
                                                   samples=2, dt=0.01))
    sweep(henon, henon.parameters[0], [1.0, 1.4], SweepSettings(transient=10, samples=5, lyapunov=True))
