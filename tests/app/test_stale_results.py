"""Stress: a parameter moved 1,000 times in quick succession while runs start and are cancelled.

Only results for the final value may be shown, nothing may raise, and no worker may be left running.
"""

import numpy as np
import pytest
from PySide6.QtCore import QThreadPool

from orbitdesk.engine.runs import simulate
from orbitdesk.engine import RunSettings
from orbitdesk.document.project import Project
from orbitdesk.document import live as live_module
from orbitdesk.samples.models import LORENZ_REF, model

from .conftest import wait_for_trajectory

# Lorenz (Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., sec. 9.2); long enough runs that most are
# cancelled before they finish.
LORENZ = model(LORENZ_REF, ranges={"r": (0, 50)})


@pytest.mark.slow
def test_thousand_moves_show_only_the_final_value(qtbot, window, monkeypatch):
    s = window.session
    wait_for_trajectory(qtbot, s, lambda: s.load_project(
        Project(name="stress", model=LORENZ, solver=RunSettings(t_end=60.0, samples=20000))))
    pp = window.views["phase_plane"]
    assert pp.start_trajectory(5.0, 5.0)  # a clicked trajectory is recomputed on each change too
    qtbot.waitUntil(lambda: bool(pp.seed_runs) and pp.seed_runs[0][0] is not None, timeout=20000)

    submitted = {"run": 0}
    original_submit = s.jobs.submit

    def counting_submit(key, *args, **kwargs):
        submitted[key] = submitted.get(key, 0) + 1
        return original_submit(key, *args, **kwargs)

    monkeypatch.setattr(s.jobs, "submit", counting_submit)
    # undo merging reads a clock: one that ticks a millisecond per move keeps the 1,000 moves one quick
    # drag however loaded the machine is
    ticks = iter(range(10**9))
    monkeypatch.setattr(live_module, "clock", lambda: next(ticks) * 1e-3)
    shown = []
    s.trajectoryChanged.connect(lambda t: shown.append(t.params["r"]))

    values = np.linspace(20.0, 30.0, 1000)
    final = float(values[-1])
    for i, v in enumerate(values):
        s.set_param("r", float(v))
        if i % 5 == 0:
            qtbot.wait(2)  # let runs start (and be cancelled by the next move)
    moves_done = len(shown)
    qtbot.waitUntil(lambda: s.trajectory is not None and s.trajectory.params["r"] == final and not s.busy,
                    timeout=60000)
    qtbot.waitUntil(lambda: pp.seed_runs[0][0] is not None and pp.seed_runs[0][0].params["r"] == final,
                    timeout=60000)

    # many runs were started and almost all of them cancelled; none was shown after the last move
    assert submitted["run"] > 20
    assert len(shown) < submitted["run"] / 2
    assert shown[moves_done:] == [final]
    assert all(np.isclose(r, values).any() for r in shown)
    # what the views show is the final value's trajectory
    for view in (window.views["timeseries"], pp):
        assert view.trajectory is s.trajectory and view.trajectory.params["r"] == final
    direct = simulate(s.system, s.run_settings(), s.initial_vector(), s.param_vector())
    np.testing.assert_array_equal(direct.states, s.trajectory.states)
    assert s.undo_stack.count() == 1  # the click adds nothing; 1,000 slider moves merge into one step
    s.undo_stack.undo()
    assert s.params["r"] == 28.0

    s.shutdown()
    assert QThreadPool.globalInstance().activeThreadCount() == 0
    assert not s.busy
