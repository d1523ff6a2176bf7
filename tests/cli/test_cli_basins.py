"""``orbitdesk basins``: JSON and CSV of the basins of the two wells of the unforced Duffing oscillator."""

import csv
import json

from .conftest import run_cli

# x'' = -0.3 x' + x - x^3: stable foci at x = +-1 (closed form); a start at rest in a well stays in it
WELLS = "x'' = -0.3*x' + x - x^3\nx(0) = 0\n"


def test_basins_json_and_csv(capsys, model, tmp_path):
    target = tmp_path / "basins.csv"
    code, out, _ = run_cli(capsys, "basins", model(WELLS), "--x", "x=-1.2:1.2:2", "--y", "x'=0:0:1",
                           "--transient", "100", "--samples", "6", "--json", "--csv", target)
    assert code == 0
    data = json.loads(out)
    centres = {a["label"]: round(a["centre"]["x"], 4) for a in data["attractors"]}
    assert [centres[label] for label in data["labels"][0]] == [-1.0, 1.0]
    with open(target, newline="") as f:
        rows = list(csv.reader(f))
    assert rows[0] == ["x", "x'", "attractor (-1: escape)"] and len(rows) == 3
    code, _, err = run_cli(capsys, "basins", model(WELLS), "--x", "v=0:1:2", "--y", "x'=0:1:2")
    assert code != 0 and "unknown state 'v'" in err


def test_basins_take_the_method_and_tolerances_or_a_fixed_step(capsys, model):
    # by symmetry (x, x') -> (-x, -x') the two wells' basins on a grid symmetric about the saddle are half and half
    grid = ["--x", "x=-2:2:6", "--y", "x'=-1.5:1.5:4", "--transient", "120", "--samples", "6"]
    for options, method in ((["--method", "rk45", "--rtol", "1e-7"], "rk45"), (["--dt", "0.02"], "rk4"), ([], "dop853")):
        code, out, err = run_cli(capsys, "basins", model(WELLS), *grid, *options)
        assert code == 0, err
        data = json.loads(out)
        assert data["method"] == method
        assert sorted(a["share"] for a in data["attractors"]) == [0.5, 0.5]
    code, _, err = run_cli(capsys, "basins", model(WELLS), *grid, "--dt", "0.02", "--method", "rk45")
    assert code != 0 and "--dt fixes the step" in err
    code, _, err = run_cli(capsys, "basins", model(WELLS), *grid, "--method", "stiff")
    assert code != 0 and "invalid choice" in err
