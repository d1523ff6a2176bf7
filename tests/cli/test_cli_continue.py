"""The command line contract of ``continue``."""

import json
import math

import numpy as np
import pytest
from orbitdesk.samples.models import LOGISTIC_REF, model

from .conftest import run_cli

BRUSSELATOR = "a = 1.5\nb = 1\nx' = a - (b + 1)*x + x^2*y\ny' = b*x - x^2*y\n"
LOGISTIC = model(LOGISTIC_REF, r=2.8, initial={'x[0]': 0.3})


def test_continue_json_contract(capsys, model):
    code, out, _ = run_cli(capsys, "continue", model(BRUSSELATOR), "--param", "b", "--from", "0", "--to", "4",
                           "--json")
    assert code == 0
    data = json.loads(out)
    assert data["parameter"] == "b"
    (branch,) = data["branches"]
    assert branch["kind"] == "equilibrium"
    point = branch["points"][0]
    assert set(point) >= {"value", "state", "stable", "eigenvalues"}
    assert set(point["state"]) == {"x", "y"} and set(point["eigenvalues"][0]) == {"re", "im"}
    (hopf,) = branch["special"]
    # closed form: Hopf at b = 1 + a^2 with frequency a
    assert hopf["type"] == "hopf" and hopf["value"] == pytest.approx(3.25, rel=1e-12)
    assert hopf["frequency"] == pytest.approx(1.5) and hopf["first_lyapunov_coefficient"] < 0
    stable = {p["value"] < 3.25: p["stable"] for p in branch["points"] if abs(p["value"] - 3.25) > 1e-6}
    assert stable == {True: True, False: False}


def test_continue_words_for_a_map(capsys, model):
    code, out, _ = run_cli(capsys, "continue", model(LOGISTIC), "--param", "r", "--from", "2.5", "--to", "3.3")
    assert code == 0
    assert "period doubling at r = 3 " in out  # closed form r = 3
    assert "fixed point" in out and "PD" not in out


def test_continue_json_fixed_point_of_a_period_two_cycle(capsys, model):
    code, out, _ = run_cli(capsys, "continue", model(LOGISTIC), "--param", "r", "--from", "3.2", "--to", "3.5",
                           "--period", "2", "--set", "r=3.3", "--no-switch", "--json")
    assert code == 0
    (branch,) = json.loads(out)["branches"]
    assert branch["kind"] == "fixed point" and "multipliers" in branch["points"][0]
    flips = {round(s["value"], 10) for s in branch["special"] if s["type"] == "period doubling"}
    assert flips == {round(1 + math.sqrt(6), 10)}  # closed form


def test_continue_refuses_bad_input(capsys, model):
    path = model(BRUSSELATOR)
    code, _, err = run_cli(capsys, "continue", path, "--param", "c", "--from", "0", "--to", "1")
    assert code != 0 and "unknown parameter 'c'" in err
    code, _, err = run_cli(capsys, "continue", path, "--param", "b", "--from", "1", "--to", "1")
    assert code != 0 and "interval" in err
    code, _, err = run_cli(capsys, "continue", path, "--param", "b", "--from", "0", "--to", "1", "--period", "2")
    assert code != 0 and "maps" in err


def test_continue_cycles_from_the_hopf_point(capsys, model):
    # Strogatz 8.2: r' = mu r + r^3 - r^5 has its cycle fold at mu = -1/4 with period 2 pi
    text = ("mu = -0.1\nx' = mu*x - y + x*(x^2 + y^2) - x*(x^2 + y^2)^2\n"
            "y' = x + mu*y + y*(x^2 + y^2) - y*(x^2 + y^2)^2\n")
    code, out, _ = run_cli(capsys, "continue", model(text), "--param", "mu", "--from", "-0.4", "--to", "0.2",
                           "--cycles", "--json")
    assert code == 0
    branches = json.loads(out)["branches"]
    assert [b["kind"] for b in branches] == ["equilibrium", "cycle"]
    cycle = branches[1]
    assert {"period", "amplitude", "multipliers", "stable"} <= set(cycle["points"][0])
    (fold,) = [s for s in cycle["special"] if s["type"] == "cycle fold"]
    assert fold["value"] == pytest.approx(-0.25, abs=1e-9) and fold["period"] == pytest.approx(2 * math.pi)


DUFFING = "c = 0.05\nb = 0.1\nF = 0.1\nw = 0.8\nx'' = -c*x' - x - b*x^3 + F*cos(w*t)\n"


