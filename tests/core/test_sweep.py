"""Parameter sweeps and Lyapunov grids against closed forms, published values and single runs."""

import math
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest

from orbitdesk.engine.runs import Event, RunSettings, simulate
from orbitdesk.engine.progress import CancelToken, Cancelled
from orbitdesk.analyses.sweep import (BOTH, DOWN, MAXIMA, PLANE, STROBE, UP, GridSettings, SweepSettings,
                                  grid_exponents, lyapunov_grid, sweep)
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.samples.models import DUFFING_REF, HENON, LOGISTIC_REF, model

LOGISTIC = model(LOGISTIC_REF, r=3.5)
DUFFING = model(DUFFING_REF, gamma=0.3, initial={"x'(0)": 0})
OSCILLATOR = "w = 1\nE = (x'^2 + w^2*x^2)/2\nx'' = -w^2*x\nx(0) = 1\nx'(0) = 0\n"
PERIOD = 2 * math.pi / 1.2  # forcing period of DUFFING


def _distinct(points, decimals=6):
    return np.unique(np.round(points, decimals))


def test_logistic_period_doubling_at_r_3():
    # closed form: the fixed point 1 - 1/r has multiplier 2 - r, which reaches -1 at r = 3
    system = compile_model(LOGISTIC)
    rs = np.array([2.8, 2.9, 2.97, 3.03, 3.1, 3.2])
    result = sweep(system, "r", rs, SweepSettings(transient=20000, samples=64))
    assert result.mode == "iterate" and result.observed == "x"
    for i, r in enumerate(rs):
        distinct = _distinct(result.points(i))
        if r < 3:
            assert len(distinct) == 1
            assert distinct[0] == pytest.approx(1 - 1 / r, abs=1e-6)
        else:
            assert len(distinct) == 2


def test_logistic_period_two_values_match_the_closed_form():
    # closed form: x = (r + 1 +- sqrt((r - 3)(r + 1))) / (2 r)
    r = 3.2
    result = sweep(compile_model(LOGISTIC), "r", [r], SweepSettings(transient=2000, samples=10))
    root = math.sqrt((r - 3) * (r + 1))
    expected = sorted([(r + 1 - root) / (2 * r), (r + 1 + root) / (2 * r)])
    low, high = np.sort(result.points(0))[[0, -1]]
    assert low == pytest.approx(expected[0], abs=1e-12)
    assert high == pytest.approx(expected[1], abs=1e-12)


def test_logistic_lyapunov_exponents_in_the_sweep():
    # closed forms: ln|2 - r| on the fixed point, (1/2) ln|4 + 2r - r^2| on the period-2 cycle
    system = compile_model(LOGISTIC)
    result = sweep(system, "r", [2.8, 3.2], SweepSettings(transient=2000, samples=500, lyapunov=True))
    assert result.lyapunov[0] == pytest.approx(math.log(0.8), abs=1e-9)
    assert result.lyapunov[1] == pytest.approx(0.5 * math.log(abs(4 + 6.4 - 3.2 ** 2)), abs=1e-9)


def test_logistic_lyapunov_exponent_at_r_4_is_ln_2():
    # closed form: at r = 4 the logistic map is conjugate to the tent map, lambda = ln 2; sixteen orbits
    # (one starting point per value) of 12000 iterates each
    starts = np.linspace(0.1, 0.9, 16) + 0.0123
    result = sweep(compile_model(LOGISTIC), "r", np.full(16, 4.0), SweepSettings(transient=100, samples=12000,
                                                                                   lyapunov=True),
                   u0=starts[None, :])
    assert np.all(np.abs(result.lyapunov - math.log(2)) < 0.05)
    assert np.mean(result.lyapunov) == pytest.approx(math.log(2), abs=0.01)


