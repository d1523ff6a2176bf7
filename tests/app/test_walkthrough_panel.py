"""The walkthrough panel in the main window: record a step, change things, show the step again, leave for
the user's own state; undoable record/delete/reorder/edit; save and reopen; a step that names a parameter
the model lost; presenting mode."""

import time

import numpy as np
import pytest
from PySide6.QtCore import QModelIndex, Qt

from orbitdesk.document.project import Project, WalkthroughStep
from orbitdesk.samples.models import LORENZ

from .conftest import wait_for_trajectory

# Harmonic oscillator x'' = -w^2 x with x(0) = 1, x'(0) = 0: x(t) = cos(w t) (closed form).
OSCILLATOR = """# spring
x'' = -w^2*x - c*x'
w = 2 in [0.5, 4]
c = 0 in [0, 1]
x(0) = 1
x'(0) = 0
"""


def idle(qtbot, session, timeout=20000):
    qtbot.waitUntil(lambda: session.system is not None and session.trajectory is not None
                    and not session.jobs.running("run") and not session._run_timer.isActive(), timeout=timeout)


def open_oscillator(qtbot, window, tmp_path, steps=()):
    path = tmp_path / "spring.orbitdesk"
    from orbitdesk.document import project as core_project

    core_project.save(path, Project(name="spring", model=OSCILLATOR, walkthrough=list(steps)))
    window.open_path(path, ask=False)
    idle(qtbot, window.session)
    return path


def test_record_change_show_and_leave(qtbot, window, tmp_path):
    open_oscillator(qtbot, window, tmp_path)
    s, panel = window.session, window.walkthrough_panel
    assert panel.steps == [] and not s.dirty
    step = panel.record("Fast spring", "Look at the **period**.")
    assert step is not None and step.snapshot["parameters"]["w"] == 2.0
    assert s.dirty and len(panel.steps) == 1 and not panel.in_walkthrough
    assert set(step.snapshot["open_views"]) == {"timeseries", "phase_plane"}

    traj = wait_for_trajectory(qtbot, s, lambda: s.set_param("w", 3.0))
    np.testing.assert_allclose(traj.series("x"), np.cos(3.0 * traj.time), atol=1e-6)
    window.view_docks["phase_plane"].hide()

    traj = wait_for_trajectory(qtbot, s, lambda: panel.show_step(0))
    assert s.params["w"] == 2.0 and panel.problems == [] and panel.in_walkthrough
    np.testing.assert_allclose(traj.series("x"), np.cos(2.0 * traj.time), atol=1e-6)
    assert window.view_docks["phase_plane"].isVisible()  # the step had it open
    assert panel.title_label.text() == "Fast spring"
    assert "<strong>period</strong>" in panel.note_view.toHtml() or "period" in panel.note_view.toPlainText()
    assert panel.position_label.text() == "Step 1 of 1"

    traj = wait_for_trajectory(qtbot, s, panel.leave)
    assert s.params["w"] == 3.0 and not panel.in_walkthrough
    np.testing.assert_allclose(traj.series("x"), np.cos(3.0 * traj.time), atol=1e-6)
    assert not window.view_docks["phase_plane"].isVisible()  # the user's layout is back
    assert not panel.leave_button.isEnabled()


def test_showing_steps_is_not_an_edit_and_restores_solver_and_time_cursor(qtbot, window, tmp_path):
    steps = [WalkthroughStep("Long run", "", {"parameters": {"w": 1.0}, "solver": {"t_end": 30.0},
                                               "time_cursor": 12.5})]
    open_oscillator(qtbot, window, tmp_path, steps)
    s, panel = window.session, window.walkthrough_panel
    assert window.walkthrough_dock.isVisible()  # a project with steps shows its walkthrough
    t_end, w = s.solver.t_end, s.params["w"]
    traj = wait_for_trajectory(qtbot, s, panel.next)
    assert s.solver.t_end == 30.0 and traj.time[-1] == pytest.approx(30.0)
    assert s.time_cursor == pytest.approx(12.5)
    assert not s.dirty and s.undo_stack.count() == 0
    wait_for_trajectory(qtbot, s, panel.leave)
    assert (s.solver.t_end, s.params["w"]) == (t_end, w) and not s.dirty


