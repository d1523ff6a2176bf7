"""Delay differential equations: the language's x(t - tau) and histories, and the method-of-steps engine,
checked against closed forms worked out by the method of steps (by hand, and exactly with sympy)."""

import math

import numpy as np
import pytest
import sympy as sp

from orbitdesk.engine.delay import DelayModel, breakpoints
from orbitdesk.engine.runs import OK, Event, RunSettings, simulate
from orbitdesk.language.model import parse_model
from orbitdesk.system.compiled_system import compile_model

UNIT = "x' = -x(t - 1)\nx(t) = 1 for t <= 0\n"


def _errors(text):
    return [(d.line, d.column, d.end_column, d.message) for d in parse_model(text).errors]


# ---------------------------------------------------------------- language
def test_delayed_values_and_history_parse():
    m = parse_model("a = 2\ntau = 0.5\nx' = -a*x(t - tau) + y(t - 2*tau)\ny' = -y\n"
                    "x(t) = cos(t) for t <= 0\n")
    assert m.ok, m.diagnostics
    assert [(d.state, str(d.amount), d.value) for d in m.delays] == [("x", "tau", 0.5), ("y", "2*tau", 1.0)]
    assert [d.label for d in m.delays] == ["x(t - tau)", "y(t - 2*tau)"]
    assert m.initial["x"] == 1.0  # the history's value at t = 0 when x(0) is not written
    assert str(m.history["x"]) == "cos(t)"
    assert "y" not in m.history  # held at its initial value


def test_same_delayed_value_written_twice_is_one_symbol():
    m = parse_model("tau = 1\nx' = x(t - tau) - x(t-tau)^3\n")
    assert m.ok and len(m.delays) == 1


def test_history_of_a_second_order_equation_gives_the_derivative_its_history():
    m = parse_model("x'' = -x(t - 1)\nx(t) = sin(t) for t <= 0\n")
    assert m.ok
    assert str(m.history["x'"]) == "cos(t)"
    assert m.initial == {"x": 0.0, "x'": 1.0}


@pytest.mark.parametrize("text, where, words", [
    ("x' = -x(t - y)\ny' = 1\n", (1, 13, 14), "state-dependent delays are not supported"),
    ("x' = -x(t + 1)\n", (1, 9, 14), "looks back a fixed time"),
    ("x' = -x(t)\n", (1, 7, 11), "current value; write x"),
    ("x' = -x(2)\n", (1, 7, 11), "its delayed value is written x(t - tau)"),
    ("x' = -x(t - 1, 2)\n", (1, 7, 18), "one time"),
    ("a = 0\nx' = -x(t - a)\n", (2, 13, 14), "a delay must be positive"),
    ("x' = -x(t - sin(t))\n", (1, 17, 18), "time-dependent delays are not supported"),
    ("x[n+1] = x(t - 1)\n", (1, 10, 18), "belong to flows"),
    ("x' = -x(t - 1)\nx(t) = 1 for t < 0\n", (2, 10, 19), "for t <= 0"),
    ("x' = -x(t - 1)\nz(t) = 1 for t <= 0\n", (2, 1, 5), "not a state"),
    ("x' = -x(t - 1)\ny' = 1\nx(t) = y for t <= 0\n", (3, 8, 9), "'y' is a state"),
    ("x' = -x(t - 1)\nx(t) = 1 for t <= 0\nx(t) = 2 for t <= 0\n", (3, 1, 5), "second history"),
    ("N = 3\nx_{i}' = -x_{i}(t - 1)   for i in 1..N\n", (2, 11, 17), "family members"),
    ("x' = -x'(t - 1)\n", (1, 7, 16), "neutral equation"),
    ("x'' = -x''(t - 1) - x\n", (1, 8, 18), "neutral equation"),
])
def test_diagnostics_are_exact(text, where, words):
    errors = _errors(text)
    assert errors, text
    line, col, end, message = errors[0]
    assert (line, col, end) == where, errors
    assert words in message


def test_history_without_delays_is_a_warning():
    m = parse_model("x' = -x\nx(t) = 1 for t <= 0\n")
    assert m.ok
    assert any("history is not used" in d.message for d in m.diagnostics)


