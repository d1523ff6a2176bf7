"""Equilibrium inspector: the table filled in the background, details of the selected point, starts off it."""

import math
import os

import numpy as np
import pytest

from orbitdesk.samples.models import LORENZ_REF, model

from .conftest import load_model, open_view

LORENZ = model(LORENZ_REF, ranges={"r": (0, 200)})

SADDLE_2D = """x' = y
y' = x - x^3
x(0) = 0.5
"""


def load(qtbot, session, text, **solver):
    return load_model(qtbot, session, text, dict(t_end=20.0, samples=2001), **solver)


def make_view(qtbot, session):
    return open_view(qtbot, session, "equilibria", (820, 560))


def wait_found(qtbot, view, action=None):
    with qtbot.waitSignal(view.equilibriaChanged, timeout=30000) as blocker:
        if action is not None:
            action()
    return blocker.args[0]


def test_lorenz_equilibria_have_the_textbook_types(qtbot, session, artifacts):
    view = make_view(qtbot, session)
    found = wait_found(qtbot, view, lambda: load(qtbot, session, LORENZ))
    # Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., sec. 9.2: the origin and C+-
    # (+-sqrt(beta (r-1)), +-sqrt(beta (r-1)), r-1); for r = 28 > r_H = 24.74 C+- have lost stability.
    assert len(found) == 3 and view.table.rowCount() == 3
    c = math.sqrt(8 / 3 * 27)
    by_x = {round(eq.state["x"], 6): eq for eq in found}
    origin, plus, minus = by_x[0.0], by_x[round(c, 6)], by_x[round(-c, 6)]
    assert origin.kind == "saddle" and origin.stable is False
    # closed form at the origin: -beta and (-(sigma+1) +- sqrt((sigma+1)^2 + 4 sigma (r-1))) / 2
    root = math.sqrt(11**2 + 4 * 10 * 27)
    np.testing.assert_allclose(sorted(origin.eigenvalues.real), sorted([-8 / 3, (-11 + root) / 2, (-11 - root) / 2]),
                               rtol=1e-9)
    for eq in (plus, minus):
        assert eq.kind == "saddle-focus" and eq.stable is False
        assert eq.state["z"] == pytest.approx(27.0, rel=1e-9)
        assert eq.n_unstable == 2 and eq.n_stable == 1  # a complex pair with positive real part
    # the table shows what the core found, in words
    kinds = sorted(view.table.item(r, 5).text() for r in range(3))
    assert kinds == ["saddle", "saddle-focus", "saddle-focus"]
    assert all(view.table.item(r, 6).text() == "unstable" for r in range(3))
    assert view.table.item(0, 7).text()  # how each was found

    origin_row = [r for r in range(3) if view.table.item(r, 1).text() == "0"][0]
    view.select(origin_row)
    html = view.details.toPlainText()
    assert "Jacobian" in html and "saddle" in html and "eigenvectors" in html
    assert "−8/3" not in html and "−2.6667" in html  # beta shown as a number on the diagonal
    assert "± 10.19i" in view.table.item(0, 4).text() or "± 10.19i" in view.table.item(1, 4).text()
    qtbot.wait(50)  # let the start buttons lay out before the picture
    view.grab().save(os.path.join(artifacts, "view_equilibria_lorenz.png"))


def test_starts_along_eigen_directions(qtbot, session):
    view = make_view(qtbot, session)
    wait_found(qtbot, view, lambda: load(qtbot, session, LORENZ))
    origin_row = [r for r in range(3) if view.equilibria[r].state["x"] == 0.0][0]
    view.select(origin_row)
    eq = view.selected()
    view.eps.setValue(0.01)
    with qtbot.waitSignal(view.startsRequested, timeout=2000) as blocker:
        view.start_along(None)
    starts = blocker.args[0]
    assert len(starts) == 6  # three real eigenvalues, both signs
    for s in starts:
        k = s["index"]
        v = np.real(eq.eigenvectors[:, k])
        v /= np.linalg.norm(v)
        offset = np.array(s["u0"]) - eq.vector
        assert np.linalg.norm(offset) == pytest.approx(0.01, rel=1e-12)
        assert abs(abs(offset @ v) - 0.01) < 1e-12  # along the eigenvector
        assert s["backward"] == (eq.eigenvalues[k].real < 0)
    # one button per direction and sign
    assert sum(1 for i in range(view.starts_grid.count())
               if view.starts_grid.itemAt(i).widget().__class__.__name__ == "QToolButton") == 6


