"""The command line with a model that has noise: run --seed --realisations --json and the note of
deterministic analyses."""

import json

import numpy as np

from .conftest import run_cli

OU = "x' = -theta*x + sigma*noise\ntheta = 1\nsigma = 0.5\nx(0) = 1\n"


def test_run_with_noise_json_contract(capsys, model):
    path = model(OU)
    args = ("run", path, "--t-end", "2", "--samples", "5", "--seed", "3", "--realisations", "6", "--json")
    code, out, _ = run_cli(capsys, *args)
    data = json.loads(out)
    assert code == 0 and data["t"] == [0.0, 0.5, 1.0, 1.5, 2.0]
    assert set(data["mean"]) == set(data["std"]) == set(data["states"]) == {"x"}
    assert data["realisations"] == 6 and data["seed"] == 3 and data["scheme"] == "milstein"
    assert data["mean"]["x"][0] == 1.0 and data["std"]["x"][0] == 0.0 and data["std"]["x"][-1] > 0
    # the same seed gives the same numbers; another seed other numbers
    assert json.loads(run_cli(capsys, *args)[1]) == data
    other = json.loads(run_cli(capsys, *args[:-5], "--seed", "4", "--realisations", "6", "--json")[1])
    assert other["states"]["x"] != data["states"]["x"]


def test_run_with_noise_csv(capsys, model, tmp_path):
    out_file = tmp_path / "ou.csv"
    code, _, _ = run_cli(capsys, "run", model(OU), "--t-end", "1", "--samples", "3", "--realisations", "5",
                         "--csv", out_file)
    assert code == 0
    rows = np.genfromtxt(out_file, delimiter=",", names=True)
    assert rows.dtype.names == ("t", "x", "x_mean", "x_std") and np.allclose(rows["t"], [0, 0.5, 1])


def test_deterministic_analyses_say_they_use_the_noise_free_part(capsys, model):
    code, out, err = run_cli(capsys, "equilibria", model(OU), "--json")
    assert code == 0 and "noise-free part" in err
    found = json.loads(out)["equilibria"]
    assert len(found) == 1 and abs(found[0]["state"]["x"]) < 1e-9  # the drift -theta x rests at 0 only


def test_too_many_values_is_refused_plainly(capsys, model):
    code, _, err = run_cli(capsys, "run", model(OU), "--t-end", "10", "--samples", "0", "--dt", "1e-4",
                           "--realisations", "100000")
    assert code == 1 and "fewer realisations" in err
