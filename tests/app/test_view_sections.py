"""Poincaré section view: plane and stroboscopic sections computed in the background, the return map."""

import math
import os

import numpy as np
import pytest

from orbitdesk.samples.models import HENON_REF, model

from .conftest import load_model, open_view

# x'' + 2 zeta x' + x = cos(w t), written as a first-order model
FORCED_LINEAR = """zeta = 0.1
w = 1.4
x' = v
v' = -2*zeta*v - x + cos(w*t)
x(0) = 0
v(0) = 0
"""

LORENZ = """sigma = 10
r = 28
beta = 8/3
x' = sigma*(y - x)
y' = x*(r - z) - y
z' = x*y - beta*z
rate_z = x*y - beta*z
x(0) = 1
y(0) = 1
z(0) = 1
"""

DUFFING = """# a double-well oscillator shaken periodically
delta = 0.25
gamma = 0.3
w = 1
x'' = -delta*x' + x - x^3 + gamma*cos(w*t)
x(0) = 0.1
"""

HENON = model(HENON_REF, initial={'x[0]': 0, 'y[0]': 0})


def load(qtbot, session, text, **solver):
    return load_model(qtbot, session, text, dict(t_end=50.0, samples=2001), **solver)


def make_view(qtbot, session):
    return open_view(qtbot, session, "sections", (980, 520))


def wait_section(qtbot, view, action=None, timeout=30000):
    with qtbot.waitSignal(view.sectionChanged, timeout=timeout) as blocker:
        if action is not None:
            action()
    return blocker.args[0]


def test_forcing_period_is_detected_and_strobe_points_match_the_steady_response(qtbot, session):
    view = make_view(qtbot, session)
    view.count.setValue(20)
    view.transient.setValue(150.0)
    result = wait_section(qtbot, view, lambda: load(qtbot, session, FORCED_LINEAR))
    assert view.section_kind() == "strobe"
    assert view.period.value() == pytest.approx(2 * math.pi / 1.4, rel=1e-12)
    # steady response A cos(w t - phi), A = 1/sqrt((1-w^2)^2 + (2 zeta w)^2), tan phi = 2 zeta w / (1-w^2)
    # (any vibrations text, e.g. Thomson, Theory of Vibration with Applications, sec. 3.1); at t = kT:
    zeta, w = 0.1, 1.4
    A = 1 / math.hypot(1 - w * w, 2 * zeta * w)
    phi = math.atan2(2 * zeta * w, 1 - w * w)
    np.testing.assert_allclose(result.points[0], A * math.cos(phi), atol=1e-6)
    np.testing.assert_allclose(result.points[1], A * w * math.sin(phi), atol=1e-6)
    assert result.times.size == 20
    header, rows = view.export_data()
    assert header == ["t", "x", "v"] and rows.shape == (20, 3)
    # the return map of x sits on the diagonal: a fixed point of the period map
    xk, xk1 = view.return_points.getData()
    np.testing.assert_allclose(xk, xk1, atol=1e-6)


def test_plane_section_of_a_harmonic_oscillator(qtbot, session):
    view = make_view(qtbot, session)
    view.auto.setChecked(False)
    load(qtbot, session, "x' = y\ny' = -x\nx(0) = 0\ny(0) = 2\n")
    view.set_plane("x", 0.0, "up")
    view.count.setValue(6)
    view.transient.setValue(0.0)
    result = wait_section(qtbot, view, view.compute)
    # x = 2 sin t: upward crossings of x = 0 at t = 2 pi k with y = 2 (the start itself is not a crossing)
    np.testing.assert_allclose(result.times, 2 * math.pi * np.arange(1, 7), rtol=1e-7)
    np.testing.assert_allclose(result.series("y"), 2.0, rtol=1e-7)
    view.set_plane("x", 0.0, "both")
    result = wait_section(qtbot, view, view.compute)
    np.testing.assert_allclose(np.diff(result.times), math.pi, rtol=1e-7)


