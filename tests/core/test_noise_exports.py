"""Exports of a model with noise: the LaTeX writes the noise terms as xi(t) with what they are, and the
standalone script reproduces the engine's realisations from the seed (compared number for number with
``simulate``; the reference is the engine itself, whose schemes are checked against closed forms in
test_noise.py)."""

import csv
import re
import subprocess
import sys

import numpy as np
import pytest

from orbitdesk.engine import compiled
from orbitdesk.engine import runs
from orbitdesk.engine.settings import RunSettings
from orbitdesk.exports.latex import model_latex
from orbitdesk.exports.run_script import run_script
from orbitdesk.system.compiled_system import compile_model


def simulate(*args, **kwargs):
    """A run with its realisations (the default run of a model with noise is its noise-free part)."""
    return runs.simulate(*args, noise=True, **kwargs)

TWO_SOURCES = ("x' = -theta*x + sigma*x*noise(1) + 0.1*noise\ny' = x - y + s2*noise(1)\n"
               "theta = 1\nsigma = 0.5\ns2 = 0.3\nx(0) = 1\ny(0) = -1\n")


def test_latex_writes_the_noise_terms():
    text = model_latex(TWO_SOURCES)
    lines = {line.split("&=")[0].strip(): line.split("&=")[1] for line in text.splitlines() if "&=" in line}
    assert r"\xi_{1}(t)" in lines[r"\dot{x}"] and r"\xi(t)" in lines[r"\dot{x}"]
    assert r"\xi_{1}(t)" in lines[r"\dot{y}"] and r"\xi(t)" not in lines[r"\dot{y}"]
    assert r"It\^o sense" in text and r"\xi_{1}(t) &: \text{shared by }\dot{x}, \dot{y}" in text
    for line in text.splitlines():  # what TeX would read: balanced braces, no stray $ in math rows
        assert line.count("{") == line.count("}")
        if "&" in line and not line.startswith(r"\intertext"):
            assert "$" not in line


def _exported_rows(tmp_path, text):
    script = tmp_path / "noise_run.py"
    script.write_text(text)
    assert "orbitdesk" not in re.sub(r"^#.*$", "", text, flags=re.M).lower() and "scipy" not in text
    done = subprocess.run([sys.executable, str(script), str(tmp_path / "out.csv")], cwd=tmp_path,
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    with open(tmp_path / "out.csv", newline="") as handle:
        rows = list(csv.reader(handle))
    return rows[0], np.array(rows[1:], dtype=float)


@pytest.mark.parametrize("scheme", ["euler_maruyama", "milstein"])
def test_script_reproduces_the_realisations(tmp_path, scheme):
    system = compile_model(TWO_SOURCES)
    if scheme == "milstein" and compiled.available():
        compiled.engine_for(system, wait=True)  # the compiled loop and kernel against the script too
    settings = RunSettings(t_end=3.0, dt=0.01, samples=31, realisations=4, seed=12, scheme=scheme)
    R = simulate(system, settings).realisations
    header, rows = _exported_rows(tmp_path, run_script(system, settings, title="two sources"))
    assert header == ["t", "x", "y", "x_mean", "y_mean", "x_std", "y_std"]
    expected = np.column_stack([R.time, *R.states[0], *R.mean, *R.std])
    exact = not compiled.is_compiled(system)  # plain Python: the same arithmetic, number for number
    if exact:
        assert np.array_equal(rows, expected)
    else:
        np.testing.assert_allclose(rows, expected, rtol=1e-10, atol=1e-12)


def test_report_writes_the_noise_terms_and_the_realisations():
    from orbitdesk.document.project import Project
    from orbitdesk.exports.report import render_report

    project = Project(name="two sources", model=TWO_SOURCES, solver=RunSettings(realisations=7, seed=5))
    html = render_report(project, compile_model(TWO_SOURCES), equilibria=[])
    assert "= -theta*x + sigma*x*noise(1) + 0.1*noise" in html.replace("&#x27;", "'")
    assert "7 realisations from seed 5" in html and "noise-free part" in html
