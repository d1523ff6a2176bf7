"""Events with resets: 'when COND then ASSIGN, ...' and 'when COND then stop'.

Each numerical check names its closed form beside it; the engine must locate each crossing on the
dense output to the integrator's tolerance, apply the assignments together and restart.
"""

import json
import math

import numpy as np
import pytest

from orbitdesk.engine.runs import Event, RunSettings, simulate
from orbitdesk.engine.status import CHATTERING, OK, REFUSED, STOPPED
from orbitdesk.language.model import parse_model
from orbitdesk.system.compiled_system import compile_model

G, H, E = 9.81, 1.0, 0.8
BALL = f"""\
g = {G}
e = {E}
x'' = -g             # height of a ball above the floor
x(0) = {H}
when x < 0 then x' = -e*x'
"""

RELAY = """\
tau = 1
K = 1
h = 0.1
u = 1
y' = (-y + K*u)/tau
when y > h then u = -1
when y < -h then u = 1
"""


def ball_impacts(count, g=G, h=H, e=E):
    """Impact times of a ball dropped from rest at height h onto a floor with restitution e.

    Free fall: the first impact at t1 = sqrt(2h/g) with speed v0 = sqrt(2gh); the k-th rebound leaves
    with speed e^k v0 and returns after 2 e^k v0 / g (closed form; e.g. Halliday, Resnick & Walker,
    Fundamentals of Physics, free fall; the restitution coefficient as Newton's law of impact).
    """
    t1 = math.sqrt(2 * h / g)
    times = [t1]
    for k in range(1, count):
        times.append(times[-1] + 2 * e**k * math.sqrt(2 * g * h) / g)
    return np.array(times)


def accumulation_time(g=G, h=H, e=E):
    """The sum of the geometric series: t1 + 2 v0/g * e/(1-e) = t1 (1+e)/(1-e) (closed form)."""
    return math.sqrt(2 * h / g) * (1 + e) / (1 - e)


@pytest.mark.fallback
@pytest.mark.parametrize("method", ["dop853", "rk45", "stiff"])
def test_bouncing_ball_impact_times_follow_the_closed_form(method):
    traj = simulate(compile_model(BALL), RunSettings(t_end=3.0, samples=400, method=method))
    assert traj.status == OK, traj.message
    times = np.array([ev.t for ev in traj.model_events])
    assert len(times) == 6  # the 7th impact is at 3.06 (closed form above)
    assert np.allclose(times, ball_impacts(6), rtol=0, atol=1e-7)
    first = traj.model_events[0]
    speed = math.sqrt(2 * G * H)
    assert first.before["x'"] == pytest.approx(-speed, rel=1e-8)
    assert first.after["x'"] == pytest.approx(E * speed, rel=1e-8)  # right side evaluated before the reset
    assert abs(first.before["x"]) < 1e-9 and first.line == 5 and first.rule == "when x < 0 then x' = -e*x'"
    # the samples never go below the floor by more than the tolerance
    assert traj.states[0].min() > -1e-8


@pytest.mark.fallback
def test_every_step_output_shows_the_jump_at_each_impact():
    traj = simulate(compile_model(BALL), RunSettings(t_end=1.0, samples=0))
    t1 = ball_impacts(1)[0]
    at = np.flatnonzero(np.isclose(traj.time, t1, rtol=0, atol=1e-12))
    assert len(at) == 2  # before and after, at the same time
    assert traj.states[1, at[0]] < 0 < traj.states[1, at[1]]


@pytest.mark.fallback
def test_zeno_ball_past_its_accumulation_time_ends_with_the_guard_status():
    """Impacts accumulate at t1 (1+e)/(1-e) = 4.0637 s; the guard must end the run there, not hang."""
    traj = simulate(compile_model(BALL), RunSettings(t_end=10.0, samples=400))
    assert traj.status == CHATTERING
    assert "events per unit time" in traj.message and "line 5" in traj.message
    last = traj.model_events[-1].t
    assert accumulation_time() - 1e-3 < last < accumulation_time()
    assert traj.time[-1] <= last + 1e-12
    # a looser limit lets more impacts through before the guard ends it, still before the accumulation
    looser = simulate(compile_model(BALL), RunSettings(t_end=10.0, samples=400, event_rate=100.0))
    assert looser.status == CHATTERING and len(looser.model_events) < len(traj.model_events)