def test_compiled_system_drops_the_delay_for_equilibria_but_keeps_it_for_runs():
    s = compile_model("a = 2\nx' = -a*x(t - 1) + 1\n")
    assert s.has_delays
    assert str(s.f[0]) == "-a*x + 1"
    assert str(s.f_delayed[0]) == "-a*x(t - 1) + 1"
    with pytest.raises(ValueError, match="not available for models with delays"):
        s.refuse_delays("continuation")


# ---------------------------------------------------------------- engine
def test_unit_delay_method_of_steps_by_hand():
    # x' = -x(t - 1), x = 1 for t <= 0. By hand, piece by piece:
    # [0,1]: x = 1 - t;  [1,2]: x = 1 - t + (t-1)^2/2, x(2) = -1/2;
    # [2,3]: x = x(2) - int_2^t (1 - (s-1) + (s-2)^2/2) ds, x(3) = -1/2 - (1 - 3/2 + 1/6) = -1/6
    run = simulate(compile_model(UNIT), RunSettings(t_end=3, samples=301))
    assert run.status == OK
    assert run.time[200] == 2.0 and run.time[300] == 3.0
    assert run.states[0, 100] == pytest.approx(0.0, abs=1e-12)
    assert run.states[0, 200] == pytest.approx(-0.5, abs=1e-12)
    assert run.states[0, 300] == pytest.approx(-1 / 6, abs=1e-12)


def test_if_with_a_constant_branch_and_a_condition_of_the_parameters_alone():
    # x' = -a x(t - 1) r(t), r = t/2 before t = 2 and 1 after, x = 1 for t <= 0, a = 1 (the second if() is 1).
    # By hand, piece by piece: [0,1]: x' = -t/2, x = 1 - t^2/4, x(1) = 3/4;
    # [1,2]: x' = -(t/2)(1 - (t-1)^2/4), x(2) = 3/4 - 3/4 + int_0^1 (s+1) s^2/8 ds = 7/96.
    # The if()'s last branch, the pair (1, True), and the condition a > 2 hold no state: the plain-Python
    # evaluator the delay engine runs on once took them for constants of the parameters and failed.
    system = compile_model("a = 1\nx' = -a*x(t - 1)*if(t < 2, t/2, 1)*if(a > 2, 0, 1)\nx(t) = 1 for t <= 0\n")
    run = simulate(system, RunSettings(t_end=2, samples=201, rtol=1e-10, atol=1e-12))
    assert run.status == OK, run.message
    assert run.states[0, 100] == pytest.approx(3 / 4, abs=1e-10)
    assert run.states[0, 200] == pytest.approx(7 / 96, abs=1e-10)


def test_discontinuities_are_stepped_onto():
    assert breakpoints(0.0, 3.5, [1.0]) == [1.0, 2.0, 3.0]
    assert breakpoints(0.0, 2.0, [1.0, 0.75]) == [0.75, 1.0, 1.5, 1.75, 2.0]


def _exact_cos_history(t_end: int):
    """x' = -x(t - 1) with x = cos(t) for t <= 0: the method of steps in exact arithmetic (sympy)."""
    t, s = sp.symbols("t s", real=True)
    piece, start = sp.cos(t), sp.Integer(0)
    pieces = []
    for k in range(t_end):
        value0 = piece.subs(t, start)
        new = value0 - sp.integrate(piece.subs(t, s - 1), (s, start, t))
        pieces.append((start, start + 1, sp.lambdify(t, new)))
        piece, start = new, start + 1
    return pieces


def test_smooth_history_against_exact_method_of_steps():
    pieces = _exact_cos_history(4)
    system = compile_model("x' = -x(t - 1)\nx(t) = cos(t) for t <= 0\n")
    run = simulate(system, RunSettings(t_end=4, samples=81, rtol=1e-10, atol=1e-12))
    exact = np.array([next(f for a, b, f in pieces if a <= tt <= b)(tt) for tt in run.time])
    assert np.max(np.abs(run.states[0] - exact)) < 1e-8


