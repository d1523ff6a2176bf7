"""``orbitdesk fit``: the JSON contract, data from files and from a project, errors with line and column.

The data are made here from Bateman's closed form of A -> B -> C (first order), so the fitted rates are
compared with scipy.optimize.least_squares on that closed form.
"""

import json

import numpy as np
from scipy.optimize import least_squares

from orbitdesk.document.datasets import parse_data
from orbitdesk.document.project import ParameterSetting, Project, save

from .conftest import run_cli

MODEL = """k1 = 0.5 in [0, 5]
k2 = 0.2 in [0, 5]
a' = -k1*a
b' = k1*a - k2*b
a(0) = 1
b(0) = 0
"""


def bateman(t, k1, k2, a0):
    a = a0 * np.exp(-k1 * t)
    return a, a0 * k1 / (k2 - k1) * (np.exp(-k1 * t) - np.exp(-k2 * t))


def write_batch(path, a0, seed):
    rng = np.random.default_rng(seed)
    t = np.arange(1, 25) * 10 / 60  # every ten minutes, in hours
    a, b = bateman(t, 0.9, 0.35, a0)
    a, b = a + 0.01 * rng.standard_normal(t.size), b + 0.01 * rng.standard_normal(t.size)
    path.write_text("t [h], conc_a [mol/l], b [mol/l]\n" + "".join(f"{x},{y},{z}\n" for x, y, z in zip(t, a, b)))
    return t, a, b


def test_json_contract_and_reference(tmp_path, model, capsys):
    path = model(MODEL)
    t, a, b = write_batch(tmp_path / "batch.csv", 1.0, 1)
    code, out, err = run_cli(capsys, "fit", path, "--data", tmp_path / "batch.csv", "--param", "k1", "--param", "k2",
                             "--init", "a=0.9", "--column", "conc_a=a", "--weights", "a=1,b=1", "--json")
    assert code == 0, err
    doc = json.loads(out)
    assert list(doc) == ["parameters", "initial", "residual_rms", "correlation", "evaluations", "warnings"]
    assert list(doc["parameters"]) == ["k1", "k2"] and list(doc["initial"]) == ["a"]
    for entry in [*doc["parameters"].values(), *doc["initial"].values()]:
        assert set(entry) == {"value", "stderr", "interval"}
        lo, hi = entry["interval"]
        assert lo < entry["value"] < hi and entry["stderr"] > 0
    assert set(doc["residual_rms"]) == {"a", "b"}
    assert np.array(doc["correlation"]).shape == (3, 3)
    assert isinstance(doc["evaluations"], int) and doc["evaluations"] > 0
    ref = least_squares(lambda q: np.concatenate([x - y for x, y in zip(bateman(t, *q), (a, b))]), [0.5, 0.2, 0.9],
                        ftol=1e-12, xtol=1e-12, gtol=1e-12)
    got = [doc["parameters"]["k1"]["value"], doc["parameters"]["k2"]["value"], doc["initial"]["a"]["value"]]
    np.testing.assert_allclose(got, ref.x, rtol=1e-5)


def test_joint_fit_of_two_files_and_per_batch_initial_values(tmp_path, model, capsys):
    path = model(MODEL)
    write_batch(tmp_path / "one.csv", 1.0, 2)
    write_batch(tmp_path / "two.csv", 2.0, 3)
    code, out, err = run_cli(capsys, "fit", path, "--data", tmp_path / "one.csv", "--data", tmp_path / "two.csv",
                             "--param", "k1", "--param", "k2", "--init", "a", "--column", "conc_a=a", "--json",
                             "--multiple-shooting", "3")
    assert code == 0, err
    doc = json.loads(out)
    assert list(doc["initial"]) == ["a (one)", "a (two)"]
    assert abs(doc["initial"]["a (two)"]["value"] - 2.0) < 4 * doc["initial"]["a (two)"]["stderr"]


def test_data_stored_in_a_project_and_plain_text_report(tmp_path, capsys):
    d = parse_data("t,a,b\n" + "".join(f"{t},{x},{y}\n" for t, x, y in zip(np.arange(1, 9) / 2,
                                                                         *bateman(np.arange(1, 9) / 2, 0.9, 0.35, 1))),
                   "batch", "batch.csv")
    project = Project(model=MODEL, parameters={"k1": ParameterSetting(0.5, 0.0, 0.6)}, datasets=[d])
    save(tmp_path / "r.orbitdesk", project)
    code, out, err = run_cli(capsys, "fit", tmp_path / "r.orbitdesk", "--param", "k1", "--param", "k2")
    assert code == 0, err
    assert "95 % interval" in out and "k1" in out
    assert "k1 ended at its upper bound 0.6" in out  # the project's range, not the model's


def test_bad_data_file_names_line_and_column(tmp_path, model, capsys):
    path = model(MODEL)
    (tmp_path / "bad.csv").write_text("t,a\n0,1\n1,x1\n")
    code, out, err = run_cli(capsys, "fit", path, "--data", tmp_path / "bad.csv", "--param", "k1")
    assert code == 2 and "bad.csv: line 3 column 2: 'x1' is not a number" in err
    code, out, err = run_cli(capsys, "fit", path, "--data", tmp_path / "bad.csv")
    assert code != 0
    (tmp_path / "ok.csv").write_text("t,a\n0,1\n1,0.5\n")
    code, out, err = run_cli(capsys, "fit", path, "--data", tmp_path / "ok.csv", "--param", "nope")
    assert code == 1 and "'nope' is not a parameter" in err
    code, out, err = run_cli(capsys, "fit", path, "--param", "k1")
    assert code == 1 and "no data" in err


def test_export_fit_script_and_report_of_a_project(tmp_path, capsys):
    t = np.arange(1, 9) / 2
    d = parse_data("t,a,b\n" + "".join(f"{x},{y},{z}\n" for x, y, z in zip(t, *bateman(t, 0.9, 0.35, 1))), "batch")
    save(tmp_path / "r.orbitdesk", Project(model=MODEL, datasets=[d]))
    code, out, err = run_cli(capsys, "export", tmp_path / "r.orbitdesk", "--fit-script")
    assert code == 1 and "no fit set up" in err
    save(tmp_path / "r.orbitdesk", Project(model=MODEL, datasets=[d], views={"fit": {"parameters": ["k1", "k2"]}}))
    code, out, err = run_cli(capsys, "export", tmp_path / "r.orbitdesk", "--fit-script", "-o", tmp_path / "fit.py")
    assert code == 0, err
    compile((tmp_path / "fit.py").read_text(), "fit.py", "exec")  # a valid script (run by test_fit_exports)
    code, out, err = run_cli(capsys, "export", tmp_path / "r.orbitdesk", "--report")
    assert code == 0 and "Measured data and fit" in out and "<svg" in out
