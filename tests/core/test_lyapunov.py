"""Lyapunov exponents: published spectra, closed forms, the two-trajectory cross-check, edge cases."""

import math

import numpy as np
import pytest
from scipy.linalg import expm

from orbitdesk.analyses.lyapunov import (QR, TWO_TRAJECTORY, kaplan_yorke_dimension, largest_lyapunov_two_trajectory,
                                     lyapunov_spectrum)
from orbitdesk.engine.progress import CancelToken
from orbitdesk.samples.models import LORENZ
from orbitdesk.system.compiled_system import compile_model

pytestmark = pytest.mark.fallback  # published values: run with the compiler and without

HENON = "x[n+1] = 1 - a*x^2 + y\ny[n+1] = b*x\na = 1.4\nb = 0.3\nx[0] = 0.1\ny[0] = 0.1\n"
# r = 4: start away from the dyadic points, whose float orbits fall onto 0 (0.5 -> 1 -> 0).
LOGISTIC = "x[n+1] = r*x*(1 - x)\nr = 4\nx[0] = 0.1234567\n"


@pytest.fixture(scope="module")
def lorenz_spectrum():
    return lyapunov_spectrum(compile_model(LORENZ), t_end=1020, transient=20)


# ---------------------------------------------------------------- published values
def test_lorenz_spectrum_sprott(lorenz_spectrum):
    # Sprott, Chaos and Time-Series Analysis (2003), table of exponents: 0.9056, 0, -14.5723.
    result = lorenz_spectrum
    assert result.ok and result.method == QR
    l1, l2, l3 = result.exponents
    assert l1 == pytest.approx(0.906, abs=0.05)
    assert abs(l2) < 0.05
    assert l3 == pytest.approx(-14.57, abs=0.1)
    # closed form: the trace of the Jacobian is -(sigma + 1 + beta) everywhere
    assert result.exponents.sum() == pytest.approx(-(10 + 1 + 8 / 3), abs=1e-3)


def test_lorenz_kaplan_yorke_dimension_sprott(lorenz_spectrum):
    # Sprott (2003): D_KY = 2.062 for the Lorenz attractor.
    assert lorenz_spectrum.kaplan_yorke_dimension == pytest.approx(2.06, abs=0.01)


def test_lorenz_running_estimates_converge(lorenz_spectrum):
    result = lorenz_spectrum
    assert result.running.shape[1] == 3 and result.running.shape[0] == result.times.size > 100
    assert np.allclose(result.running[-1], result.exponents)
    assert np.all(np.diff(result.times) > 0) and result.times[-1] == pytest.approx(1020)
    late = result.running[result.times > 520]
    assert np.ptp(late[:, 0]) < 0.1  # the largest estimate has settled


def test_two_trajectory_agrees_with_qr_for_lorenz(lorenz_spectrum):
    # Benettin et al. (1980): the two methods estimate the same largest exponent.
    two = largest_lyapunov_two_trajectory(compile_model(LORENZ), t_end=1020, transient=20)
    assert two.ok and two.method == TWO_TRAJECTORY and two.exponents.size == 1
    assert two.kaplan_yorke_dimension is None
    assert two.largest == pytest.approx(lorenz_spectrum.largest, abs=0.1)


def test_henon_spectrum_sprott():
    # Sprott (2003): 0.41922, -1.62319 for a = 1.4, b = 0.3.
    result = lyapunov_spectrum(compile_model(HENON), steps=50000, transient=500)
    assert result.ok
    assert result.exponents[0] == pytest.approx(0.419, abs=0.01)
    assert result.exponents[1] == pytest.approx(-1.623, abs=0.01)
    # closed form: det J = -b at every point, so the sum is ln b
    assert result.exponents.sum() == pytest.approx(math.log(0.3), abs=1e-10)
    assert result.averaged_over == 49500
    # Sprott (2003): D_KY = 1.258
    assert result.kaplan_yorke_dimension == pytest.approx(1.258, abs=0.01)


def test_henon_two_trajectory():
    # Sprott, Chaos and Time-Series Analysis (2003): 0.41922 for a = 1.4, b = 0.3 (value from memory)
    two = largest_lyapunov_two_trajectory(compile_model(HENON), steps=50000, transient=500)
    assert two.ok and two.method == TWO_TRAJECTORY
    assert two.largest == pytest.approx(0.419, abs=0.01)
    assert two.averaged_over == 49500
    assert two.running.shape[1] == 1 and two.running[-1, 0] == pytest.approx(two.largest, abs=1e-12)


