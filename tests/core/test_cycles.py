"""Periodic orbits of flows and cycles of maps against published values and closed forms."""

import math

import numpy as np
import pytest
from scipy.integrate import simpson
from scipy.special import ai_zeros

from orbitdesk.analyses.cycles import CycleError, detect_forcing_period, find_cycle, find_map_cycle
from orbitdesk.engine.progress import CancelToken, Cancelled
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.samples.models import BRUSSELATOR_REF, LOGISTIC, VAN_DER_POL, model

pytestmark = pytest.mark.fallback  # published values: run with the compiler and without

CIRCLE = "x' = x - y - x*(x^2 + y^2)\ny' = x + y - y*(x^2 + y^2)\nx(0) = 0.5\n"
BRUSSELATOR = model(BRUSSELATOR_REF, b=2.5, initial={'x(0)': 1, 'y(0)': 1.5})


@pytest.fixture(scope="module")
def vdp():
    return compile_model(VAN_DER_POL)


def test_van_der_pol_small_mu_amplitude(vdp):
    # Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., sec. 7.6 (averaging): for small mu the limit
    # cycle is nearly a circle of radius 2, so x swings between about -2 and 2.
    cycle = find_cycle(vdp, vdp.param_vector({"mu": 0.1}))
    assert cycle.amplitude["x"] / 2 == pytest.approx(2.0, rel=0.01)
    assert cycle.period == pytest.approx(2 * math.pi, rel=0.01)  # same averaging: frequency 1 + O(mu^2)


def test_van_der_pol_cycle_by_the_stiff_method(vdp):
    # the same cycle with Radau on the model's kernels and its Jacobian (the monodromy's tangent
    # columns too); period 6.6633 at mu = 1 (from memory), Floquet: one multiplier 1 (the flow direction)
    cycle = find_cycle(vdp, vdp.param_vector({"mu": 1.0}), method="stiff", rtol=1e-9, atol=1e-11)
    assert cycle.period == pytest.approx(6.6633, abs=5e-5)
    assert min(abs(m - 1) for m in cycle.multipliers) < 1e-5


def test_van_der_pol_mu_one_period(vdp):
    # period of the Van der Pol cycle at mu = 1: 6.6633 (value from memory, four figures)
    cycle = find_cycle(vdp, vdp.param_vector({"mu": 1.0}))
    assert cycle.period == pytest.approx(6.6633, abs=5e-5)
    assert cycle.orbit.shape == (2, cycle.time.size) and cycle.time[-1] == pytest.approx(cycle.period)
    assert np.allclose(cycle.orbit[:, 0], cycle.orbit[:, -1], atol=1e-7)


def test_forcing_switched_off_by_its_parameter_is_an_autonomous_cycle():
    # the same Van der Pol cycle (period 6.6633 at mu = 1, from memory) with a forcing term whose
    # amplitude is zero: found by autonomous shooting, with the trivial multiplier 1
    forced = compile_model("mu = 1\nA = 0\nw = 1.1\nx'' = mu*(1 - x^2)*x' - x + A*cos(w*t)\nx(0) = 0.5\n")
    assert not forced.autonomous and forced.autonomous_at(forced.param_vector({}))
    cycle = find_cycle(forced, forced.param_vector({}))
    assert cycle.period == pytest.approx(6.6633, abs=5e-5)
    assert cycle.forcing_period is None and abs(cycle.multipliers[cycle.trivial_index] - 1) < 1e-6