def test_tent_map_exponent_with_the_jacobian_that_holds_almost_everywhere():
    # the tent map uses min(), a non-smooth function; closed form: |f'| = mu everywhere, so lambda = ln mu
    system = compile_model("mu = 1.9\nx[n+1] = mu*min(x, 1 - x)\nx[0] = 0.1234\n")
    assert not system.smooth
    result = sweep(system, "mu", [1.5, 1.9], SweepSettings(transient=100, samples=5000, lyapunov=True))
    np.testing.assert_allclose(result.lyapunov, np.log([1.5, 1.9]), atol=0.01)


def test_map_sweep_equals_each_value_alone():
    system = compile_model(LOGISTIC)
    rs = np.linspace(2.5, 4.0, 25)
    settings = SweepSettings(transient=300, samples=40, lyapunov=True)
    together = sweep(system, "r", rs, settings)
    for i, r in enumerate(rs):
        alone = sweep(system, "r", [r], settings)
        np.testing.assert_array_equal(together.samples[i], alone.samples[0])
        assert together.lyapunov[i] == alone.lyapunov[0]
    # and the same iterates as a single run of the engine
    run = simulate(system, RunSettings(steps=340), p=[rs[7]])
    np.testing.assert_allclose(together.samples[7], run.states[0, 301:341], rtol=0, atol=1e-12)


def test_henon_grid_exponent_matches_sprott():
    # Sprott, Chaos and Time-Series Analysis (2003): Henon map (a, b) = (1.4, 0.3), lambda = 0.41922
    system = compile_model(HENON)
    grid = lyapunov_grid(system, "a", [1.2, 1.4], "b", [0.2, 0.3], GridSettings(transient=500, duration=10000),
                         executor=ThreadPoolExecutor(2), chunk_size=2)
    assert grid.exponent.shape == (2, 2)
    assert grid.exponent[1, 1] == pytest.approx(0.41922, abs=0.01)
    assert grid.status[1, 1] == "ok"


def test_grid_results_do_not_depend_on_the_executor():
    system = compile_model(HENON)
    settings = GridSettings(transient=200, duration=2000)
    xs, ys = [1.0, 1.2, 1.4], [0.25, 0.3]
    with ThreadPoolExecutor(3) as pool:
        threads = lyapunov_grid(system, "a", xs, "b", ys, settings, executor=pool, chunk_size=2)
    default = lyapunov_grid(system, "a", xs, "b", ys, settings, chunk_size=2)  # local process pool
    np.testing.assert_array_equal(threads.exponent, default.exponent)
    np.testing.assert_array_equal(threads.status, default.status)
    single = lyapunov_grid(system, "a", xs, "b", ys, settings, chunk_size=100)  # one chunk, this thread
    np.testing.assert_allclose(single.exponent, default.exponent, rtol=0, atol=1e-12)


def test_grid_flags_escaping_orbits():
    # for a = 2 the Henon orbit from (0.1, 0.1) escapes to infinity
    grid = lyapunov_grid(compile_model(HENON), "a", [1.4, 2.0], "b", [0.3], GridSettings(transient=100,
                                                                                          duration=1000))
    assert list(grid.status[0]) == ["ok", "diverged"]
    assert np.isfinite(grid.exponent[0, 0]) and np.isnan(grid.exponent[0, 1])


def _section_reference(system, gamma, t_end, direction=-1):
    p = system.param_vector({"gamma": gamma})
    run = simulate(system, RunSettings(t_end=t_end, samples=2, rtol=1e-11, atol=1e-12), p=p,
                   events=[Event(lambda t, u: u[1], direction)])
    return run.event_times[0], run.event_states[0]