def test_lorenz_map_of_successive_maxima(qtbot, session, artifacts):
    view = make_view(qtbot, session)
    view.auto.setChecked(False)
    load(qtbot, session, LORENZ)
    # maxima of z are the downward crossings of z' = 0 (the derived quantity rate_z)
    view.set_plane("rate_z", 0.0, "down")
    view.count.setValue(400)
    view.transient.setValue(20.0)
    view.set_view_axes("x", "y", "z")
    result = wait_section(qtbot, view, view.compute)
    z = result.series("z")
    assert z.size == 400
    # Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., sec. 9.4: z_{n+1} = f(z_n) is a cusp-shaped curve
    # with |f'(z)| > 1 everywhere; both branches are steeper than the diagonal.
    zk, zk1 = z[:-1], z[1:]
    peak = zk[np.argmax(zk1)]
    left, right = zk < peak - 0.5, zk > peak + 0.5
    slope_left = np.polyfit(zk[left], zk1[left], 1)[0]
    slope_right = np.polyfit(zk[right], zk1[right], 1)[0]
    assert slope_left > 1 and slope_right < -1
    qtbot.wait(30)
    view.grab().save(os.path.join(artifacts, "view_sections_lorenz_map.png"))


def test_duffing_strobe_picture_and_settings(qtbot, session, artifacts):
    view = make_view(qtbot, session)
    view.count.setValue(1500)
    view.transient.setValue(100.0)
    result = wait_section(qtbot, view, lambda: load(qtbot, session, DUFFING))
    assert view.section_kind() == "strobe" and result.times.size == 1500
    np.testing.assert_allclose(np.diff(result.times), 2 * math.pi, rtol=1e-12)
    view.set_view_axes("x", "x'", "x")
    qtbot.wait(30)
    view.grab().save(os.path.join(artifacts, "view_sections_duffing.png"))
    d = view.view_settings()
    assert d["kind"] == "strobe" and d["count"] == 1500 and d["axes"] == ["x", "x'"]
    other = make_view(qtbot, session)
    other.auto.setChecked(False)
    other.apply_view_settings({**d, "kind": "plane", "coordinate": "x'", "value": 0.5, "direction": "down"})
    assert other.section_kind() == "plane" and other.coordinate.currentText() == "x'"
    assert other.value.value() == 0.5 and other.view_settings()["direction"] == "down"


def test_values_change_recomputes_and_maps_show_their_iterates(qtbot, session):
    view = make_view(qtbot, session)
    view.count.setValue(10)
    view.transient.setValue(300.0)  # the free response decays like exp(-zeta t)
    wait_section(qtbot, view, lambda: load(qtbot, session, FORCED_LINEAR))
    result = wait_section(qtbot, view, lambda: session.set_param("w", 0.5))
    assert view.period.value() == pytest.approx(2 * math.pi / 0.5)  # follows the model's forcing
    A = 1 / math.hypot(1 - 0.25, 2 * 0.1 * 0.5)
    phi = math.atan2(2 * 0.1 * 0.5, 1 - 0.25)
    np.testing.assert_allclose(result.points[0], A * math.cos(phi), atol=1e-6)

    load(qtbot, session, HENON, steps=2000)
    assert not view.compute_button.isEnabled()
    xk, xk1 = view.return_points.getData()
    traj = session.trajectory
    np.testing.assert_array_equal(xk1, traj.series("x")[1:])
    # y[n+1] = b x[n]: the section points (x, y) of the orbit obey it exactly
    header, rows = view.export_data()
    assert header == ["n", "x", "y"]
    np.testing.assert_allclose(rows[1:, 2], 0.3 * rows[:-1, 1], rtol=1e-12)


def test_a_strobe_phase_samples_later_in_each_period(qtbot, session):
    from orbitdesk.engine.runs import RunSettings, simulate

    view = make_view(qtbot, session)
    view.apply_view_settings({"kind": "strobe", "count": 4, "transient": 20.0, "auto": False})
    load(qtbot, session, DUFFING)
    period = view.period.value()
    assert period == pytest.approx(2 * math.pi)  # read off cos(w t), w = 1
    view.phase.setValue(1.5)
    result = wait_section(qtbot, view, view.compute)
    k0 = math.ceil(20.0 / period - 1e-9)
    assert result.times == pytest.approx(1.5 + period * np.arange(k0, k0 + 4), rel=1e-12)
    # the state there is the state of a plain run to that time
    direct = simulate(session.system, RunSettings(t_end=float(result.times[0]), samples=2, rtol=1e-10, atol=1e-12),
                      session.initial_vector(), session.param_vector())
    assert result.points[:, 0] == pytest.approx(direct.final_state, abs=1e-6)
    assert view.view_settings()["phase"] == 1.5


