"""Equilibria and fixed points against closed forms and published values."""

import math
import os
import time

import numpy as np
import pytest

from orbitdesk.analyses.equilibria import classify, find_equilibria
from orbitdesk.engine.progress import CancelToken, Cancelled
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.samples.models import BRUSSELATOR, LOGISTIC_REF, LORENZ_REF, model

LORENZ = model(LORENZ_REF, initial={'y(0)': None, 'z(0)': None})
LOGISTIC = model(LOGISTIC_REF, r=2.5)


def nearest(eqs, point):
    return min(eqs, key=lambda e: np.linalg.norm(e.vector - np.asarray(point, float)))


def test_lorenz_equilibria_and_eigenvalues():
    # Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., sec. 9.2: origin and
    # C± = (±sqrt(beta(r-1)), ±sqrt(beta(r-1)), r-1) (closed form).
    system = compile_model(LORENZ)
    eqs = find_equilibria(system)
    sigma, r, beta = 10.0, 28.0, 8.0 / 3.0
    c = math.sqrt(beta * (r - 1))
    assert len(eqs) == 3
    for point in ([0, 0, 0], [c, c, r - 1], [-c, -c, r - 1]):
        assert np.allclose(nearest(eqs, point).vector, point, atol=1e-12)
    origin = nearest(eqs, [0, 0, 0])
    # closed form at the origin: -beta and (-(sigma+1) ± sqrt((sigma+1)^2 + 4 sigma (r-1)))/2
    disc = math.sqrt((sigma + 1) ** 2 + 4 * sigma * (r - 1))
    expected = sorted([(-(sigma + 1) + disc) / 2, -beta, (-(sigma + 1) - disc) / 2], reverse=True)
    assert np.allclose(origin.eigenvalues.real, expected, rtol=1e-12)
    assert np.allclose(origin.eigenvalues.imag, 0)
    assert expected[0] == pytest.approx(11.83, abs=0.005) and expected[2] == pytest.approx(-22.83, abs=0.005)
    assert origin.kind == "saddle" and origin.stable is False
    assert (origin.n_unstable, origin.n_stable) == (1, 2)
    for sign in (1, -1):
        eq = nearest(eqs, [sign * c, sign * c, r - 1])
        # values from memory (Strogatz ch. 9 exercises): -13.85 and 0.094 ± 10.19i
        lam = eq.eigenvalues
        assert lam[0].real == pytest.approx(0.094, abs=5e-4) and abs(lam[0].imag) == pytest.approx(10.19, abs=5e-3)
        assert lam[2].real == pytest.approx(-13.85, abs=5e-3) and lam[2].imag == 0
        assert eq.kind == "saddle-focus" and eq.stable is False
        assert (eq.n_unstable, eq.n_stable, eq.n_center) == (2, 1, 0)
        assert eq.method == "exact+newton"
    # eigenvalues sorted by real part, descending
    for eq in eqs:
        assert list(eq.eigenvalues.real) == sorted(eq.eigenvalues.real, reverse=True)


@pytest.mark.parametrize("b, kind, stable", [(1.9, "stable focus", True), (2.1, "unstable focus", False)])
def test_brusselator_hopf_flip(b, kind, stable):
    # Brusselator: the only equilibrium is (a, b/a); its Jacobian [[b-1, a^2], [-b, -a^2]] has trace
    # b - 1 - a^2, so it loses stability at b = 1 + a^2 (closed form; Strogatz, sec. 8.3 exercises).
    system = compile_model(BRUSSELATOR)
    a = 1.0
    eqs = find_equilibria(system, system.param_vector({"b": b}))
    assert len(eqs) == 1
    eq = eqs[0]
    assert eq.vector == pytest.approx([a, b / a], abs=1e-12)
    assert eq.eigenvalues.real == pytest.approx([(b - 1 - a * a) / 2] * 2, abs=1e-12)
    assert eq.kind == kind and eq.stable is stable


