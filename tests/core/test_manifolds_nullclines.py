"""Saddle manifolds and nullclines against closed forms."""

import numpy as np
import pytest

from orbitdesk.analyses.equilibria import find_equilibria
from orbitdesk.analyses.manifolds import saddle_manifolds
from orbitdesk.analyses.nullclines import contour_zero, nullclines
from orbitdesk.system.compiled_system import compile_model


def saddle_of(system):
    return next(e for e in find_equilibria(system) if e.kind == "saddle")


def first_integrated_direction(branch):
    seg = branch.points[:, 2] - branch.points[:, 1]
    return seg / np.linalg.norm(seg)


def test_linear_saddle_manifolds_are_the_axes():
    # x' = x, y' = -y: unstable manifold the x-axis, stable manifold the y-axis (closed form)
    system = compile_model("x' = x\ny' = -y\n")
    eq = saddle_of(system)
    m = saddle_manifolds(system, eq, box={"x": (-2, 2), "y": (-2, 2)})
    assert sorted(b.label for b in m.branches) == ["stable +", "stable -", "unstable +", "unstable -"]
    for b in m.unstable:
        assert np.max(np.abs(b.points[1])) < 1e-12
        assert abs(b.points[0, -1]) == pytest.approx(2.0, abs=1e-6)  # runs to the box edge
    for b in m.stable:
        assert np.max(np.abs(b.points[0])) < 1e-12
        assert abs(b.points[1, -1]) == pytest.approx(2.0, abs=1e-6)
    assert {tuple(np.sign(b.points[:, -1]).astype(int)) for b in m.unstable} == {(1, 0), (-1, 0)}


def test_nonlinear_saddle_unstable_manifold_parabola():
    # x' = x, y' = -y + x^2: the unstable manifold is y = x^2/3 (closed form: y = c x^2 gives
    # 2c x^2 = -c x^2 + x^2, so c = 1/3); the stable manifold is the y-axis (x = 0 is invariant).
    system = compile_model("x' = x\ny' = -y + x^2\n")
    eq = saddle_of(system)
    m = saddle_manifolds(system, eq, box={"x": (-3, 3), "y": (-3, 3)})
    for b in m.unstable:
        x, y = b.points
        assert np.max(np.abs(y - x**2 / 3)) < 1e-7
        assert np.max(np.abs(x)) > 2.9  # the branch reaches far out, not only the linear region
    for b in m.stable:
        assert np.max(np.abs(b.points[0])) < 1e-12
    # every branch leaves along its eigenvector
    for b in m.branches:
        k = 0 if b.label.startswith("unstable") else 1
        v = np.real(eq.eigenvectors[:, k])
        v = v / np.linalg.norm(v)
        d = first_integrated_direction(b)
        assert abs(abs(d @ v) - 1) < 1e-3
        assert d @ b.direction > 0  # and on its own side


def test_rotated_saddle_leaves_along_eigenvectors():
    # x' = y, y' = x - x^2 (a saddle at the origin with eigenvectors (1, ±1)/sqrt 2, closed form)
    system = compile_model("x' = y\ny' = x - x^2\n")
    eq = next(e for e in find_equilibria(system) if abs(e.vector[0]) < 1e-12)
    assert eq.kind == "saddle"
    m = saddle_manifolds(system, eq, box={"x": (-1.5, 1.5), "y": (-1.5, 1.5)})
    for b in m.branches:
        expected = np.array([1.0, 1.0 if b.label.startswith("unstable") else -1.0]) / np.sqrt(2)
        assert abs(abs(first_integrated_direction(b) @ expected) - 1) < 1e-3
    # this flow conserves H = y^2/2 - x^2/2 + x^3/3; the manifolds lie on H = H(0) = 0 (closed form)
    for b in m.branches:
        x, y = b.points
        assert np.max(np.abs(y**2 / 2 - x**2 / 2 + x**3 / 3)) < 1e-8


