"""The command line contract of section and lyapunov."""

import csv
import json
import math

import numpy as np
import pytest

from orbitdesk.samples.models import HENON, LORENZ

from .conftest import run_cli

OSCILLATOR = "x' = y\ny' = -w^2*x\nw = 2\nx(0) = 0.3\ny(0) = 1\n"
DUFFING = ("x'' = -delta*x' + x - x^3 + gamma*cos(omega*t)\n"
           "delta = 0.3\ngamma = 0.005\nomega = 1.2\nx(0) = 1\nx'(0) = 0\nE = x'^2/2 - x^2/2 + x^4/4\n")


# ---------------------------------------------------------------- section
def test_section_plane_json_contract(capsys, model):
    # x = A sin(w t + phase): upward crossings of x = 0 at y = A w, every 2 pi / w (closed form)
    code, out, err = run_cli(capsys, "section", model(OSCILLATOR), "--plane", "x=0", "--count", "5", "--json")
    assert code == 0
    data = json.loads(out)
    points = data["points"]
    assert len(points) == 5 and all(set(p) == {"x", "y", "t"} for p in points)
    amplitude = math.hypot(0.3, 1 / 2)
    assert [p["y"] for p in points] == pytest.approx([amplitude * 2] * 5, abs=1e-7)
    assert max(abs(p["x"]) for p in points) < 1e-10
    assert np.allclose(np.diff([p["t"] for p in points]), math.pi, atol=1e-7)
    assert data["status"] == "ok" and data["found"] == 5
    assert "%" not in err  # no progress drawn when stderr is not a terminal


def test_section_plane_on_a_derivative_state_with_direction(capsys, model):
    code, out, _ = run_cli(capsys, "section", model(DUFFING), "--plane", "x'=0", "--direction", "down",
                           "--count", "4", "--transient", "300", "--json")
    assert code == 0
    points = json.loads(out)["points"]
    assert len(points) == 4 and max(abs(p["x'"]) for p in points) < 1e-10
    assert np.allclose(np.diff([p["t"] for p in points]), 2 * math.pi / 1.2, atol=1e-6)  # period-1 maxima


def test_section_strobe_json_and_csv(capsys, model, tmp_path):
    period = 2 * math.pi / 1.2
    target = tmp_path / "strobe.csv"
    code, out, _ = run_cli(capsys, "section", model(DUFFING), "--strobe", repr(period), "--count", "6",
                           "--transient", repr(60 * period), "--json", "--csv", target)
    assert code == 0
    points = json.loads(out)["points"]
    assert [p["t"] for p in points] == pytest.approx(period * np.arange(60, 66), rel=1e-12)
    assert np.ptp([p["x"] for p in points]) < 1e-8  # a fixed point at small forcing
    with open(target, newline="") as handle:
        rows = list(csv.reader(handle))
    assert rows[0] == ["x", "x'", "t"] and len(rows) == 7
    assert float(rows[1][0]) == pytest.approx(points[0]["x"], rel=1e-12)


def test_section_strobe_phase(capsys, model):
    # linearised response at small forcing x = 1 + A cos(omega t - phi) (see tests/core/test_sections.py):
    # a quarter period later the samples sit at x = 1 + A sin(phi)
    period, omega, delta, gamma = 2 * math.pi / 1.2, 1.2, 0.3, 0.005
    code, out, _ = run_cli(capsys, "section", model(DUFFING), "--strobe", repr(period), "--phase", repr(period / 4),
                           "--count", "3", "--transient", repr(60 * period), "--json")
    assert code == 0
    points = json.loads(out)["points"]
    assert [p["t"] for p in points] == pytest.approx(period * np.arange(60, 63) + period / 4, rel=1e-12)
    phi = math.atan2(delta * omega, 2 - omega**2)
    amplitude = gamma / math.hypot(2 - omega**2, delta * omega)
    assert points[0]["x"] == pytest.approx(1 + amplitude * math.sin(phi), abs=2e-4)
    code, _, err = run_cli(capsys, "section", model(DUFFING), "--plane", "x=0", "--phase", "1")
    assert code != 0 and "--phase applies to --strobe" in err


def test_section_plain_table(capsys, model):
    code, out, _ = run_cli(capsys, "section", model(OSCILLATOR), "--plane", "x=0", "--count", "3")
    lines = out.splitlines()
    assert code == 0 and lines[0].split() == ["x", "y", "t"] and len(lines) == 4


def test_section_fewer_points_than_asked_is_noted(capsys, model):
    code, out, err = run_cli(capsys, "section", model(OSCILLATOR), "--plane", "x=5", "--count", "3", "--json")
    assert code == 1 and json.loads(out)["points"] == [] and "no crossing" in err


@pytest.mark.parametrize("args, text", [
    (["--plane", "q=1"], "unknown state or derived quantity 'q'"),
    (["--plane", "x=1", "--count", "-2"], "--count must be at least 1"),
    (["--plane", "x"], "--plane expects NAME=VALUE"),
    (["--plane", "x=abc"], "not a number"),
    (["--strobe", "-1"], "period must be positive"),
    (["--strobe", "1", "--direction", "down"], "--direction applies to --plane"),
    (["--plane", "x=0", "--transient", "-1"], "--transient must not be negative"),
])
def test_section_refuses_bad_input(capsys, model, args, text):
    code, out, err = run_cli(capsys, "section", model(OSCILLATOR), *args)
    assert code != 0 and text in err and "Traceback" not in err and out == ""


