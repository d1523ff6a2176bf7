"""mod() inside products and with products as its sides, evaluated by the compiled right side as Python's own
% on the same doubles (the closed form): Python's % binds like *, so a bare "a % b" inside a product once
read -x*mod(x, y) as (-x*x) % y and mod(x, 0.001) as (x % 1)/1000 (a fuzz run's find)."""

import numpy as np
import pytest

from orbitdesk.system.compiled_system import compile_model

X, Y, Z = 0.25, 0.3, 0.7

CASES = [
    ("-x*mod(x, y)", -X * (X % Y)),
    ("-x*mod(x, x)", -X * (X % X)),
    ("mod(x, 0.001)", X % 0.001),
    ("mod(x, y*z)", X % (Y * Z)),
    ("mod(x*y, z) + 1", (X * Y) % Z + 1),
    ("2*mod(-x, y)/z", 2 * ((-X) % Y) / Z),
    ("mod(x, y)^2", (X % Y) ** 2),
]


@pytest.mark.parametrize("expr, closed_form", CASES)
def test_mod_in_a_product_is_what_python_computes(expr, closed_form):
    system = compile_model(f"x' = 0\ny' = 0\nz' = 0\nv' = {expr}\n")
    u = np.array([X, Y, Z, 0.0])
    assert system.rhs(0.0, u)[3] == pytest.approx(closed_form, rel=1e-15, abs=1e-300)
    assert system.rhs_vec(0.0, u[:, None])[3, 0] == pytest.approx(closed_form, rel=1e-12, abs=1e-15)