def test_logistic_map_at_four_two_trajectory_is_ln2():
    # closed form: x = sin^2(pi theta) conjugates r = 4 to the doubling map, lambda = ln 2.
    two = largest_lyapunov_two_trajectory(compile_model(LOGISTIC), steps=100000, transient=100)
    assert two.ok
    assert two.largest == pytest.approx(math.log(2), abs=1e-2)
    # renormalised every 5 steps the separation still stays small: the same exponent
    five = largest_lyapunov_two_trajectory(compile_model(LOGISTIC), steps=100000, transient=100, d0=1e-12,
                                           renorm_every=5)
    assert five.largest == pytest.approx(math.log(2), abs=2e-2) and five.averaged_over == 99900


def test_two_trajectory_map_pair_in_the_compiled_loop_matches_plain_python():
    # the one map loop, compiled and as plain Python: the same arithmetic, the same estimate
    from orbitdesk.engine import compiled, drivers

    system = compile_model(HENON)
    p, u = system.param_values, system.initial
    plain = drivers.map_pair(compiled.python_engine(system), 0, 3000, 100, u, [0.6, 0.8], p, 1e-8)
    fast = drivers.map_pair(compiled.engine_for(system, wait=True), 0, 3000, 100, u, [0.6, 0.8], p, 1e-8)
    assert plain.code == fast.code == 0 and plain.averaged == fast.averaged == 2900
    assert fast.sums[0] == pytest.approx(plain.sums[0], rel=1e-9)
    assert np.allclose(fast.rows, plain.rows, rtol=1e-9)


def test_logistic_map_at_four_is_ln2():
    # closed form: x = sin^2(pi theta) conjugates r = 4 to the doubling map, lambda = ln 2.
    result = lyapunov_spectrum(compile_model(LOGISTIC), steps=50000, transient=100)
    assert result.ok and not result.warnings
    assert result.exponents[0] == pytest.approx(math.log(2), abs=1e-2)


# ---------------------------------------------------------------- closed forms
def test_linear_flow_exponents_are_real_parts_of_eigenvalues():
    system = compile_model("x' = -x + 2*y\ny' = -3*y + 5*z\nz' = 0.5*z\nx(0) = 1\ny(0) = 1\nz(0) = 1\n")
    result = lyapunov_spectrum(system, t_end=60, transient=5)
    assert np.allclose(result.exponents, [0.5, -1, -3], atol=0.02)
    assert result.exponents.sum() == pytest.approx(-3.5, abs=1e-3)  # trace, up to the RK4 step's error


def test_cat_map_exponents_closed_form():
    # Arnold's cat map (mod 1 keeps the orbit bounded): lambda = +-ln((3 + sqrt 5) / 2), from the
    # Jacobian [[2, 1], [1, 1]] that holds everywhere except on the lines where mod jumps.
    system = compile_model("x[n+1] = mod(2*x + y, 1)\ny[n+1] = mod(x + y, 1)\nx[0] = 0.1\ny[0] = 0.3\n")
    result = lyapunov_spectrum(system, steps=200)
    assert result.method == QR and "mod()" in result.warnings[0] and "almost everywhere" in result.warnings[0]
    golden = math.log((3 + math.sqrt(5)) / 2)
    assert np.allclose(result.exponents, [golden, -golden], atol=0.005)  # the start direction fades as 1/N
    two = largest_lyapunov_two_trajectory(system, steps=200)
    assert two.largest == pytest.approx(golden, abs=0.05)


def test_lozi_map_full_spectrum_sprott():
    # Lozi map x' = 1 - a|x| + y, y' = b x with a = 1.7, b = 0.5: Sprott, Chaos and Time-Series
    # Analysis (2003): 0.4703, -1.1634 (values from memory); the sum is ln b (|det J| = b everywhere).
    system = compile_model("x[n+1] = 1 - a*abs(x) + y\ny[n+1] = b*x\na = 1.7\nb = 0.5\nx[0] = 0.1\ny[0] = 0.1\n")
    result = lyapunov_spectrum(system, steps=100000, transient=1000)
    assert result.ok and result.method == QR
    assert result.exponents[0] == pytest.approx(0.470, abs=0.01)
    assert result.exponents[1] == pytest.approx(-1.163, abs=0.01)
    assert result.exponents.sum() == pytest.approx(math.log(0.5), abs=1e-9)