def test_section_refuses_maps_and_needs_a_kind(capsys, model):
    code, _, err = run_cli(capsys, "section", model(HENON), "--strobe", "1")
    assert code != 0 and "map" in err and "Traceback" not in err
    code, _, err = run_cli(capsys, "section", model(OSCILLATOR))
    assert code == 2 and "--plane" in err


# ---------------------------------------------------------------- lyapunov
def test_lyapunov_flow_json_contract(capsys, model):
    # Lorenz: 0.906, 0, -14.57 and D_KY = 2.06 (Sprott, Chaos and Time-Series Analysis, 2003); a short run
    code, out, _ = run_cli(capsys, "lyapunov", model(LORENZ), "--t-end", "320", "--transient", "20", "--json")
    assert code == 0
    data = json.loads(out)
    assert {"exponents", "kaplan_yorke_dimension", "method", "warnings"} <= set(data)
    l1, l2, l3 = data["exponents"]
    assert l1 == pytest.approx(0.906, abs=0.1) and abs(l2) < 0.1 and l3 == pytest.approx(-14.57, abs=0.2)
    assert sum(data["exponents"]) == pytest.approx(-(10 + 1 + 8 / 3), abs=1e-3)  # trace, closed form
    assert data["kaplan_yorke_dimension"] == pytest.approx(2.06, abs=0.02)
    assert data["method"] == "qr"
    # 300 time units: the block averages still spread by more than 1% + 0.002, and the output says so
    assert len(data["uncertainty"]) == 3 and data["blocks"] == 10 and data["converged"] is None
    assert all("still wander" in w for w in data["warnings"])


def test_lyapunov_text_shows_the_digits_the_error_supports(capsys, model):
    # the text rounds each exponent to its standard error (2 significant digits, the value to the same decimal
    # place: the rule worked by hand in tests/core/test_error_digits.py); JSON keeps every digit and the error
    args = ("lyapunov", model(LORENZ), "--t-end", "320", "--transient", "20")
    code, out, _ = run_cli(capsys, *args)
    assert code == 0
    code, data, _ = run_cli(capsys, *args, "--json")
    data = json.loads(data)
    line = out.splitlines()[0]
    assert line.startswith("exponents: ")
    shown = [item.split(" ± ") for item in line[len("exponents: "):].split(", ")]
    for (value, error), exact, spread in zip(shown, data["exponents"], data["uncertainty"]):
        decimals = len(error.split(".")[1]) if "." in error else 0
        assert len(value.split(".")[1] if "." in value else "") == decimals
        assert abs(float(value) - exact) <= 0.5 * 10.0 ** -decimals + 1e-12
        assert abs(float(error) - spread) <= 0.5 * 10.0 ** -decimals + 1e-12
        assert float(value) != exact  # the JSON value has more digits than the text
    assert "standard error of 10 block averages" in out


def test_lyapunov_map_with_set_and_plain_output(capsys, model):
    # Henon: sum = ln b exactly (det J = -b); a = 1.4, b = 0.3 gives 0.419, -1.623 (Sprott 2003)
    code, out, _ = run_cli(capsys, "lyapunov", model(HENON), "--steps", "20000", "--set", "b=0.3", "--json")
    data = json.loads(out)
    assert code == 0 and sum(data["exponents"]) == pytest.approx(math.log(0.3), abs=1e-10)
    assert data["exponents"][0] == pytest.approx(0.419, abs=0.02)
    code, out, _ = run_cli(capsys, "lyapunov", model(HENON), "--steps", "2000")
    assert code == 0 and out.startswith("exponents: ") and "Kaplan-Yorke dimension" in out


def test_lyapunov_two_trajectory_and_nonsmooth_warning(capsys, model):
    code, out, _ = run_cli(capsys, "lyapunov", model(HENON), "--steps", "20000", "--two-trajectory", "--json")
    data = json.loads(out)
    assert code == 0 and data["method"] == "two-trajectory" and data["kaplan_yorke_dimension"] is None
    assert data["exponents"][0] == pytest.approx(0.419, abs=0.02)
    tent = model("x[n+1] = mu*min(x, 1 - x)\nmu = 2\nx[0] = 0.2345678\n", "tent.txt")
    code, out, err = run_cli(capsys, "lyapunov", tent, "--steps", "5000", "--json")
    data = json.loads(out)
    # the tent map's exponent is ln 2 (|f'| = 2 wherever the slope exists: closed form), from the
    # Jacobian that holds almost everywhere, with a note that says so
    assert data["method"] == "qr" and "min" in data["warnings"][0] and "note:" in err
    assert data["exponents"][0] == pytest.approx(math.log(2), abs=1e-6)


@pytest.mark.parametrize("text, args, message", [
    (HENON, ["--t-end", "10"], "--t-end applies to flows"),
    (LORENZ, ["--steps", "10"], "--steps applies to maps"),
    (LORENZ, ["--t-end", "10", "--transient", "20"], "transient"),
    (LORENZ, ["--transient", "-1"], "--transient must not be negative"),
    (LORENZ, ["--set", "q=1"], "unknown parameter 'q'"),
    (HENON, ["--steps", "0"], "--steps: expected a whole number from 1"),
])
def test_lyapunov_refuses_bad_input(capsys, model, text, args, message):
    code, out, err = run_cli(capsys, "lyapunov", model(text), *args)
    assert code != 0 and message in err and "Traceback" not in err and out == ""
