"""A chaotic attractor is one attractor of a basin map, however differently its samples fall from start to start
(the shaken beam's stroboscopic basins listed 41 to 128 "chaotic" attractors, all the same strange attractor)."""

import numpy as np

from orbitdesk.analyses.basins import BasinSettings, _same_chaos, basins
from orbitdesk.language.model import parse_model
from orbitdesk.samples.models import DUFFING_REF, model
from orbitdesk.system.compiled_system import compile_model


def test_the_forced_duffing_strange_attractor_is_one_attractor():
    # x'' + 0.3 x' - x + x^3 = 0.5 cos(1.2 t): a strange attractor spanning both wells (Guckenheimer and Holmes,
    # sec. 2.2; the values from memory); once per forcing period every start of the grid lands on it
    system = compile_model(parse_model(model(DUFFING_REF)))
    r = basins(system, "x", np.linspace(-2, 2, 16), "x'", np.linspace(-2, 2, 12),
               BasinSettings(transient=200.0, period=2 * np.pi / 1.2))
    assert len(r.attractors) == 1 and r.attractors[0]["kind"].startswith("no period")
    assert r.attractors[0]["share"] == 1.0 and set(np.unique(r.labels)) == {0}
    assert r.stroboscopic


def test_two_chaotic_clouds_in_separate_regions_stay_two():
    rng = np.random.default_rng(1)
    left = [np.vstack([rng.uniform(-1.4, -0.6, 48), rng.uniform(-0.5, 0.5, 48)]) for _ in range(3)]
    right = [np.vstack([rng.uniform(0.6, 1.4, 48), rng.uniform(-0.5, 0.5, 48)]) for _ in range(3)]
    tracks = [left[0], right[0], left[1], right[1], left[2], right[2]]
    attractors = [{"label": k, "kind": "no period (chaotic or quasi-periodic)"} for k in range(6)]
    same = _same_chaos(attractors, tracks)
    assert same == {2: 0, 3: 1, 4: 0, 5: 1}
