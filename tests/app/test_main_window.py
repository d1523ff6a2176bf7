"""The main window: open, run, look at the views, save and reopen, unsaved-work prompts, bad files,
undo of a parameter, exports, dock layout, and a screenshot of the whole window."""

import base64
import csv
import os

import numpy as np
import pytest
from PySide6.QtCore import QPointF, Qt
from PySide6.QtWidgets import QFileDialog, QMessageBox

from orbitdesk.document import project as core_project
from orbitdesk.document.project import ProjectError
from orbitdesk.samples.models import LORENZ_REF, model

from .conftest import wait_for_trajectory

# Lorenz, "Deterministic nonperiodic flow", J. Atmos. Sci. 20 (1963); Strogatz, Nonlinear Dynamics and
# Chaos, 2nd ed., sec. 9.2, with sigma = 10, r = 28, b = 8/3.
LORENZ = model(LORENZ_REF, ranges={"sigma": (0, 20), "r": (0, 50), "beta": (0, 5)})

# Harmonic oscillator x'' = -w^2 x: x(t) = cos(w t) for x(0) = 1, x'(0) = 0 (closed form).
OSCILLATOR = """# spring
x'' = -w^2*x
w = 2 in [0.5, 4]
x(0) = 1
x'(0) = 0
"""


def open_model(qtbot, window, tmp_path, text, name="model.txt", **solver):
    """Open a model text file (and apply solver settings as if they had been saved with it)."""
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    s = window.session
    traj = wait_for_trajectory(qtbot, s, lambda: window.open_path(path))
    if solver:
        traj = wait_for_trajectory(qtbot, s, lambda: s.set_solver(**solver))
        s.undo_stack.clear()
    return path, traj


def test_open_sample_model_run_and_see_it_in_both_views(qtbot, window, tmp_path):
    _, traj = open_model(qtbot, window, tmp_path, OSCILLATOR, "spring.txt", t_end=10.0)
    assert window.windowTitle() == "spring — OrbitDesk"
    np.testing.assert_allclose(traj.series("x"), np.cos(2 * traj.time), atol=1e-6)
    ts, pp = window.views["timeseries"], window.views["phase_plane"]
    assert ts.trajectory is traj and pp.trajectory is traj
    assert ts.checked() == ["x", "x'"]
    x_curve = ts._curves["x"]
    assert np.array_equal(x_curve.xData, traj.time) and np.array_equal(x_curve.yData, traj.series("x"))
    assert (pp.x_name, pp.y_name) == ("x", "x'")
    px, py = pp.curve.getData()
    # the orbit is the ellipse x^2 + (x'/w)^2 = 1
    np.testing.assert_allclose(px**2 + (py / 2) ** 2, 1.0, atol=1e-6)
    assert pp.field_item.getData()[0].size > 0  # a two-state flow gets direction arrows
    # Run again explicitly (F5 / Run action)
    again = wait_for_trajectory(qtbot, window.session, window.run_action.trigger)
    assert again is not traj and np.array_equal(again.states, traj.states)
    assert "points" in window.run_status.text()


def test_time_series_display_is_decimated_but_export_is_full(qtbot, window, tmp_path):
    _, traj = open_model(qtbot, window, tmp_path, OSCILLATOR, samples=200_000, t_end=50.0)
    ts = window.views["timeseries"]
    qtbot.wait(50)
    shown = ts._curves["x"].getData()[0]
    width = ts.plot.getViewBox().width()
    assert traj.time.size == 200_000
    assert shown.size <= 2 * width + 10  # peak decimation: a min/max pair per pixel column
    header, rows = ts.export_data()
    assert header == ["t", "x", "x'"] and rows.shape == (200_000, 3)
    path = tmp_path / "data.csv"
    assert window.export_data(path, ts)
    with open(path, newline="") as f:
        data = list(csv.reader(f))
    assert data[0] == ["t", "x", "x'"] and len(data) == 200_001
    assert float(data[-1][1]) == traj.series("x")[-1]


