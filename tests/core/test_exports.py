"""Exports: LaTeX of the model, a standalone script that reproduces a run, the HTML report."""

import csv
import html
import re
import shutil
import struct
import subprocess
import sys
import zlib

import numpy as np
import pytest

from orbitdesk.engine.runs import RunSettings, simulate
from orbitdesk.exports.latex import latex_name, model_latex
from orbitdesk.exports.run_script import run_script
from orbitdesk.document.project import ParameterSetting, Project, WalkthroughStep
from orbitdesk.exports.report import render_report
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.samples.models import LOGISTIC_REF, LORENZ_REF, VAN_DER_POL_REF, model

LORENZ = model(LORENZ_REF, ranges={'sigma': (0, 20)}, initial={'y(0)': None, 'z(0)': None})
BEAM = ("delta = 0.3 in [0, 1]\ngamma = 0.37\nomega = 1.2\nx'' = -delta*x' + x - x^3 + gamma*cos(omega*t)\n"
        "x(0) = 1\nx'(0) = 0\nenergy = x'^2/2 - x^2/2 + x^4/4\n")
LOGISTIC = model(LOGISTIC_REF, r=3.9, ranges={'r': (2.5, 4)})
HENON = "a = 1.4\nb = 0.3\nx[n+1] = 1 - a*x^2 + y\ny[n+1] = b*x\nx[0] = 0.1\ny[0] = 0.1\nsize = sqrt(x^2 + y^2)\n"
VAN_DER_POL = model(VAN_DER_POL_REF, mu=2, ranges={'mu': (0, 5)})


# ---------------------------------------------------------------- LaTeX

def test_latex_fragments_of_a_flow():
    text = model_latex(LORENZ)
    assert r"\begin{align*}" in text and r"\end{align*}" in text
    assert r"\dot{x} &= \sigma" in text
    assert r"\beta &= \frac{8}{3} \approx 2.666666667" in text
    assert r"\sigma &= 10 &&\qquad \text{in } [0, 20]" in text
    assert "x(0) &= 1" in text and "z(0) &= 0" in text


def test_latex_second_order_as_typed_with_derived_and_decimals():
    text = model_latex(BEAM, {"gamma": 0.5})
    assert r"\ddot{x} &= - \delta \dot{x}" in text
    assert r"\gamma \cos{\left(\omega t \right)}" in text
    assert r"\gamma &= 0.5" in text and r"\delta &= 0.3" in text  # decimals stay decimals
    assert r"\mathit{energy} &= \frac{x^{4}}{4} - \frac{x^{2}}{2} + \frac{\dot{x}^{2}}{2}" in text
    assert r"\dot{x}(0) &= 0" in text


def test_latex_keeps_derived_names_in_equations():
    text = model_latex("k = 2\nforce = -k*x\nx'' = force\n")
    assert r"\ddot{x} &= \mathit{force}" in text


def test_latex_map_uses_subscripts():
    text = model_latex(LOGISTIC)
    assert r"x_{n+1} &= r x_{n} \left(1 - x_{n}\right)" in text
    assert "x_{0} &= 0.2" in text
    assert latex_name("k_1") == "k_{1}" and latex_name("theta''") == r"\ddot{\theta}"


def test_latex_declares_the_angles():
    # the language reference: `angle theta` makes theta an angle, read modulo 2 pi and shown in (-pi, pi]
    text = model_latex("g = 9.81\ntheta'' = -g*sin(theta)\nphi_1' = 1\nangle theta, phi_1\ntheta'(0) = 6.5\n")
    assert r"\noindent Where the angles are read modulo $2\pi$ (and shown wrapped to $(-\pi, \pi]$):" in text
    assert r"\theta &\equiv \theta + 2\pi" in text and r"\phi_{1} &\equiv \phi_{1} + 2\pi" in text
    assert r"\dot{\theta} &\equiv" not in text  # the angle's rate is no angle
    assert "modulo" not in model_latex(BEAM)


