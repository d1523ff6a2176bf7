"""Ensembles against closed forms and single runs of the engine."""

import numpy as np
import pytest

from orbitdesk.engine.runs import RunSettings, simulate
from orbitdesk.engine.drivers import MEMBER_PAUSE_STEPS
from orbitdesk.engine.ensembles import (DIVERGED, OK, UNDEFINED, dopri5_ensemble, iterate_ensemble,
                                     rk4_ensemble)
from orbitdesk.engine.progress import CancelToken, Cancelled
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.samples.models import LOGISTIC_REF, VAN_DER_POL_REF, model

OSCILLATOR = "w = 1\nx'' = -w^2*x\nx(0) = 1\nx'(0) = 0\n"
VAN_DER_POL = model(VAN_DER_POL_REF, initial={'x(0)': 2, "x'(0)": 0})
BLOW_UP = "a = 1\nx' = a*x^2\nx(0) = 1\n"
LOGISTIC = model(LOGISTIC_REF, r=3.7)


def _members(system, n_members):
    return np.repeat(system.initial[:, None], n_members, axis=1)


def test_rk4_members_match_the_closed_form_of_the_harmonic_oscillator():
    # closed form: x = cos(w t), x' = -w sin(w t), one w per member
    system = compile_model(OSCILLATOR)
    w = np.array([0.5, 1.0, 2.0, 3.0])
    result = rk4_ensemble(system, _members(system, 4), w[None, :], t0=0.0, dt=1e-3, n_steps=5000)
    assert np.all(result.status == OK)
    assert result.time == pytest.approx(5.0)
    np.testing.assert_allclose(result.states[0], np.cos(5 * w), atol=1e-9)
    np.testing.assert_allclose(result.states[1], -w * np.sin(5 * w), atol=1e-8)


def test_rk4_members_equal_single_rk4_runs_of_the_engine():
    system = compile_model(VAN_DER_POL)
    mu = np.array([0.3, 1.0, 2.5])
    U0 = np.array([[2.0, 0.5, -1.0], [0.0, 1.0, 0.3]])
    result = rk4_ensemble(system, U0, mu[None, :], t0=0.0, dt=0.01, n_steps=800)
    for i in range(3):
        run = simulate(system, RunSettings(method="rk4", dt=0.01, t_end=8.0, samples=0), u0=U0[:, i],
                       p=[mu[i]])
        np.testing.assert_allclose(result.states[:, i], run.final_state, rtol=0, atol=1e-11)


def test_adaptive_members_with_very_different_speeds_are_both_accurate():
    # closed form x = cos(w t) for w = 1 and w = 50: each member chooses its own step
    system = compile_model(OSCILLATOR)
    w = np.array([1.0, 50.0])
    times = np.linspace(0.0, 4.0, 81)
    result = dopri5_ensemble(system, _members(system, 2), w[None, :], t0=0.0, t_end=4.0, sample_times=times,
                             rtol=1e-10, atol=1e-12)
    assert np.all(result.status == OK)
    np.testing.assert_allclose(result.samples[0], np.cos(np.outer(w, times)), atol=5e-9)
    np.testing.assert_allclose(result.states[0], np.cos(4 * w), atol=5e-9)
    # the slow member was not dragged along at the fast member's step size
    assert result.steps[1] > 20 * result.steps[0]
    assert result.steps[0] < 400


def test_adaptive_members_equal_tight_single_runs_of_the_engine():
    system = compile_model(VAN_DER_POL)
    mu = np.array([0.5, 1.0, 3.0])
    times = np.linspace(0.0, 10.0, 41)
    result = dopri5_ensemble(system, _members(system, 3), mu[None, :], t_end=10.0, sample_times=times,
                             rtol=1e-10, atol=1e-12)
    for i in range(3):
        run = simulate(system, RunSettings(t_end=10.0, samples=41, rtol=1e-12, atol=1e-13), p=[mu[i]])
        np.testing.assert_allclose(result.samples[:, i, :], run.states, atol=1e-7)


