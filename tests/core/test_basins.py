"""Basins of attraction against single runs of scipy's solve_ivp and closed-form equilibria."""

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from orbitdesk.analyses.basins import ESCAPE, BasinSettings, basins
from orbitdesk.engine.progress import CancelToken, Cancelled
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.samples.models import DUFFING_REF, HENON_REF, model

# unforced two-well Duffing x'' = -delta x' + x - x^3: stable foci at x = +-1, a saddle at 0 (closed form)
WELLS = model(DUFFING_REF, gamma=0, initial={'x(0)': 0})
HENON = model(HENON_REF, initial={'x[0]': 0, 'y[0]': 0})


def reference_well(x0, v0):
    sol = solve_ivp(lambda t, u: [u[1], -0.3 * u[1] + u[0] - u[0] ** 3], (0, 150), [x0, v0], rtol=1e-10,
                    atol=1e-12)
    return 1 if sol.y[0, -1] > 0 else -1


def test_two_wells_each_start_ends_where_a_single_run_ends():
    system = compile_model(WELLS)
    xs, ys = np.linspace(-2, 2, 8), np.linspace(-1.5, 1.5, 7)  # no start exactly on the saddle
    result = basins(system, "x", xs, "x'", ys, BasinSettings(transient=150.0, samples=8, every=0.5, dt=0.01))
    kinds = sorted((round(a["centre"]["x"], 3), a["kind"]) for a in result.attractors)
    assert kinds == [(-1.0, "equilibrium"), (1.0, "equilibrium")]
    assert not (result.labels == ESCAPE).any()
    sign = {a["label"]: 1 if a["centre"]["x"] > 0 else -1 for a in result.attractors}
    for j in range(0, 7, 2):
        for i in range(0, 8, 2):
            assert sign[result.labels[j, i]] == reference_well(xs[i], ys[j]), (xs[i], ys[j])
    assert sum(a["share"] for a in result.attractors) == pytest.approx(1.0)


def test_stroboscopic_basins_of_the_shaken_wells():
    # small forcing: one period-1 response in each well (the linearised response, see test_sections.py)
    system = compile_model(WELLS.replace("gamma = 0", "gamma = 0.05"))
    T = 2 * math.pi / 1.2
    result = basins(system, "x", [-1.2, 1.2], "x'", [0.0], BasinSettings(transient=60 * T, samples=6, period=T,
                                                                        dt=T / 200))
    assert result.stroboscopic
    assert [a["kind"] for a in result.attractors] == ["period-1 response"] * 2
    assert result.labels[0, 0] != result.labels[0, 1]


def test_henon_attractor_and_escape_and_cancel():
    # the Henon attractor (a = 1.4, b = 0.3) attracts the origin; (2, 2) runs off to infinity
    system = compile_model(HENON)
    result = basins(system, "x", [0.0, 2.0], "y", [0.0, 2.0], BasinSettings(transient=500, samples=64, every=1))
    assert result.labels[0, 0] >= 0 and result.labels[1, 1] == ESCAPE
    (attractor,) = result.attractors
    assert attractor["kind"] == "no period (chaotic or quasi-periodic)"
    data = result.to_dict()
    assert data["escape"] == ESCAPE and data["labels"][1][1] == ESCAPE
    token = CancelToken()
    token.cancel()
    with pytest.raises(Cancelled):
        basins(system, "x", [0.0], "y", [0.0], BasinSettings(transient=10, samples=4), cancel=token)
    with pytest.raises(ValueError, match="not a state"):
        basins(system, "x", [0.0], "a", [0.0])


# r' = -r (r^2 - 1)(r^2 - 4), theta' = 1 in Cartesian form: the origin is a stable focus, the circle r = 1 an
# unstable cycle (the basin boundary) and the circle r = 2 a stable limit cycle of period 2 pi (closed form).
RINGS = "g = -(x^2 + y^2 - 1)*(x^2 + y^2 - 4)\nx' = x*g - y\ny' = y*g + x\nx(0) = 0.5\ny(0) = 0\n"


