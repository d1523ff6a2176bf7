"""The fit in the exports: the standalone script reproduces core.fitting's estimates (it solves the same
problem with scipy's least_squares and finite differences, so agreement to 1e-5 relative checks both), and
the HTML report shows the data over the fitted model and the estimates, escaped."""

import json
import subprocess
import sys
from html.parser import HTMLParser

import numpy as np

from orbitdesk.document.datasets import DataColumn, DataSet
from orbitdesk.exports.fit_script import fit_script
from orbitdesk.analyses.fitting import FitSettings, fit
from orbitdesk.document.project import Project
from orbitdesk.exports.report import render_report
from orbitdesk.system.compiled_system import compile_model

MODEL = """k1 = 0.5 in [0, 5]
k2 = 0.2 in [0, 5]
a' = -k1*a
b' = k1*a - k2*b
total = a + b
a(0) = 1
"""


def batches():
    """Bateman's closed form of A -> B -> C with k1 = 0.9, k2 = 0.35, plus seeded noise."""
    t = np.linspace(0.5, 10, 25)
    out = []
    for name, a0, seed in (('batch "1" <hot>', 1.0, 1), ("batch\n2", 2.0, 2)):
        a = a0 * np.exp(-0.9 * t)
        b = a0 * 0.9 / (0.35 - 0.9) * (np.exp(-0.9 * t) - np.exp(-0.35 * t))
        rng = np.random.default_rng(seed)
        out.append(DataSet(name, t, [DataColumn("a", a + 0.01 * rng.standard_normal(t.size)),
                                     DataColumn("tot", a + b + 0.01 * rng.standard_normal(t.size), target="total",
                                                sd=np.full(t.size, 0.01))],
                           initial={"a": a0}, source="</script><b>x.csv"))
    return out


def test_exported_script_reproduces_the_fit(tmp_path):
    system = compile_model(MODEL)
    sets = batches()
    settings = FitSettings(parameters=["k1"], local=["k2"], initial=["a"], rtol=1e-11, atol=1e-13, tolerance=1e-12)
    ours = fit(system, sets, settings)
    path = tmp_path / "fit.py"
    path.write_text(fit_script(system, sets, settings, title="title\nimport os; os.remove('x')"))
    done = subprocess.run([sys.executable, "-I", str(path)], capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    doc = json.loads(done.stdout)
    assert list(doc) == list(ours.to_dict())
    for section in ("parameters", "initial"):
        for name, entry in ours.to_dict()[section].items():
            np.testing.assert_allclose(doc[section][name]["value"], entry["value"], rtol=1e-5)
            np.testing.assert_allclose(doc[section][name]["stderr"], entry["stderr"], rtol=1e-3)
    assert all(line.startswith("#") for line in path.read_text().splitlines() if "os.remove" in line)


class _Text(HTMLParser):
    def __init__(self):
        super().__init__()
        self.text, self.svgs, self.circles, self.lines = [], 0, 0, 0

    def handle_starttag(self, tag, attrs):
        self.svgs += tag == "svg"
        self.circles += tag == "circle"
        self.lines += tag == "polyline"
        assert tag not in ("script", "b"), "user text became markup"

    def handle_data(self, data):
        self.text.append(data)


def test_report_shows_data_over_fitted_model_and_estimates():
    system = compile_model(MODEL)
    sets = batches()
    project = Project(name="Reactor", model=MODEL, datasets=sets,
                      views={"fit": {"parameters": ["k1", "k2"], "initial": ["a"]}})
    html = render_report(project, system)
    page = _Text()
    page.feed(html)
    text = " ".join(page.text)
    assert page.svgs == 4 and page.lines == 4          # two columns of two data sets
    assert page.circles == 4 * 25                        # every sample drawn
    assert 'batch "1" <hot>' in text and "</script><b>x.csv" in text
    result = fit(system, sets, FitSettings(parameters=["k1", "k2"], initial=["a"]))
    k1 = result.estimates[0]
    assert f"{k1.value:.7g}" in text and "95 % interval" in text.replace("\u00a0", " ")
    assert "Correlations" in text


def test_hostile_names_stay_out_of_the_code(tmp_path):
    """Data set names, title and model comments with line ends of every kind, coding declarations and quotes:
    the script is ASCII, compiles, and none of them becomes a statement (the rules of export_script)."""
    system = compile_model("# -*- coding: latin-1 -*- \"\"\" import os\n" + MODEL)
    sets = batches()
    sets[0].name = "a'\"\u2028\x0cimport os; os.system('x')\r\n#"
    text = fit_script(system, sets, FitSettings(parameters=["k1"]), title="t\u2029\x85import os\n# -*- coding: latin-1 -*-")
    assert text.isascii()
    assert text.splitlines()[1] == "# -*- coding: utf-8 -*-"
    compile(text, "fit.py", "exec")
    for line in text.splitlines():
        if "import os" in line:
            assert line.lstrip().startswith("#") or "'name':" in line, line
