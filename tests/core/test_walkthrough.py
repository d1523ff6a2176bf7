"""Walkthrough steps: recording, applying after model edits, reordering, note markup."""

import pytest

from orbitdesk.document.project import WalkthroughStep, dumps, loads, Project
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.document.walkthrough import (apply_step, delete_step, move_step, record_step, render_note,
                                        validate_snapshot)
from orbitdesk.samples.models import LORENZ_REF, model

LORENZ = model(LORENZ_REF, initial={'y(0)': None, 'z(0)': None})

STATE = {
    "parameters": {"r": 24.5, "sigma": 10.0},
    "initial": {"x": 0.5, "z": 20.0},
    "solver": {"t_end": 60.0, "samples": 3000, "method": "rk45"},
    "views": {"phase_space_3d": {"axes": ["x", "y", "z"]}, "phase_plane": {"x": "x", "y": "z"}},
    "open_views": ["phase_space_3d", "timeseries"],
    "camera": {"azimuth": 30.0, "elevation": 15.0, "distance": 80.0},
    "selected_equilibrium": 1,
    "section": {"plane": "z=27", "direction": "up"},
    "time_cursor": 12.5,
    "_window": {"geometry": [0, 0, 800, 600]},  # the UI's own: not part of a step
}


def test_record_keeps_known_settings_as_a_copy():
    step = record_step("  Chaos  ", "Look at the wings.", STATE)
    assert step.title == "Chaos" and step.note == "Look at the wings."
    assert "_window" not in step.snapshot
    assert step.snapshot["parameters"] == {"r": 24.5, "sigma": 10.0}
    STATE["views"]["phase_plane"]["y"] = "y"  # a later change in the UI does not reach the step
    try:
        assert step.snapshot["views"]["phase_plane"]["y"] == "z"
    finally:
        STATE["views"]["phase_plane"]["y"] = "z"


def test_record_survives_the_project_file():
    step = record_step("Chaos", "note", STATE)
    again = loads(dumps(Project(name="p", model=LORENZ, walkthrough=[step]))).walkthrough[0]
    assert again == step


def test_record_refuses_malformed_state_with_clear_words():
    with pytest.raises(ValueError, match="title"):
        record_step("  ", "", {})
    with pytest.raises(ValueError, match="value of 'r' should be a finite number"):
        record_step("t", "", {"parameters": {"r": "high"}})
    with pytest.raises(ValueError, match="solver setting method: expected one of .*got 'euler'"):
        record_step("t", "", {"solver": {"method": "euler"}})


def test_apply_to_the_same_model_has_no_problems_and_sets_everything():
    system = compile_model(LORENZ)
    step = record_step("Chaos", "", STATE)
    current = {"parameters": {"r": 28.0, "sigma": 10.0, "beta": 8 / 3}, "solver": {"t_end": 10.0, "rtol": 1e-9}}
    new, problems = apply_step(step, system, current)
    assert problems == []
    assert new["parameters"] == {"r": 24.5, "sigma": 10.0, "beta": 8 / 3}
    assert new["solver"] == {"t_end": 60.0, "rtol": 1e-9, "samples": 3000, "method": "rk45"}
    assert new["section"] == {"plane": "z=27", "direction": "up"}
    assert new["camera"]["azimuth"] == 30.0 and new["selected_equilibrium"] == 1 and new["time_cursor"] == 12.5
    assert current["parameters"]["r"] == 28.0  # the current state is not modified


def test_apply_after_model_edit_names_what_is_gone_and_applies_the_rest():
    # the user renamed r to rho and z to w since the step was recorded
    edited = compile_model("sigma = 10\nrho = 28\nbeta = 8/3\nx' = sigma*(y - x)\ny' = x*(rho - w) - y\n"
                           "w' = x*y - beta*w\n")
    step = record_step("Chaos", "", STATE)
    new, problems = apply_step(step, edited, {})
    text = " | ".join(problems)
    assert "parameter 'r', which the model no longer has" in text
    assert "state 'z', which the model no longer has" in text
    assert "axes name z" in text and "y axis shows 'z'" in text
    assert "'z' is not a state" in text  # the section plane
    assert new["parameters"] == {"sigma": 10.0}
    assert new["initial"] == {"x": 0.5}
    assert new["views"]["phase_plane"] == {"x": "x"}
    assert "section" not in new and new["open_views"] == ["phase_space_3d", "timeseries"]


def test_apply_accepts_plain_names_and_reports_bad_types():
    step = WalkthroughStep("odd", "", {"parameters": {"a": True}, "time_cursor": "soon", "zoom": 3,
                                       "section": {"strobe": -1}, "views": {"sweep": {"parameter": "b"}, "sections": {"plane": "x=1"}}})
    new, problems = apply_step(step, {"states": ["x"], "parameters": ["a"]}, {"time_cursor": 1.0})
    text = " | ".join(problems)
    assert "value of 'a' should be a finite number" in text
    assert "time cursor should be a number" in text
    assert "setting 'zoom' that OrbitDesk does not know" in text
    assert "stroboscopic period should be a positive number" in text
    assert "sweeps 'b', which is no longer a parameter" in text
    assert "sections view has no setting 'plane'" in text  # the sections view keeps coordinate and value
    assert new["time_cursor"] == 1.0 and "sweep" not in new.get("views", {})


def test_validate_snapshot():
    assert validate_snapshot(record_step("a", "", STATE).snapshot) == []
    assert validate_snapshot({"selected_equilibrium": -2}) == [
        "the selected equilibrium should be a number from 0 up, or empty, not -2"]
    assert validate_snapshot({"section": {"plane": "z > 3"}})[0].startswith("the section plane should read like")
    assert validate_snapshot([1, 2]) == ["the step's snapshot is not a table of settings"]


def test_move_and_delete_return_new_lists():
    steps = [WalkthroughStep(t) for t in "abcd"]
    assert [s.title for s in move_step(steps, 0, 2)] == list("bcad")
    assert [s.title for s in move_step(steps, 3, 0)] == list("dabc")
    assert [s.title for s in delete_step(steps, 1)] == list("acd")
    assert [s.title for s in steps] == list("abcd")
    with pytest.raises(IndexError):
        move_step(steps, 0, 4)
    with pytest.raises(IndexError):
        delete_step(steps, -1)


def test_render_note_markup():
    out = render_note("The *spiral* is **stable**: `x' = -x`.\n\n- one\n  more\n- two\n\n3. three\n4. four")
    assert out == ("<p>The <em>spiral</em> is <strong>stable</strong>: <code>x' = -x</code>.</p>\n"
                   "<ul><li>one more</li><li>two</li></ul>\n"
                   '<ol start="3"><li>three</li><li>four</li></ol>')


def test_render_note_lets_no_html_through():
    out = render_note('<script>alert(1)</script> <img src=x onerror="y"> `<b>` **<i>**')
    assert "<script" not in out and "<img" not in out and "<b>" not in out and "<i>" not in out
    assert "&lt;script&gt;" in out and "<code>&lt;b&gt;</code>" in out


def test_render_note_leaves_products_alone():
    assert render_note("2*x*3 and a * b") == "<p>2*x*3 and a * b</p>"
    assert render_note("") == ""
