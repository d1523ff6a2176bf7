"""Every method meets its tolerance at the reported samples and crossings, not only at its step ends.

The reference is the stiff test problem with a closed form (Hairer & Wanner, Solving ODEs II, sec. IV.1,
and Shampine's 'lag driven by a sine'): y' = -lambda (y - sin t) + cos t, whose solution is
y(t) = sin t + (y(0) - 0) e^{-lambda t}. Samples are compared with it one by one.
"""

import math

import numpy as np
import pytest

from orbitdesk.analyses.sections import plane_section
from orbitdesk.engine.runs import OK, RunSettings, simulate
from orbitdesk.engine.stiff import StiffStepper
from orbitdesk.system.compiled_system import compile_model


def lag(lam):
    return compile_model(f"lam = {lam:g}\ny' = -lam*(y - sin(t)) + cos(t)\ny(0) = 1\n")


def exact(t, lam):
    return np.sin(t) + np.exp(-lam * t)


def worst_ratio(run, lam, rtol, atol):
    """The largest sample error over the tolerance rtol |y| + atol (|y| the larger of the solution's size
    at the sample and one: the stepper's own scale)."""
    y = exact(run.time, lam)
    return float(np.max(np.abs(run.states[0] - y) / (atol + rtol * np.maximum(np.abs(y), 1.0))))


@pytest.mark.parametrize("method", ["stiff", "bdf"])
@pytest.mark.parametrize("rtol", [1e-6, 1e-8])
def test_stiff_methods_meet_the_tolerance_at_every_sample(method, rtol):
    # lambda = 1e6: the steppers' own error control allows steps of many forcing periods here; their
    # interpolants were off by up to 2 (the size of the signal) at the samples before the check.
    lam = 1e6
    run = simulate(lag(lam), RunSettings(method=method, rtol=rtol, atol=1e-2 * rtol, t_end=60, samples=2401))
    assert run.status == OK
    assert worst_ratio(run, lam, rtol, 1e-2 * rtol) <= 3.0


@pytest.mark.fallback
def test_rk45_meets_the_tolerance_at_every_sample():
    lam = 1e3  # stiff enough that the explicit step sits at its stability limit
    run = simulate(lag(lam), RunSettings(method="rk45", rtol=1e-8, atol=1e-10, t_end=20, samples=4001))
    assert run.status == OK
    assert worst_ratio(run, lam, 1e-8, 1e-10) <= 3.0


def test_rk4_samples_are_as_accurate_as_its_steps():
    # rk4 has a fixed step and no tolerance: its samples (cubic Hermite between steps, order 4 like the
    # method) must be as close to the closed form as the step ends are
    lam = 100.0
    settings = RunSettings(method="rk4", dt=2e-3, t_end=10)
    steps = simulate(lag(lam), settings.replace(samples=0))
    samples = simulate(lag(lam), settings.replace(samples=3331))  # sample times fall between the steps
    at_steps = np.max(np.abs(steps.states[0] - exact(steps.time, lam))[steps.time > 0.1])
    at_samples = np.max(np.abs(samples.states[0] - exact(samples.time, lam))[samples.time > 0.1])
    assert at_samples <= 3 * at_steps + 1e-12


@pytest.mark.fallback
def test_dop853_meets_the_tolerance_at_every_sample():
    # at the stability limit (|lambda h| near 6) the 7th-order dense output was off by 0.3e-6 (30 times the
    # tolerance) while the step ends were right to 3e-9; the defect check reads such steps' samples off
    # sub-steps ending at them
    lam = 1e3
    run = simulate(lag(lam), RunSettings(method="dop853", rtol=1e-8, atol=1e-10, t_end=20, samples=4001))
    assert run.status == OK
    assert worst_ratio(run, lam, 1e-8, 1e-10) <= 3.0


def test_dop853_samples_of_a_non_stiff_flow_meet_a_loose_tolerance():
    # the harmonic oscillator x'' = -x with x(0) = 1: x = cos t (closed form). At rtol 1e-5 the steps are
    # long and the 7th-order output missed the tolerance between them; samples are held to it now
    system = compile_model("x' = v\nv' = -x\nx(0) = 1\nv(0) = 0\n")
    run = simulate(system, RunSettings(method="dop853", rtol=1e-5, atol=1e-7, t_end=6, samples=6001))
    err = np.abs(run.states[0] - np.cos(run.time)) / (1e-7 + 1e-5 * np.maximum(np.abs(np.cos(run.time)), 1.0))
    assert float(np.max(err)) <= 3.0


@pytest.mark.fallback
@pytest.mark.parametrize("method", ["dop853", "rk45"])
def test_sweep_members_meet_the_tolerance_at_samples_and_crossings(method):
    # the member loops (sweeps, ensembles) read points as a single run does: strobe samples of
    # y' = -lambda (y - a sin t) + a cos t, y(0) = 0 (closed form y = a sin t) at the explicit methods'
    # stability limit, and the crossings of y = 1/4 rising at t = asin(1/(4a)) + 2 pi k
    from orbitdesk.analyses.sweep import PLANE, STROBE, SweepSettings, sweep

    system = compile_model("a = 1\nlam = 1000\ny' = -lam*(y - a*sin(t)) + a*cos(t)\ny(0) = 0\n")
    values = np.array([0.5, 1.0, 2.0])
    common = dict(transient=1.0, rtol=1e-8, atol=1e-10, method=method)
    strobe = sweep(system, "a", values, SweepSettings(mode=STROBE, period=0.37, samples=60, **common))
    exact = values[:, None] * np.sin(strobe.times)
    assert list(strobe.status) == ["ok"] * 3
    assert float(np.max(np.abs(strobe.samples - exact) / (1e-10 + 1e-8 * np.maximum(np.abs(exact), 1.0)))) <= 3.0
    plane = sweep(system, "a", values, SweepSettings(mode=PLANE, plane=("y", 0.25), direction=1, samples=8, **common))
    for times, a in zip(plane.times, values):
        phase = (times - np.arcsin(0.25 / a)) / (2 * np.pi)
        assert np.abs(phase - np.round(phase)).max() * 2 * np.pi < 1e-7
        assert times.size == 8


