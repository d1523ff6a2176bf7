"""Many orbits of a map at once with their tangent vectors: the member loop's block-wise renormalisation
(compiled member by member, plain Python on the whole block with numpy) and the spectra of many values
together (``lyapunov.map_exponents``, the sweep's exponents of a map)."""

import math

import numpy as np
import pytest

from orbitdesk.analyses.lyapunov import lyapunov_spectrum, map_exponents
from orbitdesk.analyses.sweep import GridSettings, SweepSettings, lyapunov_grid, sweep
from orbitdesk.engine import compiled as kernels
from orbitdesk.engine import jitting
from orbitdesk.engine.settings import RunSettings
from orbitdesk.engine.tangent import _gram_schmidt_block_numpy, gram_schmidt_block
from orbitdesk.samples.models import HENON
from orbitdesk.system.compiled_system import compile_model

pytestmark = pytest.mark.fallback  # published values: run with the compiler and without

LOZI = "x[n+1] = 1 - a*abs(x) + y\ny[n+1] = b*x\na = 1.7\nb = 0.5\nx[0] = 0.1\ny[0] = 0.1\n"
needs_compiler = pytest.mark.skipif(not kernels.available(), reason="numba is not installed or ORBITDESK_NO_JIT=1")


def _stack(count, n=3, m=3, seed=1):
    """Members' blocks (u, V) by columns: random tangent vectors, one member with two nearly parallel
    columns (the second pass), one with a zero column (collapsed) and one with a NaN."""
    rng = np.random.default_rng(seed)
    S = np.ascontiguousarray(rng.normal(size=(n + n * m, count)))
    S[n + 1::m, 3] = S[n::m, 3] + 1e-9 * S[n + 1::m, 3]  # member 3: column 1 almost column 0
    S[n + 2::m, 5] = 0.0  # member 5: column 2 is zero
    S[n, 7] = np.nan
    return S


def test_block_renormalisation_is_a_qr_factorisation():
    # outside check: numpy's QR (LAPACK Householder) gives the same |R| diagonal and the same columns up to sign
    n = m = 3
    count = 40
    S = _stack(count)
    before = S.copy()
    norms = np.ones((m, count))
    failed = _gram_schmidt_block_numpy(S, n, n, m, norms, count)
    assert failed == 2 and norms[0, 5] == 0.0 and norms[0, 7] == 0.0
    for c in [0, 1, 3, 10, 39]:  # member 3's matrix has a condition number near 1e9: digits lost either way
        V0 = before[n:, c].reshape(n, m)
        Q, R = np.linalg.qr(V0)
        np.testing.assert_allclose(norms[:, c], np.abs(np.diag(R)), rtol=1e-4 if c == 3 else 1e-12)
        V = S[n:, c].reshape(n, m)
        np.testing.assert_allclose(np.abs(V), np.abs(Q), rtol=0, atol=1e-4 if c == 3 else 1e-12)
        np.testing.assert_allclose(V.T @ V, np.eye(m), atol=1e-12)


@pytest.mark.parametrize("count", [3, 40])
def test_block_renormalisation_on_numpy_equals_member_by_member(count):
    # the plain block (numpy over members, or members on Python floats for a few) against the element loop
    # as written for the compiler, run here as Python on the same numbers: equal bit for bit
    n = m = 3
    S = _stack(max(count, 8))[:, :count].copy()
    one, norms_one = S.copy(), np.ones((m, count))
    block, norms_block = S.copy(), np.ones((m, count))
    assert gram_schmidt_block(one, n, n, m, norms_one, count) == _gram_schmidt_block_numpy(block, n, n, m, norms_block,
                                                                                            count)
    np.testing.assert_array_equal(norms_block, norms_one)
    good = norms_one[0] != 0.0
    np.testing.assert_array_equal(block[:, good], one[:, good])


@needs_compiler
def test_compiled_block_renormalisation_equals_the_plain_one():
    n = m = 3
    count = 40
    S = _stack(count)
    loops = jitting.compiled_loops(*kernels.LOOP_MODULES)
    a, na = S.copy(), np.ones((m, count))
    b, nb = S.copy(), np.ones((m, count))
    assert loops.gram_schmidt_block(a, np.int64(n), np.int64(n), np.int64(m), na, np.int64(count)) == \
        _gram_schmidt_block_numpy(b, n, n, m, nb, count)
    np.testing.assert_array_equal(na, nb)
    good = na[0] != 0.0
    np.testing.assert_array_equal(a[:, good], b[:, good])


