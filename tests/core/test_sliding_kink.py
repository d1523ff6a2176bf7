"""A solution that slides along a kink must end with a plain-words status, never step for days.

x' = 0.1 - 0.5 sign(x - 1) drives x up to 1 from below (x' = 0.6) and down from above (x' = -0.4):
from t = 1/0.6 on, the exact solution stays at x = 1 while the right side switches back and forth
(a sliding motion, Filippov 1988), so an adaptive step shrinks to the tolerance at every switch.
"""

import pytest

from orbitdesk.engine.runs import RunSettings, simulate
from orbitdesk.engine import drivers, limits
from orbitdesk.system.compiled_system import compile_model


@pytest.mark.parametrize("method", ["dop853", "rk45"])
def test_a_run_sliding_along_a_kink_stops_with_a_reason(method, monkeypatch):
    monkeypatch.setattr(drivers, "STEP_CHECK_AFTER", 2_000)
    system = compile_model("x' = 0.1 - 0.5*sign(x - 1)\n")
    with limits.using_limits(steps=200_000):
        run = simulate(system, RunSettings(method=method, t_end=100.0, samples=200))
    assert run.status == "step_failed"
    assert "sliding along a kink" in run.message and "200,000" in run.message
    assert run.time[-1] < 100.0


def test_an_ordinary_run_is_not_stopped(monkeypatch):
    monkeypatch.setattr(drivers, "STEP_CHECK_AFTER", 2_000)
    with limits.using_limits(steps=200_000):
        run = simulate(compile_model("x' = -x + sin(t)\n"), RunSettings(t_end=100.0, samples=200))
    assert run.status == "ok"