def test_record_delete_reorder_and_text_edits_are_undoable(qtbot, window, tmp_path):
    open_oscillator(qtbot, window, tmp_path)
    s, panel = window.session, window.walkthrough_panel
    for title in ("one", "two", "three"):
        panel.step_list.clearSelection()
        panel.record(title)
    assert [st.title for st in panel.steps] == ["one", "two", "three"]
    assert [panel.step_list.item(i).text() for i in range(3)] == ["1.  one", "2.  two", "3.  three"]
    s.undo_stack.undo()
    assert [st.title for st in panel.steps] == ["one", "two"]
    s.undo_stack.redo()

    panel.move_step(0, 2)
    assert [st.title for st in panel.steps] == ["two", "three", "one"]
    s.undo_stack.undo()
    assert [st.title for st in panel.steps] == ["one", "two", "three"]

    # drag and drop in the list moves the rows of its model
    panel.step_list.setCurrentRow(0)
    panel.step_list.model().moveRow(QModelIndex(), 0, QModelIndex(), 3)
    qtbot.waitUntil(lambda: [st.title for st in panel.steps] == ["two", "three", "one"])
    assert panel.step_list.item(2).text() == "3.  one"
    s.undo_stack.undo()
    assert [st.title for st in panel.steps] == ["one", "two", "three"]

    panel.delete_step(1)
    assert [st.title for st in panel.steps] == ["one", "three"]
    s.undo_stack.undo()
    assert [st.title for st in panel.steps] == ["one", "two", "three"]

    # title and note typed in the edit fields; the note shows rendered
    assert panel.in_walkthrough  # clicking a row showed that step
    panel.leave()
    panel.edit_button.setChecked(True)
    panel.step_list.setCurrentRow(1)
    assert not panel.in_walkthrough  # choosing a step to edit does not put it on screen
    panel.title_edit.selectAll()
    qtbot.keyClicks(panel.title_edit, "Second look")
    panel.note_edit.setPlainText("Watch *x'* cross zero:\n\n- once\n- twice")
    assert panel.steps[1].title == "Second look"
    assert panel.steps[1].note.startswith("Watch")
    html = panel.note_view.toHtml()
    assert "Watch" in panel.note_view.toPlainText() and "twice" in panel.note_view.toPlainText()
    assert "<li" in html
    assert panel.step_list.item(1).text() == "2.  Second look"
    s.undo_stack.undo()  # the note
    s.undo_stack.undo()  # the title (typing merged into one step)
    assert (panel.steps[1].title, panel.steps[1].note) == ("two", "")
    assert panel.title_edit.text() == "two"
    while s.undo_stack.canUndo():
        s.undo_stack.undo()
    assert panel.steps == [] and not s.dirty


def test_steps_survive_save_and_reopen(qtbot, window, tmp_path):
    open_oscillator(qtbot, window, tmp_path)
    s, panel = window.session, window.walkthrough_panel
    wait_for_trajectory(qtbot, s, lambda: s.set_param("c", 0.2))
    panel.record("Damped", "The swing *dies away*.")
    window.views["phase_plane"].set_axes("x'", "x")
    panel.step_list.clearSelection()
    panel.record("Swapped axes")
    saved = tmp_path / "saved.orbitdesk"
    s.save(saved)
    assert not s.dirty
    window.open_path(saved, ask=False)
    idle(qtbot, s)
    assert [st.title for st in panel.steps] == ["Damped", "Swapped axes"]
    assert panel.steps[0].note == "The swing *dies away*."
    assert panel.steps[0].snapshot["parameters"]["c"] == 0.2
    assert panel.steps[1].snapshot["views"]["phase_plane"]["x"] == "x'"
    panel.show_step(1)
    assert (window.views["phase_plane"].x_name, window.views["phase_plane"].y_name) == ("x'", "x")
    assert panel.problems == []


def test_step_naming_a_removed_parameter_says_so_and_applies_the_rest(qtbot, window, tmp_path):
    steps = [WalkthroughStep("Old step", "", {"parameters": {"w": 3.0, "k_old": 5.0}, "initial": {"x": 0.5},
                                              "views": {"phase_plane": {"x": "gone", "y": "x"}}})]
    open_oscillator(qtbot, window, tmp_path, steps)
    s, panel = window.session, window.walkthrough_panel
    traj = wait_for_trajectory(qtbot, s, lambda: panel.show_step(0))
    assert s.params["w"] == 3.0 and s.initial["x"] == 0.5 and "k_old" not in s.params
    np.testing.assert_allclose(traj.series("x"), 0.5 * np.cos(3.0 * traj.time), atol=1e-6)
    assert any("'k_old'" in p for p in panel.problems)
    assert any("'gone'" in p for p in panel.problems)
    assert panel.problems_label.isVisible()
    assert "k_old" in panel.problems_label.text()