def test_adaptive_members_stop_at_their_own_end_times():
    system = compile_model(OSCILLATOR)
    ends = np.array([1.0, 2.5, 7.0])
    result = dopri5_ensemble(system, _members(system, 3), [3.0], t_end=ends, sample_times=[0.0, 2.0, 5.0],
                             rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(result.time, ends)
    np.testing.assert_allclose(result.states[0], np.cos(3 * ends), atol=1e-8)
    # a sample time beyond a member's end is left empty
    assert np.isnan(result.samples[0, 0, 1:]).all() and np.isnan(result.samples[0, 1, 2])
    assert result.samples[0, 2, 2] == pytest.approx(np.cos(15.0), abs=1e-8)


@pytest.mark.parametrize("method", ["rk4", "dopri5"])
def test_a_diverging_member_is_frozen_and_flagged_while_the_others_finish(method):
    # closed form: x = 1 / (1 - a t) blows up at t = 1/a; a = 1 diverges before t = 5, the others do not
    system = compile_model(BLOW_UP)
    a = np.array([[1.0, -1.0, 0.01]])
    U0 = np.ones((1, 3))
    if method == "rk4":
        result = rk4_ensemble(system, U0, a, dt=1e-3, n_steps=5000, bound=1e8)
    else:
        result = dopri5_ensemble(system, U0, a, t_end=5.0, bound=1e8)
    assert list(result.status) == [DIVERGED, OK, OK]
    assert 0.99 < result.time[0] <= 1.01
    assert np.isfinite(result.states[0, 0]) and abs(result.states[0, 0]) <= 1e8
    np.testing.assert_allclose(result.states[0, 1:], 1 / (1 - a[0, 1:] * 5.0), rtol=1e-7)  # rtol 1e-8 per step
    np.testing.assert_allclose(result.time[1:], 5.0)


def test_an_undefined_member_is_flagged_undefined():
    # y' = sqrt(x) with x = x0 - t: undefined once x < 0, i.e. after t = x0 = 1 for the first member
    system = compile_model("x' = -1\ny' = sqrt(x)\nx(0) = 1\n")
    U0 = np.array([[1.0, 3.0], [0.0, 0.0]])
    result = dopri5_ensemble(system, U0, None, t_end=2.0)
    assert list(result.status) == [UNDEFINED, OK]
    assert result.time[0] == pytest.approx(1.0, abs=1e-3)
    # closed form for the second member: y = (2/3) (3^(3/2) - (3 - t)^(3/2))
    assert result.states[1, 1] == pytest.approx(2 / 3 * (3 ** 1.5 - 1.0), rel=1e-8)
    fixed = rk4_ensemble(system, U0, None, dt=0.01, n_steps=200)
    assert list(fixed.status) == [UNDEFINED, OK]


def test_map_members_equal_single_runs_and_escapes_are_flagged():
    system = compile_model(LOGISTIC)
    r = np.array([[2.5, 3.5, 3.9, 4.5]])  # r = 4.5 sends x = 0.2 out of [0, 1] and on to -infinity
    result = iterate_ensemble(system, np.full((1, 4), 0.2), r, n_steps=40, bound=1e6)
    assert list(result.status) == [OK, OK, OK, DIVERGED]
    for i in range(3):
        run = simulate(system, RunSettings(steps=40), p=[r[0, i]])
        assert result.states[0, i] == run.final_state[0]
    assert result.time[3] < 40


def test_cancel_and_progress():
    system = compile_model(OSCILLATOR)
    token = CancelToken()
    fractions = []

    def progress(fraction):
        fractions.append(fraction)
        if fraction > 0.3:
            token.cancel()

    with pytest.raises(Cancelled):
        rk4_ensemble(system, _members(system, 4), None, dt=0.01, n_steps=20000, cancel=token, progress=progress)
    # members run one after the other; the loop pauses for progress (and cancel) every MEMBER_PAUSE_STEPS
    # steps, within a member too: here every 1/16 of the work
    assert MEMBER_PAUSE_STEPS == 5000
    assert 0.3 < fractions[-1] <= 0.3 + 1 / 16 + 1e-9 and fractions == sorted(fractions)
    seen = []
    dopri5_ensemble(system, _members(system, 2), None, t_end=50.0, progress=seen.append)
    assert seen and seen == sorted(seen) and seen[-1] <= 1.0
