"""Per-model kernels (codegen.py) and the compiled integrator loops (integrators/), on both paths:
numba and plain Python (the fallback), against closed forms and sympy as the reference."""

from __future__ import annotations

import os
import stat

import numpy as np
import pytest
import sympy as sp

from orbitdesk.system.codegen import sparse_jacobian
from orbitdesk.engine.ensembles import dopri5_ensemble, rk4_ensemble
from orbitdesk.engine import compiled, drivers
from orbitdesk.system.compiled_system import compile_model

pytestmark = pytest.mark.fallback  # run with the compiler and without

needs_numba = pytest.mark.skipif(not compiled.available(), reason="numba missing or ORBITDESK_NO_JIT set")
PATHS = [False, pytest.param(True, marks=needs_numba)]


def chain(n: int) -> str:
    """n masses on springs between two walls, with a cubic spring term (2n states)."""
    lines = ["k = 1", "c = 0.05", "g = 0.2"]
    for i in range(n):
        left = f"x{i - 1}" if i else "0"
        right = f"x{i + 1}" if i < n - 1 else "0"
        lines.append(f"x{i}'' = k*({left} - 2*x{i} + {right}) - c*x{i}' - g*x{i}^3")
    lines.append("x0(0) = 0.5")
    return "\n".join(lines) + "\n"


def test_sparse_jacobian_equals_sympys_dense_jacobian():
    # reference: sympy's Matrix.jacobian differentiates every entry; ours only those present
    system = compile_model(chain(6))
    rows, cols, entries = sparse_jacobian(system)
    t, u, p, _ = system._plain
    dense = sp.Matrix(system.plain(system.f)).jacobian(sp.Matrix(u))
    ours = sp.zeros(*dense.shape)
    for r, c, e in zip(rows, cols, entries):
        ours[r, c] = e
    assert sp.simplify(ours - dense) == sp.zeros(*dense.shape)
    assert len(entries) == 6 * 3 + 6 - 2 + 6  # x' = v: 1 each; v' = ...: neighbours, self, own v


@pytest.mark.parametrize("jit", PATHS)
def test_many_states_and_parameters_run_with_arrays(jit):
    # 40 masses: 80 states (kernels take arrays; there is no argument per state or parameter)
    system = compile_model(chain(40))
    engine = compiled.engine_for(system, wait=True) if jit else compiled.python_engine(system)
    out = drivers.flow_run(engine, "dop853", 0.0, 2.0, system.initial, system.param_values, 1e-9, 1e-11,
                           grid=[2.0])
    from scipy.integrate import solve_ivp

    reference = solve_ivp(lambda t, y: system.rhs(t, y), (0, 2), system.initial, method="DOP853",
                          rtol=1e-12, atol=1e-13).y[:, -1]
    assert out.code == 0 and np.allclose(out.states[:, -1], reference, atol=1e-8)


@pytest.mark.parametrize("jit", PATHS)
@pytest.mark.parametrize("masses", [4, 25])  # 18 Jacobian entries (written out) and 123 (one loop)
def test_tangent_products_equal_sympys_jacobian_times_the_vectors(jit, masses):
    # reference: sympy's dense Matrix.jacobian at a point, times tangent vectors with numpy
    from orbitdesk.system.codegen import UNROLLED_ENTRIES

    system = compile_model(chain(masses))
    assert (len(sparse_jacobian(system)[0]) > UNROLLED_ENTRIES) == (masses == 25)
    engine = compiled.engine_for(system, wait=True) if jit else compiled.python_engine(system)
    n, m = system.n_states, 3
    rng = np.random.default_rng(4)
    u, V = rng.uniform(-1, 1, n), rng.uniform(-1, 1, (n, m))
    t, syms, psyms, _ = system._plain
    f = sp.Matrix(system.plain(system.f))
    at = dict(zip(syms, u)) | dict(zip(psyms, system.param_values))
    J = np.array(f.jacobian(sp.Matrix(syms)).xreplace(at), dtype=float)
    out = np.empty(n * (m + 1))
    engine.kernels.model(m, 0.0, np.concatenate([u, V.ravel()]), system.param_values.astype(float), out)
    assert np.allclose(out[:n], np.array(f.xreplace(at), dtype=float).ravel(), rtol=1e-13, atol=1e-13)
    assert np.allclose(out[n:].reshape(n, m), J @ V, rtol=1e-13, atol=1e-13)
    engine.kernels.model(0, 0.0, u, system.param_values.astype(float), out[:n])
    assert np.allclose(out[:n], np.array(f.xreplace(at), dtype=float).ravel(), rtol=1e-13, atol=1e-13)


