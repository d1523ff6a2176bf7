"""Changing the size of a family from the parameter panel writes the model anew (headless session)."""

from .test_session import load_text

CHAIN = """\
N = 3 in [1, 10]   # masses
k = 1
x_{i}' = -k*(2*x_{i} - x_{i-1} - x_{i+1})   for i in 1..N
x_{0} = 0
x_{N+1} = 0
x_{i}(0) = 0.1*i   for i in 1..N
"""


def test_a_new_family_size_rewrites_its_line_and_the_states_follow_and_undo_restores_them(qtbot, session):
    load_text(qtbot, session, CHAIN)
    assert session.system.states == ["x_1", "x_2", "x_3"]
    session.set_param("N", 5.2)
    qtbot.waitUntil(lambda: session.system is not None and session.system.n_states == 5, timeout=20000)
    assert session.text.splitlines()[0] == "N = 5 in [1, 10]   # masses"
    assert session.system.states == [f"x_{i}" for i in range(1, 6)]
    session.undo_stack.undo()
    session.validate_now()
    qtbot.waitUntil(lambda: session.system.n_states == 3, timeout=20000)
    assert session.text == CHAIN