def test_flow_sections_equal_tight_single_runs_for_period_one_responses():
    # for gamma = 0.2 and 0.25 the forced two-well oscillator settles on a period-1 orbit, so the crossings
    # of x' = 0 downward (maxima of x) after the transient are comparable one by one with a tight DOP853 run
    system = compile_model(DUFFING)
    gammas = np.array([0.2, 0.25])
    settings = SweepSettings(mode=PLANE, plane=("x'", 0.0), direction=DOWN, transient=30 * PERIOD, samples=6,
                             dt=PERIOD / 200)
    result = sweep(system, "gamma", gammas, settings)
    maxima = sweep(system, "gamma", gammas, SweepSettings(mode=MAXIMA, observe="x", transient=30 * PERIOD,
                                                          samples=6, dt=PERIOD / 200))
    for i, gamma in enumerate(gammas):
        times, states = _section_reference(system, gamma, result.times[i, -1] + 1.0)
        late = times >= 30 * PERIOD
        # RK4 with h = T/200 and a cubic Hermite refinement: global error of order 1e-8 here
        np.testing.assert_allclose(result.times[i], times[late][:6], atol=1e-6)
        np.testing.assert_allclose(result.samples[i], states[0, late][:6], atol=1e-7)
        np.testing.assert_allclose(maxima.samples[i], states[0, late][:6], atol=1e-7)


def test_strobe_samples_equal_tight_single_runs_and_the_step_divides_the_period():
    system = compile_model(DUFFING)
    settings = SweepSettings(mode=STROBE, period=PERIOD, transient=25 * PERIOD, samples=5, dt=0.03)
    result = sweep(system, "gamma", [0.2, 0.25], settings)
    np.testing.assert_allclose(result.times[0], PERIOD * np.arange(26, 31), rtol=1e-14)
    for i, gamma in enumerate([0.2, 0.25]):
        run = simulate(system, RunSettings(t_end=30 * PERIOD, samples=31, rtol=1e-11, atol=1e-12),
                       p=system.param_vector({"gamma": gamma}))
        np.testing.assert_allclose(result.samples[i], run.states[0, 26:31], atol=1e-6)


def test_default_accuracy_is_a_single_runs():
    # without a step the sweep runs adaptive DOP853 with a single run's tolerances: strobe points and
    # section crossings (x' = 0 downward: the maxima of x) of the period-1 responses agree with tight
    # single runs (rtol 1e-11) to 1e-6
    system = compile_model(DUFFING)
    strobe = sweep(system, "gamma", [0.2, 0.25], SweepSettings(mode=STROBE, period=PERIOD, transient=25 * PERIOD,
                                                               samples=5))
    maxima = sweep(system, "gamma", [0.2, 0.25], SweepSettings(mode=MAXIMA, observe="x", transient=30 * PERIOD,
                                                               samples=4))
    for i, gamma in enumerate([0.2, 0.25]):
        run = simulate(system, RunSettings(t_end=30 * PERIOD, samples=31, rtol=1e-11, atol=1e-12),
                       p=system.param_vector({"gamma": gamma}))
        np.testing.assert_allclose(strobe.samples[i], run.states[0, 26:31], atol=1e-6)
        times, states = _section_reference(system, gamma, maxima.times[i, -1] + 1.0)
        late = times >= 30 * PERIOD
        np.testing.assert_allclose(maxima.times[i], times[late][:4], atol=1e-6)
        np.testing.assert_allclose(maxima.samples[i], states[0, late][:4], atol=1e-7)


def test_rk45_sweep_agrees_with_dop853():
    system = compile_model(DUFFING)
    settings = SweepSettings(mode=PLANE, plane=("x", 0.0), direction=UP, transient=20.0, samples=5, duration=60.0)
    a = sweep(system, "gamma", [0.2, 0.25], settings)
    b = sweep(system, "gamma", [0.2, 0.25], SweepSettings(**{**settings.__dict__, "method": "rk45"}))
    np.testing.assert_allclose(a.samples, b.samples, atol=1e-6)
    # the stiff method, given, runs each value through the plane section: the same crossings
    c = sweep(system, "gamma", [0.2, 0.25], SweepSettings(**{**settings.__dict__, "method": "stiff"}))
    assert c.method == "stiff"
    np.testing.assert_allclose(a.samples, c.samples, atol=1e-5)
    with pytest.raises(ValueError, match="adaptive method"):
        sweep(system, "gamma", [0.2], SweepSettings(**{**settings.__dict__, "method": "rk4"}))


