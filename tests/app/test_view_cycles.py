"""The limit-cycle view: finds the cycle from the end of the run or from a clicked start, shows its
period, ranges and multipliers, shares it with the phase plane, exports one period, marks itself stale."""

import csv
import math

import numpy as np
import pyqtgraph as pg
import pytest
from PySide6.QtCore import QPointF
from scipy.integrate import simpson
from orbitdesk.samples.models import LOGISTIC, VAN_DER_POL_REF, model

from .conftest import load_model, open_view, wait_for_trajectory

VAN_DER_POL = model(VAN_DER_POL_REF, ranges={'mu': (0, 5)}, initial={'x(0)': 0.1, "x'(0)": 0})


def find(qtbot, view):
    with qtbot.waitSignal(view.cycleChanged, timeout=60000, check_params_cb=lambda c: c is not None):
        view.compute()
    return view.cycle


def test_van_der_pol_cycle_from_the_end_of_the_run(qtbot, session, tmp_path, artifacts):
    view = open_view(qtbot, session, "cycles", (700, 600))
    plane = open_view(qtbot, session, "phase_plane", (700, 600))
    load_model(qtbot, session, VAN_DER_POL, dict(t_end=60.0, samples=3000))
    cycle = find(qtbot, view)
    # period of the Van der Pol cycle at mu = 1: 6.6633 (value from memory, four figures)
    assert cycle.period == pytest.approx(6.6633, abs=5e-4)
    text = view.report.toPlainText()
    assert "Period 6.6632" in text and "stable" in text and "Floquet multipliers" in text
    # Liouville: the product of the multipliers is exp(integral of the trace of the Jacobian over one
    # period); the trivial one is 1, so the other is exp(integral of mu (1 - x^2) dt)
    header, rows = view.export_data()
    assert header[:3] == ["t", "x", "x'"]
    path = tmp_path / "cycle.csv"
    with open(path, "w", newline="") as f:
        csv.writer(f).writerows([header, *rows.tolist()])
    table = np.array(list(csv.reader(open(path)))[1:], dtype=float)
    liouville = math.exp(simpson(1.0 - table[:, 1] ** 2, x=table[:, 0]))
    other = cycle.multipliers[1 - cycle.trivial_index]
    assert abs(other) == pytest.approx(liouville, rel=1e-3)
    assert f"{abs(other):.4g}"[:4] in text
    # the cycle swings x between -2.0086 and 2.0086 (value from memory, five figures)
    assert "−2.00862" in text and "2.00862" in text
    # the range of x over the cycle, as the report shows it, is the exported one
    assert cycle.amplitude["x"] == pytest.approx(table[:, 1].max() - table[:, 1].min(), rel=1e-9)
    # drawn in the phase plane
    x, y = plane.cycle_item.getData()
    assert x.size == table.shape[0] and np.allclose(x, table[:, 1]) and np.allclose(y, table[:, 2])
    view.grab().save(f"{artifacts}/cycle_view.png")
    # new values: the document keeps its one cycle, stale: the phase plane no longer draws it, the view
    # shows it and says what it was computed for; back at mu = 1 it is current again
    wait_for_trajectory(qtbot, session, lambda: session.set_param("mu", 2.0))
    assert session.cycle is cycle and view.cycle is cycle and session.current_cycle() is None
    assert plane.cycle_item.getData()[0] is None or len(plane.cycle_item.getData()[0]) == 0
    assert not view.stale_bar.isHidden() and "mu = 1 (now 2)" in view.stale_bar.label.text()
    wait_for_trajectory(qtbot, session, lambda: session.set_param("mu", 1.0))
    assert session.current_cycle() is cycle and view.stale_bar.isHidden()
    assert plane.cycle_item.getData()[0].size == table.shape[0]
    # a new model: the cycle goes everywhere
    with qtbot.waitSignal(session.systemChanged, timeout=20000):
        session.set_text(session.text + "a = 1\n")
    assert session.cycle is None and view.cycle is None and "Period" not in view.report.toPlainText()


