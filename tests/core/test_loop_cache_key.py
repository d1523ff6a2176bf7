"""The compiled loops' cache entries are keyed by the source of every loop module: numba keys a function's
cache by its own file alone, so a loop whose helper lives in another module loaded its old machine code
(the old helper linked in) after the helper changed. Each case runs in child processes sharing one cache,
as separate runs of the program do."""

import os
import subprocess
import sys
import textwrap

import pytest

pytest.importorskip("numba")

from orbitdesk.engine import compiled, jitting  # noqa: E402

CALLER = textwrap.dedent("""
    from orbitdesk.engine.jitting import noref
    from loopcase.helper import scale


    @noref
    def total(a):
        s = 0.0
        for i in range(a.shape[0]):
            s += scale(a[i])
        return s
    """)
HELPER = textwrap.dedent("""
    from orbitdesk.engine.jitting import noref


    @noref
    def scale(x):
        return {factor} * x
    """)
CHILD = textwrap.dedent("""
    import numpy as np
    from orbitdesk.engine import jitting
    from loopcase import caller, helper

    loops = jitting.compiled_loops(caller, helper)
    value = loops.total(np.ones(3))
    print(value, sum(loops.total.stats.cache_hits.values()), sum(loops.total.stats.cache_misses.values()))
    """)


def _run(tmp_path, env):
    done = subprocess.run([sys.executable, "-c", CHILD], env=env, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    value, hits, misses = done.stdout.split()
    return float(value), int(hits), int(misses)


@pytest.mark.parametrize("folder", ["numba cache folder", "next to the source"])
def test_helper_changed_in_another_module_is_compiled_anew(tmp_path, folder):
    package = tmp_path / "loopcase"
    package.mkdir()
    (package / "__init__.py").write_text("")
    (package / "caller.py").write_text(CALLER)
    (package / "helper.py").write_text(HELPER.format(factor=2.0))
    env = {k: v for k, v in os.environ.items() if k not in ("NUMBA_CACHE_DIR", "ORBITDESK_NO_JIT")}
    env["PYTHONPATH"] = os.pathsep.join([str(tmp_path)] + [p for p in sys.path if p])
    if folder == "numba cache folder":
        env["NUMBA_CACHE_DIR"] = str(tmp_path / "cache")
    assert _run(tmp_path, env) == (6.0, 0, 1)  # compiled, kept
    assert _run(tmp_path, env) == (6.0, 1, 0)  # loaded from the cache: the stamp is stable between runs
    (package / "helper.py").write_text(HELPER.format(factor=5.0))  # the caller's file is unchanged
    assert _run(tmp_path, env) == (15.0, 0, 1)  # numba's own key loaded 6.0: the old helper linked in
    assert _run(tmp_path, env) == (15.0, 1, 0)


def test_stamp_covers_the_loop_modules_and_what_they_import():
    names = {os.path.basename(p) for p in jitting.loop_sources(compiled.LOOP_MODULES)}
    # every loop module, the markers' module, and the modules whose names the loops read (status codes,
    # member rows, the numpy versions of block helpers)
    assert {m.__name__.rsplit(".", 1)[1] + ".py" for m in compiled.LOOP_MODULES} <= names
    assert {"jitting.py", "status.py", "member_rows.py", "members_numpy.py"} <= names
    # not the parser, the code printer or the Python-side drivers: a change there recompiles no loop
    assert not names & {"compiled.py", "drivers.py", "runs.py", "codegen.py", "model.py", "__init__.py"}
    assert jitting.loops_stamp(compiled.LOOP_MODULES) == jitting.loops_stamp(compiled.LOOP_MODULES)
