"""Lyapunov view: the spectrum computed in the background, its table, dimension and convergence curves."""

import math
import os

import numpy as np
import pytest

from orbitdesk.samples.models import HENON_REF, LORENZ, model

from .conftest import click_for_result, load_short as load, open_view, wait_for_trajectory


HENON = model(HENON_REF, initial={'y[0]': 0})

KINKED = """# a forced oscillator with a one-sided spring
k = 4
x'' = -0.2*x' - k*max(x, 0) - x + 2*cos(1.3*t)
"""


def make_view(qtbot, session):
    return open_view(qtbot, session, "lyapunov", (900, 460))


def compute(qtbot, view, timeout=60000):
    return click_for_result(qtbot, view.compute_button, view.resultChanged, timeout)


def test_lorenz_spectrum(qtbot, session, artifacts):
    view = make_view(qtbot, session)
    load(qtbot, session, LORENZ)
    view.length.setValue(400.0)
    view.transient.setValue(20.0)
    result = compute(qtbot, view)
    lam = result.exponents
    # the sum of the exponents is the average divergence of the flow, here the constant -(sigma + 1 + beta)
    assert lam.sum() == pytest.approx(-(10 + 1 + 8 / 3), abs=1e-3)
    # a flow's exponent along the orbit is zero; the largest is about 0.906 and the Kaplan-Yorke
    # dimension about 2.06 (Sprott, Chaos and Time-Series Analysis, 2003, values from memory)
    assert abs(lam[1]) < 0.05
    assert lam[0] == pytest.approx(0.906, abs=0.1)
    assert result.kaplan_yorke_dimension == pytest.approx(2.06, abs=0.02)
    assert view.table.rowCount() == 3
    for k in range(3):  # each value to the decimal place of its standard error's second significant digit
        value, error = view.table.item(k, 1).text().replace("−", "-"), view.table.item(k, 2).text()
        assert error.startswith("± ") and "×" not in value + error
        decimals = len(error.split(".")[1]) if "." in error else 0
        assert (len(value.split(".")[1]) if "." in value else 0) == decimals
        assert len(error.lstrip("± 0.").replace(".", "")) == 2  # two significant digits
        assert abs(float(value) - lam[k]) <= 0.5 * 10.0 ** -decimals + 1e-12
        assert float(error[2:]) == pytest.approx(result.uncertainty[k], abs=0.5 * 10.0 ** -decimals + 1e-12)
    assert "Kaplan–Yorke dimension" in view.summary.text()
    assert len(view.curves) == 3
    header, rows = view.export_data()
    assert header == ["t", "exponent 1", "exponent 2", "exponent 3"] and rows.shape[1] == 4
    np.testing.assert_allclose(rows[-1, 1:], lam)  # the last running estimate is the result
    qtbot.wait(30)
    view.grab().save(os.path.join(artifacts, "view_lyapunov_lorenz.png"))


def test_henon_map_exponents(qtbot, session):
    view = make_view(qtbot, session)
    load(qtbot, session, HENON)
    assert view.length_label.text() == "Iterate" and not view.dt.isVisible()
    view.length.setValue(20000)
    view.transient.setValue(500)
    result = compute(qtbot, view)
    # det J = -b, so the exponents add up to ln b exactly (closed form); the largest is about 0.42
    # (Sprott 2003, value from memory)
    assert result.exponents.sum() == pytest.approx(math.log(0.3), abs=1e-9)
    assert result.exponents[0] == pytest.approx(0.42, abs=0.02)
    assert "per step" in view.table.item(0, 1).toolTip()


def test_non_smooth_model_is_flagged(qtbot, session):
    view = make_view(qtbot, session)
    load(qtbot, session, KINKED)
    view.length.setValue(200.0)
    view.transient.setValue(20.0)
    result = compute(qtbot, view)
    # the full spectrum from the Jacobian that holds almost everywhere, with a note that says so;
    # closed form: that Jacobian's trace is -0.2 everywhere, so the exponents sum to -0.2
    assert result.method == "qr" and result.exponents.size == 2
    assert result.exponents.sum() == pytest.approx(-0.2, abs=1e-3)
    assert view.table.rowCount() == 2
    assert "max" in view.notes.text() and "almost everywhere" in view.notes.text()
    assert "QR of the tangent vectors" in view.summary.text()


