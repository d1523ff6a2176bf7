"""Single runs of the engine against closed forms and reference functions."""

import math

import numpy as np
import pytest
from scipy.special import ellipk

from orbitdesk.engine.runs import CANCELLED, DIVERGED, OK, STEP_FAILED, UNDEFINED, Event, RunSettings, simulate
from orbitdesk.engine.progress import CancelToken
from orbitdesk.system.compiled_system import compile_model

pytestmark = pytest.mark.fallback  # published values: run with the compiler and without

OSCILLATOR = "w = 2\nx'' = -w^2*x\nx(0) = 1\nx'(0) = 0\n"


@pytest.mark.parametrize("method, tol", [("dop853", 1e-7), ("rk45", 1e-6), ("stiff", 1e-6), ("rk4", 1e-8)])
def test_harmonic_oscillator_matches_closed_form(method, tol):
    # closed form: x(t) = cos(w t), x'(t) = -w sin(w t)
    system = compile_model(OSCILLATOR)
    run = simulate(system, RunSettings(method=method, t_end=10, samples=201, dt=1e-3))
    assert run.status == OK
    assert np.max(np.abs(run.series("x") - np.cos(2 * run.time))) < tol
    assert np.max(np.abs(run.series("x'") + 2 * np.sin(2 * run.time))) < 2 * tol


@pytest.mark.parametrize("method", ["dop853", "rk45", "rk4"])
def test_events_as_functions_and_as_planes_are_found_by_the_same_loop(method):
    # an event given as a Python function steps the compiled loop one step at a time and is located on
    # the same dense output as a plane inside the loop: the same steps, the same crossings (round-off apart).
    # Closed form as the outside check: x = cos 2t falls through 0 at t = pi/4 + k pi/2 ... rising at 3pi/4 + k pi
    system = compile_model(OSCILLATOR)
    settings = RunSettings(method=method, t_end=10, samples=101, dt=1e-3)
    by_function = simulate(system, settings, events=[Event(lambda t, u: u[0], direction=1)])
    by_plane = simulate(system, settings, events=[Event.on_plane([1.0, 0.0], 0.0, direction=1)])
    assert by_function.steps_taken == by_plane.steps_taken
    assert np.max(np.abs(by_function.states - by_plane.states)) < 1e-12
    times = by_function.event_times[0]
    assert times == pytest.approx(by_plane.event_times[0], abs=1e-12)
    assert times == pytest.approx(3 * np.pi / 4 + np.pi * np.arange(times.size), abs=1e-6)
    assert times.size == 3


@pytest.mark.parametrize("amplitude", [0.1, 1.0, 2.0, 3.0])
def test_pendulum_period_against_complete_elliptic_integral(amplitude):
    # T = 4 sqrt(L/g) K(m) with m = sin^2(theta0/2) (scipy.special.ellipk takes the parameter m)
    g, length = 9.81, 0.75
    system = compile_model(f"g = {g}\nL = {length}\ntheta'' = -g/L*sin(theta)\ntheta(0) = {amplitude}\n")
    expected = 4 * math.sqrt(length / g) * ellipk(math.sin(amplitude / 2) ** 2)
    falling = Event(lambda t, u: u[1], direction=-1)
    run = simulate(system, RunSettings(t_end=2.5 * expected, rtol=1e-11, atol=1e-12), events=[falling])
    periods = np.diff(np.concatenate([[0.0], run.event_times[0]]))
    assert len(periods) >= 2
    assert periods == pytest.approx(expected, rel=1e-8)


def test_pendulum_energy_is_a_derived_quantity_and_conserved():
    system = compile_model("g = 9.81\nE = theta'^2/2 + g*(1 - cos(theta))\ntheta'' = -g*sin(theta)\ntheta(0) = 1\n")
    run = simulate(system, RunSettings(t_end=20, rtol=1e-10, atol=1e-12))
    energy = run.series("E")
    assert energy[0] == pytest.approx(9.81 * (1 - math.cos(1)))
    assert np.ptp(energy) < 1e-7


def test_higher_order_reduction_equals_hand_written_first_order_form():
    reduced = compile_model("c = 0.3\nx''' = -c*x'' - x' - x^3\nx(0) = 0.5\n")
    manual = compile_model("c = 0.3\nx' = v\nv' = w\nw' = -c*w - v - x^3\nx(0) = 0.5\n")
    a = simulate(reduced, RunSettings(t_end=15, samples=300))
    b = simulate(manual, RunSettings(t_end=15, samples=300))
    assert reduced.states == ["x", "x'", "x''"]
    assert np.allclose(a.states, b.states, rtol=0, atol=1e-10)


