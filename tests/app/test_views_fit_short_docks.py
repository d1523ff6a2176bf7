"""Views in narrow, short docks (three views and a walkthrough sharing a 1600 x 1000 window).

The equilibria view (the long-shower sample's third step: a third of the width beside the time series and the
phase plane): every column of the table ends inside the table, the words that give way are elided with the
whole text in the tip, and the linearisation below scrolls with one bar, not two. The Lyapunov view: the table,
the summary and the notes beside the plot scroll together with one bar, none of them cut off."""

import json

import numpy as np
from PySide6.QtGui import QTextCursor
from PySide6.QtWidgets import QAbstractScrollArea

from orbitdesk.app import help as help_ui

from orbitdesk.samples.models import LORENZ

from .conftest import click_for_result, load_model, load_short, open_view

SHOWER = json.loads((help_ui.SAMPLES_DIR / "long_shower.orbitdesk").read_text(encoding="utf-8"))["model"]


def visible_bars(widget, orientation_attr):
    """The scroll areas inside ``widget`` (itself too) showing a bar of the given orientation."""
    areas = [widget] if isinstance(widget, QAbstractScrollArea) else []
    areas += widget.findChildren(QAbstractScrollArea)
    return [a for a in areas if getattr(a, orientation_attr)().isVisible() and a.isVisible()]


def test_a_narrow_dock_keeps_every_column_and_one_scroll_bar(qtbot, session, artifacts):
    view = open_view(qtbot, session, "equilibria", (440, 470))
    with qtbot.waitSignal(view.equilibriaChanged, timeout=60000):
        load_model(qtbot, session, SHOWER.replace("k = 0.5", "k = 1"), dict(t_end=60.0, samples=601))
    qtbot.waitUntil(lambda: view.table.rowCount() == 1, timeout=10000)
    qtbot.wait(100)
    view.grab().save(f"{artifacts}/equilibria_narrow.png")
    table, header = view.table, view.table.horizontalHeader()
    heads = [table.horizontalHeaderItem(c).text() for c in range(table.columnCount())]
    assert heads[-1] == "Found by"
    # u' = -k (u(t - tau) - want) near rest: lambda = -k exp(-lambda tau) has its rightmost pair near
    # 0.086 +- 0.837i at k = 1, tau = 2 (the sample's note; the pair solves lambda + exp(-2 lambda) = 0)
    lam = max(view.equilibria[0].eigenvalues, key=lambda z: (z.real, z.imag))
    assert abs(lam + np.exp(-2 * lam)) < 1e-8 and abs(lam.real - 0.086) < 5e-4 and abs(lam.imag - 0.837) < 5e-4
    room = table.viewport().width()
    for c, name in enumerate(heads):
        assert header.sectionViewportPosition(c) + header.sectionSize(c) <= room, (name, room)
        # no column narrower than its own heading: each can be read
        assert header.sectionSize(c) >= header.fontMetrics().horizontalAdvance(name), name
    assert not table.horizontalScrollBar().isVisible()
    found_by = table.item(0, heads.index("Found by"))
    assert "found by " + found_by.text() in found_by.toolTip()  # the elided words whole in the tip
    # the linearisation and the start buttons below the table: one vertical bar for the pane
    bars = visible_bars(view.lower, "verticalScrollBar")
    assert bars == [view.lower], [type(b).__name__ for b in bars]
    # the characteristic roots table is wider than the pane: it scrolls sideways inside, every number whole on
    # its line (a cell wrapped after "λ1 =" and after "0.")
    details = view.details
    assert details.height() >= details.document().size().height()
    assert details.document().idealWidth() > details.viewport().width() and details.horizontalScrollBar().isVisible()
    block, cells = details.document().begin(), 0
    while block.isValid():
        if QTextCursor(block).currentTable() is not None and block.text():
            cells += 1
            assert block.layout().lineCount() == 1 + block.text().count("\u2028"), block.text()  # (<br>: a line)
        block = block.next()
    assert cells >= 8 * 2  # the roots' heads and their vectors' entries


def test_a_short_lyapunov_dock_scrolls_its_numbers_and_notes_as_one(qtbot, session, artifacts):
    view = open_view(qtbot, session, "lyapunov", (760, 220))
    load_short(qtbot, session, LORENZ)
    view.length.setValue(60.0)  # settling asked for, capped at 60 time units: the summary says it stopped there
    view.transient.setValue(5.0)
    result = click_for_result(qtbot, view.compute_button, view.resultChanged, 60000)
    # the exponents of a flow add up to its mean divergence, for the Lorenz system the constant
    # -(sigma + 1 + beta) = -13.667 (closed form)
    assert abs(sum(result.exponents) + 10 + 1 + 8 / 3) < 1e-3
    qtbot.wait(50)
    view.grab().save(f"{artifacts}/lyapunov_short.png")
    assert "Stopped at the cap" in view.summary.text()
    table = view.table
    rows = sum(table.rowHeight(k) for k in range(table.rowCount()))
    assert table.rowCount() == 3 and table.viewport().height() >= rows  # every exponent in sight, no own bar
    assert not table.verticalScrollBar().isVisible()
    content = view.left.widget()
    for label in (view.summary, view.notes):  # whole inside the column that scrolls, wrapped to its width
        assert label.geometry().bottom() < content.height() and label.width() <= view.left.viewport().width()
        assert label.height() >= label.heightForWidth(label.width())
    assert visible_bars(view.left, "verticalScrollBar") == [view.left]  # short: one bar, the column's
    assert not visible_bars(view.left, "horizontalScrollBar")


def test_the_phase_planes_hint_leaves_its_controls_on_one_line(qtbot, session, artifacts):
    # the shower's phase plane plots the water felt (a derived quantity) against the tap: clicking cannot start
    # a path there, and the hint saying so, squeezed between the controls, made their row a third of the view
    view = open_view(qtbot, session, "phase_plane", (480, 420))
    load_model(qtbot, session, SHOWER, dict(t_end=60.0, samples=601), views={"phase_plane": {"x": "felt", "y": "u"}})
    qtbot.waitUntil(lambda: view.x_name == "felt" and view.hint.isVisible(), timeout=10000)
    qtbot.wait(50)
    view.grab().save(f"{artifacts}/phase_plane_hint.png")
    hint, combo = view.hint, view.x_combo
    assert "both axes are states" in hint.text() and hint.height() >= hint.heightForWidth(hint.width())
    assert hint.width() > view.width() // 2  # across the view, not squeezed between the buttons
    assert combo.geometry().top() < hint.geometry().top() < view.plot_widget.geometry().top()
    line = hint.fontMetrics().lineSpacing()
    assert view.plot_widget.geometry().top() - combo.geometry().bottom() <= hint.height() + line
    assert hint.height() <= 3 * line
