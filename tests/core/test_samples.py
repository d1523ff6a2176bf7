"""The sample projects: each opens, parses, replays its walkthrough cleanly, runs, and shows what it teaches."""

import importlib
import math
from pathlib import Path

import numpy as np
import pytest

from orbitdesk.document import project as project_module
from orbitdesk.engine.runs import RunSettings, simulate
from orbitdesk.language.model import parse_model
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.document.walkthrough import apply_step
from orbitdesk.samples import SAMPLES_DIR

SAMPLES = SAMPLES_DIR
NAMES = ["shaken_beam", "convection_loop", "relaxation_circuit", "clock_reaction", "pond_predators",
         "insect_generations", "pendulum", "stirred_tank", "wagon_train", "rattling_flap", "bracket_pluck",
         "long_shower", "rocking_buoy"]


def load(name):
    return project_module.load(SAMPLES / f"{name}.orbitdesk")


def module(name):
    return importlib.import_module(f"orbitdesk.analyses.{name}")


def test_every_sample_is_listed_and_the_app_sample_exists():
    assert sorted(p.stem for p in SAMPLES.glob("*.orbitdesk")) == sorted(NAMES)
    assert (SAMPLES / "convection_loop.orbitdesk").is_file()  # opened by scripts/app.sh
    readme = (SAMPLES / "README.md").read_text()
    assert all(f"{name}.orbitdesk" in readme for name in NAMES)


@pytest.mark.parametrize("name", NAMES)
def test_samples_integrate_their_sweeps_and_spectra_by_the_default_method(name):
    """A step saved without a method means the fixed-step method (the views' settings from before the
    method choice); no sample is about fixed steps, so none saves a sweep or a Lyapunov step that way."""
    project = load(name)
    saved = [project.views] + [step.snapshot.get("views", {}) for step in project.walkthrough]
    for views in saved:
        for view_id in ("sweep", "lyapunov"):
            settings = views.get(view_id, {})
            assert "dt" not in settings or settings.get("method") == "rk4", (name, view_id, settings)


@pytest.mark.parametrize("name", NAMES)
def test_sample_opens_replays_and_runs(name):
    project = load(name)
    assert project.load_warnings == []
    parsed = parse_model(project.model)
    assert parsed.errors == []
    system = compile_model(parsed)
    assert 4 <= len(project.walkthrough) <= 8
    assert set(project.parameters) == set(system.parameters)
    state = {}
    for step in project.walkthrough:
        assert step.title and len(step.note) > 80, "each step teaches something in its note"
        state, problems = apply_step(step, system, state)
        assert problems == [], f"{step.title}: {problems}"
        p = system.param_vector(state["parameters"])
        u0 = system.initial_vector(state["initial"])
        settings = RunSettings(t_end=min(project.solver.t_end, 5.0), samples=200, steps=50)
        run = simulate(system, settings, u0, p)
        # a step about the guard against piling-up events shows it ending the run, and says so
        assert run.status == "ok" or (run.status == "chattering" and "chattering" in step.note), \
            f"{step.title}: {run.message}"
    stored = project.solver
    run = simulate(system, RunSettings(method=stored.method, rtol=stored.rtol, atol=stored.atol,
                                       t_end=min(stored.t_end, 20.0), samples=500, steps=stored.steps))
    assert run.status == "ok"


def step_values(project, system, title_start):
    step = next(s for s in project.walkthrough if s.title.startswith(title_start))
    return system.param_vector(step.snapshot["parameters"]), system.initial_vector(step.snapshot["initial"])


def test_convection_loop_equilibria_kinds():
    """Lorenz: origin eigenvalues -beta and the roots of l^2 + (sigma+1) l + sigma (1-r) = 0; C+- at
    (+-sqrt(beta(r-1)), +-sqrt(beta(r-1)), r-1), stable below r_H = sigma(sigma+beta+3)/(sigma-beta-1)
    (Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., sec. 9.2)."""
    find_equilibria = module("equilibria").find_equilibria
    project = load("convection_loop")
    system = compile_model(project.model)
    sigma, beta = 10.0, 8.0 / 3.0
    assert sigma * (sigma + beta + 3) / (sigma - beta - 1) == pytest.approx(24.7368, abs=1e-4)
    for title, r, outer in (("More heat", 10.0, "stable focus"), ("Every rest state", 28.0, "saddle-focus")):
        p, _ = step_values(project, system, title)
        assert p[system.parameters.index("r")] == r
        found = find_equilibria(system, p=p, exact_timeout=2.0)
        by_x = sorted(found, key=lambda e: e.state["x"])
        assert [e.kind for e in by_x] == [outer, "saddle", outer]
        c = math.sqrt(beta * (r - 1))
        assert by_x[2].state["x"] == pytest.approx(c, rel=1e-9) and by_x[2].state["z"] == pytest.approx(r - 1)
        roots = np.roots([1, sigma + 1, sigma * (1 - r)])
        expected = sorted([-beta, *roots.real], reverse=True)
        assert sorted(by_x[1].eigenvalues.real, reverse=True) == pytest.approx(expected, rel=1e-9)


