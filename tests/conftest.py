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

    simulate(compile_model(LORENZ), RunSettings(t_end=0.1, samples=11))
    simulate(compile_model(HENON), RunSettings(t_end=10, samples=11))
