"""The command line contract of check and run."""

import json
import subprocess
import sys

import numpy as np
import pytest
from orbitdesk.samples.models import LORENZ_REF, model

from .conftest import run_cli


LORENZ = model(LORENZ_REF, initial={'y(0)': None, 'z(0)': None})


@pytest.fixture
def lorenz_file(tmp_path):
    path = tmp_path / "loop.txt"
    path.write_text(LORENZ)
    return path


def test_check_ok_lists_infos_and_exits_zero(capsys, lorenz_file):
    code, out, _ = run_cli(capsys, "check", lorenz_file)
    assert code == 0
    assert "5:1: info: no initial value for y" in out


def test_check_json_contract(capsys, tmp_path):
    bad = tmp_path / "bad.txt"
    bad.write_text("sigma = 10\nx' = sigam*(y - x)\ny' = -x\n")
    code, out, _ = run_cli(capsys, "check", bad, "--json")
    data = json.loads(out)
    assert code == 1
    assert data["ok"] is False and data["kind"] == "flow"
    assert data["states"] == ["x", "y"] and data["parameters"] == {"sigma": 10.0}
    error = [d for d in data["diagnostics"] if d["severity"] == "error"][0]
    assert (error["line"], error["column"], error["end_column"]) == (2, 6, 11)
    assert "did you mean 'sigma'" in error["message"]
    assert set(error) == {"line", "column", "end_column", "severity", "message"}


def test_check_unreadable_file_exits_two(capsys, tmp_path):
    code, _, err = run_cli(capsys, "check", tmp_path / "missing.txt")
    assert code == 2 and "missing.txt" in err
    binary = tmp_path / "binary.txt"
    binary.write_bytes(b"x' = 1\n\xff\xfe\n")
    code, _, err = run_cli(capsys, "check", binary)
    assert code == 2 and "UTF-8" in err


def test_run_json_contract_with_overrides(capsys, lorenz_file):
    code, out, _ = run_cli(capsys, "run", lorenz_file, "--t-end", "2", "--samples", "5",
                           "--set", "r=0.5", "--init", "z=1", "--json")
    data = json.loads(out)
    assert code == 0 and data["status"] == "ok"
    assert data["t"] == [0.0, 0.5, 1.0, 1.5, 2.0]
    assert data["states"]["z"][0] == 1.0
    # below r = 1 the origin attracts everything (Strogatz, sec. 9.2): the run decays
    assert abs(data["states"]["x"][-1]) < abs(data["states"]["x"][0])


def test_run_map_and_csv(capsys, tmp_path):
    model = tmp_path / "pop.txt"
    model.write_text("r = 2.8\nx[n+1] = r*x*(1 - x)\nx[0] = 0.2\n")
    csv_path = tmp_path / "out.csv"
    code, out, _ = run_cli(capsys, "run", model, "--steps", "300", "--csv", csv_path)
    assert code == 0
    table = np.genfromtxt(csv_path, delimiter=",", names=True)
    assert table["n"][-1] == 300
    assert table["x"][-1] == pytest.approx(1 - 1 / 2.8)  # fixed point 1 - 1/r (closed form)


def test_run_reports_divergence_in_json(capsys, tmp_path):
    model = tmp_path / "blow.txt"
    model.write_text("x' = x^2\nx(0) = 1\n")
    code, out, _ = run_cli(capsys, "run", model, "--t-end", "5", "--json")
    data = json.loads(out)
    assert code == 1 and data["status"] == "diverged" and "t = 1" in data["message"]


@pytest.mark.parametrize("args, fragment", [
    (["--set", "q=1"], "unknown parameter 'q'"),
    (["--set", "r"], "NAME=VALUE"),
    (["--init", "w=1"], "unknown state 'w'"),
    (["--t-end", "soon"], "not a number"),
    (["--rtol", "-1"], "positive"),
    (["--method", "magic"], "invalid choice"),
])
def test_run_refuses_bad_input_without_traceback(capsys, lorenz_file, args, fragment):
    code, _, err = run_cli(capsys, "run", lorenz_file, *args)
    assert code != 0
    assert fragment in err and "Traceback" not in err


def test_model_with_errors_refused_by_run(capsys, tmp_path):
    bad = tmp_path / "bad.txt"
    bad.write_text("x' = y\n")
    code, _, err = run_cli(capsys, "run", bad)
    assert code == 1 and "unknown name 'y'" in err


def test_entry_point_as_module(tmp_path, lorenz_file):
    done = subprocess.run([sys.executable, "-m", "orbitdesk", "check", str(lorenz_file), "--json"],
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0
    assert json.loads(done.stdout)["states"] == ["x", "y", "z"]


@pytest.mark.parametrize("text", ["x' = x + floor(cosh(690))\n", "a = mod(sinh(690), 3)\nx' = a*x\n"])
def test_check_of_constants_sympy_cannot_evaluate_prints_no_traceback(capsys, tmp_path, text):
    path = tmp_path / "huge.txt"
    path.write_text(text)
    code, out, err = run_cli(capsys, "check", path)
    assert code == 0 and "Traceback" not in out + err and "ok: flow with 1 states (x)" in out


def test_an_internal_failure_is_one_line_not_a_traceback(capsys, lorenz_file, monkeypatch):
    from orbitdesk.cli import check

    def broken(text):
        raise RuntimeError("something inside broke")

    monkeypatch.setattr(check, "parse_model", broken)
    code, out, err = run_cli(capsys, "check", lorenz_file)
    assert code == 1 and "Traceback" not in err
    assert err.strip() == ("orbitdesk: could not finish (RuntimeError: something inside broke); "
                           "this is a fault in OrbitDesk, please report it with the model")


def test_check_json_lists_delays_and_history_and_run_integrates_them(capsys, tmp_path):
    path = tmp_path / "lag.txt"
    path.write_text("tau = 1\nx' = -x(t - tau)\nx(t) = 1 for t <= 0\n")
    code, out, _ = run_cli(capsys, "check", path, "--json")
    data = json.loads(out)
    assert code == 0
    assert data["delays"] == [{"state": "x", "delay": "tau", "value": 1.0, "written": "x(t - tau)", "line": 2}]
    assert data["history"] == {"x": {"expression": "1", "line": 3}}
    # method of steps by hand: x(2) = -1/2, x(3) = -1/6
    code, out, _ = run_cli(capsys, "run", path, "--t-end", "3", "--samples", "4", "--json")
    data = json.loads(out)
    assert code == 0 and data["t"] == [0.0, 1.0, 2.0, 3.0]
    assert data["states"]["x"] == pytest.approx([1.0, 0.0, -0.5, -1 / 6], abs=1e-12)
    code, _, err = run_cli(capsys, "run", path, "--set", "tau=0", "--json")
    assert code != 0 and "a delay must be" in err


def test_equilibria_of_a_delay_model_list_characteristic_roots(capsys, tmp_path):
    # x' = -a x(t - 1) at a = 1.2 < pi/2: stable; the rightmost root is W_0(-1.2) (scipy's lambertw)
    from scipy.special import lambertw

    path = tmp_path / "lag.txt"
    path.write_text("a = 1.2\nx' = -a*x(t - 1)\n")
    code, out, _ = run_cli(capsys, "equilibria", path, "--json")
    data = json.loads(out)
    assert code == 0
    eq = data["equilibria"][0] if isinstance(data, dict) else data[0]
    assert eq["stable"] is True
    root = complex(lambertw(-1.2))
    assert (eq["eigenvalues"][0]["re"], abs(eq["eigenvalues"][0]["im"])) == pytest.approx((root.real, abs(root.imag)),
                                                                                           abs=1e-9)