def test_plane_section_of_a_delay_model(qtbot, session, artifacts):
    # x' = -(pi/2) x(t - 1) with the history cos(pi t / 2): the solution stays cos(pi t / 2) (closed form),
    # rising through 0 at t = 3, 7, 11, ... with x'(t) = pi/2 there
    view = make_view(qtbot, session)
    view.auto.setChecked(False)
    load(qtbot, session, "a = pi/2\nx' = -a*x(t - 1)\nx(t) = cos(a*t) for t <= 0\ny' = -y + x\n")
    view.set_plane("x", 0.0, "up")
    view.count.setValue(5)
    view.transient.setValue(0.0)
    result = wait_section(qtbot, view, view.compute)
    np.testing.assert_allclose(result.times, [3.0, 7.0, 11.0, 15.0, 19.0], atol=1e-6)
    view.grab().save(os.path.join(artifacts, "view_sections_delay.png"))


def test_a_period_one_section_is_shown_as_a_dot_at_the_scale_of_the_run(qtbot, session):
    """The steady response of a damped linear oscillator is periodic with the forcing period, so its strobe
    section is one point (closed form in the test above); the plot shows it at the scale of the run (a
    twentieth of the run's range at least), not its round-off spread blown up to fill the axes."""
    view = make_view(qtbot, session)
    view.count.setValue(20)
    view.transient.setValue(150.0)
    result = wait_section(qtbot, view, lambda: load(qtbot, session, FORCED_LINEAR))
    x, v = result.points
    traj = session.trajectory
    assert np.ptp(x) < 1e-6 and np.ptp(v) < 1e-6  # one point, to round-off
    for plot, extents in ((view.section_plot, (np.ptp(traj.series("x")), np.ptp(traj.series("v")))),
                          (view.return_plot, (np.ptp(traj.series("x")),) * 2)):
        for (lo, hi), extent in zip(plot.getViewBox().viewRange(), extents):
            assert hi - lo >= 0.05 * extent * (1 - 1e-9)
    (lo, hi), _ = view.section_plot.getViewBox().viewRange()
    assert lo <= x.min() and x.max() <= hi  # and the dot is in sight


def test_a_model_after_a_one_state_model_gets_its_own_section_axes(qtbot, session):
    """After a one-state model (its section points can only be drawn against the time) a forced oscillator's
    section is drawn x against x' (the picture of a strobe section), not x against the time kept from before
    (seen on opening the shaken beam and flap samples: two columns of dots against t where the notes speak of
    "two dots")."""
    view = make_view(qtbot, session)
    load(qtbot, session, "k = 1\nu' = -k*u\nu(0) = 1\n")
    qtbot.waitUntil(lambda: view.v_combo.currentText() == "t")
    load(qtbot, session, DUFFING)
    qtbot.waitUntil(lambda: view.h_combo.currentText() == "x")
    assert view.v_combo.currentText() == "x'"


def test_a_model_without_forcing_after_a_forced_one_gets_a_plane_section(qtbot, session):
    """Opening an autonomous model after a forced one (the flap sample, then the shower sample): the section
    is a plane again, not the forced model's stroboscopic section (which a model with nothing periodic
    driving it has no period for, and which a delay model refuses)."""
    view = make_view(qtbot, session)
    wait_section(qtbot, view, lambda: load(qtbot, session, DUFFING))
    assert view.section_kind() == "strobe"
    load(qtbot, session, LORENZ)
    qtbot.waitUntil(lambda: view.system is session.system)
    assert view.section_kind() == "plane"


def test_a_closed_section_view_waits_until_it_is_opened_again(qtbot, window, tmp_path):
    """A section view whose dock is closed computed a section of every model opened after it (work nobody
    saw, and the bracket sample's report listed "Section: 0 crossings of 500" left from the convection loop):
    closed, it computes nothing; opened again, it computes the section of the model now open."""
    from .test_main_window import open_model

    open_model(qtbot, window, tmp_path, DUFFING, "duffing.txt")
    view = window.show_view("sections")
    qtbot.waitUntil(lambda: view.result is not None, timeout=60000)
    window.view_docks["sections"].close()
    qtbot.waitUntil(lambda: not window.view_docks["sections"].isVisible())
    open_model(qtbot, window, tmp_path, LORENZ, "lorenz.txt")
    s = window.session
    qtbot.waitUntil(lambda: view.system is s.system and not s.busy, timeout=60000)
    assert view.result is None and not s.jobs.running("sections")
    assert not view._timer.isActive()
    with qtbot.waitSignal(view.sectionChanged, timeout=120000) as blocker:
        window.show_view("sections")
    assert blocker.args[0].state_names == list(s.system.states)