def test_an_autonomous_limit_cycle_is_found_with_its_period_beside_an_equilibrium():
    system = compile_model(RINGS)
    xs = ys = np.linspace(-2.5, 2.5, 9)
    result = basins(system, "x", xs, "y", ys, BasinSettings(transient=40.0, samples=12, every=0.5))
    by_kind = {a["kind"]: a for a in result.attractors}
    assert set(by_kind) == {"equilibrium", "limit cycle"}
    cycle = by_kind["limit cycle"]
    assert cycle["period"] == pytest.approx(2 * math.pi, rel=1e-7)  # closed form
    # the non-trivial Floquet multiplier: exp(T d(r g)/dr at r = 2) = exp(-48 pi), about 0 (closed form)
    assert cycle["multiplier"] < 1e-6
    gx, gy = np.meshgrid(xs, ys)
    inside = np.hypot(gx, gy) < 1  # no start on the unstable circle r = 1 in this grid
    assert np.all(result.labels[inside] == by_kind["equilibrium"]["label"])
    assert np.all(result.labels[~inside] == cycle["label"])


@pytest.mark.parametrize("how", [dict(method="dop853"), dict(method="rk45", rtol=1e-7, atol=1e-9), dict(dt=0.02)])
def test_the_double_wells_basins_are_half_and_half_by_symmetry_with_each_method(how):
    # x'' = -delta x' + x - x^3 is unchanged by (x, x') -> (-x, -x'): on a grid symmetric about the saddle each
    # start's mirror image goes to the other well, so the two basins hold exactly half the starts each
    system = compile_model(WELLS)
    xs, ys = np.linspace(-2, 2, 10), np.linspace(-1.5, 1.5, 8)  # even counts: no start on the saddle
    result = basins(system, "x", xs, "x'", ys, BasinSettings(transient=150.0, samples=8, every=0.5, **how))
    assert result.method == how.get("method", "rk4") and result.to_dict()["method"] == result.method
    assert [a["share"] for a in result.attractors] == [0.5, 0.5]
    assert sorted(round(a["centre"]["x"], 4) for a in result.attractors) == [-1.0, 1.0]  # closed form
    assert np.all(result.labels != result.labels[::-1, ::-1])  # the mirror start: the other well
    sign = {a["label"]: 1 if a["centre"]["x"] > 0 else -1 for a in result.attractors}
    for j in (0, 3, 6):  # a few starts against single runs of scipy's solve_ivp
        for i in (1, 4, 8):
            assert sign[result.labels[j, i]] == reference_well(xs[i], ys[j]), (xs[i], ys[j])


def test_a_damped_linear_oscillator_has_one_basin_the_whole_grid():
    # x'' = -0.5 x' - x: every start decays to the origin (closed form: a stable focus, eigenvalues -0.25 +- 0.97i)
    system = compile_model("x'' = -0.5*x' - x\nx(0) = 1\n")
    grid = np.linspace(-5, 5, 12)
    result = basins(system, "x", grid, "x'", grid, BasinSettings(transient=80.0, samples=6, every=1.0))
    assert result.method == "dop853"
    (only,) = result.attractors
    assert only["kind"] == "equilibrium" and only["share"] == 1.0
    assert abs(only["centre"]["x"]) < 1e-6 and abs(only["centre"]["x'"]) < 1e-6
    assert np.all(result.labels == only["label"])


def test_basins_refuse_a_stiff_method_and_bad_tolerances_in_words():
    system = compile_model(WELLS)
    with pytest.raises(ValueError, match="stiff method 'stiff' runs one orbit at a time"):
        basins(system, "x", [0.0, 1.0], "x'", [0.0], BasinSettings(method="stiff"))
    with pytest.raises(ValueError, match="tolerances must be positive"):
        basins(system, "x", [0.0, 1.0], "x'", [0.0], BasinSettings(rtol=0.0))