def test_lozi_grid_largest_exponent_sprott():
    # Lozi map, a = 1.7, b = 0.5: largest exponent 0.4703 (Sprott 2003, from memory), by the member loop
    system = compile_model(LOZI)
    grid = lyapunov_grid(system, "a", [1.7], "b", [0.5], GridSettings(transient=1000, duration=30000),
                         compiled=False)
    assert grid.exponent[0, 0] == pytest.approx(0.470, abs=0.01)


def test_many_orbits_together_give_each_ones_spectrum_lozi():
    # Lozi map: 0.4703, -1.1634 (Sprott 2003, from memory); the sum is ln b exactly (|det J| = b everywhere).
    # Four starts together (each settles to the command's tolerance) against the command, start by start.
    system = compile_model(LOZI)
    starts = np.array([[0.1, 0.2, -0.3, 0.05], [0.1, 0.0, 0.1, -0.2]])
    engine = kernels.engine_for_work(system, 1e9)
    exponents, errors, settled, codes = map_exponents(engine, system.param_values, starts, 1000)
    assert list(codes) == [0] * 4 and settled.all()
    for c in range(4):
        alone = lyapunov_spectrum(system, u0=starts[:, c], transient=1000, converge=True)
        np.testing.assert_allclose(exponents[c], alone.exponents, rtol=0, atol=1e-12)
        np.testing.assert_allclose(errors[c], alone.uncertainty, rtol=1e-9)
        assert exponents[c, 0] == pytest.approx(0.470, abs=0.01)
        assert exponents[c, 1] == pytest.approx(-1.163, abs=0.01)
        assert exponents[c].sum() == pytest.approx(math.log(0.5), abs=1e-9)


def test_map_sweep_exponents_equal_the_command_value_by_value():
    # the sweep's exponents of a map (all values together) against lyapunov_spectrum(converge=True) per value,
    # periodic windows and chaos alike; Henon a = 1.4: 0.41922 (Sprott 2003, from memory)
    system = compile_model(HENON)
    values = np.linspace(1.0, 1.4, 7)
    result = sweep(system, "a", values, SweepSettings(transient=100, samples=10, lyapunov=True))
    k = system.parameters.index("a")
    for i, value in enumerate(values):
        p = system.param_values.copy()
        p[k] = value
        alone = lyapunov_spectrum(system, p, system.initial, transient=100, converge=True, settings=RunSettings())
        assert result.lyapunov[i] == pytest.approx(alone.largest, abs=1e-12)
        assert result.lyapunov_error[i] == pytest.approx(alone.uncertainty[0], rel=1e-9)
    assert result.lyapunov[-1] == pytest.approx(0.41922, abs=0.01)


@needs_compiler
def test_map_sweep_exponents_plain_equal_compiled_bit_for_bit():
    system = compile_model(HENON)
    values = np.linspace(1.0, 1.4, 40)
    settings = SweepSettings(transient=100, samples=10, lyapunov=True)
    plain = sweep(system, "a", values, settings, compiled=False)
    together = sweep(system, "a", values, settings, compiled=True)
    np.testing.assert_array_equal(plain.lyapunov, together.lyapunov)
    np.testing.assert_array_equal(plain.lyapunov_error, together.lyapunov_error)


def test_map_sweep_exponents_report_progress_and_cancel():
    # two values whose exponents take many blocks (a = 1.4 settles in about 14): progress rises block by block
    # and a cancel is taken between blocks
    from orbitdesk.engine.progress import CancelToken, Cancelled

    system = compile_model(HENON)
    token, seen = CancelToken(), []

    def progress(fraction):
        seen.append(fraction)
        if fraction > 0.7:
            token.cancel()

    with pytest.raises(Cancelled):
        sweep(system, "a", [1.39, 1.4], SweepSettings(transient=100, samples=10, lyapunov=True), cancel=token,
              progress=progress)
    assert seen == sorted(seen) and 0.7 < seen[-1] < 1.0


@pytest.mark.parametrize("compiled", [False, True])
def test_the_pull_back_of_a_companion_orbit(compiled):
    # closed form: a separation (3, 4) d0 has length 5 d0; pulled back along it to (0.6, 0.8) d0; orbits that met: NaN
    from orbitdesk.engine.tangent import pull_back

    if compiled and not kernels.available():
        pytest.skip("numba is not installed or ORBITDESK_NO_JIT=1")
    step = jitting.compiled_loops(*kernels.LOOP_MODULES).pull_back if compiled else pull_back
    a, b = np.array([1.0, -2.0]), np.array([1.0 + 3e-8, -2.0 + 4e-8])
    assert step(a, b, 1e-8) == pytest.approx(math.log(5.0), rel=1e-7)
    np.testing.assert_allclose(b - a, [0.6e-8, 0.8e-8], rtol=1e-7)
    assert math.isnan(step(a, a.copy(), 1e-8))
