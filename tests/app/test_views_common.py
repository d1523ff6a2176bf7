"""What the views share: the session's equilibria and start requests, and the helpers in views/common.py."""

import numpy as np
import pytest

from orbitdesk.engine import RunSettings

from orbitdesk.document.project import Project

from .conftest import wait_for_trajectory

SADDLE_2D = """x' = y
y' = x - x^3
a = 1
x(0) = 0.5
"""


def load(qtbot, session, text):
    session.solver = RunSettings(t_end=5.0, samples=501)
    return wait_for_trajectory(qtbot, session, lambda: session.load_project(
        Project(name="m", model=text, solver=session.solver)))


def test_shared_equilibria_selection_and_clearing(qtbot, session):
    load(qtbot, session, SADDLE_2D)
    seen, picked = [], []
    session.equilibriaChanged.connect(seen.append)
    session.equilibriumSelected.connect(picked.append)
    items = [{"state": {"x": 0.0, "y": 0.0}}, {"state": {"x": 1.0, "y": 0.0}}]
    session.set_equilibria(items)
    assert seen == [items] and session.equilibria == items
    session.select_equilibrium(1)
    session.select_equilibrium(1)  # the same selection again says nothing
    session.select_equilibrium(7)  # out of range: no selection
    assert picked == [1, None] and session.selected_equilibrium is None
    session.select_equilibrium(0)
    session.set_equilibria(items[:1])  # index 0 still points into the list
    assert session.selected_equilibrium == 0
    # a changed value makes them stale: kept once in the document, but no view draws them as current
    session.set_param("a", 2.0)
    assert session.equilibria == items[:1] and session.doc.current_equilibria() == []
    assert session.doc.equilibria_stale().startswith("Computed for a = ")
    # another model: the list and the selection go
    session.doc.adopt_system(session.system, None)
    assert session.equilibria == [] and session.selected_equilibrium is None
    assert seen[-1] == [] and picked[-1] is None


def test_start_requests_report_the_views_that_took_them(qtbot, session):
    load(qtbot, session, SADDLE_2D)
    assert session.request_starts([{"u0": [0.1, 0.0]}]) == []  # nobody listens
    got = []

    def taker(starts):
        got.append(starts)
        session.note_starts_taken("Phase plane")

    session.startsRequested.connect(taker)
    taken = session.request_starts([{"u0": [0.1, 0], "backward": 1, "label": "+v1"}])
    assert taken == ["Phase plane"]
    assert got == [[{"u0": [0.1, 0.0], "backward": True}]]  # plain full states
    session.note_starts_taken("late")  # outside a request: ignored
    assert session.request_starts([]) == [] and len(got) == 1


def test_phase_plane_and_3d_follow_the_session(qtbot, session):
    from orbitdesk.app.views.phase_plane import PhasePlaneView
    from orbitdesk.app.views.phase_space_3d import PhaseSpace3DView

    load(qtbot, session, SADDLE_2D)
    plane = PhasePlaneView(session)
    qtbot.addWidget(plane)
    items = [{"state": {"x": 0.0, "y": 0.0}, "stable": False, "kind": "saddle"},
             {"state": {"x": 1.0, "y": 0.0}, "stable": None, "kind": "centre (linear)"}]
    session.set_equilibria(items)
    session.select_equilibrium(1)
    assert len(plane.eq_item.points()) == 2
    space = PhaseSpace3DView(session)  # created later: catches up with what the session holds
    qtbot.addWidget(space)
    assert space.equilibria == items and space.selected_equilibrium is items[1]
    session.select_equilibrium(0)
    assert space.selected_equilibrium is items[0]
    # x' = y, y' = x - x^3 through (0.1, 0): both views take a start of the two-state model
    taken = session.request_starts([{"u0": [0.1, 0.0], "backward": True}])
    assert sorted(taken) == ["Phase plane", "Phase space 3D"]
    assert plane.seeds[-1] == {"u0": [0.1, 0.0], "both": True}
    assert space.added[-1] == {"u0": [0.1, 0.0], "backward": True}
    np.testing.assert_array_equal(plane.seeds[-1]["u0"], space.added[-1]["u0"])
    session.cancel_all()


@pytest.mark.parametrize("value, ok", [(1, True), (2.5, True), (True, False), (float("nan"), False),
                                       ("3", False), (None, False)])
def test_is_number(value, ok):
    from orbitdesk.app.views.common import is_number

    assert is_number(value) is ok


