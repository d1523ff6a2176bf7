"""The two-parameter map view: the period and largest-exponent maps of the Henon map against the closed-form
period doubling, the colour bar, clicks setting both parameters, CSV export and staleness."""

import numpy as np
import pytest
from orbitdesk.samples.models import HENON_REF, model

from .conftest import load_model, open_view

HENON = model(HENON_REF, ranges={'a': (0, 1.4), 'b': (0, 0.4)})


def compute(qtbot, view):
    with qtbot.waitSignal(view.resultChanged, timeout=60000, check_params_cb=lambda r: r is not None):
        view.compute()
    return view.result


def test_period_map_of_the_henon_map_and_click_sets_both_parameters(qtbot, session, artifacts):
    view = open_view(qtbot, session, "parameter_map", (900, 600))
    load_model(qtbot, session, HENON, dict(steps=200))
    view.apply_view_settings({"what": "period", "x": {"parameter": "a", "from": 0.0, "to": 1.4, "count": 36},
                              "y": {"parameter": "b", "from": 0.0, "to": 0.4, "count": 21},
                              "transient": 2000, "max_period": 16})
    grid = compute(qtbot, view)
    assert grid.period.shape == (21, 36)
    # the fixed point doubles at a = 3 (1 - b)^2 / 4 (closed form): period 1 below, 2 just above
    for j, b in enumerate(grid.ys):
        threshold = 3 * (1 - b) ** 2 / 4
        below = [i for i, a in enumerate(grid.xs) if 0.05 < a < threshold - 0.03]
        above = [i for i, a in enumerate(grid.xs) if threshold + 0.03 < a < threshold + 0.12]
        assert all(grid.period[j, i] == 1 for i in below), b
        assert all(grid.period[j, i] == 2 for i in above), b
    # log2 of the period: none, 1, 2, 4, 8, 16, each tick in the middle of its band (none cut off at the ends)
    assert view.colour_bar.levels() == (-1.5, 4.5)
    assert np.nanmax(view.image.image) <= 4 and np.nanmin(view.image.image) >= -1
    assert "period" in view.colour_bar.getAxis("right").labelText
    header, rows = view.export_data()
    assert header == ["a", "b", "period (iterations)"] and rows.shape == (21 * 36, 3)
    view.grab().save(f"{artifacts}/parameter_map_period.png")
    # a click in the map sets both parameters there
    vb = view.plot.getViewBox()
    from PySide6.QtCore import QPointF, Qt

    scene = vb.mapViewToScene(QPointF(0.7, 0.25))
    qtbot.mouseClick(view.plot_widget.viewport(), Qt.MouseButton.LeftButton, pos=view.plot_widget.mapFromScene(scene))
    qtbot.waitUntil(lambda: abs(session.params["a"] - 0.7) < 0.02 and abs(session.params["b"] - 0.25) < 0.01,
                    timeout=5000)
    x, y = view.marker.getData()
    assert (x[0], y[0]) == (session.params["a"], session.params["b"])
    assert view.stale_bar.isHidden()  # moving the mapped parameters does not make the map stale


def test_lyapunov_map_is_centred_on_zero_and_goes_stale(qtbot, session, artifacts):
    view = open_view(qtbot, session, "parameter_map", (900, 600))
    load_model(qtbot, session, HENON, dict(steps=200))
    view.apply_view_settings({"what": "lyapunov", "x": {"parameter": "a", "from": 1.0, "to": 1.4, "count": 5},
                              "y": {"parameter": "b", "from": 0.25, "to": 0.3, "count": 2},
                              "transient": 500, "duration": 5000})
    grid = compute(qtbot, view)
    lo, hi = view.colour_bar.levels()
    assert lo == -hi and hi == pytest.approx(np.nanmax(np.abs(grid.exponent)))
    # Henon (1976): about 0.42 at a = 1.4, b = 0.3 (value from memory)
    assert grid.exponent[1, -1] == pytest.approx(0.42, abs=0.03)
    view.grab().save(f"{artifacts}/parameter_map_lyapunov.png")
    session.set_initial("x", 0.2)
    assert not view.stale_bar.isHidden() and "other initial values" in view.stale_bar.label.text()


# the Hopf normal form r' = a r - r^3, theta' = w: the origin attracts for a < 0; for a > 0 a limit cycle of
# period 2 pi / w (closed form)
HOPF = "a = 0.5 in [-1, 1]\nw = 1 in [1, 2]\nx' = a*x - w*y - x*(x^2 + y^2)\ny' = w*x + a*y - y*(x^2 + y^2)\n" \
       "x(0) = 0.1\ny(0) = 0\n"


def test_period_map_of_an_autonomous_flow_shows_equilibria_and_the_cycles_period_in_time(qtbot, session, artifacts):
    view = open_view(qtbot, session, "parameter_map", (900, 600))
    load_model(qtbot, session, HOPF, dict(t_end=20.0, samples=400))
    assert not view.period.isVisibleTo(view)  # no forcing period to give
    view.apply_view_settings({"what": "period", "x": {"parameter": "a", "from": -1.0, "to": 1.0, "count": 4},
                              "y": {"parameter": "w", "from": 1.0, "to": 2.0, "count": 2},
                              "transient": 200, "max_period": 4})
    grid = compute(qtbot, view)
    assert grid.unit == "maxima per cycle"
    assert grid.period.tolist() == [[-2, -2, 1, 1], [-2, -2, 1, 1]]
    np.testing.assert_allclose(grid.time_period[:, 2:], [[2 * np.pi] * 2, [np.pi] * 2], rtol=1e-6)
    assert view.colour_bar.levels() == (-2.5, 2.5)
    ticks = [label for _v, label in view.colour_bar.getAxis("right")._tickLevels[0]]
    assert ticks[:2] == ["equilibrium", "none"]
    from PySide6.QtGui import QFontMetrics

    axis = view.colour_bar.getAxis("right")  # wide enough that pyqtgraph draws the longest tick text
    qtbot.waitUntil(lambda: axis.width() >= QFontMetrics(axis.font()).horizontalAdvance("equilibrium") + 20,
                    timeout=3000)
    assert "period 1: 4 (time 3.142 to 6.283)" in view.info.text() and "equilibrium: 4" in view.info.text()
    header, rows = view.export_data()
    assert header[-1] == "period in time" and rows.shape == (8, 4)
    view.grab().save(f"{artifacts}/parameter_map_autonomous_period.png")
