"""The command line contract of sweep."""

import csv
import json
import math
import subprocess
import sys

import pytest
from orbitdesk.samples.models import DUFFING_REF, LOGISTIC_REF, model

from .conftest import run_cli


LOGISTIC = model(LOGISTIC_REF, r=3.5)
DUFFING = model(DUFFING_REF, gamma=0.3, initial={"x'(0)": 0})
PERIOD = 2 * math.pi / 1.2


@pytest.fixture
def logistic_file(tmp_path):
    path = tmp_path / "growth.txt"
    path.write_text(LOGISTIC)
    return path


@pytest.fixture
def duffing_file(tmp_path):
    path = tmp_path / "two_wells.txt"
    path.write_text(DUFFING)
    return path


def test_map_sweep_json_contract(capsys, logistic_file):
    code, out, _ = run_cli(capsys, "sweep", logistic_file, "--param", "r", "--from", "2.8", "--to", "3.2",
                           "--count", "3", "--transient", "3000", "--samples", "8", "--lyapunov")
    assert code == 0
    data = json.loads(out)
    assert {"parameter", "values", "samples", "lyapunov"} <= set(data)
    assert data["parameter"] == "r" and data["values"] == pytest.approx([2.8, 3.0, 3.2])
    assert [len(s) for s in data["samples"]] == [8, 8, 8]
    # closed forms: fixed point 1 - 1/r below r = 3 (exponent ln|2 - r|), period 2 at r = 3.2
    assert set(round(v, 9) for v in data["samples"][0]) == {round(1 - 1 / 2.8, 9)}
    assert len(set(round(v, 6) for v in data["samples"][2])) == 2
    assert data["lyapunov"][0] == pytest.approx(math.log(0.8), abs=1e-9)


def test_flow_strobe_json(capsys, duffing_file):
    code, out, _ = run_cli(capsys, "sweep", duffing_file, "--param", "gamma", "--from", "0.2", "--to", "0.25",
                           "--count", "2", "--strobe", repr(PERIOD), "--transient", "160", "--samples", "4",
                           "--dt", "0.05")
    assert code == 0
    data = json.loads(out)
    assert data["lyapunov"] is None and data["observed"] == "x" and data["mode"] == "strobe"
    # period-1 responses: the stroboscopic samples repeat
    for row in data["samples"]:
        assert len(row) == 4 and max(row) - min(row) < 1e-4


def test_plane_sweep_writes_csv(capsys, duffing_file, tmp_path):
    target = tmp_path / "diagram.csv"
    code, out, _ = run_cli(capsys, "sweep", duffing_file, "--param", "gamma", "--from", "0.2", "--to", "0.3",
                           "--count", "3", "--plane", "x'=0", "--direction", "down", "--transient", "30",
                           "--samples", "5", "--duration", "60", "--csv", target, "--lyapunov")
    assert code == 0 and out == ""
    rows = list(csv.reader(target.open()))
    assert rows[0] == ["gamma", "sample", "x", "lyapunov"]
    assert len(rows) == 1 + 3 * 5
    assert float(rows[1][0]) == pytest.approx(0.2)


def test_maxima_sweep(capsys, duffing_file):
    code, out, _ = run_cli(capsys, "sweep", duffing_file, "--param", "gamma", "--from", "0.2", "--to", "0.25",
                           "--count", "2", "--maxima", "--transient", "40", "--samples", "3", "--dt", "0.02")
    assert code == 0
    data = json.loads(out)
    assert data["mode"] == "maxima" and all(len(row) == 3 for row in data["samples"])


@pytest.mark.parametrize("args, message", [
    (["--param", "q", "--from", "1", "--to", "2", "--count", "3"], "unknown parameter 'q'"),
    (["--param", "r", "--from", "3", "--to", "3", "--count", "3"], "--from and --to must differ"),
    (["--param", "r", "--from", "1", "--to", "2", "--count", "0"], "--count must be at least 1"),
    (["--param", "r", "--from", "1", "--to", "2", "--count", "3", "--plane", "x=0.5"], "applies to flows"),
    (["--param", "r", "--from", "1", "--to", "2", "--count", "3", "--maxima"], "applies to flows"),
    (["--param", "r", "--from", "one", "--to", "2", "--count", "3"], "not a number"),
    (["--param", "r", "--from", "1", "--to", "2", "--count", "3", "--observe", "y"], "unknown quantity 'y'"),
    (["--param", "r", "--from", "1", "--to", "2", "--count", "3", "--samples", "0"], "--samples must be at least 1"),
])
def test_bad_map_input_is_refused(capsys, logistic_file, args, message):
    code, out, err = run_cli(capsys, "sweep", logistic_file, *args)
    assert code != 0 and out == ""
    assert message in err


@pytest.mark.parametrize("args, message", [
    ([], "needs a way to sample it"),
    (["--plane", "z=0"], "'z' is not one"),
    (["--plane", "x"], "expects NAME=VALUE"),
    (["--strobe", "0"], "--strobe must be positive"),
    (["--maxima", "--direction", "up"], "--direction goes with --plane"),
    (["--maxima", "--transient", "-1"], "--transient must be zero or positive"),
])
def test_bad_flow_input_is_refused(capsys, duffing_file, args, message):
    code, out, err = run_cli(capsys, "sweep", duffing_file, "--param", "gamma", "--from", "0.2", "--to", "0.3",
                             "--count", "2", *args)
    assert code != 0 and out == ""
    assert message in err


def test_refusal_from_a_fresh_process_has_no_traceback(logistic_file):
    proc = subprocess.run([sys.executable, "-m", "orbitdesk", "sweep", str(logistic_file), "--param", "r",
                           "--from", "1", "--to", "2", "--count", "3", "--strobe", "1"],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode != 0 and proc.stdout == ""
    assert "applies to flows" in proc.stderr and "Traceback" not in proc.stderr


def test_count_one_takes_one_value_and_a_shortfall_is_counted_and_explained(capsys, duffing_file):
    # one value; 200 maxima asked in a sampling time of 20 forcing periods' worth: the Duffing response
    # settles to the forcing period (2 pi / 1.2 = 5.24), so at most 20 * ... maxima fit in 100 time units
    code, out, err = run_cli(capsys, "sweep", duffing_file, "--param", "gamma", "--from", "0.3", "--to", "0.3",
                             "--count", "1", "--maxima", "--samples", "200", "--duration", "100",
                             "--transient", "50", "--json")
    assert code == 0
    data = json.loads(out)
    assert data["values"] == [0.3] and data["requested"] == 200
    found = data["found"][0]
    assert found == len(data["samples"][0]) and found < 200
    assert found <= math.ceil(100 / PERIOD) * 2  # never more than a couple of maxima per forcing period
    assert f"fewest: {found}" in err and "--duration" in err
    code, _, err = run_cli(capsys, "sweep", duffing_file, "--param", "gamma", "--from", "0.3", "--to", "0.4",
                           "--count", "1", "--maxima")
    assert code != 0 and "--count 1" in err