def test_forced_linear_flow_time_enters_the_jacobian():
    # x' = (-1 + 2 cos t) x: lambda = mean of -1 + 2 cos t = -1 (closed form); t_end a whole number of periods.
    system = compile_model("x' = (-1 + 2*cos(t))*x\nx(0) = 1\n")
    result = lyapunov_spectrum(system, t_end=2 * math.pi * 44, transient=2 * math.pi * 4)
    assert result.exponents[0] == pytest.approx(-1.0, abs=1e-4)


def test_kaplan_yorke_closed_forms():
    assert kaplan_yorke_dimension([0.5, 0.0, -1.0]) == pytest.approx(2.5)
    assert kaplan_yorke_dimension([-1.0, -2.0]) == 0.0
    assert kaplan_yorke_dimension([1.0, 0.5]) == 2.0
    assert kaplan_yorke_dimension([-2.0, 1.0]) == pytest.approx(1.5)  # sorted first


# ---------------------------------------------------------------- the tangent kernel
def test_tangent_kernel_gives_the_matrix_exponential():
    # Phi' = A Phi, Phi(0) = I has the closed form Phi(t) = expm(A t) (scipy.linalg.expm)
    from orbitdesk.engine import compiled, drivers

    system = compile_model("x' = -x + 2*y\ny' = 3*x - 4*y\nx(0) = 1\ny(0) = 0\n")
    z0 = np.concatenate([system.initial, np.eye(2).ravel()])
    engine = compiled.engine_for(system)
    out = drivers.flow_run(engine, "dop853", 0.0, 1.5, z0, system.param_values, 1e-11, 1e-12, grid=[1.5], which=2)
    a = np.array([[-1.0, 2.0], [3.0, -4.0]])
    assert out.code == 0 and np.allclose(out.states[2:, -1].reshape(2, 2), expm(1.5 * a), atol=1e-9)


def test_tangent_kernel_of_a_map_is_the_jacobian_henon():
    from orbitdesk.engine import compiled

    system = compile_model(HENON)
    engine = compiled.engine_for(system)
    z = np.array([0.2, -0.1, 1.0, 0.0, 0.0, 1.0])
    out = np.empty(6)
    engine.loops.evaluate(engine.f, 2, 0.0, z, np.asarray(system.param_values, dtype=float), out)
    assert np.allclose(out[:2], [1 - 1.4 * 0.04 - 0.1, 0.3 * 0.2])
    assert np.allclose(out[2:].reshape(2, 2), [[-2 * 1.4 * 0.2, 1.0], [0.3, 0.0]])


# ---------------------------------------------------------------- edge cases
def test_nonsmooth_flow_uses_the_almost_everywhere_jacobian_with_a_note():
    system = compile_model("x' = y\ny' = -0.2*y - x + 0.5*sign(x) + 0.3*cos(1.1*t)\nx(0) = 0.1\n")
    result = lyapunov_spectrum(system, t_end=200)
    assert result.method == QR and result.exponents.size == 2
    assert "sign()" in result.warnings[0] and "almost everywhere" in result.warnings[0]
    # closed form: the trace of the almost-everywhere Jacobian is -0.2
    assert result.exponents.sum() == pytest.approx(-0.2, abs=1e-3)


def test_logistic_orbit_through_the_critical_point():
    system = compile_model(LOGISTIC)
    result = lyapunov_spectrum(system, u0=[0.5], steps=100, transient=0)
    assert result.status == "undefined" and "critical point" in result.message
    collapsed = lyapunov_spectrum(system, u0=[0.5], steps=100, transient=10)  # 0.5 -> 1 -> 0, then stays
    assert "fixed point" in collapsed.warnings[0]
    assert collapsed.exponents[0] == pytest.approx(math.log(4))  # f'(0) = r


