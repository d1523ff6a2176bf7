"""The model language's sinh, cosh and tanh, and the Jacobian's slopes of min() and max(), against sympy's
own functions and closed forms.

The language builds sinh, cosh and tanh as subclasses of sympy's that answer questions about their values
from their argument's realness alone (sympy's split a chain of nested roots into real and imaginary parts,
growing five-fold per root: tests/data/hostile/tanh_of_a_deep_chain.txt). Everything a person sees must
stay as it was: the printed text and LaTeX, the values, the derivatives.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

from orbitdesk.language import real_hyperbolic
from orbitdesk.language.model import parse_model
from orbitdesk.system.compiled_system import compile_model

x = sp.Symbol("x", real=True)
PAIRS = [(real_hyperbolic.sinh, sp.sinh), (real_hyperbolic.cosh, sp.cosh), (real_hyperbolic.tanh, sp.tanh)]


@pytest.mark.parametrize("ours, theirs", PAIRS, ids=lambda f: f.__name__)
def test_printed_as_sympy_prints_its_own(ours, theirs):
    u = sp.sqrt(1 + x) / 3
    assert sp.sstr(ours(u)) == sp.sstr(theirs(u))
    assert sp.latex(ours(u) ** 2) == sp.latex(theirs(u) ** 2)
    assert sp.pycode(ours(u)) == sp.pycode(theirs(u))


@pytest.mark.parametrize("ours, theirs", PAIRS, ids=lambda f: f.__name__)
def test_first_and_second_derivatives_equal_sympys(ours, theirs):
    u = sp.sqrt(1 + x**2) - x / 2
    for order in (1, 2):
        mine, reference = sp.diff(ours(u), x, order), sp.diff(theirs(u), x, order)
        for point in (-1.3, 0.0, 0.4, 2.5):
            assert float(mine.subs(x, point)) == pytest.approx(float(reference.subs(x, point)), rel=1e-13)
    assert not sp.diff(ours(u), x, 2).atoms(theirs) - sp.diff(ours(u), x, 2).atoms(ours)  # derivatives stay ours


@pytest.mark.parametrize("ours, theirs", PAIRS, ids=lambda f: f.__name__)
def test_what_follows_from_a_real_argument_is_unchanged(ours, theirs):
    for u in (x, x**2 + 1, sp.exp(x) - 3):
        for question in ("is_real", "is_extended_real", "is_finite", "is_positive", "is_nonnegative", "is_zero"):
            assert getattr(ours(u), question) == getattr(theirs(u), question), (u, question)


@pytest.mark.parametrize("name", ["sinh", "cosh", "tanh"])
def test_model_values_and_jacobian_against_math_and_sympy(name):
    """x' = f(sqrt(1 + sqrt(1 + x))) + f(x)^2: the value against Python's math, the Jacobian against
    sympy's own derivative of the same formula built from sympy's classes (a chain short enough for
    sympy's questions to end quickly)."""
    system = compile_model(parse_model(f"x' = {name}(sqrt(1 + sqrt(1 + x))) + {name}(x)^2\nx(0) = 0.5\n"))
    f = getattr(math, name)
    for point in (-0.7, 0.5, 3.0):
        expected = f(math.sqrt(1 + math.sqrt(1 + point))) + f(point) ** 2
        assert system.rhs(0.0, np.array([point]))[0] == pytest.approx(expected, rel=1e-14)
        g = getattr(sp, name)
        reference = sp.diff(g(sp.sqrt(1 + sp.sqrt(1 + x))) + g(x) ** 2, x).subs(x, point)
        assert system.jac(0.0, np.array([point]))[0, 0] == pytest.approx(float(reference), rel=1e-12)


def test_slopes_of_min_and_max_in_the_jacobian():
    """d min(a, b) = heaviside(b - a) da + heaviside(a - b) db, and max() the other way round: a closed
    form on each side of the switch and the half-and-half of heaviside at the tie."""
    system = compile_model(parse_model("x' = min(x^2, 3*y) + 2*max(y, sqrt(1 + x))\ny' = 0\nx(0) = 0.5\ny(0) = 1\n"))
    for px, py in [(0.5, 1.0), (2.0, 0.2), (0.5, 0.0), (1.5, 0.75)]:
        jac = system.jac(0.0, np.array([px, py]))
        a, b = px**2, 3 * py
        step_min = 1.0 if a < b else (0.0 if a > b else 0.5)
        c, d = py, math.sqrt(1 + px)
        step_max = 1.0 if c > d else (0.0 if c < d else 0.5)
        assert jac[0, 0] == pytest.approx(step_min * 2 * px + 2 * (1 - step_max) / (2 * d), rel=1e-14)
        assert jac[0, 1] == pytest.approx((1 - step_min) * 3 + 2 * step_max, rel=1e-14)


def test_slopes_of_a_max_of_three():
    """sympy holds max(max(a, b), c) as one Max of three arguments (found by the fuzz of generated models,
    x[n+1] = max(min(x, n), max(x, 0))): the slope is 1 in the largest, against the closed form."""
    from orbitdesk.system.derivatives import jacobian_almost_everywhere

    y = sp.Symbol("y", real=True)
    row = jacobian_almost_everywhere([sp.Max(x, y**2, 2 - x) + sp.Min(x, y, 1)], [x, y])
    for px, py in [(3.0, 0.8), (0.5, 2.0), (-1.0, 0.5), (0.0, 0.1)]:
        largest = max((px, 0), (py**2, 1), (2 - px, 2))[1]
        smallest = min((px, 0), (py, 1), (1.0, 2))[1]
        dx = {0: 1.0, 1: 0.0, 2: -1.0}[largest] + (1.0 if smallest == 0 else 0.0)
        dy = (2 * py if largest == 1 else 0.0) + (1.0 if smallest == 1 else 0.0)
        values = [float(entry.subs({x: px, y: py})) for entry in row]
        assert values == pytest.approx([dx, dy], rel=1e-14)