def test_convergence_order_measured_on_fixed_steps():
    # fixed steps h = 1/m (tolerances so loose that every step is accepted), error at t = 4
    pieces = _exact_cos_history(4)
    exact = pieces[-1][2](4.0)
    system = compile_model("x' = -x(t - 1)\nx(t) = cos(t) for t <= 0\n")
    model = DelayModel(system, system.param_values)
    errors = []
    for m in (2, 4, 8, 16):
        solver = model.integrator(0.0, [1.0], 1e6, 1e6, max_step=1.0 / m, t_bound=4.0)
        solver.h = 1.0 / m  # no ramp-up from a small first step
        while solver.t < 4.0:
            solver.step(4.0)
        errors.append(abs(solver.y[0] - exact))
    order = -np.polyfit(np.log([2, 4, 8, 16]), np.log(errors), 1)[0]
    assert 4.5 < order < 6.5, (errors, order)  # Dormand-Prince 5(4): order 5 (measured: see the module)


def test_tolerance_is_met():
    pieces = _exact_cos_history(4)
    system = compile_model("x' = -x(t - 1)\nx(t) = cos(t) for t <= 0\n")
    for rtol in (1e-5, 1e-8):
        run = simulate(system, RunSettings(t_end=4, samples=41, rtol=rtol, atol=rtol))
        exact = np.array([next(f for a, b, f in pieces if a <= tt <= b)(tt) for tt in run.time])
        assert np.max(np.abs(run.states[0] - exact)) < 20 * rtol


def test_jump_at_the_start_when_the_initial_value_differs_from_the_history():
    # x' = -x(t - 1), x = 0 before the start, x(0) = 1: x = 1 on [0,1] (x(t-1) = 0), then x' = -1 on [1,2]
    run = simulate(compile_model("x' = -x(t - 1)\nx(t) = 0 for t <= 0\nx(0) = 1\n"),
                   RunSettings(t_end=2, samples=201))
    assert run.states[0, 100] == pytest.approx(1.0, abs=1e-12)
    assert run.states[0, 200] == pytest.approx(0.0, abs=1e-12)


def test_second_order_delay_equation_and_derived_quantities():
    # x'' = -x(t - 1) with x = 0, x' = 1 held... written as a history x = t: x' takes 1 from it.
    # On [0,1]: x'' = -(t-1) -> x' = 1 - t^2/2 + t, x = t - t^3/6 + t^2/2; check x(1) = 4/3
    system = compile_model("x'' = -x(t - 1)\nx(t) = t for t <= 0\nlag = x(t - 1)\n")
    run = simulate(system, RunSettings(t_end=1, samples=11))
    assert run.states[0, -1] == pytest.approx(1 - 1 / 6 + 1 / 2, abs=1e-12)
    assert run.series("lag")[5] == pytest.approx(-0.5, abs=1e-12)  # x(0.5 - 1) = -0.5 from the history


def test_plane_events_in_a_delay_run():
    # x' = -(pi/2) x(t - 1): a pure oscillation of period 4 (the stability boundary, a tau = pi/2)
    system = compile_model("a = pi/2\nx' = -a*x(t - 1)\nx(t) = cos(a*t) for t <= 0\n")
    run = simulate(system, RunSettings(t_end=20, rtol=1e-10, atol=1e-12), events=[Event.on_plane([1.0], 0.0, -1)])
    crossings = run.event_times[0]
    assert np.diff(crossings) == pytest.approx(4.0, abs=1e-6)
    assert crossings[0] == pytest.approx(1.0, abs=1e-6)  # cos(pi t / 2) falls through 0 at t = 1


def test_backward_runs_are_refused():
    with pytest.raises(ValueError, match="forward in time"):
        simulate(compile_model(UNIT), RunSettings(t_start=0, t_end=-1))


# ---------------------------------------------------------------- stability of equilibria
@pytest.mark.parametrize("a_tau", [0.2, 1.0, 1.5, math.pi / 2, 1.7, 3.0])
def test_rightmost_root_matches_lambert_w(a_tau):
    # x' = -a x(t - tau): lambda = -a exp(-lambda tau) has the roots W_k(-a tau)/tau, the principal
    # branch W_0 rightmost (closed form; scipy.special.lambertw as the reference)
    from scipy.special import lambertw

    from orbitdesk.analyses.delay_stability import characteristic_roots

    tau = 2.0
    roots = characteristic_roots(np.zeros((1, 1)), [(tau, np.array([[-a_tau / tau]]))])
    expected = complex(lambertw(-a_tau) / tau)
    assert abs(roots[0] - expected) < 1e-9
    assert abs(roots[0].real) < 1e-9 if a_tau == math.pi / 2 else True


