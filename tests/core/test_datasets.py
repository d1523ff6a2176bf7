"""Measured data sets: reading files, the malformed-file corpus, storage in the project document."""

import hashlib
import json
import os
from pathlib import Path

import numpy as np
import pytest

from orbitdesk.document import datasets as dsm
from orbitdesk.document.datasets import DataError, parse_data, read_data_file
from orbitdesk.document.project import Project, ProjectError, dumps, loads

CORPUS = Path(__file__).parent.parent / "data" / "malformed_data"

# file -> (line, column, words the message must contain); 0 = not applicable
MALFORMED = {
    "empty.csv": (0, 0, "empty"),
    "only_comment.csv": (0, 0, "empty"),
    "header_only.csv": (1, 0, "no rows"),
    "missing_cell.csv": (3, 2, "missing value"),
    "short_row.txt": (3, 3, "missing value in column 'y'"),
    "not_a_number.csv": (3, 2, "'abc' is not a number"),
    "infinite.csv": (3, 2, "not a finite number"),
    "time_goes_back.csv": (4, 1, "does not increase"),
    "time_repeats.csv": (3, 1, "does not increase"),
    "duplicate_column.csv": (1, 3, "appears twice"),
    "long_row.csv": (2, 4, "4 values where the header has 3"),
    "bad_heading.csv": (1, 2, "not a name"),
    "negative_sd.csv": (3, 3, "not positive"),
    "sd_of_nothing.csv": (1, 3, "not a column"),
    "nul_byte.csv": (3, 0, "NUL"),
    "not_utf8.csv": (3, 0, "UTF-8"),
}


def test_corpus_is_complete():
    assert sorted(p.name for p in CORPUS.iterdir() if p.name != "README.md") == sorted(MALFORMED)


@pytest.mark.parametrize("name", sorted(MALFORMED))
def test_malformed_file_refused_with_line_and_column(name):
    line, column, words = MALFORMED[name]
    with pytest.raises(DataError) as info:
        read_data_file(CORPUS / name)
    err = info.value
    assert (err.line, err.column) == (line, column), str(err)
    assert words in str(err)
    assert str(err).startswith(name)
    if line:
        assert f"line {line}" in str(err)
    if column:
        assert f"column {column}" in str(err)


def test_csv_with_units_comments_and_sd(tmp_path):
    raw = "# invented record\nt [s], x [mm], sd(x) [mm], v (mm/s)\n0, 1.5, 0.1, 2\n0.5, 2.5, 0.2, -1e-3\n"
    path = tmp_path / "shaker.csv"
    path.write_text(raw)
    d = read_data_file(path)
    assert d.name == "shaker" and d.source == "shaker.csv" and d.time_label == "t [s]"
    assert d.checksum == hashlib.sha256(raw.encode()).hexdigest()
    assert [c.label for c in d.columns] == ["x [mm]", "v [mm/s]"]
    np.testing.assert_array_equal(d.time, [0, 0.5])
    np.testing.assert_array_equal(d.columns[0].sd, [0.1, 0.2])
    assert d.columns[1].sd is None and d.columns[1].values[1] == -1e-3


def test_whitespace_text_and_map_steps():
    d = parse_data("n  x\n0  0.2\n1\t0.56\n5 0.7\n", kind="map")
    np.testing.assert_array_equal(d.time, [0, 1, 5])
    with pytest.raises(DataError, match="whole number") as info:
        parse_data("n x\n0 0.2\n1.5 0.3\n", kind="map")
    assert (info.value.line, info.value.column) == (3, 1)


def test_mapping_and_targets():
    d = parse_data("t,disp,vel\n0,1,2\n")
    m = d.with_mapping({"disp": "x", "vel": "x'"})
    assert m.quantities() == ["x", "x'"] and d.quantities() == ["disp", "vel"]
    assert m.unmatched(["x", "x'"]) == [] and d.unmatched(["x"]) == ["disp", "vel"]
    with pytest.raises(DataError, match="both stand for"):
        d.with_mapping({"disp": "x", "vel": "x"})


