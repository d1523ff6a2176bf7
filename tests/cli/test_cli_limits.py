"""The command line bounds every request (issue 10, item 6): each of these asked for endless work or
memory and hung or filled memory; now each ends at once with a message that names the limit (and the
option that raises it, where there is one), and never a traceback. A backward run works."""

from __future__ import annotations

import json

import numpy as np
import pytest

from orbitdesk.cli import main

FORCED = "x' = y\ny' = -x - 0.1*y + a*cos(t)\na = 0.5\nx(0) = 1\n"
LOGISTIC = "x[n+1] = r*x*(1 - x)\nr = 3.7\nx[0] = 0.3\n"


@pytest.fixture
def paths(tmp_path):
    forced, logistic = tmp_path / "forced.txt", tmp_path / "logistic.txt"
    forced.write_text(FORCED)
    logistic.write_text(LOGISTIC)
    return {"forced": str(forced), "logistic": str(logistic)}


@pytest.mark.parametrize("model, args, words", [
    ("forced", ["run", "--samples", "100000000"], "samples"),
    ("logistic", ["run", "--steps", "100000000"], "--max-steps"),
    ("forced", ["run", "--t-end", "1e300"], "finite time"),
    ("forced", ["run", "--method", "rk4", "--t-end", "1e9"], "--max-steps"),
    ("logistic", ["equilibria", "--starts", "100000000"], "Newton starts"),
    ("logistic", ["sweep", "--param", "r", "--from", "3", "--to", "4", "--count", "1000000000"],
     "a sweep of 1,000,000,000 values"),
    ("forced", ["section", "--plane", "x=0", "--count", "1000000000"], "--max-memory"),
    ("forced", ["section", "--strobe", "6.283185307179586", "--transient", "1e300"], "finite time"),
    ("forced", ["section", "--strobe", "1e-300", "--transient", "1"], "--max-steps"),
    ("logistic", ["cycle", "--period", "1000000000"], "a period-1,000,000,000 cycle"),
    ("logistic", ["grid", "--lyapunov", "--x", "r=3:4:1000000000", "--y", "r=3:4:2"], "1,000,000,000"),
])
def test_endless_requests_end_at_once_with_the_limit_named(paths, capsys, model, args, words):
    code = main([*args, paths[model]])
    err = capsys.readouterr().err
    assert code != 0 and words in err and "Traceback" not in err and "could not finish" not in err, err


def test_a_limit_can_be_raised_for_one_command(paths, capsys):
    assert main(["run", "--steps", "200000", "--max-steps", "1e5", paths["logistic"]]) == 1
    assert "the limit is 100,000 (ask for less, or raise it with --max-steps N)" in capsys.readouterr().err
    assert main(["run", "--steps", "200000", "--max-steps", "3e5", "--json", paths["logistic"]]) == 0
    assert len(json.loads(capsys.readouterr().out)["n"]) == 200_001


def test_a_backward_run_goes_back_in_time(paths, capsys):
    # x'' + 0.1 x' + x = 0.5 cos t from x = 1, x' = 0 back to t = -5: scipy's solve_ivp as the reference
    from scipy.integrate import solve_ivp

    assert main(["run", "--t-end", "-5", "--samples", "11", "--json", paths["forced"]]) == 0
    out = json.loads(capsys.readouterr().out)
    ref = solve_ivp(lambda t, u: [u[1], -u[0] - 0.1 * u[1] + 0.5 * np.cos(t)], (0, -5), [1.0, 0.0],
                    t_eval=np.linspace(0, -5, 11), rtol=1e-11, atol=1e-12)
    assert np.allclose(out["t"], ref.t) and np.allclose(out["states"]["x"], ref.y[0], atol=1e-7)