@pytest.mark.parametrize("a, stable", [(1.4, True), (1.5, True), (1.65, False), (2.5, False)])
def test_equilibrium_stable_exactly_when_a_tau_below_half_pi(a, stable):
    # x' = -a x(t - tau) with tau = 1: stable exactly when a tau < pi/2 (closed form of lambda = -a e^(-lambda tau))
    from orbitdesk.analyses.equilibria import find_equilibria

    system = compile_model(f"a = {a}\ntau = 1\nx' = -a*x(t - tau)\n")
    eqs = find_equilibria(system, exact=False, starts=5)
    assert len(eqs) == 1 and eqs[0].vector == pytest.approx([0.0], abs=1e-12)
    assert eqs[0].stable is stable
    assert eqs[0].stability == ("stable" if stable else "unstable")  # the word the Equilibria table shows
    assert any("Breda, Maset and Vermiglio" in w for w in eqs[0].warnings)


def test_at_the_boundary_the_roots_are_imaginary_with_period_four_tau():
    # a tau = pi/2: lambda = +-i pi/(2 tau), so the oscillation has period 4 tau; the run agrees
    from orbitdesk.analyses.equilibria import find_equilibria

    tau = 1.5
    system = compile_model(f"tau = {tau}\na = pi/(2*tau)\nx' = -a*x(t - tau)\nx(t) = cos(a*t) for t <= 0\n")
    eq = find_equilibria(system, exact=False, starts=5)[0]
    assert eq.eigenvalues[0].real == pytest.approx(0.0, abs=1e-9)
    assert 2 * math.pi / abs(eq.eigenvalues[0].imag) == pytest.approx(4 * tau, rel=1e-9)
    assert eq.stable is None and eq.kind == "non-hyperbolic"
    run = simulate(system, RunSettings(t_end=30, rtol=1e-10, atol=1e-12), events=[Event.on_plane([1.0], 0.0, 1)])
    assert np.diff(run.event_times[0]) == pytest.approx(4 * tau, abs=1e-6)


def test_two_state_delay_model_against_the_characteristic_determinant():
    # the roots make det(lambda I - A0 - A1 exp(-lambda tau)) vanish (checked directly)
    from orbitdesk.analyses.delay_stability import characteristic_matrix, linear_parts, characteristic_roots

    system = compile_model("k = 0.8\nx' = y\ny' = -x - 0.2*y - k*x(t - 1.3) + 0.1*y(t - 0.4)\n")
    A0, parts = linear_parts(system, [0.0, 0.0], system.param_values)
    assert A0 == pytest.approx(np.array([[0, 1], [-1, -0.2]]))
    assert [tau for tau, _ in parts] == [0.4, 1.3]
    roots = characteristic_roots(A0, parts)
    assert roots.size >= 4
    for lam in roots[:4]:
        assert abs(np.linalg.det(characteristic_matrix(A0, parts, lam))) < 1e-8 * (1 + abs(lam)) ** 2


# ---------------------------------------------------------------- analyses
MACKEY_GLASS = ("beta = 0.2\ngamma = 0.1\ntau = {tau}\nx' = beta*x(t - tau)/(1 + x(t - tau)^10) - gamma*x\n"
                "x(t) = 0.5 for t <= 0\n")


@pytest.mark.slow
def test_mackey_glass_largest_exponent_positive_at_a_chaotic_delay():
    # Mackey & Glass, Science 197 (1977) 287 (reference from memory): chaotic at tau = 17
    # (Farmer, Physica 4D (1982): a positive largest exponent there); at tau = 5 the solution settles
    # on a periodic orbit (exponent zero)
    from orbitdesk.analyses.lyapunov import largest_lyapunov_two_trajectory

    chaotic = largest_lyapunov_two_trajectory(compile_model(MACKEY_GLASS.format(tau=17)), t_end=3500,
                                              transient=500)
    assert chaotic.ok and chaotic.largest > 0.003
    periodic = largest_lyapunov_two_trajectory(compile_model(MACKEY_GLASS.format(tau=5)), t_end=3500,
                                               transient=500)
    assert periodic.ok and abs(periodic.largest) < 0.001
    assert any("segments over the longest delay" in w for w in chaotic.warnings)


