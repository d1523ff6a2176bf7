"""The basins view: the two wells of the unforced Duffing oscillator, coloured as single runs end, with the
stable manifolds of the saddle between them drawn over."""

import numpy as np
import pyqtgraph as pg
import pytest
from PySide6.QtCore import Qt
from scipy.integrate import solve_ivp

from .conftest import load_model, open_view, wait_for_trajectory

# x'' = -0.3 x' + x - x^3: stable foci at x = +-1, a saddle at the origin (closed form)
WELLS = "x'' = -0.3*x' + x - x^3\nx(0) = 0.5\n"


def wells(qtbot, session, columns, rows, manifolds):
    """The basins view on the two wells over x, x' in [-2, 2], computed on a grid of ``columns`` x ``rows``."""
    view = open_view(qtbot, session, "basins", (900, 700))
    load_model(qtbot, session, WELLS, dict(t_end=20.0, samples=500))
    view.apply_view_settings({"x": {"state": "x", "from": -2.0, "to": 2.0, "count": columns},
                              "y": {"state": "x'", "from": -2.0, "to": 2.0, "count": rows},
                              "transient": 120.0, "manifolds": manifolds})
    with qtbot.waitSignal(view.resultChanged, timeout=120000, check_params_cb=lambda r: r is not None):
        view.compute()
    return view


def test_two_wells_with_the_saddle_manifolds_between(qtbot, session, artifacts):
    view = wells(qtbot, session, 40, 30, True)
    r = view.result
    assert sorted(round(a["centre"]["x"], 3) for a in r.attractors) == [-1.0, 1.0]
    sign = {a["label"]: np.sign(a["centre"]["x"]) for a in r.attractors}
    for j, i in ((3, 5), (15, 20), (27, 33), (10, 30)):
        ref = solve_ivp(lambda t, u: [u[1], -0.3 * u[1] + u[0] - u[0] ** 3], (0, 150), [r.xs[i], r.ys[j]],
                        rtol=1e-10, atol=1e-12)
        assert sign[r.labels[j, i]] == np.sign(ref.y[0, -1]), (r.xs[i], r.ys[j])
    assert "2 attractors" in view.legend.text() and "equilibrium" in view.legend.text()
    qtbot.waitUntil(lambda: len(view.manifold_items) == 2, timeout=60000)  # the saddle's two stable branches
    x, y = view.manifold_items[0].getData()
    assert abs(x[0]) < 1e-6 and abs(y[0]) < 1e-6  # they start at the saddle
    header, rows = view.export_data()
    assert header[:2] == ["x", "x'"] and rows.shape == (1200, 3)
    view.grab().save(f"{artifacts}/basins_wells.png")


# r' = -r (r^2 - 1)(r^2 - 4), theta' = 1: a stable focus at the origin inside the unstable circle r = 1, and the
# stable limit cycle r = 2 of period 2 pi outside it (closed form)
RINGS = "k = 1\ng = -(x^2 + y^2 - k)*(x^2 + y^2 - 4)\nx' = x*g - y\ny' = y*g + x\nx(0) = 0.5\ny(0) = 0\n"


def test_a_limit_cycle_basin_is_kept_in_the_project_and_a_click_runs_the_orbit_from_a_cell(qtbot, window, tmp_path,
                                                                                            artifacts):
    from orbitdesk.document import project as core_project

    from .test_main_window import open_model

    open_model(qtbot, window, tmp_path, RINGS, "rings.txt", t_end=10.0, samples=500)
    s = window.session
    view = window.show_view("basins")
    view.apply_view_settings({"x": {"state": "x", "from": -2.5, "to": 2.5, "count": 11},
                              "y": {"state": "y", "from": -2.5, "to": 2.5, "count": 11}, "transient": 40.0})
    with qtbot.waitSignal(view.resultChanged, timeout=120000, check_params_cb=lambda r: r is not None):
        view.compute()
    r = view.result
    cycle = next(a for a in r.attractors if a["kind"] == "limit cycle")
    assert cycle["period"] == pytest.approx(2 * np.pi, rel=1e-7)  # closed form
    assert "limit cycle of period 6.2832" in view.legend.text()
    # a click on a cell runs the orbit from that cell's start: it ends on the cycle r = 2, as solve_ivp's does
    vb = view.plot.getViewBox()
    qtbot.waitUntil(lambda: vb.sceneBoundingRect().width() > 0)
    where = view.plot_widget.mapFromScene(vb.mapViewToScene(pg.Point(1.45, 0.05)))
    with qtbot.waitSignal(view.orbitChanged, timeout=60000, check_params_cb=lambda o: o is not None):
        qtbot.mouseClick(view.plot_widget.viewport(), Qt.MouseButton.LeftButton, pos=where)
    x, y = view.orbit_item.getData()
    assert (x[0], y[0]) == pytest.approx((1.5, 0.0))  # the cell's own start, not the clicked point
    ref = solve_ivp(lambda t, u: [u[0] * -(u @ u - 1) * (u @ u - 4) - u[1], u[1] * -(u @ u - 1) * (u @ u - 4) + u[0]],
                    (0, view.orbit.time[-1]), [1.5, 0.0], rtol=1e-10, atol=1e-12)
    assert np.hypot(x[-1], y[-1]) == pytest.approx(np.hypot(*ref.y[:, -1]), abs=1e-3) and abs(np.hypot(x[-1], y[-1]) - 2) < 1e-3
    view.grab().save(f"{artifacts}/basins_rings.png")
    # kept in the project: reopening shows the same map, current; with another k it is marked stale
    target = tmp_path / "rings.orbitdesk"
    s.save(target)
    wait_for_trajectory(qtbot, s, lambda: window.open_path(tmp_path / "rings.txt", ask=False))
    assert view.result is None
    wait_for_trajectory(qtbot, s, lambda: window.open_path(target, ask=False))
    qtbot.waitUntil(lambda: view.result is not None, timeout=20000)
    np.testing.assert_array_equal(view.result.labels, r.labels)
    assert view.stale_bar.isHidden() and "limit cycle of period 6.2832" in view.legend.text()
    saved = core_project.load(target)
    saved.parameters["k"].value = 1.1
    core_project.save(tmp_path / "moved.orbitdesk", saved)
    wait_for_trajectory(qtbot, s, lambda: window.open_path(tmp_path / "moved.orbitdesk", ask=False))
    qtbot.waitUntil(lambda: view.result is not None, timeout=20000)
    assert not view.stale_bar.isHidden() and "k = 1 (now 1.1)" in view.stale_bar.label.text()