@pytest.mark.fallback
@pytest.mark.parametrize("method", ["dop853", "stiff"])
def test_relay_with_hysteresis_has_the_closed_form_period(method):
    """A first-order lag y' = (-y + K u)/tau driven by a relay u = +-1 with hysteresis h < K.

    Between switches y relaxes towards K u: y(t) = K u + (y0 - K u) e^(-t/tau). With u = -1 from
    y = h down to y = -h: -h = -K + (h + K) e^(-T/tau), so T = tau ln((K + h)/(K - h)); the rise
    from -h to h with u = +1 takes the same time, so the period is 2 tau ln((K + h)/(K - h))
    (closed form, derived here).
    """
    tau, K, h = 1.0, 1.0, 0.1
    period = 2 * tau * math.log((K + h) / (K - h))
    traj = simulate(compile_model(RELAY), RunSettings(t_end=20.0, samples=2000, method=method),
                    events=[Event.on_plane([1.0], 0.0, 1)])
    assert traj.status == OK, traj.message
    switches = np.array([ev.t for ev in traj.model_events])
    assert switches[0] == pytest.approx(tau * math.log(K / (K - h)), abs=1e-7)  # 0 up to h with u = +1
    assert np.allclose(np.diff(switches), period / 2, rtol=0, atol=1e-7)
    # the caller's plane y = 0 (rising) is found across the events, once per period
    ups = traj.event_times[0]
    assert np.allclose(np.diff(ups), period, rtol=0, atol=1e-7)
    assert {ev.rule for ev in traj.model_events} == {"when y > h then u = -1", "when y < -h then u = 1"}
    assert traj.model_events[0].before == {"y": pytest.approx(h), "u": 1.0}
    assert traj.model_events[0].after == {"y": pytest.approx(h), "u": -1.0}


@pytest.mark.fallback
def test_stop_ends_the_run_with_a_status_naming_the_event():
    """Free fall from rest: x' = -g t reaches -2 at t = 2/g (closed form)."""
    text = "g = 9.81\nx'' = -g\nx(0) = 100\nwhen x' < -2 then stop\n"
    traj = simulate(compile_model(text), RunSettings(t_end=5.0, samples=100))
    assert traj.status == STOPPED
    assert "line 4" in traj.message and "when x' < -2 then stop" in traj.message
    assert traj.time[-1] <= 2 / 9.81 + 1e-12
    assert traj.model_events[0].t == pytest.approx(2 / 9.81, abs=1e-10)


@pytest.mark.fallback
def test_assignments_take_the_values_from_before_the_event_and_time_events_happen_on_time():
    """A swap (x, y) = (y, x) at t = 1 exactly, and a parameter switched off at t = T: x' = u gives x(5) = T."""
    text = ("T = 2.5\nu = 1\nx' = u\ny' = 0\nz' = 0\nz(0) = 7\ny(0) = 3\n"
            "when t > 1 then y = z, z = y\nwhen t > T then u = 0\n")
    traj = simulate(compile_model(text), RunSettings(t_end=5.0, samples=51))
    assert traj.status == OK, traj.message
    assert [ev.t for ev in traj.model_events] == [1.0, 2.5]
    assert traj.model_events[0].after["y"] == 7 and traj.model_events[0].after["z"] == 3
    assert traj.final_state[0] == pytest.approx(2.5, abs=1e-12)
    assert traj.params["u"] == 1.0  # the run's starting values


@pytest.mark.fallback
def test_a_family_of_balls_each_with_its_own_impact():
    """Balls dropped from heights i/2 (i = 1..3): first impacts at sqrt(2 h_i / g) (closed form)."""
    text = ("g = 9.81\ne = 0.5\nN = 3\nx_{i}'' = -g   for i in 1..N\nx_{i}(0) = i/2   for i in 1..N\n"
            "when x_{i} < 0 then x_{i}' = -e*x_{i}'   for i in 1..N\n")
    model = parse_model(text)
    assert model.ok, [d.format() for d in model.diagnostics]
    assert [ev.rule for ev in model.events][0].endswith("(i = 1)")
    traj = simulate(compile_model(model), RunSettings(t_end=0.7, samples=100))
    firsts = {}
    for ev in traj.model_events:
        firsts.setdefault(ev.rule, ev.t)
    expected = sorted(math.sqrt(2 * (i / 2) / 9.81) for i in (1, 2, 3))
    assert np.allclose(sorted(firsts.values()), expected, atol=1e-8)


