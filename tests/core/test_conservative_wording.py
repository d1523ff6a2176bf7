"""Conservative systems are worded the same by equilibria, cycles and continuation: their centres are
neutral, never undecided, at a bifurcation or Neimark-Sacker.

References (closed forms): x'' = -x - x^3 keeps H = v^2/2 + x^2/2 + x^4/4, a strict minimum at the
origin, so the origin is a centre surrounded by closed orbits; the frictionless pendulum x'' = -g sin x
keeps H = v^2/2 - g cos x: a centre at x = 0 (eigenvalues +-i sqrt g) and a saddle at x = pi (+-sqrt g)
(Strogatz, Nonlinear Dynamics and Chaos, sec. 6.5 and 6.7). An area-preserving map: the Hénon map with
b = -1 has Jacobian determinant +1; its fixed point at a = 0.5 has multipliers on the unit circle.
"""

import json
import math

import numpy as np
import pytest

from orbitdesk.analyses.conservative import CENTRE_FLOW, NEUTRAL_FLOW, NEUTRAL_MAP, structure
from orbitdesk.analyses.continuation.branches import steady_branches
from orbitdesk.analyses.continuation.results import Branch
from orbitdesk.analyses.cycles import find_cycle
from orbitdesk.analyses.equilibria import find_equilibria
from orbitdesk.system.compiled_system import compile_model

DUFFING_CONSERVATIVE = "k = 1\nx'' = -k*x - x^3\nx(0) = 1\n"
PENDULUM = "g = 2\nc = 0\nx' = v\nv' = -g*sin(x) + c\nx(0) = 1\nv(0) = 0\n"
WORDS_NEVER = ("undecided", "Neimark-Sacker", "at a bifurcation", "weak focus")


def _clean(texts):
    return not any(w in t for t in texts for w in WORDS_NEVER)


def test_centre_of_the_conservative_duffing_is_neutral_like_its_cycles():
    system = compile_model(DUFFING_CONSERVATIVE)
    (origin,) = find_equilibria(system)
    assert origin.vector == pytest.approx([0.0, 0.0], abs=1e-12)
    assert np.abs(origin.eigenvalues.imag) == pytest.approx([1.0, 1.0])  # +-i (closed form)
    assert origin.kind == CENTRE_FLOW and origin.stability == NEUTRAL_FLOW
    assert _clean(origin.warnings + [origin.kind, origin.stability])
    assert origin.to_dict()["stability"] == NEUTRAL_FLOW
    cycle = find_cycle(system, guess=[1.0, 0.0])
    assert cycle.stability == origin.stability  # the same words as the cycle around it


def test_pendulum_centre_and_saddle():
    system = compile_model(PENDULUM)
    points = sorted(find_equilibria(system, box={"x": (-1.0, 4.0), "v": (-1.0, 1.0)}), key=lambda e: e.vector[0])
    centre, saddle = points[0], points[-1]
    assert centre.vector[0] == pytest.approx(0.0, abs=1e-12) and saddle.vector[0] == pytest.approx(math.pi)
    assert sorted(np.abs(centre.eigenvalues.imag)) == pytest.approx([math.sqrt(2)] * 2)
    assert centre.kind == CENTRE_FLOW and centre.stability == NEUTRAL_FLOW and _clean(centre.warnings)
    assert saddle.kind == "saddle" and saddle.stability == "unstable"
    assert sorted(saddle.eigenvalues.real) == pytest.approx([-math.sqrt(2), math.sqrt(2)])


def test_continuation_of_conservative_centres_words_them_neutral():
    system = compile_model(PENDULUM)
    branches = steady_branches(system, "c", -0.5, 0.5)
    words = {b.stability(i) for b in branches.branches for i in range(b.size)}
    assert words == {NEUTRAL_FLOW, "unstable"}  # centres (x near 0) and saddles (x near pi)
    assert not any(s.type == "hopf" for b in branches.branches for s in b.special)
    text = json.dumps([b.to_dict() for b in branches.branches])
    assert _clean([text])
    centre = next(b for b in branches.branches if NEUTRAL_FLOW in {b.stability(i) for i in range(b.size)})
    # the centres sit where g sin x = c (closed form), and the word survives the project file
    assert np.sin(centre.points[0]) * 2 == pytest.approx(centre.values, abs=1e-8)
    again = Branch.from_saved(json.loads(json.dumps(centre.to_saved())))
    assert again.stability(0) == NEUTRAL_FLOW


def test_area_preserving_map_fixed_point_is_elliptic_not_neimark_sacker():
    # Hénon map x -> 1 - a x^2 + y, y -> b x with b = -1: det = -b = 1. Fixed point x* = (-(1 - b) +
    # sqrt((1 - b)^2 + 4a)) / (2a); the multipliers satisfy mu^2 + 2 a x* mu + 1 = 0: on the unit circle
    # when |a x*| < 1 (a = 0.5: x* = sqrt(6) - 2 = 0.449, a x* = 0.22)
    system = compile_model("a = 0.5\nb = -1\nx[n+1] = 1 - a*x^2 + y\ny[n+1] = b*x\nx[0] = 0.1\ny[0] = 0\n")
    assert structure(system) == "map+1"
    points = find_equilibria(system)
    x_star = (-2 + math.sqrt(4 + 2)) / 1.0
    elliptic = [e for e in points if e.vector[0] == pytest.approx(x_star)]
    assert elliptic and np.abs(elliptic[0].eigenvalues) == pytest.approx([1.0, 1.0])
    assert elliptic[0].stability == NEUTRAL_MAP and _clean(elliptic[0].warnings + [elliptic[0].kind])