def test_camera_selected_equilibrium_and_time_cursor_come_back(qtbot, window, tmp_path):
    # Lorenz (1963) at r = 28 has three equilibria: the origin and (+-sqrt(beta (r - 1)), ..., r - 1)
    # (Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., sec. 9.2).
    path = tmp_path / "lorenz.txt"
    path.write_text(LORENZ, encoding="utf-8")
    s, panel = window.session, window.walkthrough_panel
    wait_for_trajectory(qtbot, s, lambda: window.open_path(path, ask=False))
    wait_for_trajectory(qtbot, s, lambda: s.set_solver(t_end=20.0))
    window.view_docks["phase_space_3d"].show()
    window.view_docks["equilibria"].show()
    view3d, eq = window.ensure_view("phase_space_3d"), window.ensure_view("equilibria")
    qtbot.waitUntil(lambda: len(eq.equilibria) == 3, timeout=30000)
    eq.select(2)
    view3d.set_camera({"distance": 31.0, "elevation": 12.0, "azimuth": 40.0})
    s.set_time_cursor(7.5)
    panel.record("Looking from the side")
    snap = panel.steps[0].snapshot
    assert snap["camera"]["distance"] == 31.0 and snap["selected_equilibrium"] == 2
    assert snap["time_cursor"] == 7.5 and {"phase_space_3d", "equilibria"} <= set(snap["open_views"])

    eq.select(0)
    view3d.set_camera({"distance": 18.0, "elevation": 50.0, "azimuth": -90.0})
    s.set_time_cursor(3.0)
    panel.show_step(0)
    cam = view3d.camera()
    # the step's angles; its distance, or further back where this dock's shape would cut the box off
    assert (cam["elevation"], cam["azimuth"]) == (12.0, 40.0) and cam["distance"] >= 31.0
    assert cam["distance"] == 31.0 or view3d.box_in_view()
    assert eq.selected_index() == 2 and s.time_cursor == 7.5
    panel.leave()
    cam = view3d.camera()
    assert (cam["distance"], cam["elevation"], cam["azimuth"]) == (18.0, 50.0, -90.0)
    assert eq.selected_index() == 0 and s.time_cursor == 3.0


def test_recorded_step_survives_an_edit_of_the_model(qtbot, window, tmp_path):
    open_oscillator(qtbot, window, tmp_path)
    s, panel = window.session, window.walkthrough_panel
    wait_for_trajectory(qtbot, s, lambda: s.set_param("c", 0.1))
    panel.record("Damped")
    # the damping term and its parameter are taken out of the model
    wait_for_trajectory(qtbot, s, lambda: (s.set_text(OSCILLATOR.replace(" - c*x'", "").replace(
        "c = 0 in [0, 1]\n", "").replace("w = 2", "w = 2.5")), s.validate_now()))
    assert "c" not in s.params and s.params["w"] == 2.5
    traj = wait_for_trajectory(qtbot, s, lambda: panel.show_step(0))
    assert s.params["w"] == 2.0  # the rest of the step is applied
    np.testing.assert_allclose(traj.series("x"), np.cos(2.0 * traj.time), atol=1e-6)
    assert len(panel.problems) == 1 and "'c'" in panel.problems[0] and "no longer has" in panel.problems[0]
    assert panel.problems_label.isVisible()
    wait_for_trajectory(qtbot, s, panel.leave)
    assert s.params["w"] == 2.5  # and leaving gives the edited model's value back


def test_presenting_mode_enlarges_the_type_and_takes_the_arrow_keys(qtbot, window, tmp_path, artifacts):
    steps = [WalkthroughStep(f"Step {k}", f"Note **{k}** with a list:\n\n- first\n- second",
                             {"parameters": {"w": float(k)}}) for k in (1, 2, 3)]
    open_oscillator(qtbot, window, tmp_path, steps)
    s, panel = window.session, window.walkthrough_panel
    note_size = panel.note_view.font().pointSizeF()
    title_size = panel.title_label.font().pointSizeF()
    qtbot.mouseClick(panel.present_button, Qt.MouseButton.LeftButton)
    assert panel.presenting and panel.current == 0
    qtbot.waitUntil(window.isFullScreen)
    assert panel.note_view.font().pointSizeF() >= 1.5 * note_size
    assert panel.title_label.font().pointSizeF() >= 1.5 * title_size
    assert not panel.steps_box.isVisible()
    qtbot.keyClick(window, Qt.Key.Key_Right)
    assert panel.current == 1 and s.params["w"] == 2.0
    qtbot.keyClick(window, Qt.Key.Key_PageDown)
    assert panel.current == 2
    qtbot.keyClick(window, Qt.Key.Key_Left)
    assert panel.current == 1
    idle(qtbot, s)
    qtbot.wait(200)
    window.grab().save(f"{artifacts}/walkthrough_presenting.png")
    qtbot.keyClick(window, Qt.Key.Key_Escape)
    assert not panel.presenting
    qtbot.waitUntil(lambda: not window.isFullScreen())
    assert panel.note_view.font().pointSizeF() == pytest.approx(note_size)
    assert panel.steps_box.isVisible() and panel.in_walkthrough
    qtbot.keyClick(window, Qt.Key.Key_Right)  # arrows are the user's again
    assert panel.current == 1


