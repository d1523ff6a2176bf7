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


def test_vector_evaluators_take_both_branches_of_an_if_in_numpy_numbers():
    """numpy's where() computes both branches of an if(); with t or a parameter passed as a Python float,
    the branch not taken raised ZeroDivisionError (0.0 ** -1) out of the vector evaluator (found by the
    family-model fuzz: x / if(x < 1 and not 1 < 1, 0, t) at t = 0). Each column must be what the scalar
    evaluator gives: where the branch taken divides by zero (x < 1 here: x / 0), nan."""
    system = compile_model("c = 0\nx' = x / if(x < 1, 0, t) + 1 / if(x > 5, c, 1)\nd = 1 / if(x > 5, c, t + 1)\n"
                           "x(0) = 0\n")
    from orbitdesk.system.compiled_system import UndefinedValue

    U = np.array([[0.0, 2.0, 3.0]])
    for t in (0.0, 0.5):
        columns = system.rhs_vec(t, U)
        for k in range(3):
            try:
                expected = system.rhs(t, U[:, k])[0]
            except UndefinedValue:  # x / t at t = 0
                assert not np.isfinite(columns[0, k])
                continue
            assert np.array_equal(columns[0, k], expected, equal_nan=True), (t, k, columns, expected)
        assert np.isnan(columns[0, 0])  # x < 1: 0 / 0
        if t:
            assert columns[0, 1:].tolist() == [2.0 / t + 1.0, 3.0 / t + 1.0]
        jac = system.jac_vec(t, U)
        assert jac.shape == (1, 1, 3) and not np.isfinite(jac[0, 0, 0])
    values = system.derived_values(np.array([0.0, 1.0]), np.array([[2.0, 2.0]]))["d"]
    assert values.tolist() == [1.0, 0.5]  # 1 / (t + 1): the branch c = 0 is not taken


def test_a_model_undefined_where_the_compiler_warms_up_compiles():
    """The loops are warmed up on a model's kernels at states 0.5; log(x - 1) is undefined there, the warm-up
    step failed and its dense output raised TypeError out of engine_for: every compiled run, sweep or
    ensemble of such a model failed (found by the Jacobian fuzz example below)."""
    from orbitdesk.engine import compiled as kernels

    if not kernels.available():
        pytest.skip("the compiler is turned off")
    system = compile_model("x' = log(x - 1)\nx(0) = 2\n")
    engine = kernels.engine_for(system, wait=True)
    assert engine.compiled
    out = drivers.flow_run(engine, "dop853", 0.0, 1.0, system.initial, system.param_values,
                           grid=np.linspace(0.0, 1.0, 5)[1:])
    assert WORD[out.code] == "ok" and out.y[0] == 2.0  # x = 2 is an equilibrium: log(1) = 0


def test_a_jacobian_entry_that_is_not_real_is_undefined():
    """d (-1)^x / dx = (-1)^x i pi: the Jacobian held a complex number, which raised TypeError out of jac()
    (found by the fuzz of edited generated models: z' = x''^x with x'' = -1)."""
    system = compile_model("x'' = -y'\ny' = 1\nz' = x'' ^ x\n")
    J = system.jac(0.0, system.initial)
    assert np.isnan(J[3, 0]) and J[0, 1] == 1.0 and np.count_nonzero(J) == 2
    Jv = system.jac_vec(0.0, np.zeros((4, 2)))
    assert np.isnan(Jv[3, 0]).all() and Jv.dtype == float


@pytest.mark.parametrize("text, line, at", [
    ("k = 1\nx' = -x\nx(0) = 1\nwhen x < asin(k + 1) then x = 0\n", 4, 0.0),
    # undefined only once an earlier event changed k: x = e^-t reaches 0.5 at t = ln 2
    ("k = 1\nx' = -x\nd = 2*x\nx(0) = 1\nwhen x < 0.5 then k = 3\nwhen x > asin(k - 1) then x = 1\n", 6, np.log(2)),
    ("k = 1\nx' = -x\nx(0) = 1\nwhen t > 0.5 then k = 3\nwhen t > asin(k - 1) + 1 then x = 1\n", 5, 0.5),
])
def test_an_event_whose_boundary_is_undefined_ends_the_run_with_a_reason(text, line, at):
    """An event boundary undefined for the parameters in force (asin(2)) raised ValueError out of the run
    (found by the event-model fuzz: when x < asin(k + 1) then x = 0)."""
    run = simulate(compile_model(text), RunSettings(t_end=3.0, samples=30))
    assert run.status == "undefined"
    assert run.message.startswith(f"the boundary of the event on line {line} (") and "is undefined at t = " in run.message
    assert float(run.message.rsplit("t = ", 1)[1]) == pytest.approx(at, rel=1e-5, abs=1e-12)
    assert run.time[-1] <= at + 1e-9