@pytest.mark.parametrize("jit", PATHS)
def test_rk4_members_follow_the_stability_function(jit):
    # u' = lam u: one RK4 step multiplies by R(z) = 1 + z + z^2/2 + z^3/6 + z^4/24, z = lam h
    # (Hairer, Norsett & Wanner, Solving ODEs I, sec. IV.2, stability function of RK4)
    system = compile_model("lam = -0.7\nu' = lam*u\nu(0) = 1\n")
    lams = np.linspace(-3.0, 0.5, 50)
    h, steps = 0.05, 400
    run = rk4_ensemble(system, np.ones((1, 50)), lams[None, :], dt=h, n_steps=steps, compiled=jit)
    z = lams * h
    assert np.allclose(run.states[0], (1 + z + z**2 / 2 + z**3 / 6 + z**4 / 24) ** steps, rtol=1e-12)


@pytest.mark.parametrize("jit", PATHS)
def test_members_blowing_up_stop_at_the_closed_form_time(jit):
    # x' = x^2 from x0 has the closed form x0/(1 - x0 t): it blows up at t = 1/x0; the others go on
    system = compile_model("x' = x^2\nx(0) = 1\n")
    run = rk4_ensemble(system, np.array([[0.5, 1.0, 2.0, -1.0]]), dt=0.001, n_steps=3000, compiled=jit)
    assert list(run.status) == ["diverged", "diverged", "diverged", "ok"]
    assert run.time[:3] == pytest.approx([2.0, 1.0, 0.5], abs=0.01)
    assert run.states[0, 3] == pytest.approx(-1 / (1 + 3.0), rel=1e-9)


def test_adaptive_members_sample_the_closed_form_on_their_dense_output():
    # x'' = -w^2 x from (1, 0): x = cos(w t) (closed form), w per member
    system = compile_model("w = 1\nx'' = -w^2*x\nx(0) = 1\n")
    w = np.array([0.5, 2.0, 7.0])
    times = np.linspace(0, 3, 31)
    run = dopri5_ensemble(system, np.tile([[1.0], [0.0]], 3), w[None, :], t_end=3.0, sample_times=times,
                          rtol=1e-10, atol=1e-12)
    assert np.allclose(run.samples[0], np.cos(np.outer(w, times)), atol=1e-8)


@needs_numba
def test_kernels_are_cached_in_a_private_folder_and_checked(tmp_path, monkeypatch):
    monkeypatch.setenv("ORBITDESK_CACHE", str(tmp_path / "cache"))
    system = compile_model("w = 1.5\nx'' = -w^2*x + 0.25*x^3\nx(0) = 1\n")
    compiled.engine_for(system, wait=True)
    folder = tmp_path / "cache" / "kernels"
    assert stat.S_IMODE(os.stat(folder).st_mode) == 0o700
    files = list(folder.glob("m*.py"))
    assert len(files) == 1 and files[0].read_text() == compiled.module_source(system, jit=True)
    os.chmod(folder, 0o777)  # others may write: refused, the kernels compile in memory instead
    assert compiled.cache_folder() is None
    os.chmod(folder, 0o700)
    assert compiled.cache_folder() == folder


def test_200_state_chain_has_one_equilibrium_with_the_closed_form_eigenvalues():
    # 100 masses between two walls: the origin is the only equilibrium (springs and the cubic term both
    # pull back); its eigenvalues are -c/2 +- i sqrt(4 k sin^2(j pi / (2 (N + 1))) - c^2/4), j = 1..N
    # (the fixed-end chain's Laplacian, closed form); found by damped Newton on the sparse Jacobian
    from orbitdesk.analyses.equilibria import find_equilibria

    N, k, c = 100, 1.0, 0.05
    system = compile_model(chain(N))
    found = find_equilibria(system, exact=False, starts=6)
    assert len(found) == 1 and np.max(np.abs(found[0].vector)) < 1e-12
    values = found[0].eigenvalues
    omega = np.sqrt(4 * k * np.sin(np.arange(1, N + 1) * np.pi / (2 * (N + 1))) ** 2 - c**2 / 4)
    assert np.allclose(values.real, -c / 2, atol=1e-9)
    assert np.allclose(np.sort(np.abs(values.imag)), np.sort(np.concatenate([omega, omega])), atol=1e-9)
    assert found[0].stable and found[0].kind == "stable focus"


@needs_numba
def test_200_state_chain_spectrum_sums_to_the_trace():
    # the sum of all exponents is the time average of the Jacobian's trace: -N c for the chain (closed
    # form: each velocity carries -c); 200 tangent vectors through the kernel's sparse products
    from orbitdesk.analyses.lyapunov import lyapunov_spectrum

    system = compile_model(chain(100))
    result = lyapunov_spectrum(system, t_end=3.0, transient=0.5)
    assert result.ok and result.exponents.size == 200 and np.all(np.isfinite(result.exponents))
    assert result.exponents.sum() == pytest.approx(-100 * 0.05, abs=1e-6)
