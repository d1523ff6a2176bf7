"""While a value's slider is held, the plots keep their ranges (only the curves change); when it is let
go they fit the new run."""

import numpy as np
from PySide6.QtWidgets import QApplication

from .conftest import wait_for_trajectory
from .test_help_and_exports import open_spring


def test_plots_keep_their_range_while_a_slider_is_held_and_fit_on_release(qtbot, window, tmp_path):
    s = open_spring(qtbot, window, tmp_path)  # x'' = -4 x: x' = -2 sin 2t, amplitude 2 (closed form)
    row = window.panel_parts["ParameterPanel"].row("w")
    views = [window.views["timeseries"], window.views["phase_plane"]]
    ranges = [v.plot_widget.getPlotItem().getViewBox().viewRange() for v in views]
    row.slider.setSliderDown(True)
    traj = wait_for_trajectory(qtbot, s, lambda: s.set_param("w", 3.0))
    QApplication.processEvents()  # whatever the new run posted has been handled (no wait for time to pass)
    for view, before in zip(views, ranges):
        assert view.plot_widget.getPlotItem().getViewBox().viewRange() == before
    assert view.trajectory is traj  # the new run is drawn in the old range
    row.slider.setSliderDown(False)
    # fitted on release: x' = -3 sin 3t now reaches ±3 (closed form), inside the new vertical range
    assert np.max(np.abs(traj.series("x'"))) > 2.9

    def fitted(view):
        (_x0, _x1), (y0, y1) = view.plot_widget.getPlotItem().getViewBox().viewRange()
        return y0 < -2.9 and y1 > 2.9 and y1 < 4.5

    qtbot.waitUntil(lambda: all(fitted(view) for view in views), timeout=5000)