def test_flow_sweep_equals_each_value_alone():
    system = compile_model(DUFFING)
    gammas = np.array([0.2, 0.28, 0.35, 0.5])
    settings = SweepSettings(mode=PLANE, plane=("x", 0.0), direction=BOTH, transient=10.0, samples=8, dt=0.02,
                             duration=40.0)
    together = sweep(system, "gamma", gammas, settings)
    for i, gamma in enumerate(gammas):
        alone = sweep(system, "gamma", [gamma], settings)
        np.testing.assert_allclose(together.samples[i], alone.samples[0], rtol=0, atol=1e-12)
        np.testing.assert_allclose(together.times[i], alone.times[0], rtol=0, atol=1e-12)


def test_section_crossings_are_refined_within_the_step():
    # closed form x = cos(w t): upward crossings of x = 0 at t = 3 pi / (2 w) + 2 pi k / w with x' = w and the
    # derived energy E = w^2 / 2, located between the RK4 steps
    system = compile_model(OSCILLATOR)
    w = np.array([1.0, 2.0, 3.0])
    crossing = SweepSettings(mode=PLANE, plane=("x", 0.0), direction=UP, transient=0.0, samples=4, dt=0.01)
    speed = sweep(system, "w", w, SweepSettings(**{**crossing.__dict__, "observe": "x'"}))
    energy = sweep(system, "w", w, SweepSettings(**{**crossing.__dict__, "observe": "E"}))
    k = np.arange(4)
    np.testing.assert_allclose(speed.times, (1.5 * math.pi + 2 * math.pi * k[None, :]) / w[:, None], atol=1e-6)
    np.testing.assert_allclose(speed.samples, np.repeat(w[:, None], 4, axis=1), atol=1e-5)
    np.testing.assert_allclose(energy.samples, np.repeat(w[:, None] ** 2 / 2, 4, axis=1), rtol=1e-5)


def test_periodic_response_exponent_is_minus_half_the_damping():
    # the period-1 responses at gamma = 0.2 and 0.25 have a complex pair of Floquet multipliers (checked
    # with a finite-difference monodromy matrix), so both exponents equal half the divergence, -delta/2
    system = compile_model(DUFFING)
    settings = SweepSettings(mode=STROBE, period=PERIOD, transient=20 * PERIOD, samples=100, dt=PERIOD / 50,
                             lyapunov=True)
    result = sweep(system, "gamma", [0.2, 0.25], settings)
    # the lyapunov command's path stops when the standard error is within 1 % + 0.002: held to it
    assert np.all(np.abs(result.lyapunov + 0.15) <= 3 * result.lyapunov_error + 1e-3)
    assert np.all(result.lyapunov_error < 0.01)


def test_non_smooth_flow_exponent_with_the_jacobian_that_holds_almost_everywhere():
    # x' = -a |x| from x = 3 > 0 stays positive: x = 3 exp(-a t), nearby solutions approach at rate a
    system = compile_model("a = 1\nx' = -a*abs(x)\nx(0) = 3\n")
    result = sweep(system, "a", [0.5, 1.0, 2.0], SweepSettings(mode=STROBE, period=1.0, transient=1.0,
                                                               samples=20, dt=0.01, lyapunov=True))
    np.testing.assert_allclose(result.lyapunov, [-0.5, -1.0, -2.0], atol=1e-6)


def test_chunked_sweep_equals_the_single_ensemble():
    system = compile_model(LOGISTIC)
    rs = np.linspace(2.8, 4.0, 11)
    settings = SweepSettings(transient=100, samples=30, lyapunov=True)
    whole = sweep(system, "r", rs, settings)
    with ThreadPoolExecutor(2) as pool:
        chunked = sweep(system, "r", rs, settings, executor=pool, chunk_size=3)
    np.testing.assert_array_equal(chunked.samples, whole.samples)
    np.testing.assert_array_equal(chunked.lyapunov, whole.lyapunov)
    assert list(chunked.status) == list(whole.status)


