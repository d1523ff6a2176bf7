"""Poincaré sections: hyperplane crossings, stroboscopic samples, return maps; event edge cases."""

import math

import numpy as np
import pytest

from orbitdesk.engine.runs import Event, RunSettings, simulate
from orbitdesk.analyses.sections import SectionResult, plane_section, return_map, strobe_section
from orbitdesk.samples import models
from orbitdesk.system.compiled_system import compile_model

pytestmark = pytest.mark.fallback  # published values: run with the compiler and without

OSCILLATOR = "x' = y\ny' = -w^2*x\nw = 2\nx(0) = 0.3\ny(0) = 1\n"
CIRCLE = "x' = y\ny' = -x\nx(0) = 0\ny(0) = 1\n"  # orbits on x^2 + y^2 = 1, period 2 pi
LORENZ = models.LORENZ + "s = x + y\n"
DUFFING = ("x'' = -delta*x' + x - x^3 + gamma*cos(omega*t)\n"
           "delta = 0.3\ngamma = 0.005\nomega = 1.2\nx(0) = 1\nx'(0) = 0\n")


# ---------------------------------------------------------------- closed forms
def test_oscillator_section_is_one_point_closed_form():
    # x = A sin(w t + phi): crossing x = 0 upwards at velocity +A w, every 2 pi / w.
    system = compile_model(OSCILLATOR)
    w, x0, y0 = 2.0, 0.3, 1.0
    amplitude = math.hypot(x0, y0 / w)
    result = plane_section(system, coordinate="x", value=0.0, direction="up", count=12)
    assert result.complete and result.status == "ok"
    assert np.all(np.abs(result.points[0]) < 1e-10)
    assert np.allclose(result.points[1], amplitude * w, atol=1e-7)
    phase = math.atan2(x0 * w, y0)  # x = A sin(w t + phase)
    expected_t = (2 * math.pi * np.arange(1, 13) - phase) / w
    assert np.allclose(result.times, expected_t, atol=1e-7)


def test_both_directions_alternate_every_half_period():
    system = compile_model(OSCILLATOR)
    result = plane_section(system, coordinate="x", value=0.0, direction="both", count=10)
    assert np.allclose(np.diff(result.times), math.pi / 2, atol=1e-7)  # half of 2 pi / w
    assert np.all(np.sign(result.points[1][::2]) == -np.sign(result.points[1][1::2]))


def test_derivative_state_and_derived_quantity_as_coordinates():
    system = compile_model(LORENZ)
    on_z = plane_section(system, coordinate="z", value=27.0, direction="up", count=60, transient=5)
    assert on_z.complete
    assert np.max(np.abs(on_z.points[2] - 27.0)) < 1e-10
    on_sum = plane_section(system, coordinate="s", value=0.0, direction="both", count=30, transient=5)
    assert on_sum.complete
    assert np.max(np.abs(on_sum.points[0] + on_sum.points[1])) < 1e-10
    duffing = compile_model(DUFFING)
    turns = plane_section(duffing, coordinate="x'", value=0.0, direction="down", count=5, transient=100)
    assert np.max(np.abs(turns.points[1])) < 1e-10


def test_lorenz_section_points_cross_upwards():
    system = compile_model(LORENZ)
    result = plane_section(system, coordinate="z", value=27.0, direction="up", count=40, transient=5)
    p = system.param_values
    rates = [system.rhs(t, u, p)[2] for t, u in zip(result.times, result.points.T)]
    assert min(rates) > 0
    down = plane_section(system, coordinate="z", value=27.0, direction="down", count=40, transient=5)
    assert max(system.rhs(t, u, p)[2] for t, u in zip(down.times, down.points.T)) < 0


# ---------------------------------------------------------------- edge cases
def test_start_on_the_plane_is_not_a_crossing():
    system = compile_model(CIRCLE)  # starts at x = 0 going up
    up = plane_section(system, coordinate="x", value=0.0, direction="up", count=2)
    assert np.allclose(up.times, [2 * math.pi, 4 * math.pi], atol=1e-7)
    both = plane_section(system, coordinate="x", value=0.0, direction="both", count=2)
    assert np.allclose(both.times, [math.pi, 2 * math.pi], atol=1e-7)


def test_crossing_just_after_the_start_is_found_once():
    system = compile_model(CIRCLE)
    result = plane_section(system, u0=[-1e-12, 1.0], coordinate="x", value=0.0, direction="both", count=3)
    assert np.allclose(result.times, [1e-12, math.pi, 2 * math.pi], atol=1e-7)
    assert result.times[0] > 0