def test_escape_leaves_presenting_even_while_a_view_computes(qtbot, window, tmp_path):
    steps = [WalkthroughStep("One", "note", {"parameters": {"w": 1.5}, "open_views": ["phase_plane"]})]
    open_oscillator(qtbot, window, tmp_path, steps)
    s, panel = window.session, window.walkthrough_panel
    assert window.model_dock.isVisible()
    qtbot.mouseClick(panel.present_button, Qt.MouseButton.LeftButton)
    qtbot.waitUntil(window.isFullScreen)
    assert not window.model_dock.isVisible()  # no editor and no sliders on the stage
    view = window.views["phase_plane"]
    from orbitdesk.app.plots.plot_style import JobStrip

    strip = JobStrip(s, "Waiting", view)
    view.layout().addWidget(strip)

    def wait_for_cancel(cancel, report):
        while not cancel.cancelled:
            time.sleep(0.01)

    strip.run("long", wait_for_cancel, lambda _r: None)
    view.setFocus()
    qtbot.keyClick(view, Qt.Key.Key_Escape)
    assert not panel.presenting  # the first Esc ends presenting
    assert strip.running  # and the view's job goes on
    qtbot.waitUntil(lambda: not window.isFullScreen())
    assert window.model_dock.isVisible()
    strip.cancel()


def test_opening_another_project_ends_the_walkthrough(qtbot, window, tmp_path):
    steps = [WalkthroughStep("A", "", {"parameters": {"w": 1.5}})]
    open_oscillator(qtbot, window, tmp_path, steps)
    panel = window.walkthrough_panel
    panel.show_step(0)
    assert panel.in_walkthrough
    window.session.new()
    assert not panel.in_walkthrough and panel.steps == [] and panel.current is None
    assert panel.title_label.text() == "No walkthrough yet"


def test_a_step_brings_a_view_that_computes_on_request_up_to_date(qtbot, window, tmp_path):
    # the equilibria view computes through the views' common contract (compute), so a step that opens it
    # with Automatic off finds the rest points for the step's values; x'' = -w^2 x - c x' has one, the
    # origin, a centre for c = 0 with eigenvalues +-i w (closed form)
    step = WalkthroughStep("Rest point", "", {"parameters": {"w": 3.0}, "open_views": ["equilibria"],
                                              "views": {"equilibria": {"auto": False}}})
    open_oscillator(qtbot, window, tmp_path, [step])
    s, panel = window.session, window.walkthrough_panel
    panel.show_step(0)
    view = window.views["equilibria"]
    assert not view.auto.isChecked() and view.on_request and not view.follows_values()
    qtbot.waitUntil(lambda: len(s.equilibria) == 1, timeout=30000)
    eq = s.equilibria[0]
    assert np.allclose(eq.vector, 0.0) and np.allclose(sorted(np.abs(np.imag(eq.eigenvalues))), [3.0, 3.0])


def test_long_step_titles_wrap_in_the_list_instead_of_being_cut_off(qtbot, window, tmp_path):
    title = "Turning the shaking frequency: where the wobble jumps between two sizes"
    open_oscillator(qtbot, window, tmp_path, [WalkthroughStep(title=title), WalkthroughStep(title="Short")])
    steps = window.walkthrough_panel.step_list
    window.walkthrough_dock.show()
    qtbot.waitUntil(lambda: steps.isVisible() and steps.viewport().width() > 0)
    qtbot.waitUntil(lambda: steps.viewport().width() < steps.fontMetrics().horizontalAdvance(title), timeout=3000)
    first = steps.visualItemRect(steps.item(0))
    assert first.right() <= steps.viewport().width()  # the whole title inside the list's width
    assert first.height() >= 2 * steps.fontMetrics().height()  # on two lines
    assert not steps.horizontalScrollBar().isVisible()