def test_logistic_fixed_points_and_multipliers():
    # logistic map x -> r x (1-x): fixed points 0 and 1 - 1/r with multipliers r and 2 - r (closed form)
    system = compile_model(LOGISTIC)
    r = 2.5
    eqs = find_equilibria(system)
    assert len(eqs) == 2
    zero, other = nearest(eqs, [0]), nearest(eqs, [1 - 1 / r])
    assert zero.vector[0] == 0 and other.vector[0] == pytest.approx(1 - 1 / r, abs=1e-14)
    assert zero.eigenvalues[0] == pytest.approx(r) and other.eigenvalues[0] == pytest.approx(2 - r)
    assert zero.kind == "unstable fixed point" and zero.stable is False
    assert other.kind == "stable fixed point" and other.stable is True
    d = other.to_dict()
    assert d["multipliers"] == d["eigenvalues"] == [{"re": pytest.approx(2 - r), "im": 0.0}]


def test_logistic_flip_and_fold_warnings():
    # at r = 3 the nonzero fixed point has multiplier 2 - r = -1 (flip); at r = 1 the origin has
    # multiplier r = 1 (fold) (closed forms)
    system = compile_model(LOGISTIC)
    eqs = find_equilibria(system, system.param_vector({"r": 3.0}))
    eq = nearest(eqs, [2 / 3])
    assert eq.kind == "non-hyperbolic fixed point" and eq.stable is None
    assert "flip (multiplier near -1)" in eq.warnings
    eqs = find_equilibria(system, system.param_vector({"r": 1.0}))
    assert len(eqs) == 1  # 0 and 1 - 1/r coincide
    assert "fold (multiplier near +1)" in eqs[0].warnings and eqs[0].stable is None


def test_rotation_map_is_an_elliptic_fixed_point_not_a_bifurcation():
    # a rotation by 1 radian: multipliers exp(±i) on the unit circle (closed form); it keeps areas
    # (determinant cos^2 + sin^2 = 1), so the point is elliptic - neutral - for every parameter, not a
    # Neimark-Sacker point
    system = compile_model("c = cos(1)\ns = sin(1)\nx[n+1] = c*x - s*y\ny[n+1] = s*x + c*y\n")
    eq = find_equilibria(system)[0]
    assert np.sort_complex(eq.eigenvalues) == pytest.approx(np.sort_complex([np.exp(-1j), np.exp(1j)]))
    assert not any("Neimark-Sacker" in w for w in eq.warnings) and eq.stable is None
    assert eq.kind == "elliptic fixed point (area-preserving map)"
    assert eq.stability == "neutral (area-preserving map)"


@pytest.mark.parametrize("exact", [True, False])
def test_equilibria_a_millionth_apart_stay_two(exact):
    # x' = (x-1)(x-1-d), y' = -y: equilibria at x = 1 and x = 1 + d (closed form), here d = 1e-6
    system = compile_model("d = 1e-6\nx' = (x - 1)*(x - 1 - d)\ny' = -y\n")
    eqs = find_equilibria(system, exact=exact)
    xs = sorted(e.vector[0] for e in eqs)
    assert len(xs) == 2
    assert xs[0] == pytest.approx(1.0, abs=1e-13) and xs[1] == pytest.approx(1.000001, abs=1e-13)
    lower, upper = sorted(eqs, key=lambda e: e.vector[0])
    # f'(1) = -d, f'(1+d) = +d: a stable node and a saddle
    assert lower.kind == "stable node" and upper.kind == "saddle"
    assert {e.method for e in eqs} == ({"exact+newton"} if exact else {"newton"})


@pytest.mark.parametrize("text", ["x' = -x^3\n", "x' = x^2\n"])
@pytest.mark.parametrize("exact", [True, False])
def test_non_hyperbolic_point_has_no_stability(text, exact):
    # x' = -x^3 (stable, but not by linearisation) and x' = x^2 (semi-stable): f'(0) = 0
    eqs = find_equilibria(compile_model(text), exact=exact)
    assert len(eqs) == 1
    eq = eqs[0]
    assert abs(eq.vector[0]) < 1e-12
    assert eq.kind == "non-hyperbolic" and eq.stable is None and eq.n_center == 1


