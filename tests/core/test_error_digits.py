"""Exponents are written with the digits their standard error supports: the error to two significant digits,
the value to the same decimal place (the usual rule for a measured value, e.g. Taylor, An Introduction to
Error Analysis, sec. 2.2, from memory). Every expected text below is rounded by hand."""

import pytest

from orbitdesk.analyses.error_digits import value_with_error


@pytest.mark.parametrize("value, error, expected", [
    (0.89148, 0.031, ("0.891", "0.031")),  # the example of the issue: 0.89148 +- 0.031
    (0.89148, 0.0996, ("0.89", "0.10")),  # 0.0996 rounds up to 0.10: the place moves to hundredths
    (-14.5723, 0.0049, ("-14.5723", "0.0049")),
    (0.905630123, 0.00012, ("0.90563", "0.00012")),
    (2.0, 0.95, ("2.00", "0.95")),  # trailing zeros kept: they are digits the error supports
    (12345.6, 123.0, ("12350", "120")),  # an error of 123: tens
    (-0.00004, 0.0031, ("0.0000", "0.0031")),  # no '-0.0000'
    (1.2345678e-7, 3.2e-9, ("1.235e-07", "3.2e-09")),  # tiny: the scientific form, down to 1e-10
    (-1.2345e7, 5.0e4, ("-1.2345e+07", "5.0e+04")),
])
def test_value_and_error_by_hand(value, error, expected):
    assert value_with_error(value, error) == expected


@pytest.mark.parametrize("error", [None, 0.0, -0.1, float("nan"), float("inf")])
def test_no_error_no_rounding(error):
    assert value_with_error(0.89148, error) is None


def test_the_report_writes_exponents_with_their_errors():
    # a spectrum with its standard errors as the lyapunov command returns it, written into the HTML report:
    # 0.89148 +- 0.031 -> 0.891 +- 0.031 and -14.5723 +- 0.12 -> -14.57 +- 0.12 (by hand), a true minus sign
    import numpy as np

    from orbitdesk.analyses.lyapunov import LyapunovResult
    from orbitdesk.document.project import Project
    from orbitdesk.exports.report import render_report
    from orbitdesk.system.compiled_system import compile_model

    model = "x' = y\ny' = z\nz' = -x\n"
    result = LyapunovResult(np.array([0.89148, 0.00021, -14.5723]), "flow", "qr", np.array([1.0]),
                            np.zeros((1, 3)), None, 400.0, uncertainty=np.array([0.031, 0.0049, 0.12]), blocks=12)
    text = render_report(Project(name="spectrum", model=model), compile_model(model), results={"lyapunov": result})
    assert "0.891 \u00b1 0.031" in text and "0.0002 \u00b1 0.0049" in text and "\u221214.57 \u00b1 0.12" in text
    assert "0.89148" not in text and "standard error of 12 block averages" in text
