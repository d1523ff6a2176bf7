"""Cold compile of the engine's loops: everything the test suite's warm-up compiles (tests/conftest.py: the
compiled engines of Lorenz and Hénon with their batched kernels, a short run of each, sweeps through the
adaptive, fixed-step and map member loops), in a fresh child process with empty caches (``NUMBA_CACHE_DIR``
and ``ORBITDESK_CACHE`` in a new temporary folder). The same child runs once more on the caches the
first one filled (what every later process pays: loading the machine code).

Before/after side by side: the package as it was at an older commit (``--before COMMIT``, extracted by
``git archive`` into a temporary folder, default the commit before the compile-time work) against the
working tree, each in its own child process, one after the other. Figures are the children's processor
time (user + system, all threads): on a machine shared with other work the wall time measures the load.
The per-loop lines come from numba's compile events (outermost compilations only: a loop's time
includes the helpers and callees it compiled).

    .venv/bin/python -m benchmarks.bench_compile [--before COMMIT] [--only after]
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

from benchmarks.harness import Row

ROOT = Path(__file__).resolve().parent.parent
BEFORE = "e82738e"  # main before the loops were split for compile time

CHILD = r"""
import json, resource, sys, time
def cpu():
    r = resource.getrusage(resource.RUSAGE_SELF)
    return r.ru_utime + r.ru_stime
start = cpu()
import numba
from numba.core import event

loops = {}
depth = [0]
class Listener(event.Listener):
    def on_start(self, ev):
        depth[0] += 1
        if depth[0] == 1:
            self.t = time.process_time()
    def on_end(self, ev):
        depth[0] -= 1
        if depth[0] == 0:
            d = ev.data.get("dispatcher")
            name = getattr(d, "__name__", "?") if d is not None else "?"
            loops[name] = loops.get(name, 0.0) + time.process_time() - self.t
event.register("numba:compile", Listener())

from orbitdesk.analyses.sweep import SweepSettings, sweep
from orbitdesk.engine.compiled import engine_for
from orbitdesk.engine.runs import simulate
from orbitdesk.engine.settings import RunSettings
from orbitdesk.samples.models import HENON, LORENZ
from orbitdesk.system.compiled_system import compile_model

imported = cpu()
lorenz, henon = compile_model(LORENZ), compile_model(HENON)
for system in (lorenz, henon):
    engine_for(system, wait=True).batch
simulate(lorenz, RunSettings(t_end=0.1, samples=11))
simulate(henon, RunSettings(t_end=10, samples=11))
sweep(lorenz, "r", [20.0, 28.0], SweepSettings(mode="maxima", observe="z", transient=0.5, duration=1.0, samples=2,
                                               method="dop853"))
sweep(lorenz, "r", [20.0, 28.0], SweepSettings(mode="maxima", observe="z", transient=0.5, duration=1.0, samples=2,
                                               dt=0.01))
sweep(henon, henon.parameters[0], [1.0, 1.4], SweepSettings(transient=10, samples=5, lyapunov=True))
print(json.dumps({"cpu": cpu() - imported, "imports": imported - start, "loops": loops}))
"""


def _child(package_root: Path, caches: Path) -> dict:
    """One child process on ``package_root``'s orbitdesk with numba's and our caches in ``caches``."""
    env = dict(os.environ)
    env.pop("ORBITDESK_NO_JIT", None)
    env["NUMBA_CACHE_DIR"] = str(caches / "numba")
    env["ORBITDESK_CACHE"] = str(caches / "orbitdesk")
    env["PYTHONPATH"] = str(package_root)
    done = subprocess.run([sys.executable, "-c", CHILD], cwd=package_root, env=env, capture_output=True, text=True)
    if done.returncode:
        raise RuntimeError(done.stderr[-3000:])
    return json.loads(done.stdout.strip().splitlines()[-1])


def _extract(commit: str, folder: Path) -> Path:
    """The package as it was at ``commit``, in ``folder``."""
    archive = subprocess.run(["git", "archive", commit, "orbitdesk"], cwd=ROOT, capture_output=True, check=True)
    subprocess.run(["tar", "-x", "-C", str(folder)], input=archive.stdout, check=True)
    return folder


def measure(before: str | None = BEFORE, log=print) -> dict:
    results = {}
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        trees = {}
        if before:
            (tmp / "before").mkdir()
            trees["before"] = _extract(before, tmp / "before")
        trees["after"] = ROOT
        for label, tree in trees.items():
            caches = tmp / f"caches-{label}"
            cold = _child(tree, caches)
            warm = _child(tree, caches)
            results[label] = {"cold": cold, "warm": warm}
            top = sorted(cold["loops"].items(), key=lambda kv: -kv[1])
            log(f"{label}: cold {cold['cpu']:.1f} s CPU, from the cache {warm['cpu']:.1f} s; "
                + ", ".join(f"{name} {t:.1f}" for name, t in top[:12]))
    return results


def run(log=print) -> list[Row]:
    results = measure(log=log)
    before, after = results["before"]["cold"]["cpu"], results["after"]["cold"]["cpu"]
    warm = results["after"]["warm"]["cpu"]
    return [Row("cold compile of the loops, everything the test warm-up compiles (CPU s, empty caches, child "
                "process)", after, before, f"loaded from the cache afterwards: {warm:.1f} s CPU",
                f"the package at {BEFORE}", "under 60 s CPU")]


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--before", default=BEFORE, help="the older commit to compare with ('' for none)")
    args = parser.parse_args(argv)
    print(json.dumps(measure(args.before or None), indent=1))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
