"""Axis numbers in the data's own units (no automatic 'x0.001' prefixes) on every plot, and curves
drawn at screen resolution whose drawn points are data points."""

import numpy as np
import pytest

from orbitdesk.app.plots.plot_style import tick_texts

from .conftest import load_model


@pytest.mark.parametrize("values, spacing, texts", [
    ([-0.0008, -0.0004, 0.0, 0.0004, 0.0008], 0.0004, ["−0.0008", "−0.0004", "0", "0.0004", "0.0008"]),
    ([0.0, 2.5, 5.0, 7.5], 2.5, ["0", "2.5", "5.0", "7.5"]),
    ([-200.0, 0.0, 200.0], 200.0, ["−200", "0", "200"]),
    ([0.0, 2e-5, 4e-5], 2e-5, ["0", "2e−5", "4e−5"]),
    ([0.0, 5e6, 1e7], 5e6, ["0", "5e6", "1e7"]),
    ([1.25e6, 1.5e6], 2.5e5, ["1.25e6", "1.5e6"]),
])
def test_tick_texts_are_plain_numbers(values, spacing, texts):
    assert tick_texts(values, spacing) == texts


SMALL = "x' = y\ny' = -x\nx(0) = 0.0008\ny(0) = 0\n"  # x = 0.0008 cos t, y = -0.0008 sin t


def test_views_show_small_values_without_a_scale_factor(qtbot, window):
    load_model(qtbot, window.session, SMALL, {"t_end": 10.0, "samples": 2000})
    for name in ("timeseries", "phase_plane"):
        plot = window.views[name].plot_widget.getPlotItem()
        qtbot.wait(20)
        axis = plot.getAxis("left")
        assert "x0.001" not in axis.labelString() and "×" not in axis.labelString()
        (y0, y1) = plot.getViewBox().viewRange()[1]
        levels = axis.tickValues(y0, y1, 300)
        spacing, values = levels[0]
        texts = axis.tickStrings(values, axis.autoSIPrefixScale, spacing)
        assert any(t in texts for t in ("0.0008", "−0.0008", "0.0005", "−0.0005", "0.0004", "−0.0004"))
        assert all(abs(float(t.replace("−", "-"))) < 0.0011 for t in texts)


def test_time_series_is_drawn_smooth_at_screen_resolution(qtbot, window):
    traj = load_model(qtbot, window.session, SMALL, {"t_end": 100.0, "samples": 200_000})
    view = window.views["timeseries"]
    qtbot.wait(50)
    curve = view._curves["x"]
    shown_x, shown_y = curve.getData()
    width = view.plot.getViewBox().width()
    assert shown_x.size <= 2 * width + 4
    # every drawn point is a sample of the run, in time order (no made-up staircase corners)
    index = np.searchsorted(traj.time, shown_x)
    assert np.array_equal(traj.time[index], shown_x)
    assert np.array_equal(traj.series("x")[index], shown_y)
    assert np.all(np.diff(shown_x) > 0)
    # the full run stays in the item for exports and readouts
    full_x, _ = curve.getOriginalDataset()
    assert full_x.size == 200_000
