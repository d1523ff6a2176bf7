"""What the samples' bifurcation diagrams show, against closed forms and runs."""

import math
from pathlib import Path

import numpy as np
import pytest

from orbitdesk.document import project as project_module
from orbitdesk.analyses.continuation.results import Branch, locus_from_saved, response_from_saved
from orbitdesk.engine.runs import RunSettings, simulate
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.samples import SAMPLES_DIR

SAMPLES = SAMPLES_DIR


def stored(name, title_word):
    project = project_module.load(SAMPLES / f"{name}.orbitdesk")
    (step,) = [s for s in project.walkthrough if title_word in s.title]
    return project, step.snapshot["views"]["bifurcation"]


def test_stirred_tank_folds_cusp_and_hysteresis():
    project, view = stored("stirred_tank", "S-shaped")
    (branch,) = [Branch.from_saved(b) for b in view["branches"]]
    folds = sorted(branch.special, key=lambda s: s.value)
    # steady states: c = T / heat and stay = T exp(-T) / (heat - T); folds where T^2 - heat T + heat = 0
    heat = 6.0
    for s, T in zip(folds, (3 + math.sqrt(3), 3 - math.sqrt(3))):
        assert s.type == "fold" and s.state["T"] == pytest.approx(T, rel=1e-9)
        assert s.value == pytest.approx(T * math.exp(-T) / (heat - T), rel=1e-9)
    _, view = stored("stirred_tank", "hysteresis at all")
    (cusp,) = locus_from_saved(view["locus"]).special
    # the two roots meet at heat = 4, T = 2, stay = 2 exp(-2) / 2
    assert cusp["type"] == "cusp"
    assert cusp["values"]["heat"] == pytest.approx(4, rel=1e-6)
    assert cusp["values"]["stay"] == pytest.approx(math.exp(-2), rel=1e-6)
    # between the folds the tank keeps its history: cold and hot starts end apart
    system = compile_model(project.model)
    p = system.param_vector({"stay": 0.05})
    ends = [simulate(system, RunSettings(t_end=30.0, samples=300), system.initial_vector(u0), p).states[1, -1]
            for u0 in ({"c": 0, "T": 0}, {"c": 0.8, "T": 4.8})]
    assert ends[0] < 1 and ends[1] > 5


def test_clock_reaction_hopf_and_its_cycles():
    _, view = stored("clock_reaction", "Hopf point")
    branches = [Branch.from_saved(b) for b in view["branches"]]
    (hopf,) = [s for b in branches for s in b.special]
    # closed form: Hopf at b = 1 + a^2 = 2 (a = 1) with frequency a = 1, supercritical
    assert hopf.type == "hopf" and hopf.value == pytest.approx(2.0, rel=1e-10)
    assert hopf.frequency == pytest.approx(1.0, rel=1e-9) and hopf.first_lyapunov_coefficient < 0
    (cycles,) = [b for b in branches if b.kind == "cycle"]
    assert cycles.values.max() == pytest.approx(3.5) and all(cycles.stable)
    assert np.all(np.diff(cycles.amplitude("x")) > 0)  # the cycle grows with the feed: a soft onset


def test_shaken_beam_frequency_response():
    _, view = stored("shaken_beam", "shaking frequency")
    curve = response_from_saved(view["response"])
    folds = sorted(s.value for s in curve.special if s.type == "fold")
    assert len(folds) == 2 and 1.2 < folds[0] < folds[1] < 1.32
    up, down = (response_from_saved(c) for c in view["stepped_sweeps"])
    jump_up = up.values[int(np.argmax(np.diff(up.amplitudes))) + 1]
    jump_down = down.values[int(np.argmin(np.diff(down.amplitudes))) + 1]
    assert folds[1] < jump_up < folds[1] + 0.03 and folds[0] - 0.03 < jump_down < folds[0]
