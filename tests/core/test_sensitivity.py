"""Forward sensitivities (the model's sensitivity kernel run by the engine's loops) against closed forms.

x' = -k x, x(0) = x0:  x = x0 e^{-kt},  dx/dk = -t x0 e^{-kt},  dx/dx0 = e^{-kt}  (differentiating the
closed form by hand). The map x[n+1] = a x[n] + b:  x_n = a^n x0 + b (a^n - 1)/(a - 1), differentiated
by hand in a, b and x0. Both paths (numba and plain Python) run these.
"""

import numpy as np
import pytest

from orbitdesk.analyses.sensitivity import SensitivityFailure, Sensitivities
from orbitdesk.engine import compiled
from orbitdesk.engine.progress import CancelToken, Cancelled
from orbitdesk.system.codegen import kernel_source, parameter_derivatives
from orbitdesk.system.compiled_system import compile_model

DECAY = """a = 0.7
k = 0.8
x' = -k*x
y' = a - y
x(0) = 2
y(0) = 0
"""


@pytest.mark.fallback
@pytest.mark.parametrize("method", ["dop853", "rk45", "radau"])
def test_decay_matches_closed_form(method):
    system = compile_model(DECAY)
    k, x0 = 0.8, 2.0
    t = np.array([0.0, 0.5, 1.0, 2.5, 2.5, 4.0])  # the start and a repeated time included
    run = Sensitivities(system, [1]).run([x0, 0.0], [0.7, k], 0.0, t, rtol=1e-10, atol=1e-12, method=method)
    tol = 1e-6 if method == "radau" else 1e-8
    assert np.allclose(run.states[0], x0 * np.exp(-k * t), rtol=tol, atol=tol)
    assert run.dparams.shape == (2, 1, t.size)
    assert np.allclose(run.dparams[0, 0], -t * x0 * np.exp(-k * t), rtol=tol, atol=tol)
    assert np.allclose(run.dparams[1, 0], 0.0, atol=tol)  # y does not depend on k
    assert np.allclose(run.dstart[0, 0], np.exp(-k * t), rtol=tol, atol=tol)
    assert np.allclose(run.dstart[1, 1], np.exp(-t), rtol=tol, atol=tol)  # y' = a - y: dy/dy0 = e^{-t}
    assert np.allclose(run.dstart[0, 1], 0.0, atol=tol)


@pytest.mark.fallback
def test_both_parameters_selected_in_their_order():
    system = compile_model(DECAY)
    t = np.linspace(0.0, 3.0, 7)
    run = Sensitivities(system, [1, 0]).run([2.0, 0.0], [0.7, 0.8], 0.0, t, rtol=1e-10, atol=1e-12)
    # y = a (1 - e^{-t}): dy/da = 1 - e^{-t}
    assert np.allclose(run.dparams[1, 1], 1 - np.exp(-t), atol=1e-8)
    assert np.allclose(run.dparams[0, 0], -t * 2.0 * np.exp(-0.8 * t), atol=1e-8)


@pytest.mark.fallback
def test_map_sensitivities_match_closed_form():
    system = compile_model("a = 0.9\nb = 0.5\nx[n+1] = a*x[n] + b\nx[0] = 1\n")
    a, b, x0 = 0.9, 0.5, 1.0
    steps = np.arange(0, 12)
    run = Sensitivities(system, [0, 1]).run([x0], [a, b], 0, steps)
    an = a ** steps
    assert np.allclose(run.states[0], an * x0 + b * (an - 1) / (a - 1), rtol=1e-12)
    dxa = steps * a ** np.maximum(steps - 1, 0) * x0 + b * (steps * a ** np.maximum(steps - 1, 0) * (a - 1)
                                                           - (an - 1)) / (a - 1) ** 2
    assert np.allclose(run.dparams[0, 0], dxa, rtol=1e-10, atol=1e-12)
    assert np.allclose(run.dparams[0, 1], (an - 1) / (a - 1), rtol=1e-10, atol=1e-12)
    assert np.allclose(run.dstart[0, 0], an, rtol=1e-12)


