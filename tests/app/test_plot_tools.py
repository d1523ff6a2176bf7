"""Reading values off plots: the readout under the mouse, a two-point measurement of a period, and
axis names with units saved with the project."""

import numpy as np
import pytest
from PySide6.QtCore import QPoint, QPointF, Qt

from orbitdesk.app.plots import plot_tools

from .test_main_window import OSCILLATOR, open_model


def widget_point(plot_widget, x, y) -> QPoint:
    vb = plot_widget.getPlotItem().getViewBox()
    return plot_widget.mapFromScene(vb.mapViewToScene(QPointF(x, y)))


def test_readout_gives_each_series_at_the_time_under_the_mouse(qtbot, window, tmp_path):
    open_model(qtbot, window, tmp_path, OSCILLATOR, t_end=10.0, samples=4001)
    view = window.views["timeseries"]
    readout = plot_tools.readouts(view)[0]
    qtbot.wait(50)
    qtbot.mouseMove(view.plot_widget.viewport(), widget_point(view.plot_widget, 2.0, 0.0))
    qtbot.wait(50)
    text = readout.text()
    # x = cos 2t and x' = -2 sin 2t (closed form), read at the t under the mouse
    t = float(text.split("t = ")[1].split()[0].replace("−", "-"))
    assert t == pytest.approx(2.0, abs=0.05)
    x = float(text.split("x = ")[1].split()[0].replace("−", "-"))
    v = float(text.split("x' = ")[1].split()[0].replace("−", "-"))
    assert x == pytest.approx(np.cos(2 * t), abs=1e-3) and v == pytest.approx(-2 * np.sin(2 * t), abs=1e-3)
    assert readout.label.isVisible()


def test_two_ctrl_clicks_measure_a_period(qtbot, window, tmp_path):
    open_model(qtbot, window, tmp_path, OSCILLATOR, t_end=10.0, samples=4001)
    view = window.views["timeseries"]
    readout = plot_tools.readouts(view)[0]
    qtbot.wait(50)
    # two successive maxima of x = cos 2t: t = 0 + pi and 2 pi... measured at pi and 2 pi (closed form)
    for t in (np.pi, 2 * np.pi):
        qtbot.mouseClick(view.plot_widget.viewport(), Qt.MouseButton.LeftButton,
                         Qt.KeyboardModifier.ControlModifier, widget_point(view.plot_widget, t, 1.0))
    assert len(readout.points) == 2
    dt = readout.points[1][0] - readout.points[0][0]
    assert dt == pytest.approx(np.pi, abs=0.03)  # within a pixel or two of the period
    assert "Δt = " in readout.measure and "1/Δt = " in readout.measure
    shown = float(readout.measure.split("1/Δt = ")[1].split()[0])
    assert shown == pytest.approx(1 / dt, rel=1e-4)


def test_ctrl_click_in_the_phase_plane_measures_instead_of_starting_a_trajectory(qtbot, window, tmp_path):
    open_model(qtbot, window, tmp_path, OSCILLATOR)
    view = window.views["phase_plane"]
    qtbot.wait(50)
    qtbot.mouseClick(view.plot_widget.viewport(), Qt.MouseButton.LeftButton,
                     Qt.KeyboardModifier.ControlModifier, widget_point(view.plot_widget, 0.5, 0.5))
    assert view.seeds == [] and len(plot_tools.readouts(view)[0].points) == 1


def test_axis_names_and_units_are_shown_saved_and_reopened(qtbot, window, tmp_path):
    open_model(qtbot, window, tmp_path, OSCILLATOR)
    view = window.views["phase_plane"]
    assert set(plot_tools.quantities(view)) >= {"x", "x'"}
    plot_tools.set_axis_names(view, {"x": {"text": "position", "units": "m"},
                                     "x'": {"text": "velocity", "units": "m/s"}, 3: "ignored"})
    plot = view.plot_widget.getPlotItem()
    assert plot.getAxis("bottom").labelString().count("position") == 1
    assert "(m)" in plot.getAxis("bottom").labelString() and "m/s" in plot.getAxis("left").labelString()
    # the name follows the quantity when the axes are swapped
    view.set_axes("x'", "x")
    assert "velocity" in plot.getAxis("bottom").labelString()
    target = tmp_path / "named.orbitdesk"
    assert window._save_to(target)
    saved = window.session.project.views["phase_plane"]["axis_names"]
    assert saved["x"] == {"text": "position", "units": "m"}
    window.open_path(target, ask=False)
    qtbot.waitUntil(lambda: "velocity" in plot.getAxis("bottom").labelString(), timeout=10000)
    # exports show the names too, with the legend off for a single curve
    from orbitdesk.app.plots.figures import copy_plot

    copy = copy_plot(plot, 600, 400)
    assert "velocity" in copy.getPlotItem().getAxis("bottom").labelString()
    copy.close()
