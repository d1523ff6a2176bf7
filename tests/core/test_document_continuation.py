"""The bifurcation diagram's branches and two-parameter curves as results of the live document: kept once,
saved in the project file and read back, stale when the values change (not when the followed parameter or
the initial state moves), and moved out of the view's settings of files written by earlier versions."""

import math

import pytest

from orbitdesk.analyses.continuation import steady_branches
from orbitdesk.analyses.continuation.results import ContinuationResult, Locus
from orbitdesk.document import project as core_project
from orbitdesk.document.live import LiveDocument
from orbitdesk.document.project import Project
from orbitdesk.document.results import RESULTS_KEY, result_class, results_from_view_settings, unpack
from orbitdesk.samples import SAMPLES_DIR

BRUSSELATOR = "a = 1\nb = 1.5 in [0, 5]\nx' = a - (b + 1)*x + x^2*y\ny' = b*x - x^2*y\nx(0) = 1\ny(0) = 1\n"


def hopf_of(result):
    (hopf,) = [s for s in result.specials if s.type == "hopf"]
    return hopf


def test_branches_are_kept_saved_read_back_and_marked_stale(tmp_path):
    doc = LiveDocument.from_project(Project(name="b", model=BRUSSELATOR), compile=True)
    found = steady_branches(doc.system, "b", 0.5, 3.5, doc.param_vector())
    doc.set_result("bifurcation", ContinuationResult("steady", "b", 0.5, 3.5, found.branches, found.notes),
                   doc.basis("b", initial=False))
    # closed form: the Brusselator's steady state (a, b/a) has its Hopf point at b = 1 + a^2 = 2, frequency a = 1
    assert hopf_of(doc.result("bifurcation")).value == pytest.approx(2.0, rel=1e-8)

    path = doc.save(tmp_path / "branches.orbitdesk")
    assert core_project.load(path).views[RESULTS_KEY]["bifurcation"]["class"] == "ContinuationResult"
    assert "branches" not in (core_project.load(path).views.get("bifurcation") or {})
    back = LiveDocument.open(path, compile=True)
    kept = back.result("bifurcation")
    hopf = hopf_of(kept)
    assert (kept.follow, kept.parameter, kept.lo, kept.hi) == ("steady", "b", 0.5, 3.5)
    assert hopf.value == pytest.approx(2.0, rel=1e-8) and hopf.frequency == pytest.approx(1.0, rel=1e-8)
    assert hopf.first_lyapunov_coefficient < 0   # supercritical (soft onset)
    assert [b.size for b in kept.branches] == [b.size for b in found.branches]

    assert back.result_stale("bifurcation") == ""
    back.set_param("b", 3.0)          # the followed parameter
    back.set_initial("x", 2.0)        # the start only picks where the search begins
    assert back.result_stale("bifurcation") == ""
    back.set_param("a", 1.5)
    assert back.result_stale("bifurcation") == "Computed for a = 1 (now 1.5)"

    # the report reads the same result: the Hopf point where it lies, and that it is stale now
    from orbitdesk.exports.report import document_results, render_report

    results, stale = document_results(back)
    html = render_report(back.to_project(), back.system, results=results, stale=stale)
    assert "Bifurcation diagram" in html and "Hopf (supercritical: soft onset)" in html
    assert 'b</span> = 2<' in html and "Computed for a = 1 (now 1.5)" in html


def test_a_file_of_an_earlier_version_opens_with_its_branches_in_the_document(tmp_path):
    project = core_project.load(SAMPLES_DIR / "stirred_tank.orbitdesk")
    # (written by an earlier version: the branches in the view's settings)
    project.views.pop(RESULTS_KEY, None)
    (step,) = [s for s in project.walkthrough if "S-shaped" in s.title]
    project.views["bifurcation"] = dict(step.snapshot["views"]["bifurcation"])
    core_project.save(tmp_path / "old.orbitdesk", project)
    doc = LiveDocument.open(tmp_path / "old.orbitdesk", compile=True)
    assert "branches" not in doc.project.views["bifurcation"]
    assert doc.project.views["bifurcation"]["parameter"] == "stay"
    kept = doc.result("bifurcation")
    assert isinstance(kept, ContinuationResult) and doc.result_stale("bifurcation") == ""
    # steady states of the tank: folds where T^2 - heat T + heat = 0 (heat = 6), stay = T exp(-T) / (heat - T)
    folds = sorted((s for s in kept.specials if s.type == "fold"), key=lambda s: s.value)
    for s, T in zip(folds, (3 + math.sqrt(3), 3 - math.sqrt(3))):
        assert s.state["T"] == pytest.approx(T, rel=1e-9) and s.value == pytest.approx(T * math.exp(-T) / (6 - T), rel=1e-9)
    again = LiveDocument.open(doc.save(tmp_path / "new.orbitdesk"), compile=True)
    assert len(again.result("bifurcation").branches) == len(kept.branches)


def test_a_two_parameter_curve_read_from_a_step_keeps_its_cusp():
    project = core_project.load(SAMPLES_DIR / "stirred_tank.orbitdesk")
    (step,) = [s for s in project.walkthrough if "hysteresis at all" in s.title]
    _settings, held = results_from_view_settings(step.snapshot["views"]["bifurcation"],
                                                 {"stay": 0.05, "heat": 6.0}, project.model)
    entry = held["bifurcation_locus"]
    assert tuple(entry["for"]["skip"]) == ("stay", "heat") and entry["for"]["initial"] is None
    locus = unpack(result_class("bifurcation_locus", entry["class"]), entry["data"])
    assert isinstance(locus, Locus)
    (cusp,) = locus.special
    # closed form: the two folds meet at heat = 4, T = 2, stay = 2 exp(-2) / 2
    assert cusp["values"]["heat"] == pytest.approx(4, rel=1e-6)
    assert cusp["values"]["stay"] == pytest.approx(math.exp(-2), rel=1e-6)


@pytest.mark.parametrize("bad", [{"saved": {"branches": [{"kind": 5, "points": "no"}]}},
                                 {"saved": {"branches": [], "response": {}}},
                                 {"saved": {"branches": [[[[[[[[[[1]]]]]]]]]]}},
                                 {"saved": "text"}])
def test_branches_that_do_not_fit_are_left_out(bad):
    assert unpack(ContinuationResult, bad) is None


def test_a_number_the_file_holds_as_null_reads_back_as_nan():
    # JSON has no NaN: a multiplier or period that could not be computed is written as null, read back as NaN
    import numpy as np

    from orbitdesk.analyses.continuation.results import Branch
    from orbitdesk.document.results import pack

    branch = Branch("cycle", "b", ["x", "y"], np.array([2.0, 2.5]), np.array([[1.0, 1.1], [2.0, 2.1]]), [True, None],
                    [np.array([1.0 + 0j, 0.5 + 0j]), np.array([1.0 + 0j, complex(math.nan, 0.0)])],
                    periods=np.array([6.28, math.nan]))
    back = unpack(ContinuationResult, pack(ContinuationResult("cycles", "b", 2.0, 2.5, [branch])))
    (again,) = back.branches
    assert again.periods[0] == 6.28 and math.isnan(again.periods[1]) and math.isnan(again.spectra[1][1].real)
    assert again.stable == [True, None] and again.spectra[0][1] == 0.5
