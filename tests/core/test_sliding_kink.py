"""A solution that slides along a kink must end with a plain-words status, never step for days.

x' = 0.1 - 0.5 sign(x - 1) drives x up to 1 from below (x' = 0.6) and down from above (x' = -0.4):
from t = 1/0.6 on, the exact solution stays at x = 1 while the right side switches back and forth
(a sliding motion, Filippov 1988), so an adaptive step shrinks to the tolerance at every switch.
"""

import numpy as np
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
    assert "sliding along a kink" in run.message
    assert "the limit is 200,000;" in run.message or "the limit is 8,000 in plain Python" in run.message
    assert run.time[-1] < 100.0


def test_an_ordinary_run_is_not_stopped(monkeypatch):
    monkeypatch.setattr(drivers, "STEP_CHECK_AFTER", 2_000)
    with limits.using_limits(steps=200_000):
        run = simulate(compile_model("x' = -x + sin(t)\n"), RunSettings(t_end=100.0, samples=200))
    assert run.status == "ok"


# x' = c - mod(-x, 1): for 0 < c < 1 the right side is c > 0 just below each integer and c - 1 < 0 just
# above it; from x(0) = 0.2 (where x' = x - 1 + c < 0) x falls to 0 and slides there. For c > 1 it is
# positive everywhere and x crosses every integer.
SLIDING_MEMBERS = "x' = c - mod(-x, 1)\nc = 0.5\nx(0) = 0.2\n"


@pytest.mark.fallback
def test_ensemble_members_sliding_along_a_jump_stop_with_a_reason_and_the_others_go_on(monkeypatch):
    from orbitdesk.engine.ensembles import dopri5_ensemble

    monkeypatch.setattr(drivers, "STEP_CHECK_AFTER", 2_000)
    monkeypatch.setattr(drivers, "MEMBER_PAUSE_STEPS", 1_000)
    system = compile_model(SLIDING_MEMBERS)
    P = np.array([[0.5, 1.5, 0.25]])
    with limits.using_limits(steps=200_000):
        out = dopri5_ensemble(system, np.full((1, 3), 0.2), P, t_end=100.0, sample_times=np.linspace(0, 100, 11))
    assert list(out.status) == ["step_failed", "ok", "step_failed"]
    assert sorted(out.notes) == [0, 2]
    for i in (0, 2):
        assert out.notes[i].startswith(f"member {i + 1} stopped after")
        assert "sliding along a kink" in out.notes[i]
        # small work runs in plain Python until the kernels are compiled: there the limit is 1/25
        assert "the limit is 200,000;" in out.notes[i] or "the limit is 8,000 in plain Python" in out.notes[i]
        assert out.time[i] < 100.0 and out.states[0, i] == pytest.approx(0.0, abs=1e-6)  # it stopped on the jump
        assert np.isnan(out.samples[0, i, -1])
    # the member that does not slide: x' = 1.5 - mod(-x, 1) >= 0.5 crosses every integer
    assert out.time[1] == 100.0 and out.states[0, 1] > 50.0 and not np.isnan(out.samples[0, 1]).any()


@pytest.mark.fallback
def test_sweep_values_that_slide_stop_with_step_failed(monkeypatch):
    from orbitdesk.analyses.sweep import SweepSettings, sweep

    monkeypatch.setattr(drivers, "STEP_CHECK_AFTER", 2_000)
    monkeypatch.setattr(drivers, "MEMBER_PAUSE_STEPS", 1_000)
    with limits.using_limits(steps=200_000):
        result = sweep(compile_model(SLIDING_MEMBERS), "c", [0.5, 1.5],
                       SweepSettings(mode="strobe", period=10.0, transient=10.0, samples=9))
    assert list(result.status) == ["step_failed", "ok"]
    assert np.isnan(result.samples[0, -1]) and not np.isnan(result.samples[1]).any()


def test_a_slide_just_under_the_step_limit_in_plain_python_stops_at_the_plain_python_limit():
    """From t = 1/0.6 on the solution slides at x = 1; to t = 1.9 the pace needs a few million steps,
    under a limit of 10 million for the compiled loops (minutes of work in plain Python): the loops as
    plain Python judge against 1/25 of the limit, and the message says so."""
    from orbitdesk.engine.compiled import python_engine

    system = compile_model("x' = 0.1 - 0.5*sign(x - 1)\n")
    with limits.using_limits(steps=1e7):
        assert limits.step_limit(compiled=False) == 400_000
        out = drivers.flow_run(python_engine(system), "dop853", 0.0, 1.9, system.initial, system.param_values,
                               grid=np.linspace(0.0, 1.9, 20)[1:])
    assert out.code == 3 and out.t < 1.9  # step_failed
    assert "400,000 in plain Python, 1/25 of the compiled loops' limit; --max-steps N raises it" in out.note
    needed = float(out.note.split("would need about ")[1].split(" steps")[0])
    assert 400_000 < needed < 1e7  # a pace the compiled loops would have been allowed to go on at
    assert out.steps + out.rejected < 50_000


def test_members_sliding_in_the_compiled_loop_stop_with_a_reason(monkeypatch):
    """The same members in the compiled member loop (the tests above may run them as plain Python, the work
    being small): the driver's verdict reaches the compiled loop, which freezes that member only."""
    from orbitdesk.engine import compiled as kernels

    if not kernels.available():
        pytest.skip("the compiler is turned off")
    monkeypatch.setattr(drivers, "STEP_CHECK_AFTER", 2_000)
    monkeypatch.setattr(drivers, "MEMBER_PAUSE_STEPS", 1_000)
    system = compile_model(SLIDING_MEMBERS)
    engine = kernels.engine_for(system, wait=True)
    assert engine.compiled
    with limits.using_limits(steps=200_000):
        out = drivers.members_run(engine, "rk45", 0.0, 100.0, np.full((1, 3), 0.2), np.array([[0.5, 1.5, 0.25]]),
                                  grid=np.linspace(10.0, 100.0, 10))
    assert list(out.codes) == [3, 0, 3]  # step_failed, ok, step_failed
    for i in (0, 2):
        assert out.notes[i].startswith(f"member {i + 1} stopped after") and "the limit is 200,000;" in out.notes[i]
        assert out.t[i] < 100.0 and out.states[0, i] == pytest.approx(0.0, abs=1e-6)
        assert np.isnan(out.samples[0, i, -1])
        assert out.steps[i] < 20_000  # judged within a few pauses, not at the step limit
    assert out.t[1] == 100.0 and out.states[0, 1] > 50.0 and not np.isnan(out.samples[0, 1]).any()