def test_relaxation_circuit_cycle_period():
    """Van der Pol at mu = 1: period 6.6633 (value from memory: 6.6632868...), amplitude close to 2."""
    find_cycle = module("cycles").find_cycle
    project = load("relaxation_circuit")
    system = compile_model(project.model)
    p, u0 = step_values(project, system, "The period")
    cycle = find_cycle(system, p=p, guess=[2.0, 0.0])
    assert cycle.period == pytest.approx(6.6632868, abs=1e-5)
    assert cycle.amplitude["x"] / 2 == pytest.approx(2.0, abs=0.02)
    assert cycle.stable


def test_clock_reaction_either_side_of_the_hopf_point():
    """Brusselator: equilibrium (a, b/a), trace b - 1 - a^2, determinant a^2 (Strogatz, 2nd ed., ex. 8.3.1)."""
    find_equilibria = module("equilibria").find_equilibria
    project = load("clock_reaction")
    system = compile_model(project.model)
    kinds = {}
    for title in ("Why it settles", "A faster feed", "Move the threshold"):
        p, _ = step_values(project, system, title)
        a, b = p[system.parameters.index("a")], p[system.parameters.index("b")]
        (eq,) = find_equilibria(system, p=p, exact_timeout=2.0)
        assert eq.state == pytest.approx({"x": a, "y": b / a})
        trace, det = b - 1 - a * a, a * a
        expected = trace / 2 + 1j * math.sqrt(det - trace**2 / 4)
        top = max(eq.eigenvalues, key=lambda z: z.imag)
        assert top == pytest.approx(expected, abs=1e-9)
        kinds[title] = (b < 1 + a * a, eq.kind)
    assert kinds["Why it settles"] == (True, "stable focus")
    assert kinds["A faster feed"] == (False, "unstable focus")
    assert kinds["Move the threshold"] == (True, "stable focus")


def test_insect_generations_sweep_and_lyapunov():
    """Logistic map: fixed point 1 - 1/r; 2-cycle (r + 1 +- sqrt((r - 3)(r + 1))) / (2 r); Lyapunov
    exponent ln 2 at r = 4 (closed forms; Strogatz, 2nd ed., secs. 10.3 and 10.5)."""
    sweep_module = module("sweep")
    project = load("insect_generations")
    system = compile_model(project.model)
    settings = sweep_module.SweepSettings(transient=2000, samples=64, lyapunov=True)
    result = sweep_module.sweep(system, "r", [2.8, 3.2, 3.9, 4.0], settings, u0=[0.3])
    assert np.unique(np.round(result.points(0), 9)) == pytest.approx([1 - 1 / 2.8])
    r = 3.2
    two = sorted((r + 1 + s * math.sqrt((r - 3) * (r + 1))) / (2 * r) for s in (-1, 1))
    assert np.unique(np.round(result.points(1), 9)) == pytest.approx(two, abs=1e-9)
    assert len(np.unique(np.round(result.points(2), 6))) > 32  # chaos: no short repeat
    assert result.lyapunov[0] == pytest.approx(math.log(abs(2 - 2.8)), abs=1e-3)
    assert result.lyapunov[2] > 0.3
    # r = 4: ln 2 holds for almost every start; a finite run of 64 steps scatters around it
    assert result.lyapunov[3] == pytest.approx(math.log(2), abs=0.15)


def test_convection_loop_largest_lyapunov_exponent():
    """Lorenz at r = 28: largest exponent about 0.906 (Wolf, Swift, Swinney & Vastano, Physica D 16, 1985)."""
    sweep_module = module("sweep")
    project = load("convection_loop")
    system = compile_model(project.model)
    p, u0 = step_values(project, system, "How fast")
    settings = sweep_module.SweepSettings(mode="maxima", observe="z", transient=10.0, samples=2000,
                                          duration=120.0, dt=0.01, lyapunov=True)
    result = sweep_module.sweep(system, "r", [28.0], settings, u0=u0, p=p)
    assert result.lyapunov[0] == pytest.approx(0.906, abs=0.15)