def test_latex_refuses_models_with_errors():
    with pytest.raises(ValueError, match="errors"):
        model_latex("x' = y +\n")


def test_latex_standalone_document_compiles(tmp_path):
    text = model_latex(BEAM, standalone=True, title="Beam & co_1 50%")
    assert text.startswith(r"\documentclass") and text.rstrip().endswith(r"\end{document}")
    assert r"\section*{Beam \& co\_1 50\%}" in text
    if shutil.which("pdflatex") is None:
        pytest.skip("pdflatex is not installed; the document was checked for its parts only")
    (tmp_path / "model.tex").write_text(text)
    done = subprocess.run(["pdflatex", "-interaction=nonstopmode", "-halt-on-error", "-no-shell-escape",
                           "model.tex"], cwd=tmp_path, capture_output=True, text=True, timeout=60)
    assert done.returncode == 0, done.stdout[-2000:]
    assert (tmp_path / "model.pdf").stat().st_size > 1000


# ---------------------------------------------------------------- standalone script

def run_exported(tmp_path, text):
    script = tmp_path / "exported.py"
    script.write_text(text)
    assert "orbitdesk" not in re.sub(r"^#.*$", "", text, flags=re.M).lower()
    assert "sympy" not in text
    done = subprocess.run([sys.executable, str(script), str(tmp_path / "out.csv")], cwd=tmp_path,
                          capture_output=True, text=True, timeout=60)
    assert done.returncode == 0, done.stderr
    with open(tmp_path / "out.csv", newline="") as handle:
        rows = list(csv.reader(handle))
    return rows[0], np.array(rows[1:], dtype=float)


@pytest.mark.parametrize("method", ["dop853", "rk45", "stiff", "rk4"])
def test_script_reproduces_a_flow(tmp_path, method):
    system = compile_model(BEAM)
    settings = RunSettings(method=method, t_end=30.0, samples=301, transient=5.0, dt=0.01, rtol=1e-9, atol=1e-11)
    p = system.param_vector({"gamma": 0.2})
    u0 = system.initial_vector({"x'": 0.1})
    header, data = run_exported(tmp_path, run_script(system, settings, u0, p, title="Beam"))
    assert header == ["t", "x", "x'", "energy"]
    reference = simulate(system, settings, u0, p)
    assert data.shape == (reference.time.size, 4)
    assert data[:, 0] == pytest.approx(reference.time, abs=1e-12)
    assert np.abs(data[:, 1:3].T - reference.states).max() < 1e-6
    assert np.abs(data[:, 3] - reference.derived["energy"]).max() < 1e-6


@pytest.mark.parametrize("method", ["stiff", "bdf", "rk45"])
def test_script_meets_its_tolerance_at_every_sample_of_a_stiff_lag(tmp_path, method):
    # the stiff test problem y' = -lambda (y - sin t) + cos t (Hairer & Wanner, Solving ODEs II, sec. IV.1),
    # closed form y = sin t + (y(0) - 0) e^{-lambda t}. scipy's Radau takes steps of many periods here and
    # its interpolant missed by up to the size of the signal at samples read off it
    lam = 1e6 if method != "rk45" else 1e3
    system = compile_model(f"lam = {lam:g}\ny' = -lam*(y - sin(t)) + cos(t)\ny(0) = 1\n")
    rtol, atol = 1e-6, 1e-8
    settings = RunSettings(method=method, t_end=30.0, samples=1201, rtol=rtol, atol=atol)
    header, data = run_exported(tmp_path, run_script(system, settings))
    t, y = data[:, 0], data[:, 1]
    assert t == pytest.approx(np.linspace(0, 30, 1201), abs=1e-12)
    exact = np.sin(t) + np.exp(-lam * t)
    assert float(np.max(np.abs(y - exact) / (atol + rtol * np.maximum(np.abs(exact), 1.0)))) <= 3.0


