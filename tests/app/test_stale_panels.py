"""Every result panel marks its result stale the same way when the values it was computed for change
(a bar naming the old and new value, with Recompute); equilibria of a forced model whose forcing is
switched off by its parameter are found as for an autonomous model."""

import numpy as np
import pytest
from orbitdesk.samples.models import DUFFING_REF, model

from .conftest import load_model, open_view, wait_for_trajectory

# Two-well Duffing x'' + delta x' - x + x^3 = gamma cos(omega t): with gamma = 0 the rest points are
# x = 0 (a saddle) and x = +-1 (stable foci for delta > 0) -- closed form.
DUFFING = model(DUFFING_REF, ranges={'gamma': (0, 0.8)})


def test_equilibria_of_a_forced_model_at_zero_forcing_and_stale_when_forcing_returns(qtbot, session):
    view = open_view(qtbot, session, "equilibria")
    load_model(qtbot, session, DUFFING, dict(t_end=10.0, samples=200))
    assert "no equilibria in the usual sense" in view.summary.text()
    assert view.equilibria == []
    with qtbot.waitSignal(view.equilibriaChanged, timeout=30000):  # Automatic searches by itself
        wait_for_trajectory(qtbot, session, lambda: session.set_param("gamma", 0.0))
    xs = sorted(round(eq.state["x"], 9) for eq in view.equilibria)
    assert xs == [-1.0, 0.0, 1.0]
    assert not view.is_stale() and view.stale_bar.isHidden()
    wait_for_trajectory(qtbot, session, lambda: session.set_param("gamma", 0.4))
    assert view.is_stale() and not view.stale_bar.isHidden()
    assert "gamma = 0 (now 0.4)" in view.stale_bar.label.text()
    wait_for_trajectory(qtbot, session, lambda: session.set_param("gamma", 0.0))
    assert not view.is_stale() and view.stale_bar.isHidden()  # back to the values it was computed for


@pytest.mark.parametrize("module", ["sweep", "sections"])
def test_result_panels_mark_their_result_stale(qtbot, session, module):
    view = open_view(qtbot, session, module)
    load_model(qtbot, session, DUFFING, dict(t_end=10.0, samples=200))
    if module == "sweep":
        view.apply_view_settings({"parameter": "gamma", "from": 0.1, "to": 0.2, "count": 3, "mode": "strobe",
                                  "transient": 5.0, "samples": 4})
        signal, start = view.sweepChanged, view.run
    else:
        view.apply_view_settings({"kind": "strobe", "count": 5, "transient": 0.0, "auto": False})
        signal, start = view.sectionChanged, view.compute
    with qtbot.waitSignal(signal, timeout=30000):
        start()
    assert view.stale_bar.isHidden()
    if module == "sweep":  # the swept parameter itself does not make the diagram stale
        wait_for_trajectory(qtbot, session, lambda: session.set_param("gamma", 0.7))
        assert view.stale_bar.isHidden()
    wait_for_trajectory(qtbot, session, lambda: session.set_param("delta", 0.25))
    assert not view.stale_bar.isHidden() and "delta = 0.3 (now 0.25)" in view.stale_bar.label.text()
    with qtbot.waitSignal(signal, timeout=30000):
        view.stale_bar.button.click()
    assert view.stale_bar.isHidden()
    assert np.isfinite(view.export_data()[1]).any()