def test_fifo_refused_without_blocking(tmp_path):
    if not hasattr(os, "mkfifo"):
        pytest.skip("no FIFOs on this system")
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)
    with pytest.raises(DataError, match="not a regular file"):  # opening a FIFO for reading would block
        read_data_file(fifo)


def test_too_large_refused(tmp_path, monkeypatch):
    monkeypatch.setattr(dsm, "MAX_DATA_BYTES", 100)
    path = tmp_path / "big.csv"
    path.write_text("t,x\n" + "".join(f"{i},{i}\n" for i in range(100)))
    with pytest.raises(DataError, match="too large"):
        read_data_file(path)
    monkeypatch.setattr(dsm, "MAX_DATA_BYTES", 10**6)
    monkeypatch.setattr(dsm, "MAX_ROWS", 10)
    with pytest.raises(DataError, match="too many rows") as info:
        read_data_file(path)
    assert info.value.line == 12


def test_project_stores_data_and_old_documents_still_load():
    d = parse_data("t [s],x [mm],sd(x)\n0,1,0.1\n1,2,0.1\n", "run 1", "run1.csv")
    d.initial = {"x": 1.0}
    p = Project(model="k = 1\nx' = -k*x\n", datasets=[d], parameter_sets={"fit 1": {"k": 0.5}})
    back = loads(dumps(p))
    got = back.datasets[0]
    assert (got.name, got.source, got.checksum, got.time_label) == ("run 1", "run1.csv", d.checksum, "t [s]")
    np.testing.assert_array_equal(got.columns[0].values, [1, 2])
    np.testing.assert_array_equal(got.columns[0].sd, [0.1, 0.1])
    assert got.initial == {"x": 1.0} and back.parameter_sets == {"fit 1": {"k": 0.5}}
    old = json.loads(dumps(Project(model="x' = -x\n")))
    assert "datasets" not in old  # documents without data stay as they were
    assert loads(json.dumps(old)).datasets == []


@pytest.mark.parametrize("change, path", [
    (lambda d: d["time"].__setitem__(1, 0.0), "$.datasets[0].time[1]"),
    (lambda d: (d["columns"][0]["values"].pop(), d["columns"][0]["sd"].pop()), "$.datasets[0].columns[0].values"),
    (lambda d: d["columns"][0]["sd"].pop(), "$.datasets[0].columns[0].sd"),
    (lambda d: d["columns"][0].__setitem__("target", "no good"), "$.datasets[0].columns[0].target"),
    (lambda d: d["columns"][0]["sd"].__setitem__(0, -1), "$.datasets[0].columns[0].sd"),
    (lambda d: d.__setitem__("sha256", "xyz"), "$.datasets[0].sha256"),
    (lambda d: d["columns"][0]["values"].__setitem__(0, "1"), "$.datasets[0].columns[0].values[0]"),
])
def test_stored_data_validated_on_load(change, path):
    d = parse_data("t,x,sd(x)\n0,1,0.1\n1,2,0.1\n", "a", "a.csv")
    doc = json.loads(dumps(Project(datasets=[d])))
    change(doc["datasets"][0])
    with pytest.raises(ProjectError) as info:
        loads(json.dumps(doc))
    assert info.value.path == path


def test_stored_sizes_bounded(monkeypatch):
    monkeypatch.setattr(dsm, "MAX_DATASETS", 2)
    d = parse_data("t,x\n0,1\n", "a")
    doc = json.loads(dumps(Project(datasets=[d])))
    doc["datasets"] = [dict(doc["datasets"][0], name=f"s{i}") for i in range(3)]
    with pytest.raises(ProjectError, match="too many entries"):
        loads(json.dumps(doc))
    doc["datasets"] = [doc["datasets"][0]] * 2
    with pytest.raises(ProjectError, match="second data set named"):
        loads(json.dumps(doc))
