"""Results kept once, in the live document (document/results.py through document/live.py): set, announced,
stale when the values or the model differ from those they were computed for, and saved in and read back
from the project file with the same rule."""

import math

import numpy as np
import pytest

from orbitdesk.analyses.basins import BasinResult
from orbitdesk.analyses.lyapunov import LyapunovResult
from orbitdesk.analyses.parameter_maps import PeriodGrid
from orbitdesk.analyses.sections import SectionResult
from orbitdesk.analyses.sweep import LyapunovGrid, SweepSettings, sweep
from orbitdesk.document import project as core_project
from orbitdesk.document.live import LiveDocument
from orbitdesk.document.project import Project
from orbitdesk.document.results import KINDS, RESULTS_KEY
from orbitdesk.samples.models import LOGISTIC

SPRING = "x' = v\nv' = -w^2*x\nw = 1\nx(0) = 1\nv(0) = 0\n"


def opened(text):
    return LiveDocument.from_project(Project(name="r", model=text), compile=True)


def logistic_sweep(doc):
    """The logistic map's orbit diagram at r = 2.5 and 3.2: below r = 3 the fixed point 1 - 1/r, above it
    the period-2 cycle (closed forms, e.g. Strogatz, Nonlinear Dynamics and Chaos, sec. 10.3)."""
    return sweep(doc.system, "r", np.array([2.5, 3.2]), SweepSettings(transient=2000, samples=4),
                 u0=doc.initial_vector(), p=doc.param_vector(), compiled=False)


def spring_section():
    # x = cos t crosses x = 0 upward at t = 3 pi / 2 + 2 k pi with v = 1 (closed form)
    times = 1.5 * math.pi + 2 * math.pi * np.arange(3)
    return SectionResult(points=np.vstack([np.zeros(3), np.ones(3)]), times=times, state_names=["x", "v"], requested=3)


def results_for(kind, doc):
    if kind == "sweep":
        return logistic_sweep(doc)
    if kind == "lyapunov":
        return LyapunovResult(exponents=np.array([math.log(2.0)]), kind="map", method="qr", times=np.arange(3.0),
                              running=np.full((3, 1), math.log(2.0)), kaplan_yorke_dimension=1.0,
                              averaged_over=3.0, warnings=["short run"], uncertainty=np.array([0.01]), blocks=3)
    if kind == "sections":
        return spring_section()
    if kind == "basins":
        return BasinResult("x", np.array([0.0, 1.0]), "y", np.array([2.0]), np.array([[0, -1]]),
                           [{"label": 0, "kind": "fixed point", "period": 1, "multiplier": 0.5,
                             "centre": {"x": 0.0, "y": 0.5}, "share": 0.5}])
    if kind == "parameter_map":
        return PeriodGrid("r", np.array([2.5, 3.2]), "a", np.array([0.0]), np.array([[1, 2]]), 8, "iterations")
    raise KeyError(kind)


# (the fit below; branches and two-parameter curves in test_document_continuation.py)
FILE_KINDS = sorted(set(KINDS) - {"fit", "bifurcation", "bifurcation_locus"})