def test_power_spectrum_peaks_at_the_oscillation_frequency(qtbot, window, tmp_path):
    open_model(qtbot, window, tmp_path, OSCILLATOR, t_end=200.0, samples=20_001)
    ts = window.views["timeseries"]
    ts.set_series(["x"])
    ts.spectrum.setChecked(True)
    header, rows = ts.export_data()
    freq, power = rows[:, 0], rows[:, 1]
    # x = cos(2 t) has frequency w / (2 pi) = 1/pi cycles per unit time (closed form)
    assert freq[np.argmax(power)] == pytest.approx(1 / np.pi, abs=2 / 200.0)


def test_save_reopen_compare(qtbot, window, tmp_path, monkeypatch):
    _, traj = open_model(qtbot, window, tmp_path, LORENZ, "lorenz.txt")
    s = window.session
    wait_for_trajectory(qtbot, s, lambda: s.set_param("r", 24.5))
    window.views["timeseries"].set_series(["z"])
    window.views["phase_plane"].set_axes("x", "z")
    window.view_docks["phase_plane"].hide()
    assert window.windowTitle().startswith("• ")
    target = tmp_path / "saved.orbitdesk"
    monkeypatch.setattr(QFileDialog, "getSaveFileName", staticmethod(lambda *a, **k: (str(target)[:-10], "")))
    assert window.save()  # Save on an unsaved document asks for a name; the suffix is added
    assert window.windowTitle() == "lorenz — OrbitDesk"
    saved = core_project.load(target)
    assert saved.model == LORENZ and saved.parameters["r"].value == 24.5
    assert saved.parameters["r"].lo == 0 and saved.parameters["r"].hi == 50
    assert saved.views["timeseries"]["series"] == ["z"]
    assert saved.views["phase_plane"]["x"] == "x" and saved.views["phase_plane"]["y"] == "z"
    assert base64.b64decode(saved.views["_window"]["state"])

    window.view_docks["phase_plane"].show()
    window.views["phase_plane"].set_axes("x", "y")
    wait_for_trajectory(qtbot, s, lambda: window.open_path(tmp_path / "lorenz.txt"))
    assert s.params["r"] == 28.0
    traj = wait_for_trajectory(qtbot, s, lambda: window.open_path(target))
    assert traj.params["r"] == 24.5 and s.path == target and not s.dirty
    assert window.views["timeseries"].checked() == ["z"]
    assert not window.view_docks["phase_plane"].isVisible()  # the dock layout came back
    window.view_docks["phase_plane"].show()
    pp = window.views["phase_plane"]
    assert (pp.x_name, pp.y_name) == ("x", "z")
    again = s.to_project()
    assert (again.model, again.parameters, again.initial, again.solver) == \
        (saved.model, saved.parameters, saved.initial, saved.solver)
    assert again.views["timeseries"] == saved.views["timeseries"]
    assert again.views["phase_plane"] == saved.views["phase_plane"]


def test_closing_with_unsaved_work_asks_first(qtbot, window, tmp_path, message_boxes):
    open_model(qtbot, window, tmp_path, OSCILLATOR)
    window.session.set_param("w", 3.0)
    message_boxes.answer = QMessageBox.StandardButton.Cancel
    assert not window.close()
    assert window.isVisible() and len(message_boxes.texts("question")) == 1
    assert "not saved" in message_boxes.texts("question")[0]
    # replacing the document asks too; Cancel keeps it
    assert not window.new_document()
    assert window.session.params["w"] == 3.0
    message_boxes.answer = QMessageBox.StandardButton.Discard
    assert window.close()
    assert len(message_boxes.texts("question")) == 3


def test_closing_saved_work_does_not_ask(qtbot, window, tmp_path, message_boxes):
    open_model(qtbot, window, tmp_path, OSCILLATOR)
    assert window.close()
    assert message_boxes.calls == []


def test_save_answer_saves_before_closing(qtbot, window, tmp_path, message_boxes):
    open_model(qtbot, window, tmp_path, OSCILLATOR)
    window.session.save(tmp_path / "spring.orbitdesk")
    window.session.set_param("w", 1.5)
    message_boxes.answer = QMessageBox.StandardButton.Save
    assert window.close()
    assert core_project.load(tmp_path / "spring.orbitdesk").parameters["w"].value == 1.5


