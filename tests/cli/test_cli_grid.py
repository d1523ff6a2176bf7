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


def test_period_grid_of_an_autonomous_flow_gives_the_period_in_time(capsys, model, tmp_path):
    # Hopf normal form r' = a r - r^3, theta' = w: equilibrium for a < 0, a cycle of period 2 pi / w for a > 0
    hopf = "a = 0.5\nw = 1\nx' = a*x - w*y - x*(x^2 + y^2)\ny' = w*x + a*y - y*(x^2 + y^2)\nx(0) = 0.1\ny(0) = 0\n"
    target = tmp_path / "hopf.csv"
    code, out, _ = run_cli(capsys, "grid", model(hopf), "--x", "a=-0.5:0.5:2", "--y", "w=2:2:1", "--period",
                           "--max-period", "4", "--csv", target, "--json")
    assert code == 0
    data = json.loads(out)
    assert data["period"] == [[-2, 1]] and data["unit"] == "maxima per cycle"
    assert data["time_period"][0][0] is None and data["time_period"][0][1] == pytest.approx(math.pi, rel=1e-6)
    with open(target, newline="") as f:
        rows = list(csv.reader(f))
    assert rows[0] == ["a", "w", "period (maxima per cycle)", "period in time"]
    assert float(rows[2][3]) == pytest.approx(math.pi, rel=1e-6)