def test_blow_up_is_reported_with_time_and_state():
    # x' = x^2, x(0) = 1 has the closed form 1/(1 - t): it blows up at t = 1
    run = simulate(compile_model("x' = x^2\nx(0) = 1\n"), RunSettings(t_end=3))
    assert run.status == DIVERGED
    assert "x passes" in run.message and "t = 1" in run.message
    assert run.time[-1] < 1.0 + 1e-6


def test_undefined_expression_names_the_expression_and_time():
    run = simulate(compile_model("x' = -1\ny' = log(x)\nx(0) = 1\n"), RunSettings(t_end=2))
    assert run.status == UNDEFINED
    assert "log(x)" in run.message and "t = 1" in run.message
    assert np.all(np.isfinite(run.states))


def test_map_iteration_and_escape():
    logistic = compile_model("r = 2.5\nx[n+1] = r*x*(1 - x)\nx[0] = 0.1\n")
    run = simulate(logistic, RunSettings(steps=200))
    assert run.final_state[0] == pytest.approx(1 - 1 / 2.5)  # fixed point 1 - 1/r (closed form)
    escape = simulate(compile_model("x[n+1] = x^2 + 1\nx[0] = 2\n"), RunSettings(steps=50))
    assert escape.status == DIVERGED and "escapes" in escape.message


def test_cancel_stops_the_run_and_keeps_what_was_computed():
    token = CancelToken()
    seen = []

    def progress(fraction):
        seen.append(fraction)
        if fraction > 0.3:
            token.cancel()

    run = simulate(compile_model(OSCILLATOR), RunSettings(t_end=1000, samples=1000), cancel=token, progress=progress)
    assert run.status == CANCELLED
    assert 0 < run.time[-1] < 1000 and max(seen) < 0.5


def test_stiff_problem_collapses_the_explicit_step_and_suggests_the_stiff_method():
    # Robertson's chemical kinetics (Hairer & Wanner, Solving ODEs II, sec. IV.1): stiff
    text = ("a' = -0.04*a + 1e4*b*c\nb' = 0.04*a - 1e4*b*c - 3e7*b^2\nc' = 3e7*b^2\na(0) = 1\n")
    stiff = simulate(compile_model(text), RunSettings(method="stiff", t_end=40, rtol=1e-6, atol=1e-10))
    assert stiff.status == OK
    # reference value at t = 40 (Hairer & Wanner, sec. IV.10 table): a = 0.7158
    assert stiff.final_state[0] == pytest.approx(0.7158, abs=2e-4)
    assert stiff.final_state.sum() == pytest.approx(1.0, abs=1e-6)  # mass conservation (closed form)


def test_events_locate_crossings_on_dense_output():
    system = compile_model(OSCILLATOR)
    rising = Event(lambda t, u: u[0], direction=1)
    run = simulate(system, RunSettings(t_end=10, samples=11, rtol=1e-12, atol=1e-12), events=[rising])
    # x = cos(2t) rises through 0 at 2t = 3pi/2 + 2k pi
    expected = [(1.5 * math.pi + 2 * math.pi * k) / 2 for k in range(3)]
    assert run.event_times[0] == pytest.approx(expected, abs=1e-9)
    assert np.all(np.abs(run.event_states[0][0]) < 1e-9)


def test_very_fine_output_grid_stays_on_the_closed_form():
    # more samples than steps: filled from the method's dense output; x = cos(2t) (closed form)
    system = compile_model(OSCILLATOR)
    run = simulate(system, RunSettings(t_end=20, samples=50_001, rtol=1e-10, atol=1e-12))
    assert run.status == OK and run.time.size == 50_001
    assert np.max(np.abs(run.series("x") - np.cos(2 * run.time))) < 1e-8


@pytest.mark.parametrize("text, fragment", [
    ("x' = 477^max(21e6, -x)\n", "477**Max(21000000, -x)"),  # exact evaluation would never finish
    ("x' = 1\ny' = -min(1, x)^(7/1000000)\nx(0) = -1\n", "Min(1, x)**(7/1000000)"),
])
def test_undefined_powers_are_explained_in_floats_without_hanging(text, fragment):
    run = simulate(compile_model(text), RunSettings(t_end=1))
    assert run.status == UNDEFINED and fragment in run.message