# ------------------------------------------------------------------ the language


def test_events_are_read_and_listed():
    model = parse_model(BALL + "when x' > 100 then stop\n")
    assert model.ok
    listed = [ev.to_dict() for ev in model.events]
    assert listed == [
        {"line": 5, "rule": "when x < 0 then x' = -e*x'", "becomes_true": "falling", "kind": "plane",
         "sets": ["x'"], "stop": False},
        {"line": 6, "rule": "when x' > 100 then stop", "becomes_true": "rising", "kind": "plane",
         "sets": [], "stop": True}]


def test_a_parameter_named_when_is_still_a_parameter():
    model = parse_model("when = 2\nx' = -when*x\n")
    assert model.ok and "when" in model.parameters and not model.events


@pytest.mark.parametrize("line, fragment, column", [
    ("when x < 0 x' = 0", "'then' is missing", 1),
    ("when then stop", "expected a condition between 'when' and 'then'", 6),
    ("when x < 0 then", "expected an action after 'then'", 16),
    ("when x < 0 and x' < 0 then stop", "one comparison", 6),
    ("when x*x > 1 then stop", "must be straight", 6),
    ("when x > sin(t) then stop", "cannot move with t", 6),
    ("when e > 1 then stop", "neither states nor t", 6),
    ("when x < 0 then q = 1", "'q' is neither a state nor a parameter", 17),
    ("when x < 0 then x'' = 1", "x'' is given by the equation of x", 17),
    ("when x < 0 then x' = 1, x' = 2", "'x'' is set twice", 25),
    ("when x < 0 then stop, stop", "'stop' is written twice", 23),
    ("when x < 0 then x + 1", "expected an assignment", 17),
    ("when x < 0 then x' = -e*xx'", "unknown name 'xx''", 25),
    ("when x < 0 then E = 1", "'E' is a derived quantity", 17),
])
def test_event_errors_at_exact_positions(line, fragment, column):
    text = BALL + "E = x'^2/2 + g*x\n" + line + "\n"
    found = [d for d in parse_model(text).diagnostics if d.severity == "error"]
    assert len(found) == 1, [d.format() for d in found]
    assert fragment in found[0].message and found[0].line == 7 and found[0].column == column, found[0].format()


def test_events_belong_to_flows():
    found = [d for d in parse_model("x[n+1] = x/2\nwhen x < 0 then x = 1\n").diagnostics if d.severity == "error"]
    assert len(found) == 1 and "events belong to flows" in found[0].message


def test_a_condition_on_a_derived_quantity_linear_in_the_states_is_a_plane():
    model = parse_model("k = 2\nx' = y\ny' = -x\ns = x + k*y\nwhen s > 1 then y = 0\n")
    assert model.ok
    ev = model.events[0]
    assert [str(c) for c in ev.normal] == ["1", "k"] and str(ev.offset) == "-1"


# ------------------------------------------------------------------ analyses say what they assume


def test_lyapunov_and_cycles_refuse_models_with_events_and_equilibria_say_what_they_assume():
    from orbitdesk.analyses.cycles import find_cycle
    from orbitdesk.analyses.equilibria import find_equilibria
    from orbitdesk.analyses.lyapunov import largest_lyapunov_two_trajectory, lyapunov_spectrum

    system = compile_model(RELAY)
    for result in (lyapunov_spectrum(system, t_end=10.0), largest_lyapunov_two_trajectory(system, t_end=10.0)):
        assert result.status == REFUSED and "saltation matrix" in result.message and "line 6" in result.message
    with pytest.raises(ValueError, match="saltation matrix"):
        find_cycle(system)
    found = find_equilibria(system, exact=False, starts=20)
    assert any("between events" in note for note in found.notes)
    assert [round(float(e.vector[0]), 9) for e in found] == [1.0]  # y = K u with u = 1 (closed form)


# ------------------------------------------------------------------ command line