def test_the_basins_integrate_by_the_method_chosen_with_the_runs_tolerances(qtbot, session, artifacts):
    # the two wells are mirror images ((x, x') -> (-x, -x')): on a grid symmetric about the saddle each basin holds
    # half the starts, whichever method integrates them; the method and step are the view's settings
    from orbitdesk.engine.methods import METHODS

    view = open_view(qtbot, session, "basins", (900, 700))
    load_model(qtbot, session, WELLS, dict(t_end=20.0, samples=500, rtol=1e-7, atol=1e-9))
    combo = view.integration.method
    offered = [combo.itemData(i) for i in range(combo.count())]
    assert offered[0] == "automatic" and "rk4" in offered and "rk45" in offered
    assert not any(METHODS[m].stiff for m in offered[1:])  # the starts run together: no stiff method offered
    base = {"x": {"state": "x", "from": -2.0, "to": 2.0, "count": 12},
            "y": {"state": "x'", "from": -2.0, "to": 2.0, "count": 8}, "transient": 120.0, "manifolds": False}
    for chosen, shown in (({"method": "automatic"}, "Dormand–Prince 8(5,3)"), ({"method": "rk45"}, "Dormand–Prince 5(4)"),
                          ({"method": "rk4", "dt": 0.02}, "Classical Runge–Kutta at a fixed step")):
        view.apply_view_settings({**base, **chosen})
        assert view.integration.dt.isVisible() == (chosen["method"] == "rk4")
        with qtbot.waitSignal(view.resultChanged, timeout=120000, check_params_cb=lambda r: r is not None):
            view.compute()
        r = view.result
        assert r.method == ("dop853" if chosen["method"] == "automatic" else chosen["method"])
        assert [a["share"] for a in r.attractors] == [0.5, 0.5]
        assert f"integrated by {shown}" in view.legend.text()
        assert view.view_settings()["method"] == chosen["method"]
    assert view.view_settings()["dt"] == 0.02
    view.grab().save(f"{artifacts}/basins_method.png")


FORCED_WELLS = "gamma = 0 in [0, 1]\nx'' = -0.3*x' + x - x^3 + gamma*cos(1.2*t)\nx(0) = 0.5\n"


def test_a_forcing_switched_off_by_its_parameter_gives_the_autonomous_basins(qtbot, session):
    # at gamma = 0 the shaken wells are the unforced ones: looked at in time, two equilibria (closed form x = +-1);
    # with the forcing on, the view looks once per forcing period (the stroboscopic basins)
    view = open_view(qtbot, session, "basins", (900, 700))
    load_model(qtbot, session, FORCED_WELLS, dict(t_end=20.0, samples=500))
    assert not view.strobe.isChecked()
    view.apply_view_settings({"x": {"state": "x", "from": -2.0, "to": 2.0, "count": 6},
                              "y": {"state": "x'", "from": -2.0, "to": 2.0, "count": 4}, "transient": 60.0,
                              "manifolds": False})
    with qtbot.waitSignal(view.resultChanged, timeout=120000, check_params_cb=lambda r: r is not None):
        view.compute()
    assert not view.result.stroboscopic
    assert sorted((round(a["centre"]["x"], 4), a["kind"]) for a in view.result.attractors) == [
        (-1.0, "equilibrium"), (1.0, "equilibrium")]
    session.set_param("gamma", 0.05)
    assert view.strobe.isChecked()
    session.set_param("gamma", 0.0)
    assert not view.strobe.isChecked()  # ticked for the forcing, unticked with it
    view.strobe.click()  # the user's own choice stays
    session.set_param("gamma", 0.1)
    session.set_param("gamma", 0.0)
    assert view.strobe.isChecked()
