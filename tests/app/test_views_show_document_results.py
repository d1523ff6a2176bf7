"""Views present the live document's results: a result set on the document (by the command line, a
walkthrough, a project read back, another view) is drawn by its view, marked stale there by the same rule,
and cleared with it; the report reads the same results."""

import math

import numpy as np
import pytest

from orbitdesk.samples.models import LOGISTIC

from ..core.test_document_results import SPRING, results_for
from .conftest import load_model, open_view

DRAWN = {  # how many things the view draws for the results of tests/core/test_document_results.py
    "sweep": lambda v: v.points.data.size,                    # 2 values x 4 samples
    "lyapunov": lambda v: v.table.rowCount(),                 # one exponent
    "sections": lambda v: len(v.section_points.data),         # three crossings
    "basins": lambda v: 0 if v.image.image is None else v.image.image.shape[1],   # two cells across
    "parameter_map": lambda v: 0 if v.image.image is None else v.image.image.shape[1],
}
EXPECTED = {"sweep": 8, "lyapunov": 1, "sections": 3, "basins": 2, "parameter_map": 2}
MODELS = {"sweep": LOGISTIC, "lyapunov": LOGISTIC, "sections": SPRING,
          "basins": SPRING.replace("v", "y"), "parameter_map": LOGISTIC + "a = 0\n"}


@pytest.mark.parametrize("kind", sorted(DRAWN))
def test_a_result_set_on_the_document_is_shown_by_its_view(qtbot, session, kind):
    view = open_view(qtbot, session, kind)
    # the sections view computes by itself unless the project says otherwise: its result would race the one set here
    views = {"sections": {"auto": False}} if kind == "sections" else None
    load_model(qtbot, session, MODELS[kind], dict(t_end=5.0, samples=101), views=views)
    assert view.auto is None or not view.auto.isChecked()
    assert view.result is None and DRAWN[kind](view) == 0
    result = results_for(kind, session.doc)
    session.doc.set_result(kind, result)
    assert view.result is result and DRAWN[kind](view) == EXPECTED[kind]
    assert view.stale_bar.isHidden()
    name = "w" if kind == "sections" else ("r" if "r" in session.params else next(iter(session.params)))
    with qtbot.waitSignal(session.trajectoryChanged, timeout=20000):
        session.set_param(name, session.params[name] + 0.5)
    assert not view.stale_bar.isHidden() and view.stale_bar.label.text().startswith(f"Computed for {name} = ")
    session.doc.clear_result(kind)
    assert view.result is None and DRAWN[kind](view) == 0 and view.stale_bar.isHidden()


def test_the_report_gives_the_numbers_of_the_documents_results_and_says_when_they_are_stale(qtbot, session):
    from orbitdesk.exports.report import document_results, render_report

    load_model(qtbot, session, LOGISTIC, dict(t_end=50.0))
    session.doc.set_result("lyapunov", results_for("lyapunov", session.doc))
    results, stale = document_results(session.doc)
    html = render_report(session.to_project(), session.system, results=results, stale=stale)
    # ln 2: the logistic map at r = 4 (closed form), with its standard error 0.01: 0.693 ± 0.010 (rounded by hand)
    assert "Lyapunov exponents" in html and "0.693 \u00b1 0.010" in html, (results, stale)
    assert "Computed for" not in html
    with qtbot.waitSignal(session.trajectoryChanged, timeout=20000):
        session.set_param("r", 3.9)
    results, stale = document_results(session.doc)
    html = render_report(session.to_project(), session.system, results=results, stale=stale)
    assert "Computed for r = 3.2 (now 3.9): these numbers belong to those values" in html
    assert math.isclose(results["lyapunov"].exponents[0], math.log(2))