def test_run_and_check_json_list_the_events(tmp_path, capsys):
    from orbitdesk.cli import main

    path = tmp_path / "ball.txt"
    path.write_text(BALL, encoding="utf-8")
    assert main(["run", str(path), "--json", "--t-end", "2", "--samples", "50"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert [e["t"] for e in out["events"]] == pytest.approx(list(ball_impacts(3)), abs=1e-7)
    assert out["events"][0]["line"] == 5 and out["events"][0]["rule"] == "when x < 0 then x' = -e*x'"
    assert set(out["events"][0]["before"]) == {"x", "x'"}
    assert main(["run", str(path), "--json", "--t-end", "10", "--event-rate", "50"]) == 1
    out = json.loads(capsys.readouterr().out)
    assert out["status"] == CHATTERING
    assert main(["check", str(path), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["events"][0]["rule"] == "when x < 0 then x' = -e*x'"


@pytest.mark.fallback
def test_sections_follow_the_runs_through_events_that_change_parameters():
    """The relay's crossings of y = 0 upwards come once per period 2 tau ln((K + h)/(K - h)) (closed form
    above), also when the section is computed in several pieces that must carry the switched u along."""
    from orbitdesk.analyses.sections import plane_section

    period = 2 * math.log(1.1 / 0.9)
    system = compile_model(RELAY)
    section = plane_section(system, coordinate="y", value=0.0, direction="up", count=40, transient=1.0,
                            settings=RunSettings(t_end=2.0))
    assert section.status == OK and section.points.shape[1] == 40, section.message
    assert np.allclose(np.diff(section.times), period, rtol=0, atol=1e-7)
    down = plane_section(system, coordinate="y", value=0.0, direction="down", count=10, settings=RunSettings(t_end=2.0))
    assert np.allclose(np.diff(down.times), period, rtol=0, atol=1e-7)


def test_ensemble_analyses_fitting_and_the_script_refuse_models_with_events_in_plain_words():
    from orbitdesk.analyses.basins import basins
    from orbitdesk.analyses.fitting import FitSettings, fit
    from orbitdesk.analyses.sweep import SweepSettings, lyapunov_grid, sweep
    from orbitdesk.exports.run_script import run_script

    system = compile_model(RELAY)
    with pytest.raises(ValueError, match="ensemble engine that does not stop at the model's events"):
        lyapunov_grid(system, "K", [0.5, 1.0], "h", [0.1, 0.2])
    with pytest.raises(ValueError, match="saltation matrix"):
        sweep(system, "K", [0.5, 1.0], SweepSettings(mode="strobe", period=1.0, lyapunov=True))
    with pytest.raises(ValueError, match="line 5"):
        basins(compile_model(BALL), "x", [0.5, 1.0], "x'", [0.0, 1.0])
    with pytest.raises(ValueError, match="saltation matrix"):
        fit(system, [], FitSettings(parameters=["K"]))
    with pytest.raises(ValueError, match="does not apply events"):
        run_script(system)


@pytest.mark.fallback
@pytest.mark.parametrize("e", [0.3, 0.05])
def test_a_dead_ball_never_leaks_through_the_floor(e):
    """With little restitution the rebounds shrink below what floating point resolves long before the
    accumulation time t1 (1+e)/(1-e) (closed form above); the run must end there with the guard's
    status, never step on with the ball below the floor."""
    text = BALL.replace(f"e = {E}", f"e = {e}")
    traj = simulate(compile_model(text), RunSettings(t_end=3.0, samples=300))
    assert traj.status == CHATTERING, traj.message
    assert "line 5" in traj.message
    assert traj.model_events[-1].t < accumulation_time(e=e) + 1e-9
    assert traj.states[0].min() > -1e-8 and traj.time[-1] < accumulation_time(e=e) + 1e-9
    times = np.array([ev.t for ev in traj.model_events])
    assert np.allclose(times, ball_impacts(len(times), e=e), atol=1e-8)


def test_latex_lists_the_events_as_typed():
    from orbitdesk.exports.latex import model_latex

    text = model_latex(BALL + "when x' >= 20 then stop\n")
    assert r"\text{when } x < 0\text{ becomes true:}\quad \dot{x} \leftarrow - e \dot{x}" in text
    assert r"\text{when } \dot{x} \ge 20\text{ becomes true:}\quad \text{stop}" in text


FLAP = """\
k = 1
c = 0.05
A = 0.3
w = 0.8
gap = 1
r = 0.7
x'' = -c*x' - k*x + A*cos(w*t)
when x > gap then x' = -r*x'
"""


def test_a_sweep_follows_each_value_through_its_events():
    """A shaken oscillator with a stop: no hit at gap = 1 (its free amplitude
    A/sqrt((k - w^2)^2 + (c w)^2) = 0.828 < 1, closed form), a hit every other shake at 0.6 (two strobe
    points), one per shake at 0.3; each sweep value must equal its own stroboscopic section, and the
    maxima of x never pass the stop."""
    from orbitdesk.analyses.sections import strobe_section
    from orbitdesk.analyses.sweep import SweepSettings, sweep

    system = compile_model(FLAP)
    period = 2 * math.pi / 0.8
    result = sweep(system, "gap", [1.0, 0.6, 0.3],
                   SweepSettings(mode="strobe", period=period, transient=400.0, samples=20, observe="x"))
    assert [len(set(np.round(result.points(i), 3))) for i in range(3)] == [1, 2, 1]
    alone = strobe_section(system, system.param_vector({"gap": 0.6}), period=period, count=20, transient=400.0)
    assert np.allclose(result.points(1), alone.points[0], atol=1e-9)
    # no hit at gap = 1: the shaken spring's steady response x = A((k - w^2) cos wt + c w sin wt)/D,
    # D = (k - w^2)^2 + (c w)^2, seen at wt = 2 pi j: A (k - w^2)/D = 0.823171 (closed form)
    assert np.allclose(result.points(0), 0.3 * 0.36 / (0.36**2 + 0.04**2), atol=1e-4)
    # maxima are where x' falls through zero: the free amplitude A/sqrt(D) = 0.828236 at gap = 1; a swing
    # that ends on the stop has its peak at the event (x' jumps), which is not a maximum of the equation
    highs = sweep(system, "gap", [1.0], SweepSettings(mode="maxima", observe="x", transient=400.0, samples=10))
    assert np.allclose(highs.points(0), 0.3 / math.sqrt(0.36**2 + 0.04**2), atol=1e-4)


def test_events_and_delays_together_are_refused_at_the_event():
    found = [d for d in parse_model("tau = 1\nx' = -x(t - tau)\nwhen x < 0 then x = 1\n").diagnostics
             if d.severity == "error"]
    assert len(found) == 1 and found[0].line == 3 and "delays" in found[0].message


def test_the_html_report_lists_the_events_escaped(tmp_path):
    """The report names each event with its line and boundary; a rule's text is escaped for HTML."""
    from html.parser import HTMLParser

    from orbitdesk.document.project import Project
    from orbitdesk.exports.report import render_report

    text = BALL + "when x' > 100 then stop   # <b>not bold</b>\n"
    system = compile_model(text)
    page = render_report(Project(name="ball", model=text), system)

    class Cells(HTMLParser):
        def __init__(self):
            super().__init__()
            self.cells, self.inside, self.bold = [], False, 0

        def handle_starttag(self, tag, attrs):
            if tag == "td":
                self.inside = True
                self.cells.append("")
            self.bold += tag == "b"

        def handle_endtag(self, tag):
            if tag == "td":
                self.inside = False

        def handle_data(self, data):
            if self.inside:
                self.cells[-1] += data

    reader = Cells()
    reader.feed(page)
    shown = " | ".join(reader.cells)
    assert "when x < 0 then x' = -e*x'" in shown and "x falls below 0" in shown
    assert "when x' > 100 then stop" in shown and "x' rises above 100" in shown
    assert reader.bold == 0 and "&lt;b&gt;" in page  # the comment in the model is shown as text, never as markup


def test_an_event_constant_held_exactly_beyond_a_float_is_evaluated_as_one():
    # sin(atan(1e300)) is exactly 10^300 / sqrt(1 + 10^600), whose parts overflow a float; its value is 1
    # (closed form: sin(atan(x)) = x / sqrt(1 + x^2)), so x' = 1 from 0 meets the boundary at t = 1 and a
    # reset to the same constant puts x back at 1. Found by the event-model fuzz (an OverflowError).
    system = compile_model("x' = 1\nx(0) = 0\nwhen x > sin(atan(1e300)) then stop\n")
    run = simulate(system, RunSettings(t_end=5.0, samples=50), system.initial, system.param_values)
    assert run.status == STOPPED and run.time[-1] == pytest.approx(1.0, abs=1e-9)
    timed = compile_model("x' = 0\nx(0) = 0\nwhen t > 2 then x = sin(atan(1e300))\n")
    run = simulate(timed, RunSettings(t_end=3.0, samples=31), timed.initial, timed.param_values)
    assert run.states[0, -1] == pytest.approx(1.0, abs=1e-12)