def test_script_reproduces_a_map_exactly(tmp_path):
    """A chaotic map amplifies any rounding difference, so equality over 2000 steps means the same arithmetic."""
    system = compile_model(HENON)
    settings = RunSettings(steps=2000)
    header, data = run_exported(tmp_path, run_script(system, settings))
    reference = simulate(system, settings)
    assert header == ["n", "x", "y", "size"]
    assert np.array_equal(data[:, 0], reference.time)
    assert np.array_equal(data[:, 1:3].T, reference.states)
    assert data[:, 3] == pytest.approx(reference.derived["size"], rel=1e-12)


def test_script_writes_parameters_as_exact_literals():
    system = compile_model(LORENZ)
    text = run_script(system, RunSettings(t_end=1.0))
    assert "'beta': 2.6666666666666665" in text
    assert "METHOD = 'dop853'" in text
    assert "#   x' = sigma*(y - x)" in text  # the model as typed, as comments only


# ---------------------------------------------------------------- HTML report

def tiny_png() -> bytes:
    def chunk(kind, data):
        return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data))
    raw = b"".join(b"\x00" + b"\xff\x80\x00" * 4 for _ in range(4))
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", 4, 4, 8, 2, 0, 0, 0))
            + chunk(b"IDAT", zlib.compress(raw)) + chunk(b"IEND", b""))


def report_project(model=VAN_DER_POL):
    return Project(name="Buoy <lamp> & co", model=model + "# <script>alert(1)</script>\n",
                   parameters={"mu": ParameterSetting(1.0, 0.0, 5.0)}, initial={"x": 0.25},
                   notes="A *blinker* circuit.",
                   walkthrough=[WalkthroughStep("Start <small>", "Watch the **cycle**.\n\n- one\n- two",
                                                {"parameters": {"mu": 3.0}, "open_views": ["phase_plane"]})])


def test_report_is_self_contained_and_escaped():
    project = report_project()
    system = compile_model(project.model)
    text = render_report(project, system, {"Phase plane": tiny_png()})
    assert text.startswith("<!DOCTYPE html>")
    assert "<title>Buoy &lt;lamp&gt; &amp; co</title>" in text
    assert "<script" not in text and "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    assert not re.search(r"""(src|href)=["'](?!data:)""", text), "no external resources"
    assert 'src="data:image/png;base64,' in text and "<figcaption>Phase plane</figcaption>" in text
    assert "<em>blinker</em>" in text and "<strong>cycle</strong>" in text
    assert "<h3>Start &lt;small&gt;</h3>" in text and "Sets mu = 3; opens phase plane." in text
    assert "d(x&#x27;)/dt" in text and html.escape("mu*(1 - x^2)*x' - x", quote=True) in text
    assert ">1<" in text and ">0.25<" in text  # the project's values, not the model's
    assert "@media print" in text


def test_report_equilibria_table():
    """Van der Pol at mu = 1: the origin with eigenvalues mu/2 +- i sqrt(1 - mu^2/4) = 0.5 +- 0.866i."""
    from orbitdesk.analyses.equilibria import find_equilibria

    project = report_project()
    system = compile_model(project.model)
    text = render_report(project, system, {}, equilibria=find_equilibria(system, p=[1.0], exact_timeout=2.0))
    assert "<h2>Equilibria</h2>" in text and "unstable focus" in text
    assert "0.5 \u00b1 0.866i" in text
    dicts = render_report(project, system, {}, equilibria=[{"state": {"x": 0.0, "x'": 0.0}, "kind": "saddle",
                                                            "eigenvalues": [{"re": 2.0, "im": 0.0}, -1.0]}])
    assert "saddle" in dicts and "2; \u22121" in dicts


def test_report_of_a_map_and_bad_figures():
    project = Project(name="Moths", model=LOGISTIC)
    system = compile_model(project.model)
    text = render_report(project, system)
    assert "x[n+1]" in text and "x[0]" in text and "1000 iterations" in text
    with pytest.raises(ValueError, match="not PNG"):
        render_report(project, system, {"bad": b"GIF89a"})
