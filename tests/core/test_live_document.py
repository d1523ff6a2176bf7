"""The headless live document (document/live.py) and its undo stack (document/undo.py), without Qt:
what the window's Session and the command line both stand on."""


import numpy as np
import pytest

from orbitdesk.document import live
from orbitdesk.document.live import LiveDocument
from orbitdesk.document.project import Project, WalkthroughStep
from orbitdesk.engine.runs import simulate
from orbitdesk.engine.settings import RunSettings

DECAY = "x' = -k*x\nx(0) = 2\nk = 0.5 in [0, 2]\n"


@pytest.fixture
def ticks(monkeypatch):
    """Undo merging reads a clock: one we advance by hand, so merging never depends on the machine's load."""
    now = [0.0]
    monkeypatch.setattr(live, "clock", lambda: now[0])
    return now


def events_of(doc):
    seen = []
    for name in live.EVENTS:
        doc.subscribe(name, lambda *args, _n=name: seen.append(_n))
    return seen


def test_a_compiled_document_runs_the_closed_form():
    doc = LiveDocument.from_project(Project(name="d", model=DECAY,
                                            solver=RunSettings(t_end=4.0, samples=201)), compile=True)
    assert doc.system.states == ["x"] and doc.params == {"k": 0.5} and doc.initial == {"x": 2.0}
    doc.set_param("k", 0.25)
    traj = simulate(doc.system, doc.run_settings(), doc.initial_vector(), doc.param_vector())
    # closed form x(t) = x0 exp(-k t)
    np.testing.assert_allclose(traj.series("x"), 2 * np.exp(-0.25 * traj.time), rtol=1e-6)
    doc.set_trajectory(traj)
    assert doc.time_cursor == pytest.approx(4.0)


def test_edits_announce_themselves_and_undo_gives_the_old_values_back(ticks):
    doc = LiveDocument.from_project(Project(model=DECAY), compile=True)
    seen = events_of(doc)
    doc.set_param("k", 1.0)
    assert seen == ["values", "inputs", "dirty"] and doc.dirty
    assert doc.undo.undo_label() == "Change parameter k"
    doc.undo.undo()
    assert doc.params["k"] == 0.5 and not doc.dirty
    doc.undo.redo()
    assert doc.params["k"] == 1.0
    doc.set_solver(t_end=7.0)
    assert doc.run_settings().t_end == 7.0 and seen.count("settings") == 1
    doc.undo.undo()
    assert doc.solver.t_end == RunSettings().t_end


def test_slider_moves_merge_into_one_step_until_a_pause(ticks):
    doc = LiveDocument.from_project(Project(model=DECAY), compile=True)
    for i, v in enumerate((0.6, 0.7, 0.8)):
        ticks[0] = 0.1 * i
        doc.set_param("k", v)
    assert doc.undo.count() == 1
    ticks[0] = 10.0
    doc.set_param("k", 0.9)
    assert doc.undo.count() == 2
    doc.undo.undo()
    doc.undo.undo()
    assert doc.params["k"] == 0.5
    # moving back to where the step started leaves nothing to undo
    doc.undo.clear()
    doc.set_param("k", 0.7)
    doc.set_param("k", 0.5)
    assert doc.undo.count() == 0 and doc.params["k"] == 0.5


def test_merging_stops_at_the_saved_state(ticks, tmp_path):
    doc = LiveDocument.from_project(Project(model=DECAY), compile=True)
    doc.set_param("k", 0.6)
    doc.save(tmp_path / "d.orbitdesk")
    assert not doc.dirty
    doc.set_param("k", 0.7)
    assert doc.undo.count() == 2 and doc.dirty
    doc.undo.undo()
    assert not doc.dirty and doc.params["k"] == 0.6


def test_values_set_by_hand_survive_text_edits_unless_the_written_value_changes():
    doc = LiveDocument.from_project(Project(model=DECAY), compile=True)
    doc.set_param("k", 1.5)
    doc.set_text(DECAY.replace("x(0) = 2", "x(0) = 3"))
    doc.parse_now()
    doc.compile_now()
    assert doc.params["k"] == 1.5 and doc.initial["x"] == 3.0
    doc.set_text(DECAY.replace("k = 0.5", "k = 0.25"))
    doc.parse_now()
    doc.compile_now()
    assert doc.params["k"] == 0.25


def test_results_belong_to_the_values_they_were_found_for():
    doc = LiveDocument.from_project(Project(model=DECAY), compile=True)
    doc.set_equilibria([{"state": {"x": 0.0}}])
    doc.select_equilibrium(0)
    doc.set_cycle("a cycle")
    doc.set_param("k", 0.9)
    assert doc.current_cycle() is None and doc.current_equilibria() == []
    assert doc.equilibria_stale() == "Computed for k = 0.5 (now 0.9)" and doc.selected_equilibrium == 0  # kept, stale
    assert doc.cycle == "a cycle" and doc.cycle_stale() == "Computed for k = 0.5 (now 0.9)"
    doc.set_param("k", 0.5)
    assert doc.current_equilibria() == [{"state": {"x": 0.0}}] and doc.equilibria_stale() == ""
    assert doc.current_cycle() == "a cycle" and doc.cycle_stale() == ""
    doc.set_text(DECAY.replace("-k*x", "-k*x^3"))
    doc.parse_now()
    doc.compile_now()
    assert doc.equilibria == [] and doc.selected_equilibrium is None and doc.cycle is None  # another model: gone


