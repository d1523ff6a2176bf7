"""Fold and Hopf loci in two parameters, with their codimension-two points, against closed forms."""

import numpy as np
import pytest

from orbitdesk.analyses.continuation import BOGDANOV_TAKENS, CUSP, GENERALISED_HOPF
from orbitdesk.analyses.continuation.loci import locus
from orbitdesk.system.compiled_system import compile_model

# Kuznetsov 2004, section 8.4: the Bogdanov-Takens normal form (s = -1); folds on b1 = b2^2 / 4,
# Hopf points on b1 = 0 with b2 < 0, both curves meeting at the Bogdanov-Takens point (0, 0)
BT = "b1 = 0.1\nb2 = -1\nx' = y\ny' = b1 + b2*x + x^2 - x*y\n"


def kinds(result):
    return [s["type"] for s in result.special]


def test_cusp_form_fold_locus():
    # x' = a + b x - x^3: folds on 27 a^2 = 4 b^3, meeting in a cusp at the origin (closed form)
    result = locus(compile_model("a = 0.1\nb = 1\nx' = a + b*x - x^3\n"), "fold", "a", "b", -1, 1)
    a, b = result.values
    assert np.max(np.abs(27 * a ** 2 - 4 * b ** 3)) < 1e-10
    assert a.min() == pytest.approx(-1) and a.max() == pytest.approx(1)  # both halves of the curve
    (cusp,) = result.special
    assert cusp["type"] == CUSP
    assert cusp["values"]["a"] == pytest.approx(0, abs=1e-10) and cusp["values"]["b"] == pytest.approx(0, abs=1e-10)


def test_bogdanov_takens_on_the_fold_and_hopf_loci():
    fold = locus(compile_model(BT.replace("b1 = 0.1", "b1 = -0.5")), "fold", "b1", "b2", -1, 1)
    b1, b2 = fold.values
    assert np.max(np.abs(b1 - b2 ** 2 / 4)) < 1e-10
    assert kinds(fold) == [BOGDANOV_TAKENS]
    assert list(fold.special[0]["values"].values()) == pytest.approx([0, 0], abs=1e-9)
    hopf = locus(compile_model(BT), "hopf", "b1", "b2", -1, 1, guess={"x": 0, "y": 0})
    b1, b2 = hopf.values
    assert np.max(np.abs(b1)) < 1e-10 and b2.min() < -5
    assert kinds(hopf) == [BOGDANOV_TAKENS]
    assert list(hopf.special[0]["values"].values()) == pytest.approx([0, 0], abs=1e-9)
    assert any("Bogdanov-Takens" in r for r in hopf.reasons)


def test_generalised_hopf_where_the_lyapunov_coefficient_changes_sign():
    # Bautin normal form (Kuznetsov 2004, section 8.3) in x, y: l1 = l on the Hopf line mu = 0 (closed form)
    model = ("mu = -0.5\nl = -0.5\nx' = mu*x - y + l*x*(x^2 + y^2) - x*(x^2 + y^2)^2\n"
             "y' = x + mu*y + l*y*(x^2 + y^2) - y*(x^2 + y^2)^2\n")
    result = locus(compile_model(model), "hopf", "mu", "l", -1, 1, range2=(-2, 2))
    assert np.max(np.abs(result.values[0])) < 1e-10
    assert result.values[1].min() == pytest.approx(-2, abs=0.2) and result.values[1].max() == pytest.approx(2, abs=0.2)
    assert kinds(result) == [GENERALISED_HOPF]
    assert result.special[0]["values"]["l"] == pytest.approx(0, abs=1e-9)