def test_plane_section_of_a_delay_model_lands_on_the_plane_once_per_period():
    # a tau = pi/2: x = cos(pi t / (2 tau)) continues the history exactly; it rises through 0 at t = 3 + 4k (tau = 1)
    from orbitdesk.analyses.sections import plane_section

    system = compile_model("a = pi/2\nx' = -a*x(t - 1)\nx(t) = cos(a*t) for t <= 0\n")
    result = plane_section(system, coordinate="x", value=0.0, direction="up", count=4, transient=2.0,
                           settings=RunSettings(t_end=10, rtol=1e-10, atol=1e-12))
    assert result.complete and result.status == OK
    assert result.times == pytest.approx([3.0, 7.0, 11.0, 15.0], abs=1e-6)
    assert np.all(np.abs(result.points[0]) < 1e-9)


def test_analyses_without_delays_say_so():
    from orbitdesk.analyses.cycles import find_cycle
    from orbitdesk.analyses.lyapunov import lyapunov_spectrum

    system = compile_model(MACKEY_GLASS.format(tau=17))
    for call in (lambda: find_cycle(system), lambda: lyapunov_spectrum(system)):
        with pytest.raises(ValueError, match="not available for models with delays"):
            call()


def test_sweep_of_the_delay_finds_the_oscillation_past_the_stability_boundary():
    # x' = -a x(t - 1) - x^3: the equilibrium 0 loses stability at a = pi/2 (a Hopf point of the
    # linear part, closed form); below it the maxima decay to 0, above it a cycle of finite size remains
    from orbitdesk.analyses.sweep import MAXIMA, SweepSettings, sweep

    system = compile_model("a = 1\nx' = -a*x(t - 1) - x^3\nx(0) = 0.5\n")
    result = sweep(system, "a", [1.2, 1.9], SweepSettings(mode=MAXIMA, transient=150, duration=30, samples=3))
    assert list(result.status) == ["ok", "ok"]
    below, above = result.points(0), result.points(1)
    assert below.size == 0 or np.max(below) < 1e-3
    assert above.size == 3 and np.ptp(above) < 1e-4 and above[0] > 0.1


# ---------------------------------------------------------------- exports
def test_latex_writes_the_delay_and_the_history(tmp_path):
    import shutil
    import subprocess

    from orbitdesk.exports.latex import model_latex

    text = model_latex(MACKEY_GLASS.format(tau=17).replace("x(t) = 0.5", "x(t) = 0.5 + t/100"), standalone=True)
    assert r"\frac{\beta x(t - \tau)}{x(t - \tau)^{10} + 1} - \gamma x" in text
    assert r"x(t) &= \frac{t}{100} + \frac{1}{2} &&\qquad \text{for } t \le 0" in text
    if shutil.which("pdflatex") is None:
        pytest.skip("pdflatex is not installed; the document was checked for its parts only")
    (tmp_path / "m.tex").write_text(text)
    done = subprocess.run(["pdflatex", "-interaction=nonstopmode", "-halt-on-error", "-no-shell-escape", "m.tex"],
                          cwd=tmp_path, capture_output=True, timeout=120)
    assert done.returncode == 0


@pytest.mark.parametrize("text, end", [
    (UNIT + "lag = x(t - 1)\n", 3.0),
    ("a = 1.8\nx'' = -0.1*x' - a*x(t - 1.5) - x^3\nx(t) = cos(t) for t <= 0\n", 12.0),
])
def test_standalone_script_reproduces_a_delay_run(tmp_path, text, end):
    # the script carries the engine's method of steps: it gives the run's numbers (and x(2) = -1/2,
    # x(3) = -1/6 for the unit delay, by hand)
    import csv
    import subprocess
    import sys

    from orbitdesk.exports.run_script import run_script

    system = compile_model(text)
    settings = RunSettings(t_end=end, samples=31, rtol=1e-9, atol=1e-11)
    script = run_script(system, settings)
    assert script.isascii()
    (tmp_path / "run.py").write_text(script)
    done = subprocess.run([sys.executable, "run.py", "out.csv"], cwd=tmp_path, capture_output=True, text=True,
                          timeout=300)
    assert done.returncode == 0, done.stderr
    with open(tmp_path / "out.csv") as handle:
        rows = list(csv.reader(handle))
    assert rows[0] == ["t", *system.states, *system.derived_names]
    table = np.array(rows[1:], dtype=float)
    run = simulate(system, settings)
    assert table[:, 0] == pytest.approx(run.time, abs=1e-12)
    assert np.max(np.abs(table[:, 1:1 + system.n_states].T - run.states)) < 1e-12
    for k, name in enumerate(system.derived_names):
        assert np.max(np.abs(table[:, 1 + system.n_states + k] - run.series(name))) < 1e-12
    if "lag" in system.derived_names:
        assert table[20, 1] == pytest.approx(-0.5, abs=1e-12) and table[30, 1] == pytest.approx(-1 / 6, abs=1e-12)


