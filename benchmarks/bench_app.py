"""The app: start to window shown, and holding a 1,000,000-point trajectory in memory.

* Start: ``python -m orbitdesk open sample_projects/convection_loop.orbitdesk`` run in a child
  process whose only addition is an event filter that reports the first Show event of a top-level
  window and quits (``sitecustomize``-free: the child runs ``orbitdesk.cli.main`` itself after
  installing the filter). Timed from process start in the parent; goal ≤ 2 s. Baseline: a bare
  ``python -c "import PySide6.QtWidgets"`` start, so interpreter and Qt loading are visible.
* Memory: peak traced allocations (tracemalloc) and the child's peak resident size (ru_maxrss)
  while a 1,000,000-sample Lorenz run is computed and held; baseline: the arrays themselves.

The display needs X: with no DISPLAY, an Xvfb is started for the run and stopped after.
Not measured here yet: slider-to-redraw and 3D frames per second (see RESULTS.md).
"""

from __future__ import annotations

import contextlib
import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

from benchmarks.harness import Row

ROOT = Path(__file__).resolve().parents[1]
PROJECT = ROOT / "sample_projects" / "convection_loop.orbitdesk"

SHOWN = r"""
import sys, time
from PySide6.QtCore import QEvent, QObject, QTimer
from PySide6.QtWidgets import QApplication, QWidget
import orbitdesk.ui.app as app_module

class Shown(QObject):
    def eventFilter(self, obj, event):
        if event.type() == QEvent.Show and isinstance(obj, QWidget) and obj.isWindow():
            print("shown", flush=True)
            QTimer.singleShot(0, QApplication.instance().quit)
            QApplication.instance().removeEventFilter(self)
        return False

original = app_module.make_application
def make_application(argv=None):
    app = original(argv)
    app._shown_filter = Shown()
    app.installEventFilter(app._shown_filter)
    return app
app_module.make_application = make_application
from orbitdesk.cli import main
sys.exit(main(["open", sys.argv[1]]))
"""

MEMORY = r"""
import resource, sys, tracemalloc
from orbitdesk.core.engine import RunSettings, simulate
from orbitdesk.core.system import compile_model
LORENZ = "sigma = 10\nr = 28\nbeta = 8/3\nx' = sigma*(y - x)\ny' = x*(r - z) - y\nz' = x*y - beta*z\nx(0) = 1\n"
system = compile_model(LORENZ)
tracemalloc.start()
run = simulate(system, RunSettings(t_end=1000, rtol=1e-9, atol=1e-9, samples=1_000_000))
current, peak = tracemalloc.get_traced_memory()
held = run.states.nbytes + run.time.nbytes
print(peak, current, held, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024, run.time.size)
"""


@contextlib.contextmanager
def display():
    """The environment for Qt on X: the current DISPLAY, or a private Xvfb for the benchmark."""
    env = dict(os.environ, QT_QPA_PLATFORM="xcb")
    if os.environ.get("DISPLAY"):
        yield env
        return
    xvfb = shutil.which("Xvfb")
    if xvfb is None:
        yield dict(env, QT_QPA_PLATFORM="offscreen")
        return
    number = 90 + os.getpid() % 50
    server = subprocess.Popen([xvfb, f":{number}", "-screen", "0", "1600x1000x24", "-nolisten", "tcp"],
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        time.sleep(1.0)
        yield dict(env, DISPLAY=f":{number}")
    finally:
        server.terminate()
        server.wait(timeout=10)


def timed_start(args, env, marker=None) -> float:
    start = time.perf_counter()
    child = subprocess.Popen(args, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, env=env, text=True, cwd=ROOT)
    if marker:
        for line in child.stdout:
            if line.strip() == marker:
                break
        elapsed = time.perf_counter() - start
        try:
            child.wait(timeout=30)
        except subprocess.TimeoutExpired:
            child.kill()
        return elapsed
    child.wait(timeout=60)
    return time.perf_counter() - start


def run(log=print) -> list[Row]:
    rows = []
    with display() as env:
        env = dict(env, PYTHONPATH=str(ROOT))
        starts, bare = [], []
        for _ in range(3):
            starts.append(timed_start([sys.executable, "-c", SHOWN, str(PROJECT)], env, marker="shown"))
            bare.append(timed_start([sys.executable, "-c", "import PySide6.QtWidgets"], env))
        starts.sort()
        bare.sort()
        log(f"start to window shown: {', '.join(f'{s:.2f}' for s in starts)} s; bare Qt import {bare[1]:.2f} s")
        rows.append(Row("start to window shown (convection_loop sample, median of 3)", starts[1], bare[1],
                        f"platform {env['QT_QPA_PLATFORM']}", "python + import PySide6.QtWidgets", "≤ 2 s"))
    out = subprocess.run([sys.executable, "-c", MEMORY], capture_output=True, text=True, check=True, cwd=ROOT,
                         env=dict(os.environ, PYTHONPATH=str(ROOT))).stdout.split()
    peak, current, held, rss, size = (int(v) for v in out)
    mib = 1024 * 1024
    log(f"1,000,000-sample run: traced peak {peak / mib:.0f} MiB, held {current / mib:.0f} MiB, "
        f"arrays {held / mib:.0f} MiB, max RSS {rss / mib:.0f} MiB")
    rows.append(Row(f"memory: compute and hold a {size:,}-sample Lorenz run (MiB, not seconds: "
                    f"traced peak {peak / mib:.0f}, max RSS {rss / mib:.0f})", None, None,
                    f"held after the run {current / mib:.0f} MiB for {held / mib:.0f} MiB of arrays"))
    return rows


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run(log=lambda text: print(text, file=sys.stderr)))