def test_response_json_contract(capsys, model):
    path = model(DUFFING)
    code, out, _ = run_cli(capsys, "response", path, "--param", "w", "--from", "0.8", "--to", "1.4", "--json")
    assert code == 0
    data = json.loads(out)
    assert data["parameter"] == "w"
    assert set(data["points"][0]) >= {"value", "amplitude", "stable", "state"}
    folds = sorted(s["value"] for s in data["special"] if s["type"] == "fold")
    # harmonic balance (Nayfeh & Mook 1979) puts the jumps near w = 1.0761 and 1.1155 for these values
    assert folds == [pytest.approx(1.0761, rel=2e-3), pytest.approx(1.1155, rel=2e-3)]
    code, out, _ = run_cli(capsys, "response", path, "--param", "w", "--from", "1.0", "--to", "1.2",
                           "--stepped", "down", "--count", "5", "--json")
    assert code == 0
    points = json.loads(out)["points"]
    assert [p["value"] for p in points] == pytest.approx([1.2, 1.15, 1.1, 1.05, 1.0])
    assert all(p["stable"] for p in points)


def test_response_refuses_an_unforced_model(capsys, model):
    code, _, err = run_cli(capsys, "response", model(BRUSSELATOR), "--param", "b", "--from", "0", "--to", "1")
    assert code != 0 and "forced" in err


def test_continue_locus_json_contract(capsys, model):
    code, out, _ = run_cli(capsys, "continue", model("a = 0.1\nb = 1\nx' = a + b*x - x^3\n"), "--locus", "fold",
                           "--param", "a", "--param2", "b", "--from", "-1", "--to", "1", "--json")
    assert code == 0
    data = json.loads(out)
    assert set(data["curve"][0]) == {"values", "state"} and set(data["curve"][0]["values"]) == {"a", "b"}
    for point in data["curve"]:  # closed form: 27 a^2 = 4 b^3
        assert 27 * point["values"]["a"] ** 2 == pytest.approx(4 * point["values"]["b"] ** 3, abs=1e-9)
    assert [s["type"] for s in data["special"]] == ["cusp"]
    code, _, err = run_cli(capsys, "continue", model("a = 0.1\nb = 1\nx' = a + b*x - x^3\n"), "--locus", "fold",
                           "--param", "a", "--from", "-1", "--to", "1")
    assert code != 0 and "--param2" in err


def test_continue_keeps_its_branches_in_the_project_as_the_app_does(capsys, tmp_path, model):
    from orbitdesk.document.live import LiveDocument
    from orbitdesk.document.project import Project, save

    path = tmp_path / "brusselator.orbitdesk"
    save(path, Project(name="Brusselator", model=BRUSSELATOR))
    code, _, err = run_cli(capsys, "continue", path, "--param", "b", "--from", "0", "--to", "4", "--keep")
    assert code == 0 and f"kept in {path}" in err
    doc = LiveDocument.open(path)  # what the app opens: the document's result, current for the values saved
    kept = doc.result("bifurcation")
    assert kept.follow == "steady" and kept.parameter == "b" and (kept.lo, kept.hi) == (0.0, 4.0)
    (hopf,) = kept.specials
    assert hopf.type == "hopf" and hopf.value == pytest.approx(3.25, rel=1e-12)  # closed form b = 1 + a^2
    assert doc.result_stale("bifurcation") == ""
    assert {k: doc.project.views["bifurcation"][k] for k in ("follow", "parameter", "from", "to")} == {
        "follow": "steady", "parameter": "b", "from": 0.0, "to": 4.0}
    doc.set_param("a", 2.0)
    assert doc.result_stale("bifurcation").startswith("Computed for a = 1.5")

    code, _, err = run_cli(capsys, "continue", path, "--locus", "hopf", "--param", "b", "--param2", "a",
                           "--from", "1", "--to", "6", "--range2", "0.5:2", "--keep")
    assert code == 0
    doc = LiveDocument.open(path)
    locus = doc.result("bifurcation_locus")
    b, a = locus.values  # closed form: the Hopf curve b = 1 + a^2
    assert b.size > 3 and np.allclose(b, 1 + a ** 2, atol=1e-8)
    assert doc.result("bifurcation").specials[0].value == pytest.approx(3.25, rel=1e-12)  # the branches stay
    assert doc.project.views["bifurcation"]["param2"] == "a" and doc.project.views["bifurcation"]["tab"] == 1


def test_continue_keeps_nothing_without_a_project(capsys, model):
    path = model(BRUSSELATOR)
    code, _, err = run_cli(capsys, "continue", path, "--param", "b", "--from", "0", "--to", "4", "--keep")
    assert code != 0 and "project file" in err and path.read_text() == BRUSSELATOR
