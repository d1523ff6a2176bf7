"""The live document: validation, compiling and running in the background, undo, values, projects."""

import math
import time

import numpy as np
import pytest

from orbitdesk.document import project as core_project
from orbitdesk.engine import RunSettings
from orbitdesk.document.project import ParameterSetting, Project, ProjectError, WalkthroughStep

from .conftest import wait_for_trajectory

DECAY = "x' = -k*x\nx(0) = 2\nk = 0.5 in [0, 2]\n"


def load_text(qtbot, session, text, **solver):
    session.solver = RunSettings(**{**dict(t_end=4.0, samples=401), **solver})
    return wait_for_trajectory(qtbot, session, lambda: session.load_project(
        Project(name="m", model=text, solver=session.solver)))


def test_exponential_decay_matches_closed_form(qtbot, session):
    traj = load_text(qtbot, session, DECAY)
    assert session.system.states == ["x"]
    assert traj.params == {"k": 0.5}
    # closed form x(t) = x0 exp(-k t)
    np.testing.assert_allclose(traj.series("x"), 2 * np.exp(-0.5 * traj.time), rtol=1e-6)
    assert traj.time[-1] == pytest.approx(4.0)


def test_typing_is_validated_after_a_pause_and_errors_keep_last_system(qtbot, session):
    load_text(qtbot, session, DECAY)
    first = session.system
    with qtbot.waitSignal(session.modelParsed, timeout=3000) as parsed:
        session.set_text(DECAY + "y' = \n")
    assert not parsed.args[0].ok
    assert session.system is first  # the last valid system stays active
    traj = wait_for_trajectory(qtbot, session, lambda: session.set_text(DECAY + "y' = -y\n"))
    assert session.system is not first
    assert traj.state_names == ["x", "y"]


def test_comment_edits_do_not_recompile(qtbot, session):
    load_text(qtbot, session, DECAY)
    system = session.system
    with qtbot.waitSignal(session.modelParsed, timeout=3000):
        session.set_text(DECAY + "# only a remark\n")
    # the same system: nothing is compiled (waits for the session to be idle, not for a fixed time)
    qtbot.waitUntil(lambda: not session.busy and not session.run_pending(), timeout=10000)
    assert session.system is system and not session.job_running("compile")


def test_user_values_survive_edits_unless_the_written_value_changes(qtbot, session):
    load_text(qtbot, session, DECAY)
    wait_for_trajectory(qtbot, session, lambda: session.set_param("k", 1.25))
    traj = wait_for_trajectory(qtbot, session, lambda: session.set_text(DECAY + "c = 3\ny' = -c*y\n"))
    assert traj.params["k"] == 1.25 and session.params == {"k": 1.25, "c": 3.0}
    traj = wait_for_trajectory(qtbot, session, lambda: session.set_text(DECAY.replace("0.5", "0.75")))
    assert session.params == {"k": 0.75}
    assert traj.params == {"k": 0.75}


def test_undo_redo_of_typing_merges_keystrokes(qtbot, session):
    load_text(qtbot, session, DECAY)
    received = []
    session.textChanged.connect(received.append)
    for i in range(1, 6):
        session.set_text(DECAY + "# abcde"[:2 + i])
    assert session.undo_stack.count() == 1
    session.undo_stack.undo()
    assert session.text == DECAY and received[-1] == DECAY
    session.undo_stack.redo()
    assert session.text == DECAY + "# abcde"


def test_undo_redo_of_parameter_change_merges_one_sliders_moves(qtbot, session):
    load_text(qtbot, session, DECAY)
    for v in np.linspace(0.5, 1.5, 30)[1:]:
        session.set_param("k", v)
    assert session.undo_stack.count() == 1
    session.set_initial("x", 3.0)
    assert session.undo_stack.count() == 2
    traj = wait_for_trajectory(qtbot, session)
    assert traj.params["k"] == 1.5 and traj.states[0, 0] == 3.0
    session.undo_stack.undo()
    session.undo_stack.undo()
    traj = wait_for_trajectory(qtbot, session)
    assert session.params["k"] == 0.5 and traj.params["k"] == 0.5 and traj.states[0, 0] == 2.0
    assert not session.dirty
    session.undo_stack.redo()
    assert session.params["k"] == 1.5 and session.dirty


def test_reset_values_goes_back_to_the_model(qtbot, session):
    load_text(qtbot, session, DECAY)
    session.set_param("k", 1.0)
    session.set_initial("x", 5.0)
    session.reset_values()
    assert session.params == {"k": 0.5} and session.initial == {"x": 2.0}
    session.undo_stack.undo()
    assert session.params == {"k": 1.0} and session.initial == {"x": 5.0}


def test_dirty_tracking(qtbot, session):
    load_text(qtbot, session, DECAY)
    seen = []
    session.dirtyChanged.connect(seen.append)
    assert not session.dirty
    session.set_solver(t_end=8.0)
    assert session.dirty and seen == [True]
    session.undo_stack.undo()
    assert not session.dirty and seen == [True, False]
    with pytest.raises(KeyError):
        session.set_solver(nonsense=1)