def test_planar_saddle_and_settings_round_trip(qtbot, session):
    view = make_view(qtbot, session)
    found = wait_found(qtbot, view, lambda: load(qtbot, session, SADDLE_2D))
    # x' = y, y' = x - x^3: a saddle at 0 (eigenvalues +-1) and two linear centres at x = +-1 (eigenvalues +-i sqrt(2))
    kinds = {round(eq.state["x"]): eq.kind for eq in found}
    assert kinds[0] == "saddle"
    assert kinds[1].startswith("centre") and kinds[-1].startswith("centre")
    saddle = [eq for eq in found if eq.kind == "saddle"][0]
    np.testing.assert_allclose(sorted(saddle.eigenvalues.real), [-1.0, 1.0], atol=1e-12)
    view.select(found.index(saddle))
    view.eps.setValue(0.002)
    view.auto.setChecked(False)
    d = view.view_settings()
    assert d == {"auto": False, "eps": 0.002, "selected": found.index(saddle)}
    other = make_view(qtbot, session)
    other.apply_view_settings(d)
    assert other.view_settings()["auto"] is False and other.eps.value() == pytest.approx(0.002)
    header, rows = view.export_data()
    assert header[:2] == ["x", "y"] and rows.shape == (3, 2 + 4 + 2)


def test_values_change_searches_again(qtbot, session):
    view = make_view(qtbot, session)
    wait_found(qtbot, view, lambda: load(qtbot, session, LORENZ))
    # below r = 1 the origin is the only equilibrium and is a stable node (Strogatz sec. 9.2)
    found = wait_found(qtbot, view, lambda: session.set_param("r", 0.5))
    assert len(found) == 1 and found[0].kind == "stable node" and found[0].stable is True


def test_time_dependent_model_explains_itself(qtbot, session):
    view = make_view(qtbot, session)
    load(qtbot, session, "x' = -x + cos(t)\n")
    qtbot.waitUntil(lambda: "depend on time" in view.summary.text())
    # no search is under way nor waiting to start (rather than waiting a while to see that none comes)
    assert not view._timer.isActive() and not session.job_running("equilibria")
    assert view.table.rowCount() == 0
    with qtbot.waitSignal(view.strip.finished, timeout=10000) as blocker:
        view.find()
    assert blocker.args[0] == "failed" and "no equilibria" in view.strip.label.text()


def test_in_the_window_equilibria_reach_the_other_views(qtbot, window, artifacts):
    s = window.session
    plane, space = window.ensure_view("phase_plane"), window.ensure_view("phase_space_3d")
    view = window.ensure_view("equilibria")
    window.view_docks["equilibria"].show()
    window.view_docks["phase_space_3d"].show()
    found = wait_found(qtbot, view, lambda: load(qtbot, s, LORENZ))
    assert len(plane.equilibria) == 3 and len(space.equilibria) == 3
    saddle_row = [r for r, eq in enumerate(found) if eq.kind == "saddle"][0]
    view.select(saddle_row)
    assert space.selected_equilibrium is found[saddle_row]
    with qtbot.waitSignal(space.addedChanged, timeout=20000):
        starts = view.start_along("+v1")  # the unstable direction of the origin
    assert len(starts) == 1 and not starts[0]["backward"]
    run = space.added_runs[0]
    np.testing.assert_allclose(run.states[:, 0], starts[0]["u0"])
    # leaving along the unstable direction the orbit goes out to the attractor (Strogatz sec. 9.3)
    assert np.max(np.abs(run.series("z"))) > 10
    assert "3D" in view.starts_note.text()


def test_planar_starts_go_to_the_phase_plane(qtbot, window):
    s = window.session
    plane = window.ensure_view("phase_plane")
    view = window.ensure_view("equilibria")
    window.view_docks["equilibria"].show()
    found = wait_found(qtbot, view, lambda: load(qtbot, s, SADDLE_2D))
    view.select([r for r, eq in enumerate(found) if eq.kind == "saddle"][0])
    before = len(plane.seeds)
    view.start_along(None)  # four starts: +-v1, +-v2
    assert len(plane.seeds) == before + 4
    assert sum(1 for seed in plane.seeds[before:] if seed["both"]) == 2  # the stable direction runs backward too