@pytest.mark.parametrize("value", [1 - 1e-9, 1.0])
@pytest.mark.parametrize("direction", ["up", "down", "both"])
def test_grazing_pass_recorded_at_most_once(value, direction):
    # The unit circle touches x = 1 at t = pi/2 + 2 pi k; x = 1 - 1e-9 is crossed twice 1e-4 apart,
    # which lies within the integrator's tolerance: one point per pass, never two, never a crash.
    system = compile_model(CIRCLE)
    result = plane_section(system, coordinate="x", value=value, direction=direction, count=6, t_max=60)
    assert result.status == "ok"
    assert np.all(np.diff(result.times) > 2 * math.pi * 0.999)
    assert np.all(np.abs(result.points[0] - value) < 1e-10)
    passes = np.round((result.times - math.pi / 2) / (2 * math.pi))
    assert np.allclose(result.times, math.pi / 2 + 2 * math.pi * passes, atol=1e-3)
    assert result.touches == result.times.size  # whether the computed orbit reaches 1 - 1e-9 is below rtol


def test_near_grazing_pass_beyond_the_tolerance_is_resolved():
    # x = 1 - 1e-6 is crossed at pi/2 -+ acos(1 - 1e-6) (closed form), 2.8e-3 apart: two crossings.
    system = compile_model(CIRCLE)
    half_gap = math.acos(1 - 1e-6)
    up = plane_section(system, coordinate="x", value=1 - 1e-6, direction="up", count=4)
    assert np.allclose(up.times, math.pi / 2 - half_gap + 2 * math.pi * np.arange(4), atol=1e-5)
    both = plane_section(system, coordinate="x", value=1 - 1e-6, direction="both", count=4)
    expected = math.pi / 2 + 2 * math.pi * np.repeat(np.arange(2), 2) + np.tile([-half_gap, half_gap], 2)
    assert np.allclose(both.times, expected, atol=1e-5) and both.touches == 0


def test_shallow_crossing_pair_inside_one_step_is_found():
    # x = 0.999 is crossed twice within about 0.09 time units, less than one integrator step.
    system = compile_model(CIRCLE)
    result = plane_section(system, coordinate="x", value=0.999, direction="both", count=6)
    half_gap = math.acos(0.999)
    expected = math.pi / 2 + 2 * math.pi * np.repeat(np.arange(3), 2) + np.tile([-half_gap, half_gap], 3)
    assert np.allclose(result.times, expected, atol=1e-7)
    assert result.touches == 0


def test_crossing_exactly_at_a_step_end_counted_once():
    # x' = 1 with fixed RK4 steps of 0.25: x reaches 0.5 exactly at the end of the second step.
    system = compile_model("x' = 1\nx(0) = 0\n")
    settings = RunSettings(method="rk4", dt=0.25, t_end=2.0)
    result = plane_section(system, coordinate="x", value=0.5, direction="both", count=3, settings=settings, t_max=2)
    assert result.times.tolist() == [0.5]
    assert not result.complete and "1 of 3" in result.message
    ends_on_plane = plane_section(system, coordinate="x", value=0.5, direction="up", count=1, settings=settings,
                                  t_max=0.5)
    assert ends_on_plane.times.tolist() == [0.5]


def test_event_at_a_step_end_within_round_off_does_not_crash():
    # RK45's dense output can differ from its step value by one unit in the last place; a plane
    # placed one unit away from a step end used to make the root finder refuse the bracket.
    system = compile_model("x' = y\ny' = -x + 0.1*cos(1.3*t) - 0.2*y - x^3\nx(0) = 0.3\ny(0) = 1\n")
    steps = simulate(system, RunSettings(method="rk45", t_end=4, samples=0))
    for k in range(1, steps.states.shape[1]):
        for i in (0, 1):
            for side in (-np.inf, np.inf):
                c = float(np.nextafter(steps.states[i, k], side))
                run = simulate(system, RunSettings(method="rk45", t_end=4, samples=2),
                               events=[Event(lambda t, u, c=c, i=i: u[i] - c)])
                assert run.ok
                assert np.all(np.abs(run.event_states[0][i] - c) < 1e-9)


def test_plane_that_is_never_crossed_gives_up_with_a_message():
    system = compile_model(CIRCLE)
    result = plane_section(system, coordinate="x", value=2.0, count=5, settings=RunSettings(t_end=20))
    assert result.times.size == 0 and "no crossing" in result.message


# ---------------------------------------------------------------- stroboscopic sections
def test_duffing_small_forcing_strobe_is_a_fixed_point():
    # x'' + delta x' - x + x^3 = gamma cos(omega t): at small gamma the response near the well
    # x = 1 is period-1. Linearised (xi = x - 1): xi'' + delta xi' + 2 xi = gamma cos(omega t),
    # amplitude A = gamma / sqrt((2 - omega^2)^2 + (delta omega)^2), phase tan(phi) =
    # delta omega / (2 - omega^2); at t = k T the state is (1 + A cos phi, A omega sin phi),
    # up to O(A^2) from the cubic terms (A = 0.0075 here).
    system = compile_model(DUFFING)
    delta, gamma, omega = 0.3, 0.005, 1.2
    period = 2 * math.pi / omega
    result = strobe_section(system, period=period, count=20, transient_periods=60)
    assert result.complete
    assert np.allclose(result.times, period * np.arange(60, 80), rtol=1e-14)
    assert np.ptp(result.points, axis=1).max() < 1e-8  # one point
    amplitude = gamma / math.hypot(2 - omega**2, delta * omega)
    phi = math.atan2(delta * omega, 2 - omega**2)
    assert result.points[0, 0] == pytest.approx(1 + amplitude * math.cos(phi), abs=2e-4)
    assert result.points[1, 0] == pytest.approx(amplitude * omega * math.sin(phi), abs=2e-4)
    # the periodic solution found by running long, sampled at the same phase
    long = simulate(system, RunSettings(t_end=79 * period, samples=2))
    assert np.allclose(long.final_state, result.points[:, -1], atol=1e-8)


