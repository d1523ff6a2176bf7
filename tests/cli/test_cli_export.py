"""The command line contract of export."""

import csv
import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from orbitdesk.document import project as project_module
from orbitdesk.engine.runs import simulate
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.samples import SAMPLES_DIR

from .conftest import run_cli

SAMPLES = SAMPLES_DIR
PENDULUM = "g = 9.81\nL = 1\ntheta'' = -(g/L)*sin(theta)\ntheta(0) = 0.3\n"


@pytest.fixture
def pendulum_file(tmp_path):
    path = tmp_path / "swing.txt"
    path.write_text(PENDULUM)
    return path


def test_latex_to_stdout_with_overrides(capsys, pendulum_file):
    code, out, _ = run_cli(capsys, "export", pendulum_file, "--latex", "--set", "L=2", "--init", "theta=0.5")
    assert code == 0
    assert r"\ddot{\theta} &= - \frac{g \sin{\left(\theta \right)}}{L}" in out
    assert "L &= 2" in out and r"\theta(0) &= 0.5" in out


def test_latex_standalone_to_file(capsys, tmp_path):
    target = tmp_path / "loop.tex"
    code, out, _ = run_cli(capsys, "export", SAMPLES / "convection_loop.orbitdesk", "--latex", "--standalone",
                           "-o", target)
    assert code == 0 and out == ""
    text = target.read_text()
    assert r"\section*{Heated convection loop}" in text and r"\end{document}" in text


def test_script_from_a_project_reproduces_its_stored_run(capsys, tmp_path):
    source = SAMPLES / "relaxation_circuit.orbitdesk"
    target = tmp_path / "buoy.py"
    code, _, _ = run_cli(capsys, "export", source, "--script", "-o", target, "--set", "mu=2")
    assert code == 0
    done = subprocess.run([sys.executable, str(target)], cwd=tmp_path, capture_output=True, text=True, timeout=60)
    assert done.returncode == 0, done.stderr
    with open(tmp_path / "buoy.csv", newline="") as handle:  # default output named after the script
        rows = list(csv.reader(handle))
    data = np.array(rows[1:], dtype=float)
    project = project_module.load(source)
    system = compile_model(project.model)
    from orbitdesk.cli.run import settings_for
    from orbitdesk.cli.common import Source
    settings = settings_for(Source(source, project.model, project), None)
    reference = simulate(system, settings, p=system.param_vector({"mu": 2.0}),
                         u0=system.initial_vector(project.initial))
    assert rows[0] == ["t", "x", "x'"] and data.shape[0] == project.solver.samples
    assert np.abs(data[:, 1:].T - reference.states).max() < 1e-6


def test_report_to_file(capsys, tmp_path):
    target = tmp_path / "moths.html"
    code, _, _ = run_cli(capsys, "export", SAMPLES / "insect_generations.orbitdesk", "--report", "-o", target)
    assert code == 0
    text = target.read_text()
    assert "<h1>Moths counted year by year</h1>" in text and "<h2>Walkthrough</h2>" in text
    assert "A window of period three" in text


def test_report_gives_the_kept_branches_of_the_project(capsys, tmp_path):
    # the stirred tank keeps its bifurcation diagram in the project: folds where T^2 - heat T + heat = 0
    # (heat = 6: T = 3 -+ sqrt 3) at stay = T exp(-T) / (heat - T) (closed form)
    import math

    target = tmp_path / "tank.html"
    code, _, _ = run_cli(capsys, "export", SAMPLES / "stirred_tank.orbitdesk", "--report", "-o", target)
    assert code == 0
    text = target.read_text()
    assert "<h3>Bifurcation diagram</h3>" in text and text.count("two steady states meet and vanish") == 2
    for T in (3 - math.sqrt(3), 3 + math.sqrt(3)):
        assert f"= {T * math.exp(-T) / (6 - T):.6g}<" in text