def test_jacobian_rows_and_columns_are_labelled_as_in_the_read_back(qtbot, session):
    from orbitdesk.app.panels.readback import ModelReadback

    view = make_view(qtbot, session)
    readback = ModelReadback(session)
    qtbot.addWidget(readback)
    # damped oscillator x'' = -x - x': Jacobian [[0, 1], [-1, -1]] at the origin (closed form)
    wait_found(qtbot, view, lambda: load(qtbot, session, "x'' = -x - x'\nx(0) = 1\n"))
    details, listing = view.details.toPlainText(), readback.plain_text()
    for label in ("dx/dt", "d(x')/dt", "\u2202/\u2202x", "\u2202/\u2202(x')"):
        assert label in details and label in listing, label


def test_the_csv_of_a_delay_models_equilibrium_has_a_column_for_every_root(qtbot, session, tmp_path):
    """A delay model lists more characteristic roots than it has states: the exported table has a header cell
    for each value in its rows (it had one eigenvalue's pair of headers over eight roots' values), and the
    roots read back from the file solve the characteristic equation lambda = -k exp(-lambda tau) of
    u' = -k u(t - tau) at rest (closed form of the linear delay equation)."""
    import csv

    from orbitdesk.exports.csv_table import write_csv

    view = make_view(qtbot, session)
    wait_found(qtbot, view, lambda: load(qtbot, session, "k = 1\ntau = 1\nu' = -k*u(t - tau)\nu(t) = 1 for t <= 0\n"))
    header, rows = view.export_data()
    path = tmp_path / "equilibria.csv"
    write_csv(path, header, np.atleast_2d(rows).tolist())
    with open(path, newline="", encoding="utf-8") as f:
        table = list(csv.reader(f))
    head, body = table[0], table[1:]
    assert all(len(r) == len(head) for r in body)
    roots = [complex(float(body[0][i]), float(body[0][i + 1]))
             for i, name in enumerate(head) if name.startswith("re(characteristic root")]
    assert len(roots) > 1
    for lam in roots:
        assert abs(lam + np.exp(-lam)) < 1e-6 * max(1.0, abs(lam))


def test_a_short_dock_still_shows_four_rows_of_the_table(qtbot, session, artifacts):
    # x' = x - x^3, y' = y - y^3: nine equilibria, every (x, y) in {-1, 0, 1}^2 (closed form)
    view = open_view(qtbot, session, "equilibria", (760, 290))  # a third of a 1000-pixel window's column
    found = wait_found(qtbot, view, lambda: load(qtbot, session, "x' = x - x^3\ny' = y - y^3\nx(0) = 0.5\n"))
    assert len(found) == 9
    assert sorted((round(e.state["x"], 9), round(e.state["y"], 9)) for e in found) == [
        (float(a), float(b)) for a in (-1, 0, 1) for b in (-1, 0, 1)]
    qtbot.wait(30)
    table = view.table
    seen = [r for r in range(table.rowCount()) if 0 <= table.rowViewportPosition(r)
            and table.rowViewportPosition(r) + table.rowHeight(r) <= table.viewport().height()]
    view.grab().save(os.path.join(artifacts, "view_equilibria_short.png"))
    assert len(seen) >= 4, f"only rows {seen} show in a {table.viewport().height()}-pixel table"
    assert view.details.height() > 0 and view.lower.isVisible()  # the linearisation below, scrolled if need be


def test_a_long_note_wraps_instead_of_widening_the_window(qtbot, session):
    # a hint that cannot wrap sets the dock's minimum width: with three views side by side it pushed the
    # main window past a 1600-pixel screen (the stirred tank sample's third step, 1878 pixels wide)
    view = make_view(qtbot, session)
    wait_found(qtbot, view, lambda: load(qtbot, session, "x' = x*y\ny' = -y\n"))  # a line of equilibria
    note = view.summary.text()
    assert "curve or surface" in note and view.summary.fontMetrics().horizontalAdvance(note) > 400
    assert view.minimumSizeHint().width() < 400
    view.resize(400, 560)
    qtbot.waitUntil(lambda: view.width() == 400)
    qtbot.wait(50)
    label = view.summary
    assert label.width() <= 400 and label.height() >= label.heightForWidth(label.width())  # all of it shown