def test_strobe_phase_samples_a_quarter_period_later():
    # the same linearised response x = 1 + A cos(omega t - phi), x' = -A omega sin(omega t - phi):
    # sampled at k T + T/4 (omega T/4 = pi/2) it is (1 + A sin phi, -A omega cos phi)
    system = compile_model(DUFFING)
    delta, gamma, omega = 0.3, 0.005, 1.2
    period = 2 * math.pi / omega
    result = strobe_section(system, period=period, count=5, transient_periods=60, phase=period / 4)
    assert np.allclose(result.times, period * np.arange(60, 65) + period / 4, rtol=1e-14)
    amplitude = gamma / math.hypot(2 - omega**2, delta * omega)
    phi = math.atan2(delta * omega, 2 - omega**2)
    assert result.points[0, 0] == pytest.approx(1 + amplitude * math.sin(phi), abs=2e-4)
    assert result.points[1, 0] == pytest.approx(-amplitude * omega * math.cos(phi), abs=2e-4)


def test_duffing_period_one_turns_twice_per_forcing_period():
    system = compile_model(DUFFING)
    period = 2 * math.pi / 1.2
    turns = plane_section(system, coordinate="x'", value=0.0, direction="both", count=40, transient=60 * period)
    assert turns.complete
    inside = np.sum(turns.times < turns.times[0] + 10 * period - 1e-6)
    assert inside == 20  # two turning points per forcing period
    maxima = turns.times[turns.points[0] > 1][:10]
    assert np.allclose(np.diff(maxima), period, atol=1e-6)


def test_strobe_transient_time_rounds_up_to_whole_periods():
    system = compile_model(DUFFING)
    result = strobe_section(system, period=2.0, count=3, transient=5.0)
    assert np.allclose(result.times, [6.0, 8.0, 10.0])
    assert strobe_section(system, period=2.0, count=1, transient=0).times.tolist() == [0.0]


def test_refusals():
    flow = compile_model(CIRCLE)
    hmap = compile_model("x[n+1] = 1 - a*x^2 + y\ny[n+1] = b*x\na = 1.4\nb = 0.3\n")
    with pytest.raises(ValueError, match="unknown coordinate"):
        plane_section(flow, coordinate="q", value=0.0)
    with pytest.raises(ValueError, match="direction"):
        plane_section(flow, coordinate="x", value=0.0, direction="sideways")
    with pytest.raises(ValueError, match="count"):
        plane_section(flow, coordinate="x", value=0.0, count=0)
    with pytest.raises(ValueError, match="flows"):
        plane_section(hmap, coordinate="x", value=0.0)
    with pytest.raises(ValueError, match="forced flows"):
        strobe_section(hmap, period=1.0)
    with pytest.raises(ValueError, match="period"):
        strobe_section(flow, period=-1.0)


# ---------------------------------------------------------------- results
def test_return_map_and_rows():
    system = compile_model(LORENZ)
    result = plane_section(system, coordinate="z", value=27.0, direction="up", count=20, transient=5)
    xk, xk1 = return_map(result, "x")
    assert np.array_equal(xk, result.points[0, :-1]) and np.array_equal(xk1, result.points[0, 1:])
    ti, tj = return_map(result, "t")
    assert np.all(tj > ti)
    rows = result.as_rows()
    assert len(rows) == 20 and set(rows[0]) == {"x", "y", "z", "t"}
    assert rows[3]["z"] == result.points[2, 3] and rows[3]["t"] == result.times[3]
    empty = SectionResult(np.empty((2, 0)), np.empty(0), ["x", "y"], 5)
    assert empty.as_rows() == [] and not empty.complete


def test_selection_of_touches_and_repeated_crossings():
    from orbitdesk.analyses.sections import _select

    # an up/down pair 1e-6 apart at rate 1e-3 only dips 2.5e-10 beyond the plane: one touch
    times, rates = [1.0, 1.0 + 1e-6, 5.0, 5.0, 9.0], [1e-3, -1e-3, 2.0, 2.0, -2.0]
    keep, touch = _select(times, rates, "both", 1e-7)
    assert keep == [0, 2, 4] and touch == [True, False, False]  # the repeated crossing at t = 5 once
    keep, touch = _select(times, rates, "down", 1e-7)
    assert keep == [1, 4] and touch == [True, False]
    keep, _ = _select(times, rates, "up", 1e-12)  # a tighter tolerance resolves the pair
    assert keep == [0, 2]