@pytest.mark.parametrize("kind", FILE_KINDS)
def test_each_kind_is_set_announced_marked_stale_and_kept_in_the_project(kind, tmp_path):
    doc = opened(LOGISTIC)
    seen = []
    doc.subscribe("result", seen.append)
    result = results_for(kind, doc)
    doc.set_result(kind, result)
    assert seen == [kind] and doc.result(kind) is result and doc.result_stale(kind) == ""
    r0 = doc.params["r"]
    doc.set_param("r", r0 + 0.25)
    assert doc.result(kind) is result  # kept, not dropped, when the values change
    assert doc.result_stale(kind) == f"Computed for r = {r0:g} (now {r0 + 0.25:g})"
    doc.set_param("r", r0)
    assert doc.result_stale(kind) == ""

    path = doc.save(tmp_path / "kept.orbitdesk")
    assert RESULTS_KEY not in doc.project.views  # the document holds results once, not also in the views' part
    back = LiveDocument.open(path, compile=True)
    again = back.result(kind)
    assert type(again) is type(result) and back.result_stale(kind) == ""
    for name, value in vars(result).items():
        if isinstance(value, np.ndarray):
            np.testing.assert_array_equal(getattr(again, name), value)
        elif isinstance(value, float) and math.isnan(value):
            assert math.isnan(getattr(again, name))
        else:
            assert getattr(again, name) == value, name

    # the same file with another value saved, then with an edited model: read back stale, with the same rule
    saved = core_project.load(path)
    saved.parameters["r"].value = r0 + 1
    core_project.save(tmp_path / "moved.orbitdesk", saved)
    assert LiveDocument.open(tmp_path / "moved.orbitdesk", compile=True).result_stale(kind).startswith(
        f"Computed for r = {r0:g} (now {r0 + 1:g})")
    saved = core_project.load(path)
    saved.model = saved.model + "\n# a comment changes the text\n"
    core_project.save(tmp_path / "edited.orbitdesk", saved)
    assert "an earlier version of the model" in LiveDocument.open(tmp_path / "edited.orbitdesk",
                                                                 compile=True).result_stale(kind)


def test_the_kept_orbit_diagram_reads_back_the_closed_forms(tmp_path):
    doc = opened(LOGISTIC)
    doc.set_result("sweep", logistic_sweep(doc))
    back = LiveDocument.open(doc.save(tmp_path / "s.orbitdesk"), compile=True).result("sweep")
    np.testing.assert_allclose(back.points(0), 1 - 1 / 2.5, atol=1e-9)
    # period 2 of x -> r x (1 - x): x = (r + 1 +- sqrt((r - 3)(r + 1))) / (2 r)
    r = 3.2
    cycle = sorted((r + 1 + s * math.sqrt((r - 3) * (r + 1))) / (2 * r) for s in (-1, 1))
    np.testing.assert_allclose(sorted(set(np.round(back.points(1), 9))), cycle, atol=1e-8)


def test_the_fit_is_saved_read_back_and_stale_when_the_values_or_its_data_change(tmp_path):
    from orbitdesk.analyses.fitting import Estimate, FitResult
    from orbitdesk.document.datasets import parse_data

    doc = opened(SPRING)
    # x = cos(w t) with w = 1 (closed form), sampled at t = 0, 1, 2
    run = parse_data("t,x\n" + "".join(f"{t},{math.cos(t)!r}\n" for t in (0, 1, 2)), "run")
    doc.replace_part("datasets", [run], "Import data run")
    fit = FitResult("ok", "converged", [Estimate("w", "parameter", "w", None, 1.0, 0.8, 0.01, (0.98, 1.02), 0.0)],
                    np.eye(1), {"x": 0.001}, 12, ["a warning"], 2, 1e-5,
                    [{"name": "run", "parameters": {"w": 1.0}, "initial": {"x": 1.0, "v": 0.0},
                      "residual_rms": {"x": 0.001}, "model": {"x": np.zeros(3)}}])
    seen = []
    doc.subscribe("result", seen.append)
    doc.set_result("fit", fit, doc.basis(data=["run"]))
    assert seen == ["fit"] and doc.result("fit") is fit
    doc.set_param("w", 1.5)
    assert doc.result_stale("fit") == "Computed for w = 1 (now 1.5)"
    doc.set_param("w", 1.0)

    back = LiveDocument.open(doc.save(tmp_path / "f.orbitdesk"), compile=True)
    again = back.result("fit")
    assert isinstance(again, FitResult) and back.result_stale("fit") == ""
    (w,) = again.estimates
    assert (w.name, w.value, w.start, w.stderr, w.interval, w.lower, w.upper) == ("w", 1.0, 0.8, 0.01, (0.98, 1.02),
                                                                                 0.0, math.inf)
    assert again.residual_rms == {"x": 0.001} and again.message == "converged" and again.warnings == ["a warning"]
    assert [d["name"] for d in again.datasets] == ["run"] and "model" not in again.datasets[0]
    np.testing.assert_array_equal(again.correlation, np.eye(1))

    edited = parse_data("t,x\n0,1\n1,0.5\n2,-0.4\n", "run")
    back.replace_part("datasets", [edited], "Edit data run")
    assert back.result_stale("fit") == "Computed for an earlier version of the data run"
    back.replace_part("datasets", [], "Remove data run")
    assert back.result_stale("fit") == "Computed for the data run (now removed)"
    back.undo.undo()
    back.undo.undo()
    assert back.result_stale("fit") == ""