def test_non_hyperbolic_but_unstable_direction_decides():
    # x' = x, y' = -y^3: eigenvalues 1 and 0; the unstable direction already makes it unstable
    eq = find_equilibria(compile_model("x' = x\ny' = -y^3\n"))[0]
    assert eq.kind == "non-hyperbolic" and eq.stable is False
    assert (eq.n_unstable, eq.n_center) == (1, 1)


def test_linear_centre_and_star_node():
    # x' = y, y' = -x: eigenvalues ±i (closed form); x' = -x, y' = -y: a star (degenerate) node
    # the harmonic oscillator keeps areas: a true centre, worded as such; x' = y, y' = -x - x^2 y has the same
    # linearisation but loses area off the axis (a weak focus): the nonlinear terms decide, and it says so
    centre = find_equilibria(compile_model("x' = y\ny' = -x\n"))[0]
    assert centre.kind == "centre (conservative flow)" and centre.stable is None
    assert centre.stability == "neutral (conservative flow)"
    assert centre.eigenvalues == pytest.approx([1j, -1j])
    weak = find_equilibria(compile_model("x' = y\ny' = -x - x^2*y\n"))[0]
    assert weak.kind == "centre (linear)" and weak.stability == "undecided"
    assert any("weak focus" in w for w in weak.warnings)
    star = find_equilibria(compile_model("x' = -x\ny' = -y\n"))[0]
    assert star.kind == "stable node" and star.stable is True
    # a degenerate node with a single eigenvector: x' = -x + y, y' = -y
    jordan = classify(np.array([[-1.0, 1.0], [0.0, -1.0]]))
    assert jordan[0] == "stable node" and jordan[1] is True


def test_pendulum_exact_and_box():
    # x' = v, v' = -sin x: equilibria (k pi, 0): centres for even k, saddles for odd k (closed form)
    system = compile_model("x' = v\nv' = -sin(x)\n")
    eqs = find_equilibria(system, box={"x": (5.0, 13.0), "v": (-1.0, 1.0)}, exact=False)
    assert sorted(round(e.vector[0] / math.pi, 9) for e in eqs) == [2.0, 3.0, 4.0]
    for e in eqs:
        assert e.kind == ("saddle" if round(e.vector[0] / math.pi) % 2 else "centre (conservative flow)")


def test_exact_timeout_falls_back_to_newton():
    system = compile_model(LORENZ)
    eqs = find_equilibria(system, exact_timeout=1e-4)
    assert any("did not finish" in note for note in eqs.notes)
    assert len(eqs) == 3 and {e.method for e in eqs} == {"newton"}


def test_time_dependent_flow_is_refused():
    system = compile_model("x' = -x + sin(t)\n")
    with pytest.raises(ValueError, match="depend on the time t"):
        find_equilibria(system)


def test_nonsmooth_model_warns_about_kinks():
    # x' = 1 - |x|: equilibria ±1 (closed form)
    eqs = find_equilibria(compile_model("x' = 1 - abs(x)\n"))
    assert sorted(e.vector[0] for e in eqs) == pytest.approx([-1.0, 1.0])
    assert all(any("Jacobian is undefined at the kinks" in w for w in e.warnings) for e in eqs)


def test_cancel_and_progress():
    system = compile_model(BRUSSELATOR)
    token = CancelToken()
    token.cancel()
    with pytest.raises(Cancelled):
        find_equilibria(system, cancel=token)
    seen = []
    find_equilibria(system, progress=seen.append, starts=20)
    assert seen and seen == sorted(seen) and seen[-1] == pytest.approx(1.0)


