"""Runs that meet numbers at the edge of the float range end with a status in plain words, never an exception.

A slope beyond the float range at the start (an event that sets a parameter to cosh(690) ~ 1e299, found by the
event-model fuzz) made the starting-step rule (Hairer, Norsett & Wanner, Solving ODEs I, sec. II.4: h0 =
0.01 d0/d1 with d1 = inf) divide by a zero trial step: a ZeroDivisionError out of the run.
"""

import numpy as np
import pytest

from orbitdesk.engine import drivers
from orbitdesk.engine.runs import RunSettings, simulate
from orbitdesk.engine.status import WORD
from orbitdesk.system.compiled_system import compile_model

STEEP = "h = 1e299\nx' = h*(1 + x)\nx(0) = 0.5\n"  # x' = 1.5e299 at the start: (x'/scale)^2 overflows


def _engines(system):
    from orbitdesk.engine import compiled as kernels

    yield kernels.python_engine(system)
    if kernels.available():
        yield kernels.engine_for(system, wait=True)


@pytest.mark.parametrize("method", ["dop853", "rk45"])
def test_a_slope_beyond_the_float_range_at_the_start_ends_with_a_status(method):
    system = compile_model(STEEP)
    for engine in _engines(system):
        out = drivers.flow_run(engine, method, 0.0, 1.0, system.initial, system.param_values,
                               grid=np.linspace(0.0, 1.0, 5)[1:])
        assert WORD[out.code] in ("diverged", "undefined", "step_failed"), (engine.compiled, out.code)
        assert out.t < 1.0


@pytest.mark.fallback
def test_an_event_that_sets_a_parameter_near_the_float_limit_ends_with_a_status():
    text = "k = 1\nh = 0.5\nx'' = -k*x - 0.1*x' + y\ny' = -y + h\nx(0) = 1\nwhen t > h then x = 0, h = cosh(690)\n"
    run = simulate(compile_model(text), RunSettings(t_end=3.0, samples=30))
    assert run.status == "diverged" and run.message
    assert run.time[-1] < 0.5 + 0.1  # stopped right after the event at t = 0.5 (the samples are 0.1 apart)


@pytest.mark.fallback
def test_a_delay_run_with_a_slope_beyond_the_float_range_ends_with_a_status():
    system = compile_model("h = 1e299\nx' = h*(1 + x(t - 1))\nx(0) = 0.5\n")
    run = simulate(system, RunSettings(t_end=3.0, samples=30))
    assert run.status == "diverged" and run.message
    assert run.time[-1] < 0.1  # at once
