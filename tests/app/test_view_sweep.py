"""Parameter sweep view: orbit diagrams in the background, click to set the parameter, cancel."""

import math
import os

import numpy as np
import pytest
from PySide6.QtCore import QPoint, Qt
from PySide6.QtWidgets import QApplication

from orbitdesk.samples.models import LOGISTIC_REF, LORENZ_REF, model

from .conftest import click_for_result, load_short as load, open_view, wait_for_trajectory

LOGISTIC = model(LOGISTIC_REF, r=3.5, ranges={'r': (2.5, 4)}, initial={'x[0]': 0.3})

FORCED_LINEAR = """zeta = 0.1 in [0.05, 0.5]
w = 1.4
x' = v
v' = -2*zeta*v - x + cos(w*t)
x(0) = 0
v(0) = 0
"""

LORENZ = model(LORENZ_REF, ranges={'r': (20, 200)})


def make_view(qtbot, session):
    return open_view(qtbot, session, "sweep", (1100, 600))


def run_sweep(qtbot, view, timeout=30000):
    return click_for_result(qtbot, view.run_button, view.sweepChanged, timeout)


def points_near(result, value):
    i = int(np.argmin(np.abs(result.values - value)))
    return result.values[i], result.points(i)


def test_logistic_map_orbit_diagram_and_exponent(qtbot, session, artifacts):
    view = make_view(qtbot, session)
    load(qtbot, session, LOGISTIC)
    assert view.sampling_mode() == "iterate"
    view.set_range("r", 2.8, 4.0, 601)
    view.transient.setValue(2000)
    view.samples.setValue(200)
    view.lyapunov.setChecked(True)
    result = run_sweep(qtbot, view)
    assert result.samples.shape == (601, 200)
    # fixed point x* = 1 - 1/r for 1 < r < 3 (Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., sec. 10.3)
    r, pts = points_near(result, 2.9)
    np.testing.assert_allclose(pts, 1 - 1 / r, atol=1e-6)
    # period-2 cycle x = ((r+1) +- sqrt((r-3)(r+1))) / (2r) for 3 < r < 1 + sqrt(6) (same section)
    r, pts = points_near(result, 3.2)
    expected = ((r + 1) + np.array([-1, 1]) * math.sqrt((r - 3) * (r + 1))) / (2 * r)
    np.testing.assert_allclose(np.unique(np.round(pts, 6)), expected, atol=1e-5)
    # at r = 4 the exponent is ln 2 (Strogatz, example 10.5.3 / closed form via the tent-map conjugacy)
    assert result.lyapunov[-1] == pytest.approx(math.log(2), abs=0.05)
    assert result.lyapunov[np.argmin(np.abs(result.values - 2.9))] < 0
    assert view.lyap_widget.isVisible()
    header, rows = view.export_data()
    assert header == ["r", "x", "largest Lyapunov exponent"] and rows.shape == (601 * 200, 3)
    view.grab().save(os.path.join(artifacts, "view_sweep_logistic.png"))


def test_clicking_the_diagram_sets_the_parameter(qtbot, session):
    view = make_view(qtbot, session)
    load(qtbot, session, LOGISTIC)
    view.set_range("r", 2.8, 4.0, 50)
    view.samples.setValue(10)
    run_sweep(qtbot, view)
    assert view.marker.value() == pytest.approx(3.5)
    vb = view.plot.getViewBox()
    scene = vb.mapViewToScene(pg_point(3.7, 0.5))
    where = view.plot_widget.mapFromScene(scene)
    with qtbot.waitSignal(session.valuesChanged, timeout=3000):
        qtbot.mouseClick(view.plot_widget.viewport(), Qt.MouseButton.LeftButton,
                         pos=QPoint(int(where.x()), int(where.y())))
    assert session.params["r"] == pytest.approx(3.7, abs=0.01)
    assert view.marker.value() == pytest.approx(session.params["r"])
    # the session re-runs with the new value: every view sees it
    traj = wait_for_trajectory(qtbot, session)
    assert traj.params["r"] == pytest.approx(session.params["r"])
    # undo puts it back (the change is an ordinary undoable edit)
    session.undo_stack.undo()
    assert session.params["r"] == 3.5 and view.marker.value() == pytest.approx(3.5)


def pg_point(x, y):
    from PySide6.QtCore import QPointF

    return QPointF(x, y)


def test_flow_sweep_per_period_matches_the_steady_response(qtbot, session):
    view = make_view(qtbot, session)
    load(qtbot, session, FORCED_LINEAR)
    assert view.sampling_mode() == "strobe"  # the forcing period is read off the model
    assert view.period.value() == pytest.approx(2 * math.pi / 1.4)
    view.set_range("zeta", 0.1, 0.5, 9)
    view.set_sampling("strobe", observe="x")
    view.transient.setValue(400.0)
    view.samples.setValue(5)
    result = run_sweep(qtbot, view)
    # steady response of x'' + 2 zeta x' + x = cos(w t) at t = kT: x = A cos(phi) (closed form,
    # A = 1/sqrt((1-w^2)^2 + (2 zeta w)^2), tan(phi) = 2 zeta w/(1 - w^2))
    w = 1.4
    for zeta, row in zip(result.values, result.samples):
        A = 1 / math.hypot(1 - w * w, 2 * zeta * w)
        phi = math.atan2(2 * zeta * w, 1 - w * w)
        np.testing.assert_allclose(row, A * math.cos(phi), atol=1e-6)