def test_bad_file_is_refused_with_the_message_and_nothing_changes(qtbot, window, tmp_path, message_boxes):
    _, traj = open_model(qtbot, window, tmp_path, OSCILLATOR, "spring.txt")
    window.session.set_param("w", 3.0)
    title, text, params = window.windowTitle(), window.session.text, dict(window.session.params)
    bad = tmp_path / "bad.orbitdesk"
    bad.write_text('{"format": "orbitdesk-project", "version": 1, "solver": {"method": "euler"}}',
                   encoding="utf-8")
    with pytest.raises(ProjectError) as err:
        core_project.load(bad)
    assert not window.open_path(bad, ask=False)
    shown = message_boxes.texts("critical")
    assert len(shown) == 1 and err.value.message in shown[0] and "$.solver.method" in shown[0]
    assert window.windowTitle() == title and window.session.text == text and window.session.params == params
    assert window.session.dirty
    assert not window.open_path(tmp_path / "missing.orbitdesk", ask=False)
    assert "no such file" in message_boxes.texts("critical")[-1]


def test_undo_redo_of_a_parameter_change_through_the_menu(qtbot, window, tmp_path):
    _, traj = open_model(qtbot, window, tmp_path, OSCILLATOR)
    s = window.session
    traj = wait_for_trajectory(qtbot, s, lambda: s.set_param("w", 3.0))
    np.testing.assert_allclose(traj.series("x"), np.cos(3 * traj.time), atol=1e-6)
    assert window.undo_action.isEnabled() and "w" in window.undo_action.text()
    traj = wait_for_trajectory(qtbot, s, window.undo_action.trigger)
    assert s.params["w"] == 2.0 and traj.params["w"] == 2.0 and not s.dirty
    assert window.windowTitle() == "model — OrbitDesk"
    traj = wait_for_trajectory(qtbot, s, window.redo_action.trigger)
    assert traj.params["w"] == 3.0 and window.windowTitle() == "• model — OrbitDesk"


def test_clicking_the_phase_plane_starts_trajectories(qtbot, window, tmp_path):
    open_model(qtbot, window, tmp_path, OSCILLATOR, t_end=5.0)
    pp = window.views["phase_plane"]
    assert pp.start_trajectory(0.5, 0.0)
    qtbot.waitUntil(lambda: pp.seed_runs and pp.seed_runs[0][0] is not None, timeout=10000)
    fwd, back = pp.seed_runs[0]
    assert back is None
    np.testing.assert_allclose(fwd.series("x"), 0.5 * np.cos(2 * fwd.time), atol=1e-6)
    # a real mouse click in the plot, with Shift: forward and backward
    vb = pp.plot.getViewBox()
    scene_pt = vb.mapViewToScene(QPointF(0.0, 1.0))
    view_pt = pp.plot_widget.mapFromScene(scene_pt)
    qtbot.mouseClick(pp.plot_widget.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.ShiftModifier,
                     view_pt)
    qtbot.waitUntil(lambda: len(pp.seed_runs) == 2 and pp.seed_runs[1][0] is not None, timeout=10000)
    fwd, back = pp.seed_runs[1]
    assert fwd.states[0, 0] == pytest.approx(0.0, abs=0.05) and fwd.states[1, 0] == pytest.approx(1.0, abs=0.1)
    assert back is not None and back.time[-1] == pytest.approx(-5.0)
    # changing a value recomputes the kept trajectories for the new value
    window.session.set_param("w", 1.0)
    qtbot.waitUntil(lambda: pp.seed_runs and pp.seed_runs[0][0] is not None
                    and pp.seed_runs[0][0].params["w"] == 1.0, timeout=10000)
    pp.clear_seeds()
    assert pp.seeds == [] and not any(item.isVisible() for item in pp.seed_items)