def test_the_interpolant_check_redoes_long_steps_and_lets_them_grow_again():
    lam = 1e6
    f = lambda t, y: -lam * (y - np.sin(t)) + np.cos(t)
    stepper = StiffStepper("Radau", f, lambda t, y: np.array([[-lam]]), 0.0, [1.0], 40.0, 1e-6, 1e-8)
    longest = 0.0
    while stepper.status == "running":
        stepper.step()
        longest = max(longest, stepper.t - stepper.t_old)
    assert stepper.redone > 0
    # a cubic over a step of h reproduces sin t to ~h^4/384 (its remainder term): the check keeps h
    # well below one period, where the unchecked stepper took steps of 10 and more
    assert longest < 1.0
    assert stepper.y[0] == pytest.approx(math.sin(40.0), abs=1e-5)


@pytest.mark.parametrize("method, lam", [("stiff", 1e6), ("bdf", 1e6), ("dop853", 1e3), ("rk45", 1e3)])
def test_section_reports_the_exact_crossings(method, lam):
    # y = sin t after the transient: y = 1/2 rising at pi/6 + 2 pi k, falling at 5 pi/6 + 2 pi k; the stiff
    # methods at lambda = 1e6, the explicit ones at their stability limit (lambda = 1e3)
    settings = RunSettings(method=method, rtol=1e-8, atol=1e-10, t_end=50)
    up = plane_section(lag(lam), coordinate="y", value=0.5, direction="up", count=6, transient=1.0,
                       settings=settings)
    down = plane_section(lag(lam), coordinate="y", value=0.5, direction="down", count=6, transient=1.0,
                         settings=settings)
    k = np.arange(1, 7)
    assert up.times == pytest.approx(math.pi / 6 + 2 * math.pi * k, abs=1e-6)
    assert down.times == pytest.approx(5 * math.pi / 6 + 2 * math.pi * (k - 1), abs=1e-6)
    assert np.all(np.abs(up.points[0] - 0.5) < 1e-8)


def test_a_large_stiff_model_runs_on_its_sparse_jacobian():
    # the heat equation on 40 interior points, u_i' = d (u_{i-1} - 2 u_i + u_{i+1}), u = 0 at both ends,
    # d = 41^2 (rates from -9.9 to -6,700: stiff). From the first mode u_i = sin(pi i / 41) the solution is
    # that mode times exp(lambda_1 t), lambda_1 = -4 d sin^2(pi / 82) (closed form, the discrete Laplacian's
    # eigenpairs)
    from orbitdesk.engine.stiff import SPARSE_FROM, model_functions

    N, d = 40, 41.0 ** 2
    lines = [f"d = {d:g}"]
    for i in range(1, N + 1):
        left, right = (f"u{i - 1}" if i > 1 else "0"), (f"u{i + 1}" if i < N else "0")
        lines += [f"u{i}' = d*({left} - 2*u{i} + {right})", f"u{i}(0) = {math.sin(math.pi * i / (N + 1))!r}"]
    system = compile_model("\n".join(lines) + "\n")
    _, jac = model_functions(system, system.param_values)
    J = jac(0.0, system.initial)
    assert N >= SPARSE_FROM and J.format == "csc" and J.nnz == 3 * N - 2  # the tridiagonal structure only
    rate = -4 * d * math.sin(math.pi / (2 * (N + 1))) ** 2
    mode = np.sin(np.pi * np.arange(1, N + 1) / (N + 1))
    for method in ("stiff", "bdf"):
        run = simulate(system, RunSettings(method=method, rtol=1e-8, atol=1e-10, t_end=0.3, samples=31))
        assert run.status == OK
        exact_states = mode[:, None] * np.exp(rate * run.time)[None, :]
        assert np.max(np.abs(run.states - exact_states)) < 1e-6


@pytest.mark.parametrize("method", ["stiff", "bdf"])
def test_a_stiff_run_that_cannot_go_on_says_what_was_tried(method):
    # x' = -1/x, x(0) = 1: x = sqrt(1 - 2t) (closed form) ends at t = 1/2, where its rate grows without bound.
    # The stiff method stops there and says so, with the tolerance it tried; it never sends the user to itself
    run = simulate(compile_model("x' = -1/x\nx(0) = 1\n"), RunSettings(method=method, t_end=1, samples=11))
    assert run.status != OK
    assert run.time[-1] <= 0.5 and run.states[0, :-1] == pytest.approx(np.sqrt(1 - 2 * run.time[:-1]), abs=1e-6)
    assert "t = 0.5" in run.message and "rtol 1e-08, atol 1e-10" in run.message and "--rtol" in run.message
    assert "try the stiff method" not in run.message
