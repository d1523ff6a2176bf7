"""Sweeps and spectra take the method like runs do, pick the stiff one when the default is held back
by stiffness, and a sweep's exponents take the lyapunov command's path.

References: the stiff lag y' = -lambda (y - a sin t) + a cos t with y(0) = 0 has the solution
y = a sin t (closed form; Hairer & Wanner, Solving ODEs II, sec. IV.1), and its one Lyapunov exponent
is exactly -lambda (the variational equation v' = -lambda v). The Lorenz system at sigma = 10,
r = 28, beta = 8/3 has the largest exponent 0.9056 (Sprott, Chaos and Time-Series Analysis, 2003;
the value from memory).
"""

import json
import math

import numpy as np
import pytest

from orbitdesk.analyses.lyapunov import lyapunov_spectrum
from orbitdesk.analyses.sweep import MAXIMA, STROBE, SweepSettings, sweep
from orbitdesk.cli import main
from orbitdesk.engine.settings import RunSettings
from orbitdesk.samples.models import LORENZ
from orbitdesk.system.compiled_system import compile_model

LAG = "a = 1\nlam = {lam:g}\ny' = -lam*(y - a*sin(t)) + a*cos(t)\ny(0) = 0\n"


def test_sweep_of_a_stiff_lag_takes_the_stiff_method_and_meets_the_closed_form():
    system = compile_model(LAG.format(lam=1e5))
    values = np.array([0.5, 1.0, 2.0])
    settings = SweepSettings(mode=STROBE, period=1.0, samples=10, transient=3.0, rtol=1e-8, atol=1e-10)
    result = sweep(system, "a", values, settings)
    assert result.method == "stiff" and any("stiff" in n for n in result.notes)
    assert list(result.status) == ["ok"] * 3
    exact = values[:, None] * np.sin(result.times)
    assert np.max(np.abs(result.samples - exact)) < 1e-6
    assert np.diff(result.times[0]) == pytest.approx(np.ones(9)) and result.times[0][0] >= 3.0


def test_sweep_exponent_is_the_lyapunov_commands_number():
    system = compile_model(LORENZ)
    p = system.param_values.copy()
    settings = SweepSettings(mode=MAXIMA, samples=5, transient=100.0, duration=3000.0, lyapunov=True)
    result = sweep(system, "r", [p[system.parameters.index("r")]], settings, p=p)
    direct = lyapunov_spectrum(system, p, system.initial, transient=100.0, converge=True, cap=3000.0,
                               settings=RunSettings(rtol=settings.rtol, atol=settings.atol), method="dop853")
    assert result.lyapunov[0] == direct.largest  # the same function, the same rule: the same number
    assert result.lyapunov_error[0] == pytest.approx(direct.uncertainty[0])
    assert abs(direct.largest - 0.9056) < 3 * direct.uncertainty[0] + 0.02


def test_spectrum_of_a_stiff_lag_by_either_method():
    # the one exponent is -lambda: resolved by steps below 1/lambda whichever the method, so the automatic
    # choice keeps the compiled explicit method and says why; the stiff methods, given, agree
    lam = 1e3
    system = compile_model(LAG.format(lam=lam))
    result = lyapunov_spectrum(system, converge=True, cap=400.0)
    assert result.ok and result.integrator == "dop853"
    assert any("stiff" in w and "fastest rate" in w for w in result.warnings)
    assert result.largest == pytest.approx(-lam, rel=1e-6)
    mild = compile_model(LAG.format(lam=50))
    for method in ("stiff", "bdf"):
        given = lyapunov_spectrum(mild, t_end=3.0, transient=1.0, method=method)
        assert given.ok and given.integrator == method
        assert given.largest == pytest.approx(-50, rel=1e-5)


def test_command_line_method_options(tmp_path, capsys):
    path = tmp_path / "lag.txt"
    path.write_text(LAG.format(lam=50))
    assert main(["lyapunov", str(path), "--method", "stiff", "--t-end", "3", "--transient", "1", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["integrator"] == "stiff" and data["exponents"][0] == pytest.approx(-50, rel=1e-5)
    path.write_text(LAG.format(lam=1e3))
    assert main(["sweep", str(path), "--param", "a", "--from", "1", "--to", "2", "--count", "2", "--strobe", "1",
                 "--samples", "3", "--transient", "2", "--method", "bdf"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["method"] == "bdf"
    assert len(data["samples"][1]) == 3
    # strobe samples one period apart after the transient of 2: on a sin t, whichever the first
    first = [2.0 * np.sin(2.0 + k + np.arange(3)) for k in (0, 1)]
    assert any(np.allclose(data["samples"][1], f, atol=1e-6) for f in first)
