"""``orbitdesk grid``: two-parameter maps of the largest Lyapunov exponent and of the period."""

import csv
import json
import math

import pytest
from orbitdesk.samples.models import HENON

from .conftest import run_cli

FORCED = "c = 0.5\nA = 1\nw = 1.3\nx'' = -c*x' - x + A*cos(w*t)\nx(0) = 0\nx'(0) = 0\n"


def test_period_grid_of_the_henon_map_as_json_and_csv(capsys, model, tmp_path):
    # period doubling of the Henon fixed point at a = 3 (1 - b)^2 / 4 (closed form): 0.3675 at b = 0.3
    target = tmp_path / "grid.csv"
    code, out, _ = run_cli(capsys, "grid", model(HENON), "--x", "a=0.2:0.45:2", "--y", "b=0.3:0.3:1", "--period",
                           "--transient", "3000", "--max-period", "8", "--json", "--csv", target)
    assert code == 0
    data = json.loads(out)
    assert data["period"] == [[1, 2]] and data["x"]["values"] == [0.2, 0.45] and data["unit"] == "iterations"
    with open(target, newline="") as f:
        rows = list(csv.reader(f))
    assert rows[0] == ["a", "b", "period (iterations)"]
    assert [float(v) for v in rows[2]] == [0.45, 0.3, 2.0]


def test_lyapunov_grid_and_forced_flow_period(capsys, model):
    code, out, _ = run_cli(capsys, "grid", model(HENON), "--x", "a=1.4:1.4:1", "--y", "b=0.3:0.3:1", "--lyapunov",
                           "--transient", "1000", "--duration", "20000")
    assert code == 0
    # Henon (1976): largest exponent about 0.42 at a = 1.4, b = 0.3 (value from memory)
    assert json.loads(out)["lyapunov"][0][0] == pytest.approx(0.42, abs=0.02)
    T = 2 * math.pi / 1.3
    code, out, _ = run_cli(capsys, "grid", model(FORCED), "--x", "c=0.5:1:2", "--y", "A=0.5:1:2", "--period",
                           "--strobe", repr(T), "--transient", repr(60 * T), "--dt", repr(T / 200), "--max-period", "4")
    assert code == 0 and json.loads(out)["period"] == [[1, 1], [1, 1]]  # a linear response: the forcing's period
    code, _, err = run_cli(capsys, "grid", model(FORCED), "--x", "c=0.5:1:2", "--y", "A=0.5:1:2", "--period")
    assert code != 0 and "--strobe T" in err
    code, _, err = run_cli(capsys, "grid", model(HENON), "--x", "a=0.2:0.4", "--y", "b=0.3:0.3:1", "--period")
    assert code != 0 and "NAME=LO:HI:N" in err