def test_equilibria_markers(qtbot, window, tmp_path):
    open_model(qtbot, window, tmp_path, OSCILLATOR)
    from orbitdesk.analyses.equilibria import Equilibrium

    pp = window.views["phase_plane"]

    def point(x, stable, kind):
        lam = {None: [1j, -1j], False: [1.0, -1.0], True: [-1.0, -2.0]}[stable]
        return Equilibrium({"x": x, "x'": 0.0}, np.array([x, 0.0]), np.eye(2), np.array(lam, dtype=complex),
                           np.eye(2, dtype=complex), kind, stable, sum(np.real(lam) < 0), sum(np.real(lam) > 0),
                           sum(np.real(lam) == 0), "newton")

    # the markers show the live document's equilibria (one list, whichever view or command put it there)
    window.session.set_equilibria([point(0.0, None, "centre (linear)"), point(1.0, False, "saddle"),
                                   point(-1.0, True, "stable node")])
    spots = pp.eq_item.points()
    assert [p.symbol() for p in spots] == ["s", "x", "o"]
    window.session.set_equilibria([])
    assert len(pp.eq_item.points()) == 0


def test_time_cursor_is_shared(qtbot, window, tmp_path):
    open_model(qtbot, window, tmp_path, OSCILLATOR, t_end=10.0)
    bar = window.run_bar
    bar.slider.setValue(500)
    assert window.session.time_cursor == pytest.approx(5.0)
    assert window.views["timeseries"].cursor.value() == pytest.approx(5.0)
    (px,), (py,) = window.views["phase_plane"].cursor_marker.getData()
    assert px == pytest.approx(np.cos(10.0), abs=1e-3) and py == pytest.approx(-2 * np.sin(10.0), abs=1e-2)
    window.views["timeseries"].cursor.setValue(2.5)
    assert window.session.time_cursor == pytest.approx(2.5) and bar.slider.value() == 250
    bar.play.setChecked(True)
    qtbot.waitUntil(lambda: window.session.time_cursor > 3.0, timeout=5000)
    bar.play.setChecked(False)


def test_run_bar_changes_solver_settings(qtbot, window, tmp_path):
    open_model(qtbot, window, tmp_path, OSCILLATOR)
    bar = window.run_bar
    traj = wait_for_trajectory(qtbot, window.session, lambda: bar.t_end.setValue(3.0))
    assert traj.time[-1] == pytest.approx(3.0)
    bar.method.setCurrentIndex(bar.method.findData("rk4"))
    assert window.session.solver.method == "rk4"
    window.session.undo_stack.undo()
    assert bar.method.currentData() == "dop853"


def test_map_model_switches_the_run_bar_to_steps(qtbot, window, tmp_path):
    open_model(qtbot, window, tmp_path, "x[n+1] = r*x*(1 - x)\nx[0] = 0.2\nr = 3.2\n")
    bar = window.run_bar
    assert bar.steps_action.isVisible() and not bar.t_end_action.isVisible()
    traj = wait_for_trajectory(qtbot, window.session, lambda: bar.steps.setValue(50))
    assert traj.time[-1] == 50


def test_view_menu_toggles_every_dock(qtbot, window):
    texts = [a.text() for a in window.view_menu.actions()]
    for dock in window.view_docks.values():
        assert dock.toggleViewAction().text() in texts
    dock = window.view_docks["timeseries"]
    dock.toggleViewAction().trigger()
    assert not dock.isVisible()
    dock.toggleViewAction().trigger()
    assert dock.isVisible()
    assert window.help_menu.title() == "&Help"


def test_screenshot_lorenz(qtbot, window, tmp_path, artifacts):
    s = window.session
    path, traj = open_model(qtbot, window, tmp_path, LORENZ, "lorenz.txt", t_end=40.0, samples=8000)
    assert traj.params == pytest.approx({"sigma": 10.0, "r": 28.0, "beta": 8 / 3})
    # The Lorenz attractor at these values lies within |x| < 20, |y| < 30, 0 < z < 50 (value from memory;
    # Strogatz, sec. 9.2, fig. 9.2.2 shows the x-z butterfly) and never settles down.
    x, y, z = traj.states[:, traj.time > 5]
    assert np.abs(x).max() < 25 and np.abs(y).max() < 35 and 0 < z.min() and z.max() < 55
    assert np.sign(x).min() == -1 and np.sign(x).max() == 1  # visits both wings
    window.views["phase_plane"].set_axes("x", "z")
    qtbot.wait(300)
    out = os.path.join(artifacts, "main_window_lorenz.png")
    assert window.grab().save(out)
    assert os.path.getsize(out) > 20_000


