"""The command line contract of equilibria and cycle."""

import csv
import json
import math

import numpy as np
import pytest
from orbitdesk.samples.models import BRUSSELATOR_REF, LOGISTIC, model

from .conftest import run_cli

BRUSSELATOR = model(BRUSSELATOR_REF, b=2.5, initial={'x(0)': 1, 'y(0)': 1.5})
SADDLE = "x' = x\ny' = -y + x^2\n"
CIRCLE = "x' = x - y - x*(x^2 + y^2)\ny' = x + y - y*(x^2 + y^2)\nx(0) = 0.5\n"
FORCED = "x' = -x + sin(t)\n"


def test_equilibria_json_contract(capsys, model):
    # Brusselator: the equilibrium (a, b/a), unstable for b > 1 + a^2 (closed form)
    code, out, _ = run_cli(capsys, "equilibria", model(BRUSSELATOR), "--json", "--set", "b=1.5")
    assert code == 0
    (eq,) = json.loads(out)["equilibria"]
    assert {"state", "eigenvalues", "kind", "stable", "stable_dim", "unstable_dim", "method"} <= set(eq)
    assert eq["state"] == {"x": pytest.approx(1.0), "y": pytest.approx(1.5)}
    assert eq["kind"] == "stable focus" and eq["stable"] is True
    assert (eq["stable_dim"], eq["unstable_dim"]) == (2, 0)
    assert [v["re"] for v in eq["eigenvalues"]] == pytest.approx([(1.5 - 2) / 2] * 2)
    assert eq["method"] == "exact+newton" and "manifolds" not in eq


def test_equilibria_json_manifolds_of_a_planar_saddle(capsys, model):
    # x' = x, y' = -y + x^2: unstable manifold y = x^2/3, stable manifold x = 0 (closed form)
    code, out, _ = run_cli(capsys, "equilibria", model(SADDLE), "--json", "--box", "x=-2:2", "--box", "y=-2:2")
    assert code == 0
    (eq,) = json.loads(out)["equilibria"]
    assert eq["kind"] == "saddle" and eq["stable"] is False
    manifolds = eq["manifolds"]
    assert len(manifolds["stable"]) == 2 and len(manifolds["unstable"]) == 2
    for branch in manifolds["unstable"]:
        pts = np.array(branch)
        assert pts.shape[1] == 2 and len(pts) > 10
        assert np.max(np.abs(pts[:, 1] - pts[:, 0] ** 2 / 3)) < 1e-6
        assert np.max(np.abs(pts[:, 0])) == pytest.approx(2.0, abs=1e-6)
    for branch in manifolds["stable"]:
        assert np.max(np.abs(np.array(branch)[:, 0])) < 1e-9


def test_equilibria_map_multipliers(capsys, model):
    # logistic map: fixed points 0 and 1 - 1/r with multipliers r and 2 - r (closed form)
    code, out, _ = run_cli(capsys, "equilibria", model(LOGISTIC), "--json", "--set", "r=2.5")
    points = sorted(json.loads(out)["equilibria"], key=lambda e: e["state"]["x"])
    assert code == 0 and len(points) == 2
    assert [p["state"]["x"] for p in points] == pytest.approx([0.0, 0.6])
    assert [p["multipliers"][0]["re"] for p in points] == pytest.approx([2.5, -0.5])
    assert [p["stable"] for p in points] == [False, True]


def test_equilibria_plain_table(capsys, model):
    code, out, _ = run_cli(capsys, "equilibria", model(BRUSSELATOR))
    assert code == 0
    header, row = out.splitlines()[:2]
    assert header.split()[:4] == ["x", "y", "kind", "stable"]
    assert "unstable focus" in row and "0.25 ± 0.968246i" in row  # (b-1-a^2)/2 ± ... at b = 2.5


def test_equilibria_bad_input(capsys, model):
    path = model(BRUSSELATOR)
    code, _, err = run_cli(capsys, "equilibria", path, "--set", "c=1")
    assert code == 1 and "unknown parameter 'c'" in err and "Traceback" not in err
    code, _, err = run_cli(capsys, "equilibria", path, "--box", "z=0:1")
    assert code == 1 and "unknown state 'z'" in err
    code, _, err = run_cli(capsys, "equilibria", path, "--box", "x=2:1")
    assert code == 1 and "below" in err
    code, _, err = run_cli(capsys, "equilibria", model(FORCED, "forced.txt"))
    assert code == 1 and "depend on the time t" in err