def test_forcing_is_sparse_and_only_in_the_sensitivity_module():
    system = compile_model("a = 1\nb = 2\nc = 3\nx' = a*x\ny' = b*y + c\n")
    rows, cols, _ = parameter_derivatives(system)
    assert sorted(zip(rows, cols)) == [(0, 0), (1, 1), (1, 2)]  # df/dp held only where a parameter appears
    assert "sensitivity" not in kernel_source(system, guard=False)
    assert "def sensitivity(" in kernel_source(system, guard=False, part="sensitivity")


def test_failures_and_cancel_come_with_the_engine_statuses():
    system = compile_model("x' = x^2\nx(0) = 1\n")  # x = 1/(1 - t): blows up at t = 1
    sens = Sensitivities(system, [])
    with pytest.raises(SensitivityFailure, match="could not be integrated"):
        sens.run([1.0], [], 0.0, [0.5, 2.0])
    oscillator = compile_model("k = 1\nx' = y\ny' = -k*x\nx(0) = 1\ny(0) = 0\n")
    token = CancelToken()
    token.cancel()
    with pytest.raises(Cancelled):
        Sensitivities(oscillator, [0]).run([1.0, 0.0], [1.0], 0.0, np.linspace(0, 2000, 50), rtol=1e-10,
                                           atol=1e-12, cancel=token)
    engine = compiled.engine_for(oscillator)
    assert compiled.sensitivity_kernel(engine, oscillator) is compiled.sensitivity_kernel(engine, oscillator)


def test_continuation_functions_come_from_the_kernels():
    # the linear oscillator x' = y, y' = -k x (closed form, by hand): over T the state transition
    # matrix is [[cos wT, sin(wT)/w], [-w sin wT, cos wT]] with w = sqrt(k), and d/dk of the state from
    # (1, 0) is (-T sin(wT) / (2w), -(sin(wT)/w + T cos wT) / 2); df/dk = (0, -x)
    from orbitdesk.analyses.continuation.functions import ModelFunctions

    funcs = ModelFunctions(compile_model("k = 2\nx' = y\ny' = -k*x\n"))
    k, T = 2.0, 1.7
    w = np.sqrt(k)
    end, M, dk = funcs.flow([1.0, 0.0], [k], 0.0, T, 0)
    assert np.allclose(end, [np.cos(w * T), -w * np.sin(w * T)], atol=1e-9)
    assert np.allclose(M, [[np.cos(w * T), np.sin(w * T) / w], [-w * np.sin(w * T), np.cos(w * T)]], atol=1e-9)
    assert np.allclose(dk, [-T * np.sin(w * T) / (2 * w), -(np.sin(w * T) / w + T * np.cos(w * T)) / 2], atol=1e-8)
    assert np.allclose(funcs.fp([0.3, 0.4], [k], 0), [0.0, -0.3])
    assert np.allclose(funcs.jac([0.3, 0.4], [k]), [[0.0, 1.0], [-k, 0.0]])
    # f^3 of the map x -> a x + b from x = 1 (closed form as in the map test above)
    mapping = ModelFunctions(compile_model("a = 0.9\nb = 0.5\nx[n+1] = a*x[n] + b\n"))
    u, J, da = mapping.iterate([1.0], [0.9, 0.5], 3, 0)
    assert u[0] == pytest.approx(0.9 ** 3 + 0.5 * (0.9 ** 3 - 1) / (0.9 - 1), rel=1e-14)
    assert J[0, 0] == pytest.approx(0.9 ** 3, rel=1e-14)
    assert da[0] == pytest.approx(3 * 0.81 + 0.5 * (2 * 0.9 + 1), rel=1e-12)  # d/da of a^3 + b (a^2 + a + 1)