def test_a_view_opened_from_the_menu_is_in_sight_beside_the_others(qtbot, window, tmp_path):
    open_model(qtbot, window, tmp_path, OSCILLATOR, "spring.txt")
    docks = window.view_docks
    docks["equilibria"].toggleViewAction().trigger()
    qtbot.wait(50)
    eq, pp, ts = docks["equilibria"], docks["phase_plane"], docks["timeseries"]
    for dock in (eq, pp, ts):
        assert dock.isVisible() and not dock.visibleRegion().isEmpty(), dock.objectName()
        assert all(not other.isVisible() for other in window.tabifiedDockWidgets(dock))
    # the equilibria table sits beside the phase plane (same row, to its right), the time series above
    g = {d: d.geometry() for d in (eq, pp, ts)}
    assert abs(g[eq].top() - g[pp].top()) < 5 and g[eq].left() > g[pp].left()
    assert g[ts].bottom() < g[pp].top()
    assert window.views["equilibria"] is not None


def test_opening_a_project_never_keeps_the_layout_or_camera_of_the_one_before(qtbot, window, tmp_path):
    open_model(qtbot, window, tmp_path, LORENZ, "lorenz.txt", t_end=5.0, samples=500)
    window.show_view("phase_space_3d")
    view3d = window.views["phase_space_3d"]
    start_camera = view3d.camera()
    view3d.set_camera({**start_camera, "azimuth": 123.0, "elevation": 61.0})
    window.show_view("lyapunov")
    assert window.view_docks["lyapunov"].isVisible()
    open_model(qtbot, window, tmp_path, OSCILLATOR, "spring.txt")  # a model file: no layout of its own
    assert not window.view_docks["lyapunov"].isVisible() and not window.view_docks["phase_space_3d"].isVisible()
    assert window.view_docks["timeseries"].isVisible() and window.view_docks["phase_plane"].isVisible()
    cam = view3d.camera()
    assert (cam["azimuth"], cam["elevation"]) == (start_camera["azimuth"], start_camera["elevation"])


def test_a_backward_run_that_blows_up_is_cut_where_it_leaves_the_plot(qtbot, window, tmp_path):
    # x' = x^2 run backward from x = -1 is x(t) = -1/(1 + t): infinite at t = -1 (closed form);
    # y' = -y is harmless
    open_model(qtbot, window, tmp_path, "x' = x^2\ny' = -y\nx(0) = -0.5\ny(0) = 0.5\n", "blowup.txt", t_end=3.0)
    pp = window.views["phase_plane"]
    pp.fit_view()
    (x0, x1), (y0, y1) = pp.plot.getViewBox().viewRange()
    assert pp.start_trajectory(-1.0, 0.5, both=True)
    qtbot.waitUntil(lambda: pp.seed_runs and pp.seed_runs[0][1] is not None, timeout=10000)
    back = pp.seed_runs[0][1]
    assert back.status != "ok" and np.nanmin(back.series("x")) < -100 * (x1 - x0)  # it did blow up
    drawn = [item.getOriginalDataset()[0] for item in pp.seed_items if item.isVisible()]
    lowest = min(np.nanmin(x) for x in drawn if x is not None and len(x))
    assert lowest >= x0 - 3 * (x1 - x0)  # cut a little past the edge: no streak to minus infinity