def test_a_swept_parameter_does_not_make_the_result_stale():
    doc = opened(LOGISTIC)
    doc.set_result("sweep", logistic_sweep(doc), doc.basis(skip="r"))
    doc.set_param("r", 3.9)
    assert doc.result_stale("sweep") == ""
    doc.set_initial("x", 0.3)
    assert doc.result_stale("sweep") == "Computed for other initial values"


def test_solver_settings_count_only_for_results_that_depend_on_them():
    doc = opened(SPRING)
    doc.set_result("sections", spring_section(), doc.basis(solver=True))
    doc.set_result("lyapunov", results_for("lyapunov", doc))
    doc.set_solver(rtol=1e-5)
    assert doc.result_stale("sections") == "Computed for other solver settings"
    assert doc.result_stale("lyapunov") == ""


def test_opening_another_project_clears_and_announces_the_results(tmp_path):
    doc = opened(LOGISTIC)
    doc.set_result("sweep", logistic_sweep(doc))
    seen = []
    doc.subscribe("result", seen.append)
    doc.load_project(Project(name="other", model=SPRING))
    assert doc.result("sweep") is None and seen == ["sweep"]


def test_results_that_do_not_fit_are_left_out_and_unknown_kinds_kept(tmp_path):
    doc = opened(LOGISTIC)
    doc.set_result("parameter_map", LyapunovGrid("r", np.array([3.0, 4.0]), "a", np.array([0.0]),
                                                 np.array([[-0.1, math.log(2)]]), np.array([["ok", "ok"]])))
    path = doc.save(tmp_path / "m.orbitdesk")
    saved = core_project.load(path)
    kept = saved.views[RESULTS_KEY]
    assert kept["parameter_map"]["class"] == "LyapunovGrid"
    kept["a later kind"] = {"for": {}, "data": {"anything": 1}}
    kept["basins"] = {"for": {"params": {"r": "not a number"}, "initial": {}}, "data": {}}
    core_project.save(tmp_path / "n.orbitdesk", saved)
    back = LiveDocument.open(tmp_path / "n.orbitdesk", compile=True)
    grid = back.result("parameter_map")
    assert isinstance(grid, LyapunovGrid) and grid.exponent[0, 1] == pytest.approx(math.log(2))
    assert back.result("basins") is None
    assert "a later kind" in back.to_project().views[RESULTS_KEY]


def test_opening_a_project_rebuilds_its_results_only_when_read(tmp_path):
    import subprocess
    import sys

    doc = opened(LOGISTIC)
    doc.set_result("sweep", logistic_sweep(doc))
    path = doc.save(tmp_path / "lazy.orbitdesk")
    # in a fresh interpreter: opening the project (what every command does) imports no analysis module
    code = ("import sys; from orbitdesk.document.live import LiveDocument; doc = LiveDocument.open(sys.argv[1]); "
            "before = 'orbitdesk.analyses.sweep' in sys.modules; r = doc.result('sweep'); "
            "print(before, type(r).__name__, doc.result_stale('sweep') == '')")
    out = subprocess.run([sys.executable, "-c", code, str(path)], capture_output=True, text=True, timeout=300)
    assert out.stdout.split() == ["False", "SweepResult", "True"], out.stderr