def test_van_der_pol_relaxation_period(vdp):
    # Strogatz, sec. 7.5: for mu >> 1 the period is (3 - 2 ln 2) mu to leading order; the plain form has
    # corrections of order mu^(-1/3), about 3% at mu = 40, so 10% is an honest tolerance.
    mu = 40.0
    cycle = find_cycle(vdp, vdp.param_vector({"mu": mu}))
    leading = (3 - 2 * math.log(2)) * mu
    assert cycle.period == pytest.approx(leading, rel=0.10)
    # with the next term 3 alpha mu^(-1/3), alpha = 2.338 the first zero of Ai taken from scipy
    # (the correction's form is a value from memory), the estimate is within 1%
    alpha = -ai_zeros(1)[0][0]
    assert cycle.period == pytest.approx(leading + 3 * alpha * mu ** (-1 / 3), rel=0.01)
    assert cycle.period > leading  # the correction is positive


def test_van_der_pol_floquet(vdp):
    mu = 1.0
    cycle = find_cycle(vdp, vdp.param_vector({"mu": mu}))
    assert cycle.multipliers[cycle.trivial_index] == pytest.approx(1.0, abs=1e-6)
    (other,) = cycle.nontrivial_multipliers
    assert abs(other) < 1 and cycle.stable is True
    # Liouville's formula: det(monodromy) = exp(integral of div f over one period), div f = mu(1 - x^2)
    x = cycle.orbit[0]
    divergence_integral = simpson(mu * (1 - x**2), x=cycle.time)
    assert np.prod(cycle.multipliers).real == pytest.approx(math.exp(divergence_integral), rel=1e-5)


def test_circle_cycle_period_and_multiplier():
    # r' = r(1 - r^2), theta' = 1 in Cartesian form: the cycle r = 1 with period 2 pi; linearising,
    # r' ~ -2(r - 1), so the nontrivial multiplier is exp(-2 * 2 pi) = exp(-4 pi) (closed form)
    cycle = find_cycle(compile_model(CIRCLE))
    assert cycle.period == pytest.approx(2 * math.pi, abs=1e-6)
    (other,) = cycle.nontrivial_multipliers
    assert other.real == pytest.approx(math.exp(-4 * math.pi), rel=1e-6) and other.imag == 0
    assert np.hypot(*cycle.orbit) == pytest.approx(np.ones(cycle.time.size), abs=1e-8)
    assert cycle.amplitude["x"] == pytest.approx(2.0, abs=1e-5)


def test_circle_cycle_from_a_guess_with_period_guess():
    cycle = find_cycle(compile_model(CIRCLE), guess={"x": 1.2, "y": 0.0}, period_guess=6.0)
    assert cycle.period == pytest.approx(2 * math.pi, abs=1e-6)
    assert math.hypot(cycle.state["x"], cycle.state["y"]) == pytest.approx(1.0, abs=1e-8)


def test_brusselator_cycle_above_hopf_only():
    # Brusselator: the equilibrium (a, b/a) is unstable for b > 1 + a^2 (closed form from its Jacobian)
    # and a stable limit cycle surrounds it (Strogatz, sec. 8.3 exercises).
    system = compile_model(BRUSSELATOR)
    cycle = find_cycle(system, system.param_vector({"b": 2.5}))
    assert cycle.stable is True
    (other,) = cycle.nontrivial_multipliers
    assert 0 < abs(other) < 1
    assert cycle.orbit[0].min() < 1.0 < cycle.orbit[0].max()  # it encircles the equilibrium x = a
    # near the Hopf point the period is 2 pi / omega with omega = a (closed form at b = 1 + a^2)
    near = find_cycle(system, system.param_vector({"b": 2.02}))
    assert near.period == pytest.approx(2 * math.pi, rel=0.02)
    with pytest.raises(CycleError):  # below the Hopf point the run spirals into the equilibrium
        find_cycle(system, system.param_vector({"b": 1.9}))


def test_equilibrium_guess_is_refused():
    system = compile_model(BRUSSELATOR)
    with pytest.raises(CycleError, match="equilibrium"):
        find_cycle(system, guess={"x": 1.0, "y": 2.5})