def test_the_status_bar_names_each_job_under_way_with_its_progress(qtbot, window, tmp_path):
    open_model(qtbot, window, tmp_path, LORENZ, "lorenz.txt", t_end=5.0, samples=500)
    sweep = window.show_view("sweep")
    sweep.set_range("r", 20.0, 40.0, 400)
    sweep.transient.setValue(5e4)  # far longer than the test waits (the compiled sweep covers 2,000 in seconds)
    sweep.run_button.click()
    lyap = window.show_view("lyapunov")
    lyap.settle.setChecked(False)  # run the whole length: a settled Lorenz spectrum ends within a second or two
    lyap.length.setValue(3e5)
    lyap.compute()
    qtbot.waitUntil(lambda: "Sweeping r over 400 values" in window.jobs_label.text()
                    and "Lyapunov" in window.jobs_label.text() and "%" in window.jobs_label.text(),
                    timeout=180000)  # on a fresh clone the first sweep compiles its member loops before it reports
    window.session.cancel_all()
    qtbot.waitUntil(lambda: window.jobs_label.text() == "", timeout=20000)


def test_reopening_restores_zoom_cursor_and_computed_results(qtbot, window, tmp_path):
    _, traj = open_model(qtbot, window, tmp_path, LORENZ, "lorenz.txt", t_end=20.0, samples=2000)
    s = window.session
    pp = window.views["phase_plane"]
    pp.plot.getViewBox().setRange(xRange=(-5.0, 7.0), yRange=(-3.0, 4.0), padding=0)
    pp.plot.getViewBox().sigRangeChangedManually.emit([True, True])
    s.set_time_cursor(12.5)
    sweep = window.show_view("sweep")
    sweep.set_range("r", 20.0, 30.0, 6)
    sweep.set_sampling("maxima", observe="z")
    sweep.transient.setValue(10.0)
    with qtbot.waitSignal(sweep.sweepChanged, timeout=60000, check_params_cb=lambda r: r is not None
                          and r.values.size == 6):
        sweep.run()
    lyap = window.show_view("lyapunov")
    lyap.length.setValue(30.0)
    lyap.transient.setValue(5.0)
    with qtbot.waitSignal(lyap.resultChanged, timeout=60000):
        lyap.compute()
    sections = window.show_view("sections")
    sections.auto.setChecked(False)
    sections.set_plane("z", 27.0, "up")
    sections.count.setValue(20)
    with qtbot.waitSignal(sections.sectionChanged, timeout=60000):
        sections.compute()
    kept = (sweep.result.samples.copy(), lyap.result.exponents.copy(), sections.result.times.copy())
    target = tmp_path / "kept.orbitdesk"
    s.save(target)
    wait_for_trajectory(qtbot, s, lambda: window.open_path(tmp_path / "lorenz.txt", ask=False))
    assert sweep.result is None and lyap.result is None
    wait_for_trajectory(qtbot, s, lambda: window.open_path(target, ask=False))
    qtbot.waitUntil(lambda: sweep.result is not None and lyap.result is not None and sections.result is not None,
                    timeout=20000)
    (x0, x1), (y0, y1) = pp.plot.getViewBox().viewRange()
    assert (x0, x1, y0, y1) == pytest.approx((-5.0, 7.0, -3.0, 4.0), abs=1e-9)
    assert s.time_cursor == 12.5
    np.testing.assert_array_equal(sweep.result.samples, kept[0])
    np.testing.assert_array_equal(lyap.result.exponents, kept[1])
    np.testing.assert_array_equal(sections.result.times, kept[2])
    assert sweep.stale_bar.isHidden() and lyap.stale_bar.isHidden() and sections.stale_bar.isHidden()
    # the same project with an edited model: the kept results come back marked stale
    saved = core_project.load(target)
    saved.model = saved.model.replace("z' = x*y - beta*z", "z' = x*y - beta*z + 0")
    core_project.save(tmp_path / "edited.orbitdesk", saved)
    wait_for_trajectory(qtbot, s, lambda: window.open_path(tmp_path / "edited.orbitdesk", ask=False))
    qtbot.waitUntil(lambda: sweep.result is not None, timeout=20000)
    assert not sweep.stale_bar.isHidden() and "earlier version of the model" in sweep.stale_bar.label.text()