def test_to_dict_contract():
    eq = find_equilibria(compile_model(BRUSSELATOR))[0]
    d = eq.to_dict()
    assert set(d) == {"state", "eigenvalues", "kind", "stable", "stability", "stable_dim", "unstable_dim", "method",
                      "warnings"}
    assert d["stability"] == "undecided"  # the Brusselator at its default a = 1, b = 2: the Hopf point b = 1 + a^2
    assert d["state"] == {"x": pytest.approx(1.0), "y": pytest.approx(2.0)}
    assert all(set(v) == {"re", "im"} for v in d["eigenvalues"])


def test_line_of_equilibria_is_reported_as_such():
    # x' = x y, y' = -y: every point of the line y = 0 is an equilibrium (closed form)
    eqs = find_equilibria(compile_model("x' = x*y\ny' = -y\n"))
    assert 1 <= len(eqs) <= 5
    assert all(e.vector[1] == 0 and e.kind == "non-hyperbolic" for e in eqs)
    assert any("curve or surface" in note for note in eqs.notes)
    assert len({round(e.vector[0], 6) for e in eqs}) == len(eqs)


def test_isolated_equilibria_sympy_cannot_eliminate_are_no_curve():
    # Exothermic stirred tank (Uppal, Ray and Poore 1974, the stirred_tank sample) at stay = 0.05, heat = 6:
    # sympy answers with c in terms of T and T as a set, yet the equilibria are three isolated points: on
    # each, c = stay e^T / (1 + stay e^T) and T = heat c (closed form from the two equations)
    eqs = find_equilibria(compile_model("stay = 0.05\nheat = 6\nc' = -c + stay*(1 - c)*exp(T)\n"
                                        "T' = -T + heat*stay*(1 - c)*exp(T)\nc(0) = 0\nT(0) = 0\n"))
    assert not any("curve or surface" in note for note in eqs.notes), eqs.notes
    assert len(eqs) == 3
    for e in eqs:
        c, T = e.vector
        assert T == pytest.approx(6 * c, abs=1e-9)
        assert c == pytest.approx(0.05 * math.exp(T) / (1 + 0.05 * math.exp(T)), abs=1e-9)


def test_search_from_a_worker_thread():
    # the app runs analyses on worker threads; the exact solve's child process must work from there
    import threading

    out = {}
    thread = threading.Thread(target=lambda: out.setdefault("eqs", find_equilibria(compile_model(LORENZ))))
    thread.start()
    thread.join(60)
    assert len(out["eqs"]) == 3 and {e.method for e in out["eqs"]} == {"exact+newton"}


def test_forcing_switched_off_leaves_the_unforced_equilibria():
    # two-well Duffing x'' + delta x' - x + x^3 = gamma cos(omega t) with gamma = 0: rest points
    # x = 0 (saddle) and x = ±1 (closed form: x - x^3 = 0; Jacobian [[0, 1], [1 - 3x^2, -delta]])
    system = compile_model("delta = 0.3\ngamma = 0\nomega = 1.2\nx'' = -delta*x' + x - x^3 + gamma*cos(omega*t)\n")
    found = sorted(find_equilibria(system), key=lambda e: e.vector[0])
    assert [round(e.vector[0], 12) for e in found] == [-1.0, 0.0, 1.0]
    assert [e.kind for e in found] == ["stable focus", "saddle", "stable focus"]
    with pytest.raises(ValueError, match="depend on the time"):
        find_equilibria(system, p=system.param_vector({"gamma": 0.1}))


def test_the_exact_solve_limit_counts_the_childs_own_processor_time():
    # the limit is the solve's computing time, so a busy machine gives it the same work as an idle one:
    # the reading matches the process's own clock (os.times, the reference) to the clock tick
    from orbitdesk.analyses.equilibria import _cpu_seconds

    deadline = time.process_time() + 0.3
    while time.process_time() < deadline:
        pass
    own = os.times()
    read = _cpu_seconds(os.getpid())
    assert read is not None and read == pytest.approx(own.user + own.system, abs=0.05)
    assert _cpu_seconds(2**22 + 12345) is None  # no such process: unreadable, the wall clock serves
