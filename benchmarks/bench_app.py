"""The app: start to window shown, and the memory of a 1,000,000-point trajectory held and drawn.

* Start: ``python -m orbitdesk open orbitdesk/samples/convection_loop.orbitdesk`` with
  ``ORBITDESK_REPORT_SHOWN=quit``: the app prints the wall-clock time of the window's first paint,
  opens the project (after that paint), prints the time once its first run is drawn, and quits. Timed
  from just before the child is spawned; goal: the first paint under 1 s. Baseline, run alternately
  with it: ``python`` + ``import PySide6.QtWidgets`` + an empty QMainWindow of the same size, to
  its first paint (interpreter, Qt and the X connection, nothing of ours).
* Memory, computed and held: peak traced allocations (tracemalloc) and peak resident size
  (ru_maxrss, from a second child without tracemalloc) of a child that computes a
  1,000,000-sample Lorenz run (no Qt); baseline: the arrays themselves.
* Memory, held and drawn: a child with the real main window computes the same run through the
  session (worker thread), shows it in the phase plane, the time series and the 3D view, and turns
  the 3D camera a few frames; same two figures, tracemalloc started before the run.

The display needs X: with no DISPLAY, an Xvfb is started for the run and stopped after.
Per-user data and settings of the children go to a temporary folder.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from benchmarks.harness import Row
from orbitdesk.samples.models import LORENZ_REF, model

ROOT = Path(__file__).resolve().parents[1]
PROJECT = ROOT / "orbitdesk" / "samples" / "convection_loop.orbitdesk"
STARTS = 5
SAMPLES = 1_000_000
SMALL = 4_000  # the default number of samples: the app's own memory, for comparison
MIB = 1024 * 1024

BARE_SHOWN = r"""
import sys, time
from PySide6.QtCore import QEvent, QObject, QTimer
from PySide6.QtWidgets import QApplication, QMainWindow
app = QApplication(sys.argv[:1])
class FirstPaint(QObject):
    def eventFilter(self, obj, event):
        if event.type() == QEvent.Type.Paint:
            obj.removeEventFilter(self)
            QTimer.singleShot(0, lambda: (print(f"shown {time.time():.6f}", flush=True), app.quit()))
        return False
window = QMainWindow()
window.resize(1440, 900)
first = FirstPaint()
window.installEventFilter(first)
window.show()
app.exec()
"""

LORENZ = model(LORENZ_REF, initial={'y(0)': None, 'z(0)': None})

MEMORY = r"""
import resource, sys, tracemalloc
from orbitdesk.engine.runs import RunSettings, simulate
from orbitdesk.system.compiled_system import compile_model
system = compile_model(sys.argv[1])
if sys.argv[2] == "trace":
    tracemalloc.start()
run = simulate(system, RunSettings(t_end=1000, rtol=1e-9, atol=1e-9, samples=int(sys.argv[3])))
current, peak = tracemalloc.get_traced_memory()
held = run.states.nbytes + run.time.nbytes
print(peak, current, held, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024, run.time.size)
"""

WINDOW_CHILD = r"""
import json, resource, statistics, sys, time, tracemalloc
from PySide6.QtCore import QEvent, QEventLoop, QObject, QStandardPaths, QTimer
QStandardPaths.setTestModeEnabled(True)
from orbitdesk.app.launch import make_application
app = make_application(["orbitdesk-benchmark"])
from orbitdesk.engine import RunSettings
from orbitdesk.document.project import Project
from orbitdesk.app.main_window import MainWindow

def wait(done, seconds):
    '''Run the event loop (sleeping when idle) until done() or the time is up.'''
    loop, poll = QEventLoop(), QTimer()
    poll.timeout.connect(lambda: done() and loop.quit())
    poll.start(1)
    QTimer.singleShot(int(seconds * 1000), loop.quit)
    if not done():
        loop.exec()
    poll.stop()
    return done()

window = MainWindow()
window.resize(1440, 900)
window.show()
session = window.session
"""  # the start of every child script that measures the real main window (here and bench_ui_interaction)

DRAWN = WINDOW_CHILD + r"""
wait(lambda: False, 0.5)
if sys.argv[2] == "trace":
    tracemalloc.start()
session.load_project(Project(name="memory", model=sys.argv[1],
                             solver=RunSettings(t_end=1000, rtol=1e-9, atol=1e-9, samples=int(sys.argv[3]))))
wait(lambda: session.trajectory is not None and not session.busy, 600)
view = window.show_view("phase_space_3d")  # after the load: a project brings its own layout
wait(lambda: False, 0.5)
for k in range(10):
    view.glview.setCameraPosition(azimuth=-58 + 4 * k)
    view.glview.repaint()
    app.processEvents()
for name in ("phase_plane", "timeseries"):
    window.view_docks[name].raise_()
    app.processEvents()
