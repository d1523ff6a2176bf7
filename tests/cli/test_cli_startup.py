"""A cold `orbitdesk run` loads only what the run needs: no other command's module, no scipy (the explicit
methods' loops and their tables need none), no numba for a short run, nothing of Qt. Checked in a child
process (a fresh interpreter), by the modules it has loaded when the run is done; no timing."""

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp

ROOT = Path(__file__).resolve().parents[2]

DRIVER = r"""
import sys
from orbitdesk.cli import main
code = main(sys.argv[1:])
print("LOADED", " ".join(sorted(sys.modules)), flush=True)
raise SystemExit(code)
"""

HEAVY = ("scipy.integrate", "scipy.optimize", "scipy.stats", "scipy.special", "numba", "PySide6", "pyqtgraph",
         "orbitdesk.app", "orbitdesk.analyses", "orbitdesk.exports", "orbitdesk.cli.sweep", "orbitdesk.cli.equilibria",
         "orbitdesk.cli.lyapunov", "orbitdesk.cli.fit", "orbitdesk.engine.delay", "orbitdesk.engine.model_events")


def _run_child(tmp_path, *args):
    env = dict(os.environ, HOME=str(tmp_path), XDG_CACHE_HOME=str(tmp_path / "cache"))
    env.pop("ORBITDESK_NO_JIT", None)
    proc = subprocess.run([sys.executable, "-c", DRIVER, *map(str, args)], env=env, capture_output=True, text=True,
                          timeout=240, cwd=ROOT)
    assert proc.returncode == 0, proc.stderr
    out, loaded = proc.stdout.rsplit("LOADED ", 1)
    return json.loads(out), set(loaded.split())


def test_a_cold_run_loads_neither_scipy_numba_nor_other_commands(tmp_path):
    path = tmp_path / "lorenz.txt"
    path.write_text("s = 10\nr = 28\nb = 8/3\nx' = s*(y - x)\ny' = x*(r - z) - y\nz' = x*y - b*z\n"
                    "x(0) = 1\ny(0) = 1\nz(0) = 1\n")
    data, loaded = _run_child(tmp_path, "run", path, "--t-end", "1", "--samples", "11", "--rtol", "1e-10",
                              "--atol", "1e-12", "--json")
    heavy = sorted(m for m in loaded if any(m == h or m.startswith(h + ".") for h in HEAVY))
    assert heavy == [], heavy
    assert "orbitdesk.engine.runs" in loaded and "orbitdesk.cli.run" in loaded  # the run did go through the engine
    # the run itself: Lorenz (1963) against scipy's DOP853 at a tighter tolerance
    ref = solve_ivp(lambda t, u: [10 * (u[1] - u[0]), u[0] * (28 - u[2]) - u[1], u[0] * u[1] - 8 / 3 * u[2]],
                    (0, 1), [1.0, 1.0, 1.0], method="DOP853", rtol=1e-12, atol=1e-14, t_eval=np.linspace(0, 1, 11))
    ours = np.array([data["states"][s] for s in "xyz"])
    assert np.allclose(data["t"], ref.t)
    assert np.max(np.abs(ours - ref.y)) < 1e-7


def test_the_stiff_method_loads_scipy_when_it_is_chosen(tmp_path):
    path = tmp_path / "lag.txt"
    path.write_text("k = 1000\nx' = -k*(x - cos(t))\nx(0) = 0\n")
    data, loaded = _run_child(tmp_path, "run", path, "--t-end", "2", "--samples", "3", "--method", "stiff",
                              "--json")
    assert "scipy.integrate" in loaded
    # closed form of x' = -k (x - cos t), x(0) = 0: x = k (k cos t + sin t - k e^{-k t}) / (k^2 + 1)
    k, t = 1000.0, np.array(data["t"])
    exact = k * (k * np.cos(t) + np.sin(t) - k * np.exp(-k * t)) / (k * k + 1)
    assert np.max(np.abs(np.array(data["states"]["x"]) - exact)) < 1e-4