def test_shaken_beam_sections_and_sweep():
    """Forced two-well Duffing with damping 0.3 and frequency 1.2: period 1 at gamma = 0.2, period 2
    at 0.28, chaos at 0.5 (Jordan & Smith, Nonlinear Ordinary Differential Equations, 4th ed., ch. 13,
    which follows this family through period doubling to chaos; values from memory)."""
    sweep_module = module("sweep")
    project = load("shaken_beam")
    system = compile_model(project.model)
    T = 2 * math.pi / 1.2
    settings = sweep_module.SweepSettings(mode="strobe", period=T, transient=40 * T, samples=24, lyapunov=True)
    result = sweep_module.sweep(system, "gamma", [0.2, 0.28, 0.5], settings)
    counts = [len(np.unique(np.round(result.points(i), 4))) for i in range(3)]
    assert counts[:2] == [1, 2]
    assert counts[2] > 12 and result.lyapunov[2] > 0.05
    assert result.lyapunov[0] < 0


def test_pond_and_pendulum_equilibria():
    """Pond: coexistence at (death/(efficiency*attack), growth/attack*(1 - x*/capacity)); pendulum:
    centre at 0, saddle at pi (closed forms)."""
    find_equilibria = module("equilibria").find_equilibria
    project = load("pond_predators")
    system = compile_model(project.model)
    p, _ = step_values(project, system, "Three kinds")
    kinds = {(round(e.state["fleas"], 9), round(e.state["fish"], 9)): e.kind
             for e in find_equilibria(system, p=p, exact_timeout=2.0)}
    assert kinds == {(0.0, 0.0): "saddle", (8.0, 0.0): "saddle", (3.0, 1.25): "stable focus"}
    project = load("pendulum")
    system = compile_model(project.model)
    box = {"theta": (-1.0, 4.0), "theta'": (-1.0, 1.0)}
    found = {round(e.state["theta"], 9): e.kind for e in find_equilibria(system, box=box, exact_timeout=2.0)}
    assert found[0.0].startswith("centre") and found[round(math.pi, 9)] == "saddle"


def test_convection_loop_section_and_shaken_beam_strobe():
    """Crossing z = 27 upward needs dz/dt = x y - beta z > 0, so x y > 27 beta = 72 at every point (from
    the equations); at gamma = 0.2 the strobed beam repeats every period (a single point, period 1)."""
    sections = module("sections")
    project = load("convection_loop")
    system = compile_model(project.model)
    p, u0 = step_values(project, system, "A slice")
    result = sections.plane_section(system, p=p, u0=u0, coordinate="z", value=27.0, direction="up",
                                    count=40, transient=5.0)
    x, y, z = result.points
    assert result.times.size == 40
    assert z == pytest.approx(np.full(40, 27.0), abs=1e-7)
    assert np.all(x * y > 72.0)
    project = load("shaken_beam")
    system = compile_model(project.model)
    p, u0 = step_values(project, system, "Gentle shaking")
    T = project.walkthrough[2].snapshot["section"]["strobe"]
    result = sections.strobe_section(system, p=p, u0=u0, period=T, count=10, transient=60 * T)
    assert np.ptp(result.points, axis=1) == pytest.approx([0.0, 0.0], abs=1e-5)
    assert np.diff(result.times) == pytest.approx(np.full(9, T), rel=1e-9)


def test_wagon_train_stretch_wave_travels_at_the_long_wave_speed():
    """A chain of masses m joined by springs k carries long waves at sqrt(k/m) masses per unit time
    (the continuum limit of the lattice, e.g. Brillouin, Wave Propagation in Periodic Structures, 1946):
    quadrupling k halves the time the stretch takes to reach the last coupling, quadrupling m doubles it."""
    project = load("wagon_train")
    system = compile_model(project.model)
    assert len(system.states) == 24 and parse_model(project.model).structural == {"N"}

    def arrival(title):
        p, u0 = step_values(project, system, title)
        run = simulate(system, RunSettings(t_end=30.0, samples=3001), u0, p)
        last = system.derived_values(run.time, run.states, p)["last_coupling"]
        values = dict(zip(system.parameters, p))
        share = values["F"] / (values["N"] * values["k"])  # its stretch in steady pulling
        return run.time[np.argmax(last > 0.5 * share)]

    base, stiff, heavy = arrival("The pull"), arrival("Stiffer"), arrival("Heavier")
    assert 4.0 < base < 7.0  # about N / sqrt(k/m) = 6 s, less the spread of the two-second ramp
    assert stiff / base == pytest.approx(0.5, abs=0.08)
    assert heavy / base == pytest.approx(2.0, abs=0.2)