def test_manifolds_need_a_planar_saddle():
    system = compile_model("x' = -x\ny' = -y\n")
    with pytest.raises(ValueError, match="saddles"):
        saddle_manifolds(system, find_equilibria(system)[0])


def test_lotka_volterra_nullclines():
    # x' = x(a - b y), y' = y(d x - c): x-nullclines x = 0 and y = a/b, y-nullclines y = 0 and
    # x = c/d (closed form; Strogatz, Nonlinear Dynamics and Chaos, sec. 6.4/6.5 predator-prey)
    a, b, c, d = 1.5, 1.0, 3.0, 1.0
    system = compile_model(f"a = {a}\nb = {b}\nc = {c}\nd = {d}\nx' = x*(a - b*y)\ny' = y*(d*x - c)\n")
    x_range, y_range = (-0.73, 5.1), (-0.61, 4.3)
    result = {n.component: n for n in nullclines(system, None, x_range, y_range, resolution=120)}
    assert set(result) == {"x", "y"}
    xs = np.concatenate([s[0] for s in result["x"].segments])
    ys = np.concatenate([s[1] for s in result["x"].segments])
    on_line = np.minimum(np.abs(xs), np.abs(ys - a / b))
    assert np.max(on_line) < 1e-9  # the field is linear across each line: interpolation is exact
    assert np.any(np.abs(xs) < 1e-9) and np.any(np.abs(ys - a / b) < 1e-9)
    # both lines are covered across the whole window
    assert ys[np.abs(xs) < 1e-9].min() == pytest.approx(y_range[0]) and ys.max() == pytest.approx(y_range[1])
    xs2 = np.concatenate([s[0] for s in result["y"].segments])
    ys2 = np.concatenate([s[1] for s in result["y"].segments])
    assert np.max(np.minimum(np.abs(ys2), np.abs(xs2 - c / d))) < 1e-9
    # points on the nullclines make that component vanish
    for k, name in enumerate(system.states):
        for seg in result[name].segments:
            assert np.max(np.abs(system.rhs_vec(0.0, seg)[k])) < 1e-8


def test_cubic_nullcline_to_grid_accuracy():
    # x' = y - x^3 + x: x-nullcline y = x^3 - x (closed form); y' = -x: y-nullcline x = 0
    system = compile_model("x' = y - x^3 + x\ny' = -x\n")
    result = {n.component: n for n in nullclines(system, None, (-2.03, 2.1), (-2.2, 2.05), resolution=200)}
    h = 4.13 / 199
    for seg in result["x"].segments:
        x, y = seg
        assert np.max(np.abs(y - (x**3 - x))) < 12 * h * h * 3  # linear interpolation: O(h^2 f'')
    pts = np.concatenate([s[0] for s in result["x"].segments])
    assert pts.min() < -1.2 and pts.max() > 1.2  # the whole S-shaped curve inside the window
    assert len(result["x"].segments) == 1  # one connected polyline
    assert all(np.max(np.abs(seg[0])) < 1e-12 for seg in result["y"].segments)


def test_closed_nullcline_is_a_loop():
    # the zero set of x^2 + y^2 - 1 is the unit circle (closed form): one closed polyline
    xs = np.linspace(-1.57, 1.61, 81)
    ys = np.linspace(-1.53, 1.49, 77)
    X, Y = np.meshgrid(xs, ys)
    (loop,) = contour_zero(xs, ys, X**2 + Y**2 - 1)
    assert np.allclose(loop[:, 0], loop[:, -1])
    assert np.max(np.abs(np.hypot(*loop) - 1)) < 2e-3


def test_nullclines_refuse_maps_and_other_dimensions():
    with pytest.raises(ValueError, match="maps"):
        nullclines(compile_model("x[n+1] = x/2\ny[n+1] = y\n"))
    with pytest.raises(ValueError, match="planar"):
        nullclines(compile_model("x' = -x\n"))
