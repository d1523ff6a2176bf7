"""An exported figure's legend goes where it covers nothing drawn: not over the names of special points nor right
beside them (the stirred tank's exported bifurcation diagram had its legend in the top left corner against the
upper fold's marker and name, while the bottom right was empty)."""

import numpy as np
import pytest
import pyqtgraph as pg
from PySide6.QtGui import QImage

from orbitdesk.app.plots import figures

from .conftest import load_model, open_view

# Exothermic stirred-tank reactor (Uppal, Ray and Poore 1974), as in the stirred-tank sample
TANK = "stay = 0.05 in [0, 0.15]\nheat = 6\nc' = -c + stay*(1 - c)*exp(T)\nT' = -T + heat*stay*(1 - c)*exp(T)\n"


def test_the_exported_s_curve_keeps_its_legend_clear_of_the_folds(qtbot, session, tmp_path, artifacts):
    load_model(qtbot, session, TANK, dict(t_end=30.0, samples=501))
    view = open_view(qtbot, session, "bifurcation", (1000, 640))
    with qtbot.waitSignal(view.resultChanged, timeout=120000):
        view.compute_button.click()
    folds = sorted(s.value for s in view.result.specials)
    # the S-curve's two folds: stay = 0.0329 and 0.0754 at heat = 6 (points where stay = c e^(-heat c) / (1 - c)
    # turns, T = heat c; c (1 - c) = 1 / heat, closed form)
    c = np.array([(1 - np.sqrt(1 - 4 / 6)) / 2, (1 + np.sqrt(1 - 4 / 6)) / 2])
    assert folds == pytest.approx(sorted(c * np.exp(-6 * c) / (1 - c)), rel=1e-6)
    w, h = 848, 199  # the plot's size in a short dock, which the export form offers
    widget = figures.copy_plot(view.plot, w, h, legend=True, host=view)
    try:
        plot = widget.getPlotItem()
        legend = plot.legend.sceneBoundingRect()
        names = [i.sceneBoundingRect() for i in plot.items if isinstance(i, pg.TextItem)]
        assert len(names) == 2
        for rect in names:
            assert not legend.adjusted(-12, -12, 12, 12).intersects(rect)  # not over a name nor against it
        for item in plot.items:
            if isinstance(item, pg.ScatterPlotItem):
                for x, y in zip(*item.getData()):
                    assert not legend.contains(plot.getViewBox().mapViewToScene(pg.Point(x, y)))
    finally:
        figures._finish(widget)
    path = tmp_path / "s_curve.png"
    assert figures.save_plot(view.plot, path, w, h, legend=True, host=view)
    image = QImage(str(path))
    image.save(f"{artifacts}/export_bifurcation_legend.png")
    assert (image.width(), image.height()) == (w, h)
