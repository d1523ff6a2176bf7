"""The equilibria table fills from the Newton search before the exact solve answers; the exact solve's
answer then refines the rows in place (Found by, coordinates), the selection kept."""

import math

from orbitdesk.samples.models import LORENZ

from .conftest import load_model, open_view


def test_numeric_rows_first_then_the_exact_solve_refines_them_in_place(qtbot, session):
    view = open_view(qtbot, session, "equilibria", (820, 560))
    # the document's list (the table) arrives first, from the Newton search alone
    with qtbot.waitSignal(session.equilibriaChanged, timeout=60000,
                          check_params_cb=lambda items: len(items) > 0) as blocker:
        load_model(qtbot, session, LORENZ, dict(t_end=20.0, samples=2001))
    first = blocker.args[0]
    # Lorenz: 0 and (+-sqrt(beta (rho - 1)), +-sqrt(beta (rho - 1)), rho - 1) (closed form; Strogatz sec. 9.2)
    assert len(first) == 3 and [eq.method for eq in first] == ["newton"] * 3
    column = view.table.columnCount() - 1
    assert view.table.item(0, column).text() == "Newton search"
    view.select(2)
    chosen = view.selected()
    # the search ends (the view's signal) when the exact solve's answer has refined the rows
    qtbot.waitUntil(lambda: [eq.method for eq in view.equilibria] == ["exact+newton"] * 3, timeout=60000)
    assert view.selected() is chosen and view.selected_index() == 2  # refined in place, still selected
    assert [view.table.item(r, column).text() for r in range(3)] == ["exact solve and Newton"] * 3
    assert all("found by exact solve and Newton" in view.table.item(r, c).toolTip()
               for r in range(3) for c in range(column + 1))
    c = math.sqrt(8.0 / 3.0 * 27.0)
    assert sorted(eq.state["x"] for eq in view.equilibria) == [-c, 0.0, c]  # the exact coordinates
    assert "exact solve and Newton" in view.details.toPlainText()