wait(lambda: False, 0.5)
current, peak = tracemalloc.get_traced_memory()
run = session.trajectory
held = run.states.nbytes + run.time.nbytes
print(peak, current, held, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024, run.time.size)
"""


def _free_display() -> int:
    for n in range(90, 200):
        if not Path(f"/tmp/.X{n}-lock").exists() and not Path(f"/tmp/.X11-unix/X{n}").exists():
            return n
    raise RuntimeError("no free X display number")


@contextlib.contextmanager
def display():
    """The environment for Qt on X: the current DISPLAY, or a private Xvfb for the benchmark;
    per-user data, settings and caches of the children in a temporary folder."""
    with tempfile.TemporaryDirectory(prefix="orbitdesk-bench-") as home:
        env = dict(os.environ, QT_QPA_PLATFORM="xcb", ORBITDESK_DATA_DIR=str(Path(home) / "data"),
                   XDG_CONFIG_HOME=str(Path(home) / "config"), ORBITDESK_NO_DIALOGS="1",
                   PYTHONPATH=str(ROOT))
        if os.environ.get("DISPLAY"):
            yield env
            return
        xvfb = shutil.which("Xvfb")
        if xvfb is None:
            yield dict(env, QT_QPA_PLATFORM="offscreen")
            return
        number = _free_display()
        server = subprocess.Popen([xvfb, f":{number}", "-screen", "0", "1600x1000x24", "-nolisten", "tcp"],
                                  stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        try:
            for _ in range(100):
                if Path(f"/tmp/.X11-unix/X{number}").exists() or server.poll() is not None:
                    break
                time.sleep(0.05)
            yield dict(env, DISPLAY=f":{number}")
        finally:
            server.terminate()
            server.wait(timeout=10)


def time_to_shown(args, env, ready: list | None = None) -> float:
    """Seconds from spawning ``args`` to the wall-clock time it prints as ``shown SECONDS``; the seconds to
    ``ready SECONDS`` (the project open and its run drawn), when printed, are appended to ``ready``."""
    start = time.time()
    child = subprocess.Popen(args, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, env=env, text=True, cwd=ROOT)
    shown = None
    try:
        for line in child.stdout:
            if line.startswith("shown "):
                shown = float(line.split()[1])
                if ready is None:
                    break
            elif line.startswith("ready ") and ready is not None:
                ready.append(float(line.split()[1]) - start)
                break
        child.wait(timeout=60)
    except subprocess.TimeoutExpired:
        child.kill()
        child.wait()
    if shown is None:
        raise RuntimeError(f"{args[1:3]} never reported its first paint")
    return shown - start


def _memory(script: str, env, samples: int = SAMPLES) -> tuple:
    """(traced peak, traced at the end, bytes of the run's arrays, max RSS, samples). The resident size
    comes from a second child without tracemalloc, whose own records of millions of small blocks
    would inflate it."""
    def child(mode):
        args = [sys.executable, "-c", script, LORENZ, mode, str(samples)]
        out = subprocess.run(args, capture_output=True, text=True, check=True, cwd=ROOT, env=env,
                             timeout=1200).stdout.split()
        return [int(v) for v in out[-5:]]

    peak, current, held, _rss, size = child("trace")
    rss = child("rss")[3]
    return peak, current, held, rss, size


def run(log=print) -> list[Row]:
    rows = []
    with display() as env:
        ours_env = dict(env, ORBITDESK_REPORT_SHOWN="quit")
        ours_args = [sys.executable, "-m", "orbitdesk", "open", str(PROJECT)]
        bare_args = [sys.executable, "-c", BARE_SHOWN]
        time_to_shown(ours_args, ours_env)  # a first start fills the file caches for both
        starts, bare, ready = [], [], []
        for _ in range(STARTS):
            starts.append(time_to_shown(ours_args, ours_env, ready))
            bare.append(time_to_shown(bare_args, env))
        log(f"start to first paint: {', '.join(f'{s:.2f}' for s in sorted(starts))} s; "
            f"bare Qt window {', '.join(f'{s:.2f}' for s in sorted(bare))} s; "
            f"project open and its run drawn {', '.join(f'{s:.2f}' for s in sorted(ready))} s")
        rows.append(Row(f"start to window shown: `orbitdesk open` convection_loop sample to the first paint "
                        f"(median of {STARTS}, {env['QT_QPA_PLATFORM']})", statistics.median(starts),
                        statistics.median(bare), f"range {min(starts):.2f}–{max(starts):.2f} s; the project open "
                        f"and its first run drawn: median {statistics.median(ready):.2f} s "
                        f"(range {min(ready):.2f}–{max(ready):.2f})" if ready else
                        f"range {min(starts):.2f}–{max(starts):.2f} s",
                        "python + PySide6.QtWidgets + empty QMainWindow to its first paint", "< 1 s"))

        peak, current, held, rss, size = _memory(MEMORY, env)
        log(f"{size:,}-sample run: traced peak {peak / MIB:.0f} MiB, held {current / MIB:.0f} MiB, "
            f"arrays {held / MIB:.0f} MiB, max RSS {rss / MIB:.0f} MiB")
        rows.append(Row(f"memory: compute and hold a {size:,}-sample Lorenz run, no Qt (MiB, not seconds: "
                        f"traced peak {peak / MIB:.0f}, max RSS {rss / MIB:.0f})", None, None,
                        f"held after the run {current / MIB:.0f} MiB for {held / MIB:.0f} MiB of arrays"))

        peak, current, held, rss, size = _memory(DRAWN, env)
        _peak, small_held, _arrays, small_rss, small = _memory(DRAWN, env, SMALL)
        log(f"{size:,}-sample run in the app, drawn: traced peak {peak / MIB:.0f} MiB, held {current / MIB:.0f} MiB, "
            f"arrays {held / MIB:.0f} MiB, max RSS {rss / MIB:.0f} MiB; with {small:,} samples: held "
            f"{small_held / MIB:.0f} MiB, max RSS {small_rss / MIB:.0f} MiB")
        rows.append(Row(f"memory: the same run in the main window, drawn in the phase plane, time series and 3D "
                        f"view (MiB, not seconds: traced peak {peak / MIB:.0f}, max RSS {rss / MIB:.0f})", None, None,
                        f"held while shown {current / MIB:.0f} MiB for {held / MIB:.0f} MiB of arrays; the same "
                        f"window with a {small:,}-sample run: held {small_held / MIB:.0f}, "
                        f"max RSS {small_rss / MIB:.0f}"))
    return rows


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run(log=lambda text: print(text, file=sys.stderr)))
