"""The HTML report gives the numbers of a basin map and of a two-parameter map the project keeps (they were left
out: a report with a basin map said nothing of its attractors)."""

import numpy as np

from orbitdesk.analyses.basins import BasinSettings, basins
from orbitdesk.analyses.parameter_maps import period_grid
from orbitdesk.analyses.sweep import SweepSettings
from orbitdesk.document.live import LiveDocument
from orbitdesk.document.project import Project
from orbitdesk.exports.report import document_results, render_report
from orbitdesk.samples.models import HENON_REF, model


def section(html: str, heading: str) -> str:
    start = html.index(f"<h3>{heading}</h3>")
    end = html.find("<h3>", start + 1)
    return html[start: end if end > 0 else None]


def report_of(doc) -> str:
    results, stale = document_results(doc)
    return render_report(doc.to_project(), doc.system, results=results, stale=stale)


def test_the_report_counts_the_periods_of_a_period_map():
    doc = LiveDocument.from_project(Project(name="h", model=model(HENON_REF)), compile=True)
    grid = period_grid(doc.system, "a", np.array([0.2, 0.3, 0.5, 0.6]), "b", np.array([0.3]),
                       SweepSettings(transient=2000), max_period=8, u0=doc.initial_vector(), p=doc.param_vector())
    doc.set_result("parameter_map", grid)
    part = section(report_of(doc), "Two-parameter map")
    # the Henon map's fixed point doubles at a = 3 (1 - b)^2 / 4 = 0.3675 for b = 0.3 (closed form): period 1 at
    # a = 0.2 and 0.3, period 2 at 0.5 and 0.6
    assert "4 × 1 values" in part
    assert "<td>period 1</td><td class=\"num\">2</td><td>of 4 points (iterations)</td>" in part
    assert "<td>period 2</td><td class=\"num\">2</td><td>of 4 points (iterations)</td>" in part


def test_the_report_names_each_basins_attractor_with_its_share():
    text = "x'' = -0.3*x' + x - x^3\nx(0) = 0.5\n"  # stable foci at x = +-1, a saddle at 0 (closed form)
    doc = LiveDocument.from_project(Project(name="w", model=text), compile=True)
    r = basins(doc.system, "x", np.linspace(-2, 2, 10), "x'", np.linspace(-2, 2, 8), BasinSettings(transient=120.0),
               u0=doc.initial_vector(), p=doc.param_vector())
    doc.set_result("basins", r)
    part = section(report_of(doc), "Basins of attraction")
    assert "10 × 8 starts" in part
    # (x, x') -> (-x, -x') maps one basin onto the other: on this symmetric grid each well has half the starts
    assert part.count("<td>equilibrium</td><td class=\"num\">50%</td>") == 2
    assert "x ≈ 1," in part and "x ≈ −1," in part