def test_an_angle_is_drawn_wrapped_in_the_phase_plane(qtbot, window, tmp_path):
    # a pendulum pushed over the top (theta'(0) = 6.5 > 2 sqrt(g), the separatrix speed): theta grows
    # without end, but drawn wrapped it stays in (-pi, pi], broken where it goes round
    text = "g = 9.81\ntheta'' = -g*sin(theta)\nangle theta\ntheta(0) = 0\ntheta'(0) = 6.5\n"
    _, traj = open_model(qtbot, window, tmp_path, text, "pendulum.txt", t_end=10.0, samples=4000)
    assert traj.series("theta")[-1] > 10  # the run itself is not wrapped
    pp = window.views["phase_plane"]
    x, _y = pp.curve.getOriginalDataset()
    finite = x[np.isfinite(x)]
    assert finite.min() >= -np.pi - 1e-12 and finite.max() <= np.pi + 1e-12
    assert np.isnan(x).sum() >= 3  # broken at every turn
    window.session.set_time_cursor(7.3)
    (px,), _ = pp.cursor_marker.getData()
    expected = traj.series("theta")[np.searchsorted(traj.time, 7.3)]
    assert px == pytest.approx(np.pi - np.mod(np.pi - expected, 2 * np.pi), abs=0.05)


def test_delay_model_run_bar_says_which_history_is_used(qtbot, window, tmp_path, artifacts):
    text = ("beta = 0.2\ngamma = 0.1\ntau = 17\nx' = beta*x(t - tau)/(1 + x(t - tau)^10) - gamma*x\n"
            "x(t) = 0.5 + 0.01*t for t <= 0\n")
    _path, traj = open_model(qtbot, window, tmp_path, text, "cells.txt", t_end=600.0, samples=3000)
    bar = window.run_bar
    assert bar.delay_note_action.isVisible() and not bar.method_action.isVisible()
    assert "x(t) = t/100 + 1/2 for t <= 0" in bar.delay_note.text()
    # Mackey & Glass (1977): at tau = 17 the solution stays within roughly 0.4..1.4 (values from memory)
    assert traj.ok and 0.2 < traj.states[0, traj.time > 100].min() < traj.states[0].max() < 1.6
    window.grab().save(os.path.join(artifacts, "delay_run_bar.png"))


@pytest.mark.slow
def test_long_shower_walkthrough_shows_roots_and_the_onset(qtbot, window, artifacts):
    # the sample's steps: the rightmost characteristic roots in the Equilibria view (W_0(-k tau)/tau at
    # k = 0.5, tau = 2: -0.159 + 0.669i, scipy's lambertw), the sweep's branch opening at k = pi/4
    from orbitdesk.app import help as help_ui

    path = help_ui.SAMPLES_DIR / "long_shower.orbitdesk"
    menu = window.samples_menu
    menu.aboutToShow.emit()
    next(a for a in menu.actions() if a.data() == str(path)).trigger()
    panel, s = window.walkthrough_panel, window.session
    for _ in range(2):
        qtbot.mouseClick(panel.next_button, Qt.MouseButton.LeftButton)
    view = window.views["equilibria"]
    qtbot.waitUntil(lambda: bool(view.equilibria) and s.params["k"] == 0.5, timeout=60000)
    eq = view.equilibria[0]
    assert eq.eigenvalues[0] == pytest.approx(complex(-0.159065751, 0.668617851), abs=1e-6)
    assert "stable" in view.table.item(0, view.table.columnCount() - 1).text() or eq.stable
    window.grab().save(os.path.join(artifacts, "long_shower_roots.png"))
    for _ in range(2):
        qtbot.mouseClick(panel.next_button, Qt.MouseButton.LeftButton)
    sweep = window.views["sweep"]
    qtbot.waitUntil(lambda: sweep.result is not None and sweep.result.values.size == 53, timeout=300000)
    r = sweep.result
    for i, k in enumerate(r.values):
        top = r.points(i)
        if k < 0.74:
            assert top.size == 0 or np.max(top) < 38.05, k
        if k > 0.85:
            assert top.size and np.max(top) > 38.5, k
    window.grab().save(os.path.join(artifacts, "long_shower_sweep.png"))