def test_settings_round_trip_and_stale_note(qtbot, session):
    view = make_view(qtbot, session)
    load(qtbot, session, LORENZ)
    view.length.setValue(50.0)
    view.transient.setValue(5.0)
    assert not view.dt.isVisible()  # the step shows with the fixed-step method only
    view.method.setCurrentIndex(view.method.findData("rk4"))
    assert view.dt.isVisible()
    view.dt.setValue(0.005)
    compute(qtbot, view)
    d = view.view_settings()
    assert d["flow"] == {"length": 50.0, "transient": 5.0} and d["dt"] == 0.005 and d["auto"] is False
    assert d["method"] == "rk4"
    assert view.result.dt == pytest.approx(0.005)
    wait_for_trajectory(qtbot, session, lambda: session.set_param("r", 30.0))
    assert view.is_stale() and not view.stale_bar.isHidden()
    assert "r = 28 (now 30)" in view.stale_bar.label.text()
    other = make_view(qtbot, session)
    other.apply_view_settings(d)
    assert other.view_settings() == d
    # automatic mode follows the values
    with qtbot.waitSignal(view.resultChanged, timeout=30000):
        view.auto.setChecked(True)
    with qtbot.waitSignal(view.resultChanged, timeout=30000) as blocker:
        session.set_param("r", 20.0)
    # below r_H about 24.74 the orbit settles on C+ or C-: no positive exponent (Strogatz sec. 9.2)
    assert blocker.args[0].exponents[0] < 0.01


@pytest.mark.slow
def test_delay_model_gets_its_largest_exponent_from_two_histories(qtbot, session, artifacts):
    # Mackey-Glass at tau = 17 (Mackey & Glass, Science 1977): chaotic, a positive largest exponent
    view = make_view(qtbot, session)
    load(qtbot, session, "tau = 17\nx' = 0.2*x(t - tau)/(1 + x(t - tau)^10) - 0.1*x\nx(t) = 0.5 for t <= 0\n")
    view.length.setValue(2500.0)
    view.transient.setValue(300.0)
    result = compute(qtbot, view, timeout=180000)
    assert result.method == "two-trajectory" and result.exponents.size == 1
    assert result.largest > 0.002
    assert view.table.rowCount() == 1
    qtbot.wait(30)
    view.grab().save(os.path.join(artifacts, "view_lyapunov_delay.png"))


def test_uncertainty_per_exponent_and_the_cap(qtbot, session, artifacts):
    view = make_view(qtbot, session)
    load(qtbot, session, LORENZ)
    view.length.setValue(60.0)  # a cap far too short for the estimates to settle to 1 %
    view.transient.setValue(20.0)
    assert view.settle.isChecked()
    result = compute(qtbot, view)
    assert result.converged is False and result.uncertainty is not None
    assert view.table.columnCount() == 3
    for k in range(3):
        shown = view.table.item(k, 2).text()
        assert shown.startswith("± ") and float(shown[2:]) == pytest.approx(result.uncertainty[k], rel=0.05)
    assert "Stopped at the cap of 60" in view.summary.text()
    qtbot.wait(200)  # the layout takes the new text in
    view.grab().save(os.path.join(artifacts, "lyapunov_uncertainty.png"))
    view.settle.setChecked(False)  # a fixed length: no cap to speak of
    result = compute(qtbot, view)
    assert result.converged is None and "cap" not in view.summary.text()
    assert view.view_settings()["settle"] is False and view.view_settings()["method"] == "automatic"


def test_the_method_and_step_pair_is_the_sweeps(qtbot, session):
    """The Lyapunov view and the sweep offer the same integration choices (one control pair) and read
    them back the same way."""
    view = make_view(qtbot, session)
    sweep = open_view(qtbot, session, "sweep", (900, 500))
    load(qtbot, session, LORENZ)
    both = [[(v.method.itemText(i), v.method.itemData(i)) for i in range(v.method.count())] for v in (view, sweep)]
    assert both[0] == both[1] and ("Automatic", "automatic") in both[0]
    for v in (view, sweep):
        v.apply_view_settings({"method": "stiff", "dt": 0.02})
        assert v.view_settings()["method"] == "stiff" and not v.dt.isVisible()
        v.apply_view_settings({"dt": 0.02})  # saved before the method choice: the fixed step it ran
        assert v.view_settings()["method"] == "rk4" and v.dt.isVisible() and v.dt.value() == pytest.approx(0.02)
    view.length.setValue(20.0)
    view.transient.setValue(2.0)
    assert compute(qtbot, view).dt == pytest.approx(0.02)