def test_diverging_values_are_flagged_and_keep_no_samples_after_they_froze():
    # the logistic map with r > 4 sends x = 0.2 out of [0, 1] and on to -infinity
    result = sweep(compile_model(LOGISTIC), "r", [3.5, 4.5], SweepSettings(transient=10, samples=50,
                                                                             lyapunov=True, bound=1e6))
    assert list(result.status) == ["ok", "diverged"]
    assert result.points(1).size == 0 and np.isnan(result.lyapunov[1])
    assert result.points(0).size == 50


def test_sweep_progress_and_cancel():
    system = compile_model(DUFFING)
    token = CancelToken()
    seen = []

    def progress(fraction):
        seen.append(fraction)
        if fraction > 0.2:
            token.cancel()

    settings = SweepSettings(mode=STROBE, period=PERIOD, transient=100 * PERIOD, samples=10, dt=0.05)
    with pytest.raises(Cancelled):
        sweep(system, "gamma", [0.2, 0.3], settings, cancel=token, progress=progress)
    assert seen == sorted(seen) and 0.2 < seen[-1] < 0.3


@pytest.mark.parametrize("settings, message", [
    (SweepSettings(), "needs a sampling mode"),
    (SweepSettings(mode=PLANE), "STATE = VALUE"),
    (SweepSettings(mode=PLANE, plane=("z", 0.0)), "'z' is not one"),
    (SweepSettings(mode=STROBE, period=-1.0), "positive"),
    (SweepSettings(mode=MAXIMA, observe="nope"), "unknown quantity"),
    (SweepSettings(mode="iterate"), "iterates apply to maps"),
])
def test_flow_settings_are_refused_with_plain_messages(settings, message):
    with pytest.raises(ValueError, match=message):
        sweep(compile_model(DUFFING), "gamma", [0.2], settings)


def test_map_and_parameter_errors():
    system = compile_model(LOGISTIC)
    with pytest.raises(ValueError, match="applies to flows"):
        sweep(system, "r", [3.0], SweepSettings(mode=PLANE, plane=("x", 0.5)))
    with pytest.raises(ValueError, match="unknown parameter 'q'"):
        sweep(system, "q", [3.0])
    with pytest.raises(ValueError, match="two different parameters"):
        lyapunov_grid(compile_model(HENON), "a", [1.0], "a", [1.0])


def test_compiled_grid_equals_the_plain_python_grid():
    # the member loop compiled and as plain Python on the same Henon grid, escapes (a = 1.5 leaves the
    # basin from (0.1, 0.1)) included; Sprott, Chaos and Time-Series Analysis (2003): (a, b) = (1.4, 0.3)
    # has lambda = 0.41922
    from orbitdesk.engine import compiled as kernels

    if not kernels.available():
        pytest.skip("numba is not installed or ORBITDESK_NO_JIT=1")
    system = compile_model(HENON)
    settings = GridSettings(transient=100, duration=3000)
    xs, ys = np.linspace(1.0, 1.5, 11), np.array([0.1, 0.2, 0.3])
    compiled = lyapunov_grid(system, "a", xs, "b", ys, settings, chunk_size=10, compiled=True)
    plain = lyapunov_grid(system, "a", xs, "b", ys, settings, chunk_size=1000, compiled=False)
    np.testing.assert_array_equal(compiled.status, plain.status)
    assert (plain.status == "diverged").any() and (plain.status == "ok").any()
    np.testing.assert_allclose(compiled.exponent, plain.exponent, rtol=0, atol=1e-9, equal_nan=True)
    assert compiled.exponent[2, 8] == pytest.approx(0.41922, abs=0.01)
    exponents, status = grid_exponents(system, np.array([[1.4], [0.3]]), system.initial, settings, compiled=True)
    assert list(status) == ["ok"] and exponents[0] == compiled.exponent[2, 8]