def test_project_round_trip_keeps_everything(qtbot, session, tmp_path):
    proj = Project(
        name="Decay", model=DECAY, parameters={"k": ParameterSetting(0.9, 0.1, 3.0)}, initial={"x": 1.5},
        solver=RunSettings(method="rk45", t_end=3.0, samples=301),
        views={"timeseries": {"series": ["x"]}},
        walkthrough=[WalkthroughStep("Start", "look at the decay", {"params": {"k": 0.9}})],
        notes="a note")
    traj = wait_for_trajectory(qtbot, session, lambda: session.load_project(proj))
    assert traj.params == {"k": 0.9} and traj.states[0, 0] == 1.5
    np.testing.assert_allclose(traj.series("x"), 1.5 * np.exp(-0.9 * traj.time), rtol=1e-5)
    assert session.param_range("k") == (0.1, 3.0)
    path = session.save(tmp_path / "decay.orbitdesk")
    again = core_project.load(path)
    assert again.views.pop("_window") == {"time_cursor": 3.0}  # the cursor, at the run's end, goes in too
    assert again == proj
    assert not session.dirty and session.path == path


def test_model_ranges_are_used_unless_overridden(qtbot, session):
    load_text(qtbot, session, DECAY)
    assert session.param_range("k") == (0.0, 2.0)
    session.set_param_range("k", 0.0, 5.0)
    assert session.param_range("k") == (0.0, 5.0)
    assert session.to_project().parameters["k"] == ParameterSetting(0.5, 0.0, 5.0)
    session.undo_stack.undo()
    assert session.param_range("k") == (0.0, 2.0)


def test_open_text_file_and_refuse_bad_files(qtbot, session, tmp_path):
    model = tmp_path / "decay.txt"
    model.write_text(DECAY, encoding="utf-8")
    wait_for_trajectory(qtbot, session, lambda: session.open(model))
    assert session.text == DECAY and session.path is None and session.name == "decay"
    bad = tmp_path / "broken.orbitdesk"
    bad.write_text('{"format": "orbitdesk-project", "version": 1, "solver": {"rtol": -1}}', encoding="utf-8")
    with pytest.raises(ProjectError) as err:
        session.open(bad)
    assert err.value.path == "$.solver.rtol"
    assert session.text == DECAY and session.name == "decay"
    binary = tmp_path / "image.dat"
    binary.write_bytes(b"\x89PNG\x00\x00")
    with pytest.raises(ProjectError):
        session.open(binary)


def test_map_runs_are_iterations(qtbot, session):
    # logistic map at r = 2.5 converges to the fixed point 1 - 1/r (closed form)
    traj = load_text(qtbot, session, "x[n+1] = r*x*(1 - x)\nx[0] = 0.2\nr = 2.5\n", steps=200)
    assert traj.time[-1] == 200
    assert traj.final_state[0] == pytest.approx(1 - 1 / 2.5, abs=1e-9)


def test_run_job_drops_results_of_older_generations(qtbot, session):
    load_text(qtbot, session, DECAY)
    got = []

    def slow(cancel, report):
        time.sleep(0.2)
        return "old"

    session.run_job("probe", slow, got.append)
    session.set_param("k", 0.7)  # values changed while the job runs
    session.jobs.wait()
    # results are delivered in order: once the next job's is in, the stale one would be before it
    session.run_job("probe", lambda c, r: "new", got.append)
    qtbot.waitUntil(lambda: "new" in got, timeout=3000)
    assert got == ["new"]


def test_job_errors_are_messages_not_tracebacks(qtbot, session):
    errors = []

    def broken(cancel, report):
        return math.log(-1.0)

    session.run_job("probe", broken, lambda r: None, on_error=errors.append)
    qtbot.waitUntil(lambda: bool(errors), timeout=3000)
    assert errors == ["math domain error"]
    assert "Traceback" not in errors[0]


def test_newer_job_with_same_key_cancels_older(qtbot, session):
    got, tokens = [], []

    def long(cancel, report):
        for i in range(200):
            report(i / 200)
            time.sleep(0.005)
        return "long"

    tokens.append(session.run_job("k", long, got.append))
    tokens.append(session.run_job("k", lambda c, r: "short", got.append))
    qtbot.waitUntil(lambda: bool(got), timeout=3000)
    session.jobs.wait()
    assert got == ["short"] and tokens[0].cancelled


def test_blow_up_is_reported_plainly(qtbot, session):
    messages = []
    session.statusMessage.connect(messages.append)
    traj = load_text(qtbot, session, "x' = x^2\nx(0) = 1\n", t_end=2.0)
    # x(t) = 1/(1 - t) blows up at t = 1 (closed form)
    assert traj.status == "diverged"
    assert traj.time[-1] < 1.0 + 1e-6
    assert any("blows up" in m for m in messages)
