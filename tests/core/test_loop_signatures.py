"""numba compiles a loop once for each distinct set of argument types it is called with (literal constants
such as ``False`` or ``0`` included, array layouts and read-only flags too): each set is a cold compile of
its own, minutes on a loaded machine. The warm-up (tests/conftest.py, ``drivers.warm_up``) calls every loop
as the engine does, so afterwards each compiled loop and helper must hold exactly one version; a second one
means two call sites disagree on a type (see DEVELOPERS.md, "The numerical engine")."""

import numpy as np
import pytest

from orbitdesk.engine import compiled, jitting

# loops the warm-up calls from Python (single runs, tangents, dense output, members adaptive and fixed, maps); the
# helpers they call show their versions only when compiled in this process (a clean clone, as CI runs): loaded
# from numba's cache, a loop brings its callees' machine code along and they list none
WARMED = ("erk_advance", "flow_tangent", "map_tangent", "map_pair", "map_advance", "members_advance",
          "members_fixed", "members_iterate", "erk_dense_prepare", "erk_dense_at", "evaluate", "newton_block")


def _versions():
    loops = jitting.compiled_loops(*compiled.LOOP_MODULES)
    return {name: [str(s) for s in value.signatures] for name, value in vars(loops).items()
            if hasattr(value, "signatures") and hasattr(value, "py_func")}


@pytest.mark.skipif(not compiled.available(), reason="the compiler is turned off")
def test_every_compiled_loop_has_one_version_after_the_warm_up():
    versions = _versions()
    missing = [name for name in WARMED if not versions.get(name)]
    assert not missing, f"the warm-up compiled no version of {missing}"
    doubled = {name: sigs for name, sigs in versions.items() if len(sigs) > 1}
    assert not doubled, "compiled more than once (argument types differ between call sites): " + "; ".join(
        f"{name}: " + " | ".join(sigs) for name, sigs in doubled.items())


@pytest.mark.skipif(not compiled.available(), reason="the compiler is turned off")
def test_the_renormalisation_called_from_python_reuses_the_loops_version():
    """The stiff methods' and the delay models' renormalisation call ``orthonormalise`` from Python
    (tangent.renormalise) with arrays of the loops' own types: no second version."""
    from orbitdesk.engine.tangent import renormalise

    loops = compiled.engine_loops()
    before = len(loops.orthonormalise.signatures)
    V = np.array([[3.0, 1.0], [4.0, 2.0]])
    logs = np.empty(2)
    assert renormalise(loops, V, logs)
    # Gram-Schmidt by hand: |(3, 4)| = 5; (1, 2) - (11/25)(3, 4) = (-8, 6)/25, of length 2/5
    assert np.allclose(np.exp(logs), [5.0, 0.4], rtol=1e-14)
    assert np.allclose(V, [[0.6, -0.8], [0.8, 0.6]], rtol=1e-14)
    assert len(loops.orthonormalise.signatures) == max(before, 1)