def test_report_gives_the_fit_the_project_keeps(capsys, tmp_path):
    """A fit kept in the project (the Fit panel's, for these values and data) is the report's: its numbers, not
    a fit run again (a kept estimate of c = 0.8765432 is what the report lists)."""
    from orbitdesk.analyses.fitting import Estimate, FitResult
    from orbitdesk.document.live import LiveDocument

    doc = LiveDocument.open(SAMPLES / "bracket_pluck.orbitdesk", compile=True)
    names = [d.name for d in doc.project.datasets]
    estimates = [Estimate("c", "parameter", "c", None, 0.8765432, 1.0, 0.0015, (0.8735, 0.8795))]
    kept = FitResult("ok", "converged", estimates, np.eye(1), {"x": 0.0097}, 19, [], 597, 0.028,
                     [{"name": n, "parameters": dict(doc.params), "initial": dict(doc.initial),
                       "residual_rms": {"x": 0.0097}} for n in names])
    doc.set_result("fit", kept, doc.basis(data=names))
    path = doc.save(tmp_path / "fitted.orbitdesk")
    target = tmp_path / "fitted.html"
    code, _, _ = run_cli(capsys, "export", path, "--report", "-o", target)
    assert code == 0 and "0.8765432" in target.read_text()


def test_bad_input_is_refused_cleanly(capsys, tmp_path, pendulum_file):
    code, _, err = run_cli(capsys, "export", pendulum_file)
    assert code == 2 and "one of the arguments --latex --script --report --fit-script --model is required" in err
    code, _, err = run_cli(capsys, "export", pendulum_file, "--latex", "--script")
    assert code == 2 and "not allowed with" in err
    code, _, err = run_cli(capsys, "export", pendulum_file, "--script", "--standalone")
    assert code == 1 and "--standalone goes with --latex" in err
    code, _, err = run_cli(capsys, "export", pendulum_file, "--latex", "--set", "q=1")
    assert code == 1 and "unknown parameter 'q'" in err
    broken = tmp_path / "broken.txt"
    broken.write_text("x' = y +\n")
    code, _, err = run_cli(capsys, "export", broken, "--report")
    assert code == 1 and "the model has errors" in err
    code, _, err = run_cli(capsys, "export", tmp_path / "missing.orbitdesk", "--latex")
    assert code == 2 and "no such file" in err
    code, _, err = run_cli(capsys, "export", pendulum_file, "--latex", "-o", tmp_path / "no" / "dir.tex")
    assert code == 1 and "cannot write" in err


def test_model_text_carries_the_values_and_runs_to_the_closed_form(capsys, tmp_path):
    source = tmp_path / "decay.txt"
    source.write_text("x' = -k*x\nk = 0.5  # per second\nx(0) = 2\n")
    target = tmp_path / "tuned.txt"
    code, _out, _ = run_cli(capsys, "export", source, "--model", "--set", "k=0.25", "--init", "x=3", "-o", target)
    assert code == 0
    assert "k = 0.25  # per second" in target.read_text()
    code, out, _ = run_cli(capsys, "run", target, "--t-end", "4", "--samples", "41")
    data = json.loads(out)
    # closed form x(t) = x0 exp(-k t)
    np.testing.assert_allclose(data["states"]["x"], 3 * np.exp(-0.25 * np.array(data["t"])), rtol=1e-6)


def test_model_text_of_a_project_reproduces_its_stored_run(capsys, tmp_path):
    target = tmp_path / "circuit.txt"
    code, _out, _ = run_cli(capsys, "export", SAMPLES / "relaxation_circuit.orbitdesk", "--model", "-o", target)
    assert code == 0
    code, out_file, _ = run_cli(capsys, "run", target, "--t-end", "5", "--samples", "11")
    code2, out_project, _ = run_cli(capsys, "run", SAMPLES / "relaxation_circuit.orbitdesk", "--t-end", "5",
                                    "--samples", "11")
    assert code == code2 == 0
    assert json.loads(out_file)["states"] == json.loads(out_project)["states"]
