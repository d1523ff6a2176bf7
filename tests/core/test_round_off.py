"""Round-off-level entries of Jacobians, eigenvectors and equilibria print as 0, not 6.1e-17."""

import numpy as np

from orbitdesk.analyses.equilibria import classify, find_equilibria, zero_round_off
from orbitdesk.system.compiled_system import compile_model

# At (pi/2, 0): x' = y cos x - x + pi/2 and y' = -y + sin x - 1 vanish, and in exact arithmetic the
# Jacobian [[-y sin x - 1, cos x], [cos x, -1]] is -I (cos(pi/2) = 0): a double eigenvalue -1 with the
# axes as eigenvectors. In floating point cos(pi/2) is 6.1e-17, which tilted the eigenvectors by 45°.
MODEL = "x' = y*cos(x) - x + pi/2\ny' = -y + sin(x) - 1\nx(0) = 1\ny(0) = 0.5\n"


def test_round_off_entries_of_an_equilibrium_are_exact_zeros():
    system = compile_model(MODEL)
    found = find_equilibria(system, system.param_values)
    assert len(found) == 1
    eq = found[0]
    assert eq.state["x"] == np.pi / 2 and eq.state["y"] == 0.0
    assert np.array_equal(eq.jacobian, -np.eye(2))
    assert np.array_equal(eq.eigenvalues, [-1.0, -1.0])
    assert np.array_equal(np.abs(eq.eigenvectors), np.eye(2))


def test_zero_round_off_is_relative_to_the_largest_entry():
    assert np.array_equal(zero_round_off([3e5, 1e-8, -2.0]), [3e5, 0.0, -2.0])
    assert np.array_equal(zero_round_off([1e-20, 2e-20]), [1e-20, 2e-20])  # small but not round-off
    z = zero_round_off(np.array([1 + 1e-17j, 1e-15 + 0.5j]))
    assert z[0] == 1 and z[1] == 0.5j and not np.signbit(z[1].real)


def test_classify_reports_clean_eigenvalues_of_a_rotation_generator():
    # [[0, 1], [-1, 0]] plus round-off: eigenvalues exactly ±i (closed form)
    *_head, _warnings, values, _vectors = classify([[1e-17, 1.0], [-1.0, -2e-17]])
    assert sorted(values, key=lambda z: z.imag) == [-1j, 1j]