def test_blow_up_is_reported_not_raised():
    result = lyapunov_spectrum(compile_model("x' = x^2\nx(0) = 1\n"), t_end=5, transient=0, dt=0.01)
    assert result.status == "diverged" and result.message


def test_cancel_returns_a_cancelled_result():
    token = CancelToken()
    token.cancel()
    result = lyapunov_spectrum(compile_model(HENON), steps=100000, transient=0, cancel=token)
    assert result.status == "cancelled"


def test_refuses_a_run_shorter_than_the_transient():
    with pytest.raises(ValueError, match="transient"):
        lyapunov_spectrum(compile_model(LORENZ), t_end=10, transient=20)
    with pytest.raises(ValueError, match="transient"):
        lyapunov_spectrum(compile_model(HENON), steps=10, transient=10)


def test_escaping_map_orbit_is_reported_not_raised():
    system = compile_model("x[n+1] = x^2 + 3\nx[0] = 2\n")
    for result in (lyapunov_spectrum(system, steps=100, transient=0),
                   lyapunov_spectrum(system, steps=100, transient=50),
                   largest_lyapunov_two_trajectory(system, steps=100, transient=0)):
        assert result.status == "diverged" and "infinity" in result.message


def test_forced_duffing_sum_is_minus_delta():
    # x'' + delta x' - x + x^3 = gamma cos(omega t): trace of the Jacobian is -delta everywhere (closed form);
    # gamma = 0.5 is in the chaotic range, so the largest exponent is positive.
    system = compile_model("x'' = -delta*x' + x - x^3 + gamma*cos(omega*t)\n"
                           "delta = 0.3\ngamma = 0.5\nomega = 1.2\nx(0) = 1\nx'(0) = 0\n")
    result = lyapunov_spectrum(system, t_end=1000, transient=100)
    assert result.exponents.sum() == pytest.approx(-0.3, abs=1e-3)
    assert result.exponents[0] > 0.05


# ---------------------------------------------------------------- stopping on convergence
def test_lorenz_converges_to_sprott_within_its_stated_uncertainty():
    # Sprott (2003): 0.9056, 0, -14.5723; the run stops when each standard error is within 1% + 0.002
    result = lyapunov_spectrum(compile_model(LORENZ), converge=True)
    assert result.ok and result.converged is True and result.blocks >= 10
    assert np.all(result.uncertainty <= 0.01 * np.abs(result.exponents) + 0.002 + 1e-12)
    for value, published in zip(result.exponents, (0.9056, 0.0, -14.5723)):
        assert abs(value - published) <= 0.02 * abs(published) + 0.01
    assert result.largest == pytest.approx(0.9056, abs=4 * result.uncertainty[0] + 0.005)
    assert result.running[-1] == pytest.approx(result.exponents)


def test_henon_converges_to_the_published_exponents():
    # Henon map a = 1.4, b = 0.3: 0.419 and -1.62 (Sprott 2003); their sum is ln b exactly (closed form)
    result = lyapunov_spectrum(compile_model(HENON), converge=True)
    assert result.converged is True
    assert result.exponents[0] == pytest.approx(0.419, abs=max(4 * result.uncertainty[0], 0.006))
    assert result.exponents[1] == pytest.approx(-1.62, abs=0.01)
    assert result.exponents.sum() == pytest.approx(math.log(0.3), abs=1e-9)


def test_a_cap_before_convergence_is_said():
    result = lyapunov_spectrum(compile_model(LORENZ), converge=True, rtol=1e-6, atol=1e-6, cap=300.0)
    assert result.converged is False
    assert result.averaged_over == pytest.approx(300.0)
    assert any("cap of 300" in w and "--cap" in w for w in result.warnings)


def test_forced_flow_states_its_kaplan_yorke_convention():
    # the forced Duffing oscillator (Ueda's chaotic regime x'' + 0.05 x' + x^3 = 7.5 cos t)
    system = compile_model("x'' = -0.05*x' - x^3 + 7.5*cos(t)\nx(0) = 3\n")
    result = lyapunov_spectrum(system, t_end=600, transient=100)
    assert result.ok
    note = [w for w in result.warnings if "forced flow" in w]
    assert note and "direction of time" in note[0]
    extended = kaplan_yorke_dimension(np.append(result.exponents, 0.0))
    assert f"{extended:.4g}" in note[0]