def test_cycle_json_contract(capsys, model):
    # r' = r(1 - r^2), theta' = 1: the cycle r = 1 of period 2 pi, nontrivial multiplier exp(-4 pi)
    # (closed form)
    code, out, _ = run_cli(capsys, "cycle", model(CIRCLE), "--json")
    assert code == 0
    data = json.loads(out)
    assert {"period", "state", "amplitude", "multipliers", "stable"} <= set(data)
    assert data["period"] == pytest.approx(2 * math.pi, abs=1e-6)
    assert math.hypot(data["state"]["x"], data["state"]["y"]) == pytest.approx(1.0, abs=1e-8)
    assert data["amplitude"] == {"x": pytest.approx(2.0, abs=1e-5), "y": pytest.approx(2.0, abs=1e-5)}
    moduli = sorted(math.hypot(m["re"], m["im"]) for m in data["multipliers"])
    assert moduli == [pytest.approx(math.exp(-4 * math.pi), rel=1e-6), pytest.approx(1.0, abs=1e-6)]
    assert data["stable"] is True


def test_cycle_guess_period_guess_and_csv(capsys, model, tmp_path):
    out_csv = tmp_path / "orbit.csv"
    code, out, _ = run_cli(capsys, "cycle", model(CIRCLE), "--guess", "x=1.1", "--guess", "y=0",
                           "--period-guess", "6", "--csv", out_csv)
    assert code == 0 and out == ""
    with open(out_csv, newline="") as handle:
        rows = list(csv.reader(handle))
    assert rows[0] == ["t", "x", "y"]
    values = np.array(rows[1:], dtype=float)
    assert values[-1, 0] == pytest.approx(2 * math.pi, abs=1e-6)
    assert np.hypot(values[:, 1], values[:, 2]) == pytest.approx(np.ones(len(values)), abs=1e-8)


def test_cycle_forced_flow(capsys, model):
    # x' = -x + sin t: periodic solution (sin t - cos t)/2, multiplier exp(-2 pi) (closed form)
    code, out, _ = run_cli(capsys, "cycle", model(FORCED), "--json")
    data = json.loads(out)
    assert code == 0
    assert data["period"] == pytest.approx(2 * math.pi) and data["forcing_multiple"] == 1
    assert data["state"]["x"] == pytest.approx(-0.5, abs=1e-8)
    assert data["multipliers"][0]["re"] == pytest.approx(math.exp(-2 * math.pi), rel=1e-6)
    code, out, _ = run_cli(capsys, "cycle", model(FORCED), "--json", "--forcing-period", str(4 * math.pi))
    assert code == 0 and json.loads(out)["period"] == pytest.approx(4 * math.pi)


def test_cycle_map_period(capsys, model):
    # logistic 2-cycle x = (r + 1 ± sqrt((r-3)(r+1)))/(2r), multiplier 4 + 2r - r^2 (closed form)
    r = 3.2
    code, out, _ = run_cli(capsys, "cycle", model(LOGISTIC), "--period", "2", "--json")
    data = json.loads(out)
    assert code == 0
    root = math.sqrt((r - 3) * (r + 1))
    assert sorted(p["x"] for p in data["points"]) == pytest.approx([(r + 1 - root) / (2 * r), (r + 1 + root) / (2 * r)])
    assert data["multipliers"] == [{"re": pytest.approx(4 + 2 * r - r * r), "im": 0.0}]
    assert data["stable"] is True


def test_cycle_plain_text(capsys, model):
    code, out, _ = run_cli(capsys, "cycle", model(CIRCLE))
    assert code == 0
    assert out.startswith("periodic orbit: period 6.283185307 (stable)")
    assert "(trivial)" in out


def test_cycle_bad_input(capsys, model):
    flow, the_map = model(BRUSSELATOR), model(LOGISTIC, "map.txt")
    cases = [
        (("cycle", flow, "--set", "c=1"), "unknown parameter 'c'"),
        (("cycle", the_map, "--period-guess", "3"), "--period-guess applies to flows"),
        (("cycle", the_map), "--period K"),
        (("cycle", flow, "--period", "2"), "--period K is for maps"),
        (("cycle", flow, "--guess", "z=1"), "unknown state 'z'"),
        (("cycle", flow, "--period-guess", "-1"), "must be positive"),
        (("cycle", model(FORCED, "forced.txt"), "--period-guess", "6"), "--forcing-period"),
        # below the Hopf point b = 1 + a^2 the run settles at the equilibrium: no cycle
        (("cycle", flow, "--set", "b=1.5"), "no cycle found"),
        (("cycle", the_map, "--period", "2", "--set", "r=2.8"), "no cycle found"),
    ]
    for args, message in cases:
        code, out, err = run_cli(capsys, *args)
        assert code == 1, args
        assert message in err and "Traceback" not in err, (args, err)


def test_equilibria_table_comes_before_the_exact_solve(capsys, model):
    # the Newton search's table first, then what the exact solve confirms (Brusselator: (a, b/a), closed form)
    code, out, _ = run_cli(capsys, "equilibria", model(BRUSSELATOR), "--timeout", "30")
    assert code == 0
    lines = out.splitlines()
    assert lines[0].split()[-2:] == ["found", "by"] and lines[1].split()[-1] == "newton"
    assert lines[1].split()[:2] == ["1", "2.5"]
    assert lines[2] == "the exact solve confirms row 1"
