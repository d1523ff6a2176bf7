"""The stiff method through the fast jumps of a relaxation oscillator: Van der Pol at mu = 300 and 1000.

Reference: the period of the relaxation oscillation, T = (3 - 2 ln 2) mu + 3 a mu^(-1/3) + ..., a = 2.33811 the
first zero of the Airy function Ai taken negative (the leading term: Strogatz, Nonlinear Dynamics and Chaos,
ex. 7.5; the mu^(-1/3) term, Dorodnitsyn's, from memory), so T(1000) = 1614.407 and T(300) = 485.160. In
Lienard's variable w = x' - mu (x - x^3 / 3) (w' = -x) a jump leaves the fold x = 1 with w = -2 mu / 3 and
crosses x = 0 before w has moved by more than a few per cent of mu^(2/3): x' = w there, -2 mu / 3 to leading
order (our own derivation).

Before the interpolant check shortened only the steps that carry a crossing, each jump through the plane
held the stiff method's step near 2e-7 (about 100,000 steps a jump, against 7,374 steps for a whole
5,000-unit run without a plane).
"""

import math

import numpy as np
import pytest

from orbitdesk.analyses.sections import plane_section
from orbitdesk.analyses.sweep import PLANE, STROBE, SweepSettings, sweep
from orbitdesk.engine.runs import OK, Event, RunSettings, simulate
from orbitdesk.engine.stiff import StiffStepper
from orbitdesk.system.compiled_system import compile_model

AIRY_ZERO = 2.33811  # -(first zero of Ai), from memory


def van_der_pol(mu=1000.0):
    return compile_model(f"mu = {mu:g}\nx'' = mu*(1 - x^2)*x' - x\nx(0) = 2\n")


def relaxation_period(mu):
    return (3 - 2 * math.log(2)) * mu + 3 * AIRY_ZERO * mu ** (-1 / 3)


def test_stiff_section_of_van_der_pol_returns_after_one_period():
    section = plane_section(van_der_pol(), coordinate="x", value=0.0, direction="down", count=3,
                            settings=RunSettings(method="stiff"))
    assert section.status == OK and section.times.size == 3
    returns = np.diff(section.times)
    assert returns == pytest.approx(relaxation_period(1000), rel=1e-3)
    assert returns[1] == pytest.approx(returns[0], rel=1e-8)  # on the cycle: the same return time each turn
    assert section.series("x'") == pytest.approx(-2 * 1000 / 3, rel=3e-3)  # the jump crosses x = 0 with w = -2 mu/3


def test_a_plane_costs_the_stiff_method_a_few_steps_per_crossing():
    # the interpolant check shortens the step that carries the crossing only; the next step's size comes
    # from the method's own error control. A run with the plane takes about as many steps as one without.
    system = van_der_pol()
    settings = RunSettings(method="stiff", t_end=2500, samples=2)
    plain = simulate(system, settings)
    crossed = simulate(system, settings, events=[Event.on_plane(np.array([1.0, 0.0]), 0.0, -1)])
    assert plain.status == OK and crossed.status == OK
    assert crossed.event_times[0].size == 2  # at 807 and 2421
    assert crossed.steps_taken <= plain.steps_taken + 100 * 2


def test_only_steps_that_carry_a_sample_are_checked_and_the_step_grows_back():
    # the lag y' = -lambda (y - sin t) + cos t, y(0) = 1 (exact: sin t + e^{-lambda t}) read at t = 20 only:
    # the step that holds t = 20 is covered again by short ones; before and after it the solver's own long
    # steps stand (they would not pass the check: sin t over 10 time units is not a cubic)
    lam, rtol, atol = 1e6, 1e-6, 1e-8
    f = lambda t, y: -lam * (y - np.sin(t)) + np.cos(t)
    sample = 20.0
    stepper = StiffStepper("Radau", f, lambda t, y: np.array([[-lam]]), 0.0, [1.0], 60.0, rtol, atol,
                           reads=lambda t_old, y_old, t_new, y_new: t_old < sample < t_new)
    steps, value = [], None
    while stepper.status == "running":
        stepper.step()
        steps.append((stepper.t_old, stepper.t))
        if stepper.t_old < sample <= stepper.t:
            value = float(stepper.dense_output()(sample)[0])
    assert 0 < stepper.redone <= 10
    assert abs(value - math.sin(sample)) <= 3 * (atol + rtol)
    after = [t1 - t0 for t0, t1 in steps if t0 > sample + 1]
    assert max(after) > 5.0  # long again: the shortening served the read step only
    assert len(steps) < 200


@pytest.mark.parametrize("mode", [PLANE, STROBE])
def test_a_stiff_sweep_over_mu_matches_single_runs(mode):
    system = van_der_pol()
    values = np.array([300.0, 1000.0])
    common = dict(method="stiff", samples=2)
    if mode == PLANE:
        settings = SweepSettings(mode=PLANE, plane=("x", 0.0), direction=-1, transient=100, duration=4000,
                                 observe="x'", **common)
    else:
        settings = SweepSettings(mode=STROBE, period=250, transient=500, **common)
    result = sweep(system, "mu", values, settings)
    assert list(result.status) == ["ok", "ok"]
    for i, mu in enumerate(values):
        p = system.param_values.copy()
        p[system.parameters.index("mu")] = mu
        if mode == PLANE:
            run = simulate(system, RunSettings(method="stiff", t_end=100 + 1.6 * relaxation_period(mu)), p=p,
                           events=[Event.on_plane(np.array([1.0, 0.0]), 0.0, -1)])
            times, states = run.event_times[0], run.event_states[0]
            keep = times > 100
            assert result.times[i] == pytest.approx(times[keep][:2], rel=1e-7)
            assert result.samples[i] == pytest.approx(states[1, keep][:2], rel=1e-6)
            assert np.diff(result.times[i])[0] == pytest.approx(relaxation_period(mu), rel=1e-3)
        else:
            run = simulate(system, RunSettings(method="stiff", t_end=750, samples=4), p=p)  # t = 0, 250, 500, 750
            assert result.times[i] == pytest.approx([500.0, 750.0])
            assert result.samples[i] == pytest.approx(run.states[0, 2:], rel=1e-6)
