"""The equilibria table keeps every column in sight in a dock of ordinary width: a long list of eigenvalues
(the long-shower sample's eight characteristic roots) pushed the type and the stability out of the dock."""

import numpy as np
import pytest

from orbitdesk.app.plots.plot_style import eigenvalues_text

from .conftest import load_model, open_view

# three masses on springs in a row, lightly damped: six eigenvalues in three conjugate pairs, the equilibrium at
# the origin; the system is linear, so its Jacobian is the matrix below (closed form)
CHAIN = """x1'' = -2*x1 + x2 - 0.1*x1'
x2'' = x1 - 2*x2 + x3 - 0.1*x2'
x3'' = x2 - 2*x3 - 0.1*x3'
x1(0) = 0.1
"""


def test_many_eigenvalues_leave_the_type_and_stability_in_sight(qtbot, session):
    view = open_view(qtbot, session, "equilibria", (700, 560))
    load_model(qtbot, session, CHAIN, dict(t_end=20.0, samples=501))
    with qtbot.waitSignal(view.equilibriaChanged, timeout=60000):
        view.find()  # six states: searched on request
    qtbot.wait(50)
    table = view.table
    heads = [table.horizontalHeaderItem(c).text() for c in range(table.columnCount())]
    k = heads.index("Eigenvalues")
    cell = table.item(0, k)
    K = np.array([[-2, 1, 0], [1, -2, 1], [0, 1, -2]], dtype=float)
    J = np.block([[np.zeros((3, 3)), np.eye(3)], [K, -0.1 * np.eye(3)]])
    reference = sorted(np.linalg.eigvals(J), key=lambda z: (round(z.real, 9), z.imag))
    # all six in the tip, three pairs; the cell shows two pairs and says how many there are
    assert "(6 in all)" in cell.text() and cell.text().count("±") == 2
    assert eigenvalues_text(view.equilibria[0].eigenvalues) in cell.toolTip()
    assert sorted(view.equilibria[0].eigenvalues, key=lambda z: (round(z.real, 9), z.imag)) == pytest.approx(reference, abs=1e-9)
    header = table.horizontalHeader()
    for name in ("Type", "Stability"):
        c = heads.index(name)
        assert header.sectionViewportPosition(c) + header.sectionSize(c) <= table.viewport().width(), name
