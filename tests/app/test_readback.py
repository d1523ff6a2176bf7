"""The read-back: what the tool understood from the model text."""

import os

import sympy as sp

from orbitdesk.document.project import Project
from orbitdesk.app.panels.readback import ModelReadback, model_str

from .test_editor import LORENZ


def show_readback(qtbot, session, text, size=(520, 560)):
    view = ModelReadback(session)
    qtbot.addWidget(view)
    view.resize(*size)
    view.show()
    qtbot.waitExposed(view)
    with qtbot.waitSignal(session.systemChanged, timeout=10000):
        session.load_project(Project(model=text))
    return view


def test_second_order_equation_is_shown_in_its_reduced_first_order_form(qtbot, session):
    # x'' = -x is the harmonic oscillator; as a first-order system the states are x and x'
    # with x' = x' and (x')' = -x (e.g. Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., sec. 5.1).
    view = show_readback(qtbot, session, "x'' = -x\nx(0) = 1\n")
    assert view.equation_lines() == ["dx/dt = x'", "d(x')/dt = -x"]  # never the puzzling x' = x'
    assert "x' is the rate of change of x" in view.plain_text()
    text = view.plain_text()
    assert "Flow in 2 states" in text
    assert "reduced to first order" in text
    assert "autonomous" in text and "non-autonomous" not in text
    assert view.jacobian_entries() == [["0", "1"], ["-1", "0"]]


def test_lorenz_jacobian(qtbot, session, artifacts):
    # Jacobian of the Lorenz system (Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., sec. 9.2):
    # [[-sigma, sigma, 0], [r - z, -1, -x], [y, x, -b]]
    view = show_readback(qtbot, session, LORENZ)
    sigma, rho, beta, x, y, z = sp.symbols("sigma rho beta x y z", real=True)
    expected = sp.Matrix([[-sigma, sigma, 0], [rho - z, -1, -x], [y, x, -beta]])
    assert view.jacobian_entries() == [[model_str(expected[i, j]) for j in range(3)] for i in range(3)]
    assert view.jacobian_entries()[1] == ["rho - z", "-1", "-x"]
    text = view.plain_text()
    for piece in ("Flow in 3 states", "sigma", "in [0, 20]", "2.66667", "smooth", "Jacobian"):
        assert piece in text
    assert view.note_text() == ""
    qtbot.wait(30)
    assert view.grab().save(os.path.join(artifacts, "readback_lorenz.png"))


def test_errors_keep_the_last_valid_model_with_a_note(qtbot, session):
    view = show_readback(qtbot, session, LORENZ)
    with qtbot.waitSignal(session.modelParsed, timeout=3000):
        session.set_text(LORENZ.replace("beta*z", "beta*zz"))
    assert "last model that read without errors" in view.note_text()
    assert "zz" in view.note_text()
    assert view.jacobian_entries()[2] == ["y", "x", "-beta"]  # still the valid Lorenz system
    with qtbot.waitSignal(session.modelParsed, timeout=3000):
        session.set_text(LORENZ)
    assert view.note_text() == ""


def test_time_dependence_nonsmooth_functions_and_derived_quantities_are_named(qtbot, session):
    # a forced, damped oscillator with Coulomb-like friction sign(x')
    model = ("x'' = -c*x' - x^3 + a*cos(w*t) - mu*sign(x')\nc = 0.2\na = 0.3\nw = 1.2\nmu = 0.05\n"
             "energy = x'^2/2 + x^4/4\n")
    view = show_readback(qtbot, session, model)
    text = view.plain_text()
    assert "non-autonomous" in text and "x''" in text
    assert "not smooth" in text and "sign" in text
    assert "energy" in text and "x'^2/2 + x^4/4" in text.replace("x^4/4 + x'^2/2", "x'^2/2 + x^4/4")
    assert view.equation_lines()[1].startswith("d(x')/dt = ")


def test_map_read_back(qtbot, session):
    # Hénon map, Commun. Math. Phys. 50 (1976): x[n+1] = 1 - a x^2 + y, y[n+1] = b x
    view = show_readback(qtbot, session, "x[n+1] = 1 - a*x^2 + y\ny[n+1] = b*x\na = 1.4\nb = 0.3\n")
    assert view.equation_lines() == ["x[n+1] = -a*x^2 + y + 1", "y[n+1] = b*x"]
    assert view.jacobian_entries() == [["-2*a*x", "1"], ["b", "0"]]
    assert "Map in 2 states" in view.plain_text()


def test_value_changes_are_mentioned(qtbot, session):
    view = show_readback(qtbot, session, LORENZ)
    session.set_param("rho", 99.5)
    qtbot.waitUntil(lambda: "now 99.5" in view.plain_text(), timeout=3000)


def test_model_str_spells_functions_as_the_model_language_does():
    x = sp.Symbol("x", real=True)
    assert model_str(sp.Abs(x) + sp.Heaviside(x) + sp.exp(1) * x ** 2) == "e*x^2 + abs(x) + heaviside(x)"
    assert model_str(sp.Min(x, 1)) == "min(1, x)"
    assert model_str(sp.Float(0.1) * x) == "0.1*x"


def test_empty_session_shows_a_hint(qtbot, session):
    view = ModelReadback(session)
    qtbot.addWidget(view)
    assert "No model yet" in view.plain_text()
    view.resize(300, 200)
    assert view.browser.toolTip() and view.note.toolTip()
    assert view.browser.lineWrapMode() == view.browser.LineWrapMode.WidgetWidth  # long notes wrap, never cut off


def test_delay_model_reads_back_with_its_delays_and_history(qtbot, session, artifacts):
    view = show_readback(qtbot, session, "a = 1.2\ntau = 2\nx' = -a*x(t - tau)\nx(t) = cos(t) for t <= 0\n"
                                         "felt = x(t - tau)\n")
    assert view.equation_lines() == ["dx/dt = -a*x(t - tau)"]
    text = view.plain_text()
    assert "delays: x(t - tau) (2)" in text and "history x(t) = cos(t) for t <= 0" in text
    assert "Jacobian with the delays dropped" in text
    assert "Derived quantities\nfelt\n=\nx(t - tau)" in text  # with its delay, not the current value
    view.grab().save(os.path.join(artifacts, "readback_delay.png"))


def test_events_are_listed_with_their_boundary_and_what_they_set(qtbot, session, artifacts):
    text = ("g = 9.81\ne = 0.8\nT = 3\nx'' = -g\nx(0) = 1\nwhen x < 0 then x' = -e*x'\n"
            "when t > T then g = 0, stop\n")
    view = show_readback(qtbot, session, text, size=(520, 640))
    shown = view.plain_text()
    assert "Events" in shown
    assert "line 6" in shown and "x falls below 0" in shown and "x' = -e*x'" in shown
    assert "line 7" in shown and "at t = T" in shown and "g = 0, stop" in shown
    qtbot.wait(30)
    assert view.grab().save(os.path.join(artifacts, "readback_events.png"))