def test_forced_linear_oscillator():
    # x'' + c x' + x = F cos(w t): the periodic response has amplitude F / sqrt((1-w^2)^2 + (c w)^2)
    # and period 2 pi / w; its multipliers are exp(lambda T) with lambda^2 + c lambda + 1 = 0 (closed forms)
    c, F, w = 0.3, 0.7, 1.3
    system = compile_model(f"c = {c}\nF = {F}\nw = {w}\nx'' = -c*x' - x + F*cos(w*t)\n")
    assert detect_forcing_period(system) == pytest.approx(2 * math.pi / w)
    cycle = find_cycle(system)
    assert cycle.period == pytest.approx(2 * math.pi / w, rel=1e-12) and cycle.forcing_multiple == 1
    assert cycle.amplitude["x"] / 2 == pytest.approx(F / math.hypot(1 - w * w, c * w), rel=1e-5)
    expected = np.exp(np.roots([1, c, 1]) * cycle.period)
    assert np.sort_complex(cycle.multipliers) == pytest.approx(np.sort_complex(expected), abs=1e-8)
    assert cycle.trivial_index is None and cycle.stable is True


SUBHARMONIC = """eps = 0.2
r2 = x^2 + y^2
w = 0.5 + eps*(2*x*y*cos(t) - (x^2 - y^2)*sin(t))/r2
x' = x*(1 - r2) - y*w
y' = y*(1 - r2) + x*w
x(0) = 0.3
y(0) = 0.1
"""


def test_subharmonic_needs_two_forcing_periods():
    # In polar form r' = r(1 - r^2), theta' = 1/2 + eps sin(2 theta - t): the forcing has period 2 pi,
    # phi = 2 theta - t obeys phi' = 2 eps sin(phi), locked at phi = pi, so the orbit r = 1,
    # theta = (t + pi)/2 closes after 4 pi = 2 forcing periods. Multipliers over 4 pi: exp(-2 * 4 pi)
    # (radial) and exp(-2 eps * 4 pi) (phase) (closed forms).
    system = compile_model(SUBHARMONIC)
    cycle = find_cycle(system)
    assert cycle.forcing_period == pytest.approx(2 * math.pi) and cycle.forcing_multiple == 2
    assert cycle.period == pytest.approx(4 * math.pi)
    assert abs(cycle.state["x"]) < 1e-8 and abs(cycle.state["y"]) == pytest.approx(1.0, abs=1e-8)
    eps = 0.2
    assert np.sort(cycle.multipliers.real) == pytest.approx(
        np.sort([math.exp(-8 * math.pi), math.exp(-8 * math.pi * eps)]), rel=1e-5, abs=1e-12)
    # the same orbit when the multiple is given, starting from a point on the cycle
    given = find_cycle(system, guess={"x": 0.0, "y": -1.0}, forcing_multiple=2)
    assert given.period == pytest.approx(4 * math.pi) and given.state["y"] == pytest.approx(-1.0, abs=1e-8)


def test_two_frequency_forcing_common_period():
    # x' = -x + cos t + cos 1.5 t: the common period of the forcing is 4 pi; the multiplier over it
    # is exp(-4 pi) (closed form)
    system = compile_model("x' = -x + cos(t) + cos(1.5*t)\n")
    assert detect_forcing_period(system) == pytest.approx(4 * math.pi)
    cycle = find_cycle(system)
    assert cycle.period == pytest.approx(4 * math.pi)
    assert cycle.multipliers[0].real == pytest.approx(math.exp(-4 * math.pi), rel=1e-6)
    # a square wave through sin(t) is still read; time outside sin/cos is not
    assert detect_forcing_period(compile_model("x' = -x + sign(sin(2*t))\n")) == pytest.approx(math.pi)
    assert detect_forcing_period(compile_model("x' = -x + mod(t, 1)\n")) is None
    with pytest.raises(ValueError, match="forcing period"):
        find_cycle(compile_model("x' = -x + t\n"))
    cycle = find_cycle(compile_model("x' = -x + mod(t, 1)\n"), forcing_period=1.0)
    assert cycle.period == pytest.approx(1.0)
    # explicit forcing period: x' = -x + (t mod 1) has x(1) = x(0)/e + integral_0^1 e^(s-1) s ds
    # = x(0)/e + 1/e, so the periodic solution starts at x(0) = 1/(e - 1) (closed form)
    assert cycle.state["x"] == pytest.approx(1 / (math.e - 1), rel=1e-7)