def test_cycle_from_a_clicked_start(qtbot, session):
    view = open_view(qtbot, session, "cycles", (700, 600))
    load_model(qtbot, session, VAN_DER_POL, dict(t_end=20.0, samples=1000))
    view.apply_view_settings({"start": "clicked"})
    view.compute()
    assert "click in the phase plane first" in view.guess_label.text()
    session.note_clicked_start([3.0, -1.0])
    cycle = find(qtbot, view)
    assert "the clicked start (x = 3, x' = −1)" in view.guess_label.text()
    assert cycle.period == pytest.approx(6.6633, abs=5e-4)


def test_logistic_two_cycle(qtbot, session):
    view = open_view(qtbot, session, "cycles", (700, 600))
    load_model(qtbot, session, LOGISTIC, dict(steps=200))
    view.apply_view_settings({"map_period": 2})
    assert view.map_period.isVisibleTo(view) and not view.period_guess.isVisibleTo(view)
    cycle = find(qtbot, view)
    # closed form of the logistic 2-cycle: x = (r + 1 +- sqrt((r - 3)(r + 1))) / (2 r)
    r = 3.2
    expected = sorted((r + 1 + s * math.sqrt((r - 3) * (r + 1))) / (2 * r) for s in (1, -1))
    header, rows = view.export_data()
    assert header[:2] == ["n", "x"] and sorted(rows[:, 1]) == pytest.approx(expected, abs=1e-10)
    # multiplier of the 2-cycle: 4 + 2r - r^2 (closed form)
    assert cycle.multipliers[0].real == pytest.approx(4 + 2 * r - r * r, abs=1e-8)
    assert "Cycle of period 2" in view.report.toPlainText()


def test_in_a_wide_short_dock_the_numbers_show_without_scrolling(qtbot, session, artifacts):
    # the size the relaxation-circuit walkthrough gives the panel below the phase plane (1600 x 1000 screen)
    view = open_view(qtbot, session, "cycles", (700, 260))
    load_model(qtbot, session, VAN_DER_POL, dict(t_end=60.0, samples=3000))
    find(qtbot, view)
    qtbot.waitUntil(lambda: view.report.width() > 0)
    view.grab().save(f"{artifacts}/cycle_view_wide.png")
    assert view.splitter.orientation().name == "Horizontal"
    assert view.report.verticalScrollBar().maximum() == 0, "the period, ranges and multipliers need scrolling"
    assert view.plot_widget.height() > 120
    view.resize(600, 700)  # tall again: one above the other
    qtbot.waitUntil(lambda: view.splitter.orientation().name == "Vertical")


def _points_under_legend(plot_item) -> int:
    """How many data points of the plot's curves lie under its legend, both taken in scene pixels."""
    box = plot_item.legend.sceneBoundingRect()
    vb = plot_item.getViewBox()
    under = 0
    for item in plot_item.items:
        if isinstance(item, pg.PlotDataItem) and item.name():
            x, y = item.xData, item.yData
            xs = np.interp(np.linspace(0, x.size - 1, 8 * x.size), np.arange(x.size), x)
            ys = np.interp(np.linspace(0, y.size - 1, 8 * y.size), np.arange(y.size), y)
            under += sum(box.contains(vb.mapViewToScene(QPointF(a, b))) for a, b in zip(xs, ys))
    return under


def test_the_legend_leaves_the_cycle_uncovered_on_screen_and_in_the_figure(qtbot, session, artifacts):
    from orbitdesk.app.plots.figures import copy_plot

    # the relaxation-circuit sample's step 4: the Van der Pol cycle at mu = 1 in a short, wide dock
    view = open_view(qtbot, session, "cycles", (740, 260))
    load_model(qtbot, session, VAN_DER_POL, dict(t_end=60.0, samples=3000))
    find(qtbot, view)
    qtbot.waitUntil(lambda: view.plot.legend.isVisible() and view.plot.getViewBox().width() > 0)
    assert _points_under_legend(view.plot) == 0
    # its names in the text colour, not a faint grey
    assert view.plot.legend.opts["labelTextColor"] == view.palette().color(view.foregroundRole())
    view.grab().save(f"{artifacts}/cycle_legend.png")
    figure = copy_plot(view.plot, 640, 300, legend=True, fit=True)
    plot = figure.getPlotItem()
    assert plot.legend is not None and len(plot.legend.items) == 2
    assert _points_under_legend(plot) == 0
    figure.grab().save(f"{artifacts}/cycle_legend_figure.png")
    figure.close()
