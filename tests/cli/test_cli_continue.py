"""The command line contract of ``continue``."""

import json
import math

import pytest

from .conftest import run_cli

BRUSSELATOR = "a = 1.5\nb = 1\nx' = a - (b + 1)*x + x^2*y\ny' = b*x - x^2*y\n"
LOGISTIC = "r = 2.8\nx[n+1] = r*x*(1 - x)\nx[0] = 0.3\n"


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