def test_two_delays_against_an_exponential_solution():
    # x' = a x(t - 1) + b x(t - 1/2) has the solution exp(lam t) (history the same exponential) when
    # lam = a exp(-lam) + b exp(-lam/2): choose lam and b, solve for a (closed form)
    lam, b = -0.3, 0.5
    a = (lam - b * math.exp(-lam / 2)) * math.exp(lam)
    system = compile_model(f"a = {a!r}\nb = {b!r}\nx' = a*x(t - 1) + b*x(t - 0.5)\nx(t) = exp({lam}*t) for t <= 0\n")
    run = simulate(system, RunSettings(t_end=10, samples=101, rtol=1e-10, atol=1e-12))
    assert run.status == OK
    assert np.max(np.abs(run.states[0] - np.exp(lam * run.time))) < 1e-9


def test_largest_exponent_at_a_stable_equilibrium_is_the_rightmost_root():
    # near a stable equilibrium nearby histories close in at the rate of the rightmost characteristic root:
    # x' = -a x(t - 1) - x^3 at a = 1.2 gives Re W_0(-1.2) (closed form; scipy's lambertw)
    from scipy.special import lambertw

    from orbitdesk.analyses.lyapunov import largest_lyapunov_two_trajectory

    system = compile_model("a = 1.2\nx' = -a*x(t - 1) - x^3\nx(0) = 0.5\n")
    result = largest_lyapunov_two_trajectory(system, t_end=120, transient=20)
    assert result.ok
    assert result.largest == pytest.approx(lambertw(-1.2).real, abs=0.01)


def test_section_on_a_derived_quantity_with_a_delay_finds_the_maxima():
    # x' = -(pi/2) x(t - 1), history cos(pi t / 2): x = cos(pi t / 2) (closed form); the rate, a derived
    # quantity with the delayed value in it, falls through 0 at the maxima t = 4, 8, 12 where x = 1
    from orbitdesk.analyses.sections import plane_section

    system = compile_model("a = pi/2\nrate = -a*x(t - 1)\nx' = rate\nx(t) = cos(a*t) for t <= 0\n")
    result = plane_section(system, coordinate="rate", value=0.0, direction="down", count=3, transient=1.0,
                           settings=RunSettings(t_end=10, rtol=1e-10, atol=1e-12))
    assert result.status == OK and result.complete
    assert result.times == pytest.approx([4.0, 8.0, 12.0], abs=1e-6)
    assert result.points[0] == pytest.approx([1.0, 1.0, 1.0], abs=1e-9)


def test_report_of_a_delay_project_shows_the_delays_and_the_roots():
    # a person reading the report sees x(t - tau) in the equations and derived quantities, the method of
    # steps with its history, and the rightmost roots (W_0(-1.2) for a = 1.2, tau = 1; scipy's lambertw)
    from scipy.special import lambertw

    from orbitdesk.analyses.equilibria import find_equilibria
    from orbitdesk.document.project import Project
    from orbitdesk.exports.report import render_report

    model = "a = 1.2\ntau = 1\nx' = -a*x(t - tau)\nx(t) = cos(t) for t <= 0\nlagged = x(t - tau)\n"
    system = compile_model(model)
    text = render_report(Project(name="Lag", model=model), system, {},
                         equilibria=find_equilibria(system, exact=False, starts=5))
    assert "= -a*x(t - tau)" in text and "= x(t - tau)" in text
    assert "method of steps" in text and "history x(t) = cos(t) for t &lt;= 0" in text
    root = complex(lambertw(-1.2))
    assert "rightmost characteristic roots" in text
    assert f"\u2212{-root.real:.4f} \u00b1 {root.imag:.3f}i" in text  # -0.1905 +- 1.439i
