"""Members at one fixed RK4 step that end together (engine/members_fixed.py, the lean loop) against the
closed form of RK4 on a linear oscillator and against the per-member loop (members.members_advance)."""

import numpy as np
import pytest

from orbitdesk.engine import compiled, drivers
from orbitdesk.engine.ensembles import DIVERGED, OK, rk4_ensemble
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.samples.models import LORENZ_REF, model

OSCILLATOR = "w = 1\nx'' = -w^2*x\nx(0) = 1\nx'(0) = 0\n"
LORENZ = model(LORENZ_REF, initial={'y(0)': None, 'z(0)': None})


@pytest.mark.fallback
def test_rk4_members_follow_the_stability_polynomial_of_rk4():
    # x'' = -w^2 x: q = x + i x'/w obeys q' = -i w q, and one classical RK4 step multiplies q by
    # R(z) = 1 + z + z^2/2 + z^3/6 + z^4/24 at z = -i w h (the method's stability function, Hairer,
    # Norsett and Wanner, Solving ODEs I, section II.1): after n steps q = R^n exactly, up to round-off.
    # 300 members: more than one block (cohort) of members in flight.
    system = compile_model(OSCILLATOR)
    w = np.linspace(0.2, 6.0, 300)
    h, n = 0.05, 400
    result = rk4_ensemble(system, np.repeat([[1.0], [0.0]], w.size, axis=1), w[None, :], dt=h, n_steps=n)
    z = -1j * w * h
    q = (1 + z + z ** 2 / 2 + z ** 3 / 6 + z ** 4 / 24) ** n
    assert np.all(result.status == OK) and np.all(result.steps == n)
    np.testing.assert_allclose(result.states[0], q.real, rtol=0, atol=1e-11)
    np.testing.assert_allclose(result.states[1], w * q.imag, rtol=0, atol=1e-10)
    assert result.time == pytest.approx(n * h)


def _both_loops(engine, U0, p, t_end, **options):
    """The same members by the lean loop (one end for all) and by the per-member loop (one more member
    with a later end sends them all there)."""
    lean = drivers.members_run(engine, "rk4", 0.0, t_end, U0, p, dt=0.01, **options)
    ends = np.full(U0.shape[1] + 1, t_end)
    ends[-1] = t_end + 0.5
    each = drivers.members_run(engine, "rk4", 0.0, ends, np.column_stack([U0, U0[:, :1]]), p, dt=0.01, **options)
    return lean, each


def _same(a, b, N):
    assert np.array_equal(a.codes, b.codes[:N]) and np.array_equal(a.steps, b.steps[:N])
    assert np.array_equal(a.t, b.t[:N]) and np.array_equal(a.states, b.states[:, :N])
    for name in ("samples", "event_y"):
        if getattr(a, name) is not None:
            assert np.array_equal(getattr(a, name), getattr(b, name)[:, :N], equal_nan=True)
    for name in ("event_t", "event_count", "log_sums", "log_span"):
        if getattr(a, name) is not None:
            assert np.array_equal(getattr(a, name), getattr(b, name)[:N], equal_nan=True)


@pytest.mark.parametrize("options", [
    dict(grid=np.linspace(0.35, 3.0, 7)),
    dict(planes=(np.array([[0.0, 0.0, 1.0, 27.0]]), np.array([1]), np.zeros(1, dtype=bool)), max_events=4, t_keep=0.5),
    dict(tangents=1, t_keep=0.5, interval=0.3, keep_going=True),
    dict(grid=np.linspace(0.35, 3.0, 7), bound=48.34),  # about half the members pass it (at 48.27 to 48.36)
], ids=["samples", "crossings", "tangents", "bound"])
def test_the_lean_loop_gives_the_per_member_loops_numbers(options):
    system = compile_model(LORENZ)
    engine = compiled.engine_for(system, wait=True)
    N = 280  # two cohorts
    U0 = np.vstack([1.0 + np.arange(N) / N, np.zeros(N), np.zeros(N)])
    lean, each = _both_loops(engine, U0, system.param_values, 3.0, **options)
    _same(lean, each, N)
    if "bound" in options:
        assert 0 < np.count_nonzero(lean.codes == 1) < N
    if "planes" in options:
        assert np.all(lean.event_count == 4)


def test_a_member_blowing_up_leaves_its_cohort_running():
    # x' = a x^2, x(0) = 1 blows up at t = 1/a (closed form): members with a < 1/2 reach t = 2
    system = compile_model("a = 1\nx' = a*x^2\nx(0) = 1\n")
    a = np.linspace(0.05, 2.0, 40)
    result = rk4_ensemble(system, np.ones((1, a.size)), a[None, :], dt=1e-3, n_steps=2000, bound=1e6)
    survives = a < 0.5 - 0.01
    assert np.all(result.status[survives] == OK)
    np.testing.assert_allclose(result.states[0, survives], 1 / (1 - 2 * a[survives]), rtol=1e-7)
    late = a > 0.5 + 0.01
    assert np.all(result.status[late] == DIVERGED)
    np.testing.assert_allclose(result.time[late], 1 / a[late], atol=0.01)  # RK4 blows up a few steps from it


def test_plain_python_members_agree_with_the_compiled_loop():
    # the plain-Python engine (numpy over the block, the batched kernel vectorised) against the compiled one
    if not compiled.available():
        pytest.skip("the compiled loops are turned off")
    system = compile_model(LORENZ)
    N = 40
    U0 = np.vstack([1.0 + np.arange(N) / N, np.zeros(N), np.zeros(N)])
    grid = np.linspace(0.5, 2.0, 4)
    planes = (np.array([[0.0, 0.0, 1.0, 27.0]]), np.array([1]), np.zeros(1, dtype=bool))
    plain = drivers.members_run(compiled.python_engine(system), "rk4", 0.0, 2.0, U0, system.param_values, dt=0.01,
                                grid=grid, planes=planes, max_events=3, tangents=1, t_keep=0.5, keep_going=True)
    engine = compiled.engine_for(system, wait=True)
    reference = drivers.members_run(engine, "rk4", 0.0, 2.0, U0, system.param_values, dt=0.01, grid=grid,
                                    planes=planes, max_events=3, tangents=1, t_keep=0.5, keep_going=True)
    assert np.array_equal(plain.codes, reference.codes) and np.array_equal(plain.steps, reference.steps)
    np.testing.assert_allclose(plain.states, reference.states, rtol=1e-9)
    np.testing.assert_allclose(plain.samples, reference.samples, rtol=1e-9)
    np.testing.assert_allclose(plain.event_t, reference.event_t, rtol=1e-9)
    np.testing.assert_allclose(plain.log_sums, reference.log_sums, rtol=1e-7)
