"""A user's change of what a view computes (its parameter, its interval) is one undo step of the document
and an unsaved change; undo and redo put the view's controls back. What the program sets on a view (a
project opened, a new system, values moved by a slider) is no undo step."""

from ..core.test_live_document import ticks  # noqa: F401 (the hand-driven clock of undo merging)
from .conftest import load_model, open_view

BRUSSELATOR = "a = 1.5 in [0.5, 3]\nb = 2 in [0, 5]\nx' = a - (b + 1)*x + x^2*y\ny' = b*x - x^2*y\nx(0) = 1\ny(0) = 1\n"


def test_changing_the_followed_parameter_is_undone_and_redone_in_the_view(qtbot, session, ticks):
    load_model(qtbot, session, BRUSSELATOR, dict(t_end=20.0, samples=501))
    view = open_view(qtbot, session, "bifurcation", (1000, 640))
    qtbot.waitUntil(lambda: view.parameter.currentText() == "a")
    qtbot.waitUntil(lambda: not view._settings_timer.isActive())   # (its settings settled into the document)
    stack = session.undo_stack
    assert stack.count() == 0 and not session.dirty   # opening the view and taking in the system: no edit

    with qtbot.waitSignal(session.trajectoryChanged, timeout=20000):
        session.set_param("b", 2.5)                    # a value moved: one step, none of the view's
    assert stack.count() == 1

    view.parameter.setCurrentText("b")                 # the user picks another parameter ...
    for hi in (4.5, 4.0, 3.5):                         # ... and drags the interval's end: one step
        ticks[0] += 0.1
        view.hi.setValue(hi)
    qtbot.waitUntil(lambda: not view._settings_timer.isActive())
    assert stack.count() == 2 and session.dirty
    assert session.project.views["bifurcation"]["parameter"] == "b"
    assert session.project.views["bifurcation"]["to"] == 3.5
    assert session.doc.undo.undo_label() == "Change bifurcation diagram settings"

    stack.undo()
    assert view.parameter.currentText() == "a" and session.project.views["bifurcation"]["parameter"] == "a"
    assert session.params["b"] == 2.5 and stack.count() == 2   # the value's step is still there, below
    stack.redo()
    assert view.parameter.currentText() == "b" and view.hi.value() == 3.5
    qtbot.waitUntil(lambda: not view._settings_timer.isActive())
    assert stack.count() == 2 and stack.canUndo() and not stack.canRedo()
    stack.undo()
    stack.undo()
    assert session.params["b"] == 2.0 and view.parameter.currentText() == "a" and not session.dirty