def test_walkthrough_and_data_parts_are_undoable(ticks):
    doc = LiveDocument.from_project(Project(model=DECAY, walkthrough=[WalkthroughStep("One")]))
    parts, after = [], []
    doc.subscribe("part", parts.append)
    doc.replace_part("walkthrough", [WalkthroughStep("One"), WalkthroughStep("Two")], "Record walkthrough step",
                     after=after.append)
    assert [s.title for s in doc.project.walkthrough] == ["One", "Two"] and parts == ["walkthrough"]
    doc.set_step_text(1, "note", "a")
    doc.set_step_text(1, "note", "ab")
    assert doc.undo.count() == 2 and doc.project.walkthrough[1].note == "ab"
    doc.undo.undo()
    assert doc.project.walkthrough[1].note == ""
    doc.undo.undo()
    assert [s.title for s in doc.project.walkthrough] == ["One"] and after == [True, False]
    with pytest.raises(KeyError):
        doc.replace_part("model", "", "no")


def test_a_macro_is_one_step():
    doc = LiveDocument.from_project(Project(model=DECAY), compile=True)
    doc.undo.begin_macro("Apply fitted values")
    doc.set_param("k", 1.0)
    doc.set_initial("x", 5.0)
    doc.undo.end_macro()
    assert doc.undo.count() == 1 and doc.undo.undo_label() == "Apply fitted values"
    doc.undo.undo()
    assert (doc.params, doc.initial) == ({"k": 0.5}, {"x": 2.0})


def test_project_round_trip_through_the_document(tmp_path):
    doc = LiveDocument.from_project(Project(name="d", model=DECAY), compile=True)
    doc.set_param("k", 1.25)
    doc.set_param_range("k", 0.0, 4.0)
    doc.set_view_settings("timeseries", {"log_y": True})
    path = doc.save(tmp_path / "d.orbitdesk")
    again = LiveDocument.open(path, compile=True)
    assert again.params == {"k": 1.25} and again.param_range("k") == (0.0, 4.0)
    assert again.project.views["timeseries"] == {"log_y": True}
    text = tmp_path / "m.txt"
    text.write_text(DECAY, encoding="utf-8")
    plain = LiveDocument.open(text, compile=True)
    assert plain.path is None and plain.name == "m" and plain.system.states == ["x"]


def test_a_views_setting_of_what_it_computes_is_an_undo_step_and_a_drag_one_step(ticks):
    doc = LiveDocument.from_project(Project(model=DECAY + "a = 1 in [0, 3]\n"), compile=True)
    sweep = {"parameter": "k", "from": 0.0, "to": 2.0, "count": 200}
    doc.set_view_settings("sweep", sweep)            # the view's settings as it opened: no edit
    assert not doc.dirty and doc.undo.count() == 0
    restored = []
    doc.subscribe("view_restored", restored.append)
    for i, hi in enumerate((1.5, 1.2, 1.0)):          # a drag of the interval's end: one step
        ticks[0] = 0.2 * i
        doc.change_view_settings("sweep", {**sweep, "to": hi})
    ticks[0] = 10.0
    doc.change_view_settings("sweep", {**sweep, "to": 1.0, "parameter": "a"})
    assert doc.undo.count() == 2 and doc.dirty and restored == []
    assert doc.undo.undo_label() == "Change parameter sweep settings"
    doc.undo.undo()
    assert doc.project.views["sweep"]["parameter"] == "k" and doc.project.views["sweep"]["to"] == 1.0
    doc.undo.undo()
    assert doc.project.views["sweep"] == sweep and not doc.dirty and restored == ["sweep", "sweep"]
    doc.undo.redo()
    assert doc.project.views["sweep"]["to"] == 1.0 and doc.dirty and restored[-1] == "sweep"
    # how a view is shown (its plot's range, its tab) is no edit of the project
    doc.undo.undo()
    doc.change_view_settings("sweep", {**sweep, "range": [0, 1, 0, 1]})
    assert doc.project.views["sweep"]["range"] == [0, 1, 0, 1] and not doc.dirty and doc.undo.can_redo()


def test_undo_and_redo_of_a_views_setting_leave_how_it_is_shown_as_it_is_now(ticks):
    # the undo step holds what the view computes (view_settings.PROJECT_KEYS); the plot's range, the
    # number of values and the like, changed since, stay as they are when the step is undone or redone
    doc = LiveDocument.from_project(Project(model=DECAY + "a = 1 in [0, 3]\n"), compile=True)
    sweep = {"parameter": "k", "from": 0.0, "to": 2.0, "count": 200, "range": [0, 2, 0, 1]}
    doc.set_view_settings("sweep", sweep)
    doc.change_view_settings("sweep", {**sweep, "parameter": "a", "to": 3.0})
    ticks[0] = 10.0
    shown = {**doc.project.views["sweep"], "range": [0, 3, -1, 1], "count": 50}
    doc.set_view_settings("sweep", shown)            # then zoomed and fewer values: no edit
    doc.undo.undo()
    assert doc.project.views["sweep"] == {**shown, "parameter": "k", "to": 2.0}
    doc.set_view_settings("sweep", {**doc.project.views["sweep"], "range": [0, 2, 0, 0.5]})
    doc.undo.redo()
    assert doc.project.views["sweep"] == {**shown, "parameter": "a", "to": 3.0, "range": [0, 2, 0, 0.5]}