def test_values_at_time_interpolates_flows_and_steps_maps():
    from orbitdesk.app.views.common import values_at_time

    # x = 2 t + 1 sampled every 0.5: linear interpolation is exact for a straight line (closed form)
    time = np.arange(0.0, 5.01, 0.5)
    x, xy = 2 * time + 1, np.column_stack([time, -time])
    (v,) = values_at_time(time, 1.3, False, x)
    assert v == pytest.approx(3.6)
    (row,) = values_at_time(time, 1.3, False, xy)
    np.testing.assert_allclose(row, [1.3, -1.3])
    assert values_at_time(-time, -1.3, False, x)[0] == pytest.approx(3.6)  # a backward run
    assert values_at_time(time, 1.3, True, x)[0] == 2 * 1.5 + 1  # a map: the iterate at or after
    assert values_at_time(time, 99.0, False, x)[0] == x[-1]  # past the end: the last sample


def test_settings_helpers_set_quietly(qtbot):
    from PySide6.QtWidgets import QCheckBox, QComboBox, QSpinBox

    from orbitdesk.app.views.common import apply_numbers, control_row, fill_combo, select_text, set_quietly

    box, combo, check = QSpinBox(), QComboBox(), QCheckBox()
    box.setRange(0, 100)
    fired = []
    for signal in (box.valueChanged, combo.currentIndexChanged, check.toggled):
        signal.connect(fired.append)
    fill_combo(combo, ["x", "y", "z"])
    apply_numbers({"n": 7, "skip": float("inf")}, ((box, "n", int), (box, "skip", int)))
    set_quietly(combo, 2)
    set_quietly(check, True)
    assert (box.value(), combo.currentText(), check.isChecked()) == (7, "z", True)
    assert fired == []  # nothing announced
    assert select_text(combo, "y") and not select_text(combo, "w") and not select_text(combo, None)
    assert combo.currentText() == "y" and fired == [1]
    row = control_row("Sweep", box, 8, None, combo)
    assert row.count() == 6 and row.itemAt(0).widget().text() == "Sweep"


def test_sweep_sampler_shows_its_whole_text(qtbot, session):
    from orbitdesk.app.views.sweep import SweepView

    load(qtbot, session, "r = 3.5 in [2.5, 4]\nx[n+1] = r*x*(1 - x)\nx[0] = 0.3\n")
    view = SweepView(session)
    qtbot.addWidget(view)
    view.resize(1100, 600)
    view.show()
    qtbot.waitExposed(view)
    combo = view.mode
    assert combo.currentText() == "every iterate"
    assert combo.width() > combo.fontMetrics().horizontalAdvance("every iterate")


def test_the_series_list_is_wide_enough_for_long_names(qtbot, session):
    from .conftest import load_model, open_view

    view = open_view(qtbot, session, "timeseries", (800, 400))
    load_model(qtbot, session, "k = 2\nx' = -k*x\nx(0) = 1\nfront_coupling_force = k*x\n", dict(t_end=1.0, samples=50))
    names = view.series_list
    widest = names.fontMetrics().horizontalAdvance("front_coupling_force")
    assert names.width() >= widest + 40  # check box and swatch beside the whole name, not "front_coupli"
    rect = names.visualItemRect(names.item(1))
    assert rect.right() <= names.viewport().width()


def test_the_phase_planes_hint_is_read_whole(qtbot, session):
    """With a derived quantity on an axis the phase plane says why clicking starts nothing; at the width the
    window gives it beside the model panel and a walkthrough (about 860 px) the hint was cut off after "are s"
    (the shower sample's first step). Its whole text fits in the label, on two lines if need be."""
    from .conftest import load_model, open_view

    view = open_view(qtbot, session, "phase_plane", (860, 500))
    qtbot.waitExposed(view)
    load_model(qtbot, session, "k = 2\nx' = -k*x\nx(0) = 1\nhalf = x/2\n", dict(t_end=1.0, samples=50))
    view.set_axes("half", "x")
    hint = view.hint
    qtbot.waitUntil(lambda: hint.text().startswith("Clicking starts"))
    qtbot.waitUntil(lambda: hint.height() >= hint.heightForWidth(hint.width()))
    lines = -(-hint.fontMetrics().horizontalAdvance(hint.text()) // max(1, hint.width()))  # lines the text needs
    assert hint.height() >= lines * hint.fontMetrics().lineSpacing()
    assert hint.geometry().top() >= view.clear_button.geometry().bottom()  # a line of its own, under the buttons
