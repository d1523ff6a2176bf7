"""Bifurcation diagram view: branches computed in the background, special points listed in words, a
click on a row sets the parameter and state, the branches kept in the live document (and the project file)."""

import re

import numpy as np
import pytest

from .conftest import load_model, open_view

BRUSSELATOR = "a = 1.5\nb = 2 in [0, 5]\nx' = a - (b + 1)*x + x^2*y\ny' = b*x - x^2*y\nx(0) = 1\ny(0) = 1\n"
DUFFING = ("c = 0.05\nb = 0.1\nF = 0.1\nw = 1.0 in [0.8, 1.4]\nx'' = -c*x' - x - b*x^3 + F*cos(w*t)\n"
           "x(0) = 0\n")


def make_view(qtbot, session):
    return open_view(qtbot, session, "bifurcation", (1000, 640))


def compute(qtbot, view, timeout=120000):
    with qtbot.waitSignal(view.resultChanged, timeout=timeout):
        view.compute_button.click()


def table_rows(table):
    return [[table.item(r, c).text() for c in range(table.columnCount())] for r in range(table.rowCount())]


def test_hopf_point_listed_in_words_and_click_goes_there(qtbot, session):
    load_model(qtbot, session, BRUSSELATOR, dict(t_end=20.0, samples=501))
    view = make_view(qtbot, session)
    assert view.parameter.currentText() == "b" and (view.lo.value(), view.hi.value()) == (0.0, 5.0)
    compute(qtbot, view)
    rows = table_rows(view.table)
    assert len(rows) == 1
    label, at, state, meaning = rows[0]
    # closed form: Hopf at b = 1 + a^2 = 3.25 with frequency a = 1.5, supercritical
    assert label == "Hopf" and at == "b = 3.25"
    assert "soft onset" in meaning and "frequency 1.5" in meaning
    # the status under both tabs says which diagram its counts are of (one Hopf point, one row above)
    assert re.match(r"One-parameter diagram: \d+ branch(es)?, 1 special point\b", view.info.text())
    view.table.cellClicked.emit(0, 0)
    assert session.params["b"] == pytest.approx(3.25)
    assert session.initial["x"] == pytest.approx(1.5) and session.initial["y"] == pytest.approx(3.25 / 1.5)
    session.undo_stack.undo()  # one undo step takes the whole jump back
    assert session.params["b"] == 2.0 and session.initial["x"] == 1.0

    # the branches are the live document's result, not the view's settings: a second view shows them too
    assert "branches" not in view.view_settings()
    assert session.doc.result("bifurcation").specials[0].type == "hopf"
    again = make_view(qtbot, session)
    assert table_rows(again.table) == rows
    session.set_param("a", 2.0)   # other values: kept, shown with the stale note
    qtbot.waitUntil(lambda: view.stale_bar.isVisible())
    assert "a = 1.5 (now 2)" in view.stale_bar.label.text() and table_rows(view.table) == rows


def test_branches_saved_in_the_project_show_on_reopening(qtbot, session, tmp_path):
    load_model(qtbot, session, BRUSSELATOR, dict(t_end=20.0, samples=501))
    view = make_view(qtbot, session)
    compute(qtbot, view)
    rows = table_rows(view.table)
    path = session.doc.save(tmp_path / "diagram.orbitdesk")
    with qtbot.waitSignal(view.resultChanged, timeout=60000):
        session.open(path)
    assert table_rows(view.table) == rows and not view.stale_bar.isVisible()


def test_frequency_response_with_stepped_sweeps(qtbot, session):
    load_model(qtbot, session, DUFFING, dict(t_end=20.0, samples=501))
    view = make_view(qtbot, session)
    assert view.follow.currentText() == "forced response" and view.stepped_box.isVisible()
    compute(qtbot, view, timeout=300000)
    folds = sorted(float(row[1].split("=")[1]) for row in table_rows(view.table))
    # harmonic balance (Nayfeh & Mook 1979) for these values: jumps near w = 1.0761 and 1.1155
    assert folds == [pytest.approx(1.0761, rel=2e-3), pytest.approx(1.1155, rel=2e-3)]
    assert [c.stepped for c in view.stepped] == ["up", "down"]
    assert "jumps at w = 1.07" in view.info.text() or "jumps at w = 1.11" in view.info.text()
    names = [item.name() for item in view.plot.listDataItems() if item.name()]
    assert {"response, stable", "response, unstable", "stepped up", "stepped down"} <= set(names)


def test_unreadable_saved_branches_are_dropped_with_a_note(qtbot, session):
    load_model(qtbot, session, BRUSSELATOR, dict(t_end=20.0, samples=501))
    view = make_view(qtbot, session)
    view.apply_view_settings({"branches": [{"kind": 5, "points": "no"}], "locus": {"curve": 3}})
    assert view.branches == [] and view.locus_result is None
    assert "could not be read" in view.info.text()