def test_a_long_status_message_is_cut_with_an_ellipsis_and_whole_in_the_tip(qtbot, window):
    """A run's long message (the flap sample's chattering stop, 200 characters) ran under the run state at the
    right of the status bar and was cut off mid-word ("per unit tim"): shown, it ends in "…" before the
    permanent widgets, and the bar's tip holds all of it; a short message is shown as it is."""
    long = ("At t = 1.25976 the event on line 16 (when x > gap then x' = -r*x') leaves the solution on its "
            "boundary, and the flow would carry it across again within 2.38e-05 time units, faster than the "
            "limit of 10000 events per unit time")
    window.session.statusMessage.emit(long)
    bar = window.statusBar()
    shown = bar.currentMessage()
    assert shown.endswith("…") and shown[:-1] in long
    right = min(w.geometry().left() for w in (window.run_status, window.progress, window.cancel_button)
                if w.isVisible())
    assert bar.fontMetrics().horizontalAdvance(shown) < right
    assert "faster than the limit of 10000 events per unit time" in bar.toolTip()
    window.session.statusMessage.emit("Saved model.orbitdesk")
    assert bar.currentMessage() == "Saved model.orbitdesk" and bar.toolTip() == ""


def test_views_opened_one_after_another_stay_readable_and_the_window_keeps_its_size(qtbot, window, tmp_path):
    """Seven views opened from the menu once put five docks side by side in one row: the window grew to
    3,878 px wide, far past the screen, and the plots were strips a few dozen pixels tall. Now a row holds
    what fits, the rows leave each plot room, and the views that do not fit wait as tabs behind the one
    just opened (still open, one click away)."""
    import pyqtgraph as pg

    from orbitdesk.app.dock_layout import READABLE

    open_model(qtbot, window, tmp_path, OSCILLATOR, "spring.txt")
    size = window.size()
    opened = ["sweep", "sections", "lyapunov", "basins", "parameter_map", "bifurcation"]
    for name in opened:
        window.show_view(name)
        qtbot.wait(100)
        assert window.size() == size, name
        dock = window.view_docks[name]
        assert dock.isVisible() and not dock.visibleRegion().isEmpty(), name  # the one just opened is in sight
        for plot in window.views[name].findChildren(pg.PlotWidget):
            if plot.isVisible():
                assert plot.height() >= READABLE - 20, (name, plot.height())
    docks = window.view_docks
    in_sight = [n for n, d in docks.items() if d.isVisible() and not d.visibleRegion().isEmpty()]
    assert "bifurcation" in in_sight and "timeseries" in in_sight
    for n in ["timeseries", "phase_plane", *opened]:
        assert docks[n].toggleViewAction().isChecked(), n  # all still open
        if n not in in_sight:  # behind a tab of a view in sight
            assert any(d in window.tabifiedDockWidgets(docks[n]) for d in (docks[m] for m in in_sight)), n
    for n in in_sight:
        geometry = docks[n].geometry()
        assert geometry.right() <= window.width() and geometry.bottom() <= window.height(), n


def test_a_project_the_command_line_kept_a_diagram_in_opens_with_the_view_that_shows_it(qtbot, window, tmp_path):
    from orbitdesk.cli import main
    from orbitdesk.samples.models import BRUSSELATOR

    path = tmp_path / "kept.orbitdesk"
    core_project.save(path, core_project.Project(name="kept", model=BRUSSELATOR))
    assert main(["continue", str(path), "--param", "b", "--from", "0", "--to", "4", "--keep"]) == 0
    wait_for_trajectory(qtbot, window.session, lambda: window.open_path(path))
    dock = window.view_docks["bifurcation"]
    qtbot.waitUntil(lambda: dock.isVisible() and not dock.visibleRegion().isEmpty(), timeout=10000)
    view = window.views["bifurcation"]
    # the Brusselator's Hopf point at b = 1 + a^2 = 2 (closed form), listed, current for the values saved
    assert [round(s.value, 9) for s in view.result.specials] == [2.0] and view.stale_bar.isHidden()
    assert window.view_docks["timeseries"].isVisible() and window.view_docks["phase_plane"].isVisible()