@pytest.mark.parametrize("r", [3.2, 3.4])
def test_logistic_period_two(r):
    # logistic map, 3 < r < 1 + sqrt 6: the 2-cycle x = (r + 1 ± sqrt((r-3)(r+1)))/(2r) with
    # multiplier 4 + 2r - r^2 (closed form)
    system = compile_model(LOGISTIC)
    cycle = find_map_cycle(system, system.param_vector({"r": r}), 2)
    root = math.sqrt((r - 3) * (r + 1))
    assert cycle.points[0] == pytest.approx(sorted([(r + 1 - root) / (2 * r), (r + 1 + root) / (2 * r)]), abs=1e-13)
    assert cycle.multipliers[0].real == pytest.approx(4 + 2 * r - r * r, abs=1e-12)
    assert cycle.stable is True and cycle.period == 2


def test_logistic_unstable_two_cycle_and_missing_one():
    system = compile_model(LOGISTIC)
    r = 3.8  # beyond 1 + sqrt 6 the 2-cycle still exists but is unstable: multiplier 4 + 2r - r^2 < -1
    cycle = find_map_cycle(system, system.param_vector({"r": r}), 2)
    assert cycle.multipliers[0].real == pytest.approx(4 + 2 * r - r * r, abs=1e-10) and cycle.stable is False
    with pytest.raises(CycleError, match="minimal period 2"):  # below r = 3 there is no 2-cycle
        find_map_cycle(system, system.param_vector({"r": 2.8}), 2)


def test_henon_period_one_is_a_fixed_point():
    # Henon map x' = 1 - a x^2 + y, y' = b x: fixed points x = (-(1-b) ± sqrt((1-b)^2 + 4a)) / (2a)
    # (closed form)
    a, b = 1.4, 0.3
    system = compile_model(f"a = {a}\nb = {b}\nx[n+1] = 1 - a*x^2 + y\ny[n+1] = b*x\nx[0] = 0.1\n")
    cycle = find_map_cycle(system, None, 1)
    roots = [(-(1 - b) + s * math.sqrt((1 - b) ** 2 + 4 * a)) / (2 * a) for s in (1, -1)]
    assert min(abs(cycle.points[0, 0] - x) for x in roots) < 1e-12
    assert cycle.points[1, 0] == pytest.approx(b * cycle.points[0, 0])


def test_wrong_kind_and_cancel():
    with pytest.raises(ValueError, match="map"):
        find_cycle(compile_model(LOGISTIC))
    with pytest.raises(ValueError, match="flow"):
        find_map_cycle(compile_model(CIRCLE), period_k=2)
    with pytest.raises(ValueError, match="no forcing period"):
        find_cycle(compile_model(CIRCLE), forcing_period=1.0)
    token = CancelToken()
    token.cancel()
    with pytest.raises(Cancelled):
        find_cycle(compile_model(CIRCLE), cancel=token)


def test_explicit_section_and_progress():
    # the cycle r = 1 of the circle system crosses the section y = 0 upwards at (1, 0) (closed form)
    seen = []
    cycle = find_cycle(compile_model(CIRCLE), guess={"x": 0.9, "y": 0.0}, period_guess=6.0,
                       section=([0.0, 1.0], [0.0, 0.0]), progress=seen.append)
    assert cycle.state["x"] == pytest.approx(1.0, abs=1e-9) and abs(cycle.state["y"]) < 1e-12
    assert seen == sorted(seen) and seen[-1] == pytest.approx(1.0)