ROSSLER = ("a = 0.2\nb = 0.2\nc = 2.6 in [2.5, 3.2]\nx' = -y - z\ny' = x + a*y\nz' = b + z*(x - c)\n"
           "x(0) = 1\ny(0) = 1\nz(0) = 0\n")


def test_the_cycle_of_the_run_and_the_cycle_of_twice_its_period(qtbot, session):
    # Rössler (1976) at a = b = 0.2: the first period doubling near c = 2.83 (value from memory; the core
    # test checks it against scipy's multipliers)
    load_model(qtbot, session, ROSSLER, dict(t_end=50.0, samples=501))
    view = make_view(qtbot, session)
    view.follow.setCurrentText("the cycle the run settles on")
    view.lo.setValue(2.5)
    view.hi.setValue(3.1)
    compute(qtbot, view, timeout=300000)
    assert len(view.branches) == 2
    parent, doubled = view.branches
    assert doubled.periods[0] == pytest.approx(2 * parent.periods[-1], rel=0.1)
    rows = table_rows(view.table)
    (doubling,) = [row for row in rows if row[0] == "period doubling"]
    assert float(doubling[1].split("=")[1]) == pytest.approx(2.83, abs=0.01)
    assert view.view_settings()["follow"] == "cycle"


CUSP = "a = -0.5 in [-1, 1]\nb = 1 in [0, 1.5]\nx' = a + b*x - x^3\nx(0) = -1\n"


def test_fold_curves_meeting_at_a_cusp_shade_the_region_of_three_steady_states(qtbot, session):
    # closed form: x' = a + b x - x^3 has three equilibria exactly where 27 a^2 < 4 b^3 (the cusp at the origin)
    from PySide6.QtCore import QPointF, Qt

    load_model(qtbot, session, CUSP, dict(t_end=10.0, samples=201))
    view = make_view(qtbot, session)
    view.parameter.setCurrentText("a")
    view.lo.setValue(-1.0)
    view.hi.setValue(1.0)
    view.param2.setCurrentText("b")
    view.lo2.setValue(0.0)
    view.hi2.setValue(1.5)
    with qtbot.waitSignal(view.resultChanged, timeout=300000):
        view.locus_button.click()
    assert [s["type"] for s in view.locus_result.special] == ["cusp"]
    region = view.locus_region
    assert region is not None
    polygon = region.polygon()
    for a in np.linspace(-0.95, 0.95, 9):
        for b in np.linspace(0.05, 1.45, 8):
            margin = 4 * b ** 3 - 27 * a ** 2
            if abs(margin) > 0.15:
                assert polygon.containsPoint(QPointF(a, b), Qt.FillRule.OddEvenFill) == (margin > 0), (a, b)


def test_a_constant_branch_gets_a_readable_axis_on_screen_and_in_the_export(qtbot, session, artifacts):
    # the Brusselator's steady state has x = a = 1.5 for every b (closed form): the branch of x is flat, and the
    # axis once spanned 1.4999999 .. 1.5000001 with every tick reading the same long number
    import os

    from orbitdesk.app.plots.figures import copy_plot, plot_image
    from orbitdesk.app.views import series_colour

    from .test_plot_export import near, pixels

    load_model(qtbot, session, BRUSSELATOR, dict(t_end=20.0, samples=501))
    view = make_view(qtbot, session)
    compute(qtbot, view)
    view.measure.setCurrentText("x")
    qtbot.wait(50)
    ys = np.concatenate([item.getData()[1] for item in view.plot.listDataItems() if item.getData()[1] is not None])
    assert np.allclose(ys, 1.5, atol=1e-6)  # the branch: x = a

    def readable(plot, height):
        (y0, y1) = plot.getViewBox().viewRange()[1]
        assert y0 < 1.5 < y1 and 0.1 <= y1 - y0 <= 1.0  # a span around the value, in its scale
        axis = plot.getAxis("left")
        texts = [text for spacing, values in axis.tickValues(y0, y1, height)
                 for text in axis.tickStrings(values, 1.0, spacing)]
        assert "1.5" in texts and all(len(t) <= 5 for t in texts) and len(set(texts)) == len(texts)
        assert not axis.autoSIPrefix or axis.autoSIPrefixScale == 1.0

    readable(view.plot, view.plot_widget.height())
    for fit in (False, True):  # the export as on screen and fitted to the data
        copy = copy_plot(view.plot, 640, 420, host=view, fit=fit)
        readable(copy.getPlotItem(), 420)
        copy.close()
    image = plot_image(view.plot, 640, 420, host=view, fit=True)
    image.save(os.path.join(artifacts, "bifurcation_flat_branch.png"))
    rows = np.nonzero(near(pixels(image), series_colour(0, view)).any(axis=1))[0]
    assert rows.size and 0.3 * 420 < np.median(rows) < 0.7 * 420  # the branch runs across the middle