def test_cancelling_a_long_sweep(qtbot, session):
    view = make_view(qtbot, session)
    load(qtbot, session, LORENZ)
    view.set_range("r", 20.0, 200.0, 2000)
    view.set_sampling("maxima", observe="z")
    view.transient.setValue(20000.0)  # minutes of work even compiled: far longer than the test waits
    view.lyapunov.setChecked(True)
    view.run_button.click()
    assert view.strip.running and view.strip.cancel_button.isVisible()
    qtbot.waitUntil(lambda: view.strip.bar.value() > 0, timeout=20000)  # progress is shown
    qtbot.mouseClick(view.strip.cancel_button, Qt.MouseButton.LeftButton)
    assert view.strip.state == "cancelled" and not view.strip.cancel_button.isVisible()
    assert "Cancelled" in view.strip.label.text()
    # the worker notices the cancel and stops; nothing is shown
    qtbot.waitUntil(lambda: session.jobs.pool.activeThreadCount() == 0, timeout=10000)
    QApplication.processEvents()  # what the worker sent before it ended is delivered now
    assert view.result is None and view.points.data.size == 0
    assert not session.jobs.running("sweep")
    # the window still answers: controls work and a small sweep runs to the end
    view.set_range("r", 20.0, 30.0, 4)
    view.transient.setValue(5.0)
    view.samples.setValue(3)
    view.duration.setValue(20.0)
    view.lyapunov.setChecked(False)
    result = run_sweep(qtbot, view)
    assert result.values.size == 4
    # Esc in the view cancels too (the shortcut itself: key events need an active window, which a bare
    # virtual X server does not always give)
    view.set_range("r", 20.0, 200.0, 2000)
    view.transient.setValue(2000.0)
    view.run_button.click()
    shortcut = view.strip._shortcut
    assert shortcut.key().toString() == "Esc" and shortcut.parent() is view
    shortcut.activated.emit()
    assert view.strip.state == "cancelled"
    qtbot.waitUntil(lambda: session.jobs.pool.activeThreadCount() == 0, timeout=10000)


def test_settings_round_trip(qtbot, session):
    view = make_view(qtbot, session)
    load(qtbot, session, LORENZ)
    view.set_range("r", 24.0, 30.0, 123)
    view.set_sampling("plane", observe="x", plane=("z", 27.0), direction=-1)
    view.lyapunov.setChecked(True)
    d = view.view_settings()
    assert d["parameter"] == "r" and d["from"] == 24.0 and d["to"] == 30.0 and d["count"] == 123
    assert d["mode"] == "plane" and d["plane"] == {"state": "z", "value": 27.0, "direction": -1}
    proj = session.to_project()
    proj.views["sweep"] = d
    wait_for_trajectory(qtbot, session, lambda: session.load_project(proj))
    assert view.view_settings() == d
    s = view.settings()
    assert s.mode == "plane" and s.plane == ("z", 27.0) and s.direction == -1 and s.observe == "x"


def test_before_a_run_the_axis_shows_the_range_and_the_current_value(qtbot, session):
    view = make_view(qtbot, session)
    load(qtbot, session, LORENZ)
    assert view.parameter.currentText() == "r"  # the parameter the model gives a range
    assert (view.lo.value(), view.hi.value()) == (20.0, 200.0)
    (x0, x1), _ = view.plot.getViewBox().viewRange()
    assert x0 <= 28.0 <= x1 and x0 < 25 and x1 > 190
    assert view.marker.isVisible() and view.marker.value() == 28.0


def test_a_sweep_draws_its_pieces_as_they_arrive_and_keeps_them_when_cancelled(qtbot, session):
    from orbitdesk.analyses.sweep import sweep

    view = make_view(qtbot, session)
    load(qtbot, session, LORENZ)
    view.set_range("r", 20.0, 40.0, 96)
    view.set_sampling("maxima", observe="z")
    view.transient.setValue(3000.0)  # long enough that the cancel comes before the end, compiled or not
    view.run_button.click()
    qtbot.waitUntil(lambda: "so far" in view.info.text(), timeout=180000)  # drawn before the end
    assert view.strip.running and view.points.data.size > 0
    qtbot.mouseClick(view.strip.cancel_button, Qt.MouseButton.LeftButton)
    qtbot.waitUntil(lambda: session.jobs.pool.activeThreadCount() == 0, timeout=30000)
    kept = view.result
    assert kept is not None and 8 <= kept.values.size < 96
    assert f"first {kept.values.size} of 96 values" in view.info.text()
    np.testing.assert_array_equal(kept.values, np.linspace(20.0, 40.0, 96)[:kept.values.size])
    # what is kept is what the core computes for those values
    direct = sweep(session.system, "r", kept.values[:8], view.settings().checked(session.system),
                   u0=session.initial_vector(), p=session.param_vector())
    np.testing.assert_allclose(kept.samples[:8, :direct.samples.shape[1]], direct.samples, equal_nan=True)
    header, rows = view.export_data()
    assert set(np.unique(rows[:, 0])) <= set(kept.values)


def test_method_choice_reads_the_registry_and_reaches_the_sweep(qtbot, session):
    from orbitdesk.engine.methods import METHODS

    view = make_view(qtbot, session)
    load(qtbot, session, FORCED_LINEAR)
    labels = [view.method.itemText(i) for i in range(view.method.count())]
    assert labels == ["Automatic", *(m.label for m in METHODS.values())]
    assert view.settings().method is None and view.settings().dt is None and not view.dt.isVisible()
    view.method.setCurrentIndex(view.method.findData("stiff"))
    assert view.settings().method == "stiff" and view.settings().dt is None
    view.method.setCurrentIndex(view.method.findData("rk4"))
    assert view.dt.isVisible() and view.settings().method is None and view.settings().dt == view.dt.value()
    assert view.view_settings()["method"] == "rk4"
    view.apply_view_settings({"method": "bdf"})
    assert view.settings().method == "bdf"
    view.apply_view_settings({"dt": 0.02})  # saved before the method choice: the fixed step it ran
    assert view.settings().dt == pytest.approx(0.02)