def test_dissipative_systems_keep_their_words():
    damped = compile_model("x'' = -x - 0.1*x'\nx(0) = 1\n")
    assert structure(damped) == ""
    (origin,) = find_equilibria(damped)
    assert origin.stability == "stable" and origin.kind == "stable focus"


# Lotka-Volterra predator and prey, x' = a x - b x y, y' = -c y + d x y: not divergence-free (div f =
# a - b y - c + d x), but f / (x y) is, so V = d x - c ln x + b y - a ln y is kept along every orbit
# (Volterra 1926; closed form). The interior point (c/d, a/b) has eigenvalues +-i sqrt(a c) and is a
# centre surrounded by the closed level curves of V (Hirsch, Smale & Devaney, Differential Equations,
# Dynamical Systems and an Introduction to Chaos, ch. 11; from memory).
LOTKA_VOLTERRA = "a = 1\nb = 0.5\nc = 0.75\nd = 0.25\nx' = a*x - b*x*y\ny' = -c*y + d*x*y\nx(0) = 4\ny(0) = 1\n"


def test_lotka_volterra_interior_point_is_a_centre_by_its_jacobi_multiplier():
    from orbitdesk.analyses.conservative import multiplier

    system = compile_model(LOTKA_VOLTERRA)
    assert structure(system) == "flow" and multiplier(system) == (-1, -1)  # 1/(x y)
    points = sorted(find_equilibria(system), key=lambda e: e.vector[0])
    origin, interior = points[0], points[-1]
    assert interior.vector == pytest.approx([0.75 / 0.25, 1 / 0.5])
    assert sorted(interior.eigenvalues.imag) == pytest.approx([-math.sqrt(0.75), math.sqrt(0.75)])
    assert interior.kind == CENTRE_FLOW and interior.stability == NEUTRAL_FLOW
    assert _clean(interior.warnings) and any("1/(x*y)" in w for w in interior.warnings)
    assert origin.kind == "saddle" and origin.stability == "unstable"  # where 1/(x y) is infinite: no claim


def test_lotka_volterra_cycle_is_neutral_and_keeps_its_conserved_quantity():
    system = compile_model(LOTKA_VOLTERRA)
    a, b, c, d = 1.0, 0.5, 0.75, 0.25
    # a small cycle round the centre (1 % of its distance from the axes): its period tends to
    # 2 pi / sqrt(a c) (the linearisation, closed form) as the amplitude shrinks. Such a cycle travels
    # less than the runs' error at the state's size allowed the shooting before: "no periodic orbit found"
    small = find_cycle(system, guess=[3.03, 2.0])
    assert small.stability == NEUTRAL_FLOW and small.stable is False
    assert small.period == pytest.approx(2 * math.pi / math.sqrt(a * c), rel=1e-4)
    assert _clean(small.warnings)
    big = find_cycle(system, guess=[4.0, 1.0])
    assert big.stability == NEUTRAL_FLOW
    x, y = big.orbit
    V = d * x - c * np.log(x) + b * y - a * np.log(y)
    assert np.ptp(V) < 1e-7 * abs(V.mean())  # on one level curve of the closed-form invariant


def test_lotka_volterra_branch_is_neutral_without_hopf_points():
    system = compile_model(LOTKA_VOLTERRA)
    branches = steady_branches(system, "a", 0.5, 2.0)
    interior = [br for br in branches.branches if np.all(br.points[0] > 1)]
    assert interior and all(br.stability(i) == NEUTRAL_FLOW for br in interior for i in range(br.size))
    assert not any(s.type == "hopf" for br in branches.branches for s in br.special)
    # the interior point moves as (c/d, a/b) (closed form)
    assert interior[0].points[1] == pytest.approx(interior[0].values / 0.5, rel=1e-8)


def test_logistic_prey_is_not_conservative():
    # with the prey's growth limited (x' = a x (1 - x/K) - b x y) the interior point is a stable focus:
    # div(f / (x y)) = -a / (K y) != 0 and no power product of the states is a multiplier
    system = compile_model("a = 1\nK = 8\nb = 0.5\nc = 0.6\nd = 0.2\nx' = a*x*(1 - x/K) - b*x*y\n"
                           "y' = -c*y + d*x*y\nx(0) = 4\ny(0) = 1\n")
    assert structure(system) == ""
    interior = max(find_equilibria(system), key=lambda e: e.vector[0] * e.vector[1])
    assert interior.stability == "stable" and "focus" in interior.kind


def test_area_preserving_branch_has_no_torus_points():
    # along the Hénon map's elliptic fixed points (b = -1, det = +1) every multiplier stays on the unit
    # circle (mu^2 + 2 a x* mu + 1 = 0, |a x*| < 1 for a in [0.1, 1.5]): nothing bifurcates
    system = compile_model("a = 0.5\nb = -1\nx[n+1] = 1 - a*x^2 + y\ny[n+1] = b*x\nx[0] = 0.1\ny[0] = 0\n")
    branches = steady_branches(system, "a", 0.1, 1.5)
    assert not any(s.type == "torus" for br in branches.branches for s in br.special)
    assert NEUTRAL_MAP in {br.stability(i) for br in branches.branches for i in range(br.size)}


def test_cycles_of_a_conservative_flow_are_not_continued_as_if_isolated():
    from orbitdesk.analyses.continuation.cycles import cycle_branches
    from orbitdesk.analyses.continuation.functions import ContinuationError

    system = compile_model(DUFFING_CONSERVATIVE)
    with pytest.raises(ContinuationError, match="families"):
        cycle_branches(system, "k", 0.5, 2.0, guess=[1.0, 0.0])
