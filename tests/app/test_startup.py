"""Start-up: the window paints before the heavy modules are loaded (sympy comes with the first model), and a
project given on the command line is opened right after that first paint."""

import json
import subprocess
import sys
from pathlib import Path

from .test_recovery import child_env

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "orbitdesk" / "samples" / "convection_loop.orbitdesk"

DRIVER = r"""
import sys
from PySide6.QtCore import QTimer
from orbitdesk.app import launch
qapp, win = launch.create(["orbitdesk"], sys.argv[1])
first = win._first_paint
shown = first._painted
def painted():
    heavy = sorted(m for m in ("sympy", "scipy", "orbitdesk.language.model", "orbitdesk.engine.runs") if m in sys.modules)
    print("AT FIRST PAINT", heavy, repr(win.session.project.name), flush=True)
    shown()
first._painted = painted
poll = QTimer()
def opened():
    s = win.session
    if s.trajectory is not None and not s.busy:
        print("OPENED", repr(s.project.name), s.system.states, flush=True)
        poll.stop()
        win.close()
poll.timeout.connect(opened)
poll.start(20)
QTimer.singleShot(120000, qapp.quit)
qapp.exec()
launch.finish(win)
"""


def test_the_window_paints_before_the_model_machinery_loads_then_opens_the_project(tmp_path):
    home = tmp_path / "home"
    home.mkdir()
    proc = subprocess.run([sys.executable, "-c", DRIVER, str(SAMPLE)], env=child_env(home), capture_output=True,
                          text=True, timeout=240, cwd=ROOT)
    assert "Traceback" not in proc.stderr, proc.stderr
    lines = proc.stdout.splitlines()
    first = next(line for line in lines if line.startswith("AT FIRST PAINT"))
    assert first.startswith("AT FIRST PAINT [] "), first  # none of them loaded yet
    name = json.loads(SAMPLE.read_text(encoding="utf-8"))["name"]
    assert f"OPENED {name!r}" in lines[-1] or any(line.startswith(f"OPENED {name!r}") for line in lines), lines