def test_bracket_sample_data_match_their_files_and_fit_back_to_what_made_them():
    """The invented pluck records were made with c = 0.9, k = 158, k3 = 22 (scripts/make_samples.py): a joint
    fit of the stored data sets recovers those within three standard errors, and each stored data set is
    the file it names (same SHA-256)."""
    from orbitdesk.document.datasets import read_data_file
    from orbitdesk.analyses.fitting import FitSettings, fit

    project = load("bracket_pluck")
    for d in project.datasets:
        assert read_data_file(SAMPLES / "data" / d.source).checksum == d.checksum
        assert "INVENTED" in (SAMPLES / "data" / d.source).read_text().splitlines()[0]
    system = compile_model(project.model)
    result = fit(system, project.datasets, FitSettings(parameters=["c", "k", "k3"], initial=["x"]))
    truth = {"c": 0.9, "k": 158.0, "k3": 22.0, "x (small pluck)": 0.5, "x (large pluck)": 2.0}
    for e in result.estimates:
        assert abs(e.value - truth[e.name]) < 3 * e.stderr, e
    assert project.views["fit"]["parameters"] == ["c", "k", "k3"]


def test_long_shower_roots_and_onset_as_its_walkthrough_says():
    # near rest u' = -k (u(t - tau) - want): rightmost roots W_0(-k tau)/tau (closed form, scipy's lambertw),
    # stable exactly when k tau < pi/2, i.e. k < pi/4 = 0.785 at tau = 2
    from scipy.special import lambertw

    from orbitdesk.analyses.equilibria import find_equilibria

    project = load("long_shower")
    system = compile_model(project.model)
    p, _ = step_values(project, system, "Why it settles")
    eq = find_equilibria(system, p, exact=False, starts=5)[0]
    assert eq.vector == pytest.approx([38.0])
    assert eq.eigenvalues[0] == pytest.approx(complex(lambertw(-1.0) / 2.0), abs=1e-9)  # -0.159 + 0.669i
    assert eq.stable is True
    for k, stable in ((0.77, True), (0.80, False)):
        assert find_equilibria(system, system.param_vector({"k": k}), exact=False, starts=5)[0].stable is stable
    p, _ = step_values(project, system, "Impatient hands")
    run = simulate(system, RunSettings(t_end=150, samples=3001), p=p)
    late = run.states[0, run.time > 100]
    assert 33.4 < late.min() < 33.8 and 42.2 < late.max() < 42.6  # "between about 33.6 and 42.4 degrees"


def test_rattling_flap_hits_follow_the_steps():
    """The flap's hits: none after the start-up at gap = 1 (the shaken spring's amplitude
    A/sqrt((k - w^2)^2 + (c w)^2) = 0.83 < gap, closed form), two section dots at gap = 0.6, one at
    gap = 0.3, and the dead stop ends as chattering."""
    from orbitdesk.analyses.sections import strobe_section

    project = load("rattling_flap")
    system = compile_model(project.model)
    p = system.param_vector()
    a, k, c, w = (p[system.parameters.index(n)] for n in ("A", "k", "c", "w"))
    assert a / math.sqrt((k - w**2) ** 2 + (c * w) ** 2) == pytest.approx(0.8282, abs=1e-4)
    state = {}
    dots = []
    for step in project.walkthrough[:3]:
        state, _ = apply_step(step, system, state)
        pv = system.param_vector(state["parameters"])
        late = simulate(system, RunSettings(t_start=0.0, t_end=200.0, samples=2000, transient=100.0), p=pv)
        hits = [ev for ev in late.model_events if ev.t > 100.0]
        section = strobe_section(system, pv, period=2 * math.pi / 0.8, count=40, transient=400.0)
        dots.append((len(hits) > 0, len(set(np.round(section.points[0], 3)))))
    assert dots == [(False, 1), (True, 2), (True, 1)]
    state, _ = apply_step(project.walkthrough[4], system, state)
    run = simulate(system, RunSettings(t_end=300.0), p=system.param_vector(state["parameters"]))
    assert run.status == "chattering" and run.model_events[-1].t == pytest.approx(1.26, abs=0.01)
