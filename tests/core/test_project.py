"""Tests for the project document: round trips, validation paths, migration, hostile files, saving."""

import json
import math
import os
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from orbitdesk.document import project as pj
from orbitdesk.engine import RunSettings
from orbitdesk.document.project import (
    FORMAT_NAME, FORMAT_VERSION, ParameterSetting, Project, ProjectError, WalkthroughStep,
    dumps, load, loads, project_from_dict, project_to_dict, save,
)


def full_project() -> Project:
    return Project(
        name="Lorenz — butterfly",
        model="x' = sigma*(y - x)\ny' = x*(rho - z) - y\nz' = x*y - beta*z\n",
        parameters={"sigma": ParameterSetting(10.0, 0.0, 20.0), "rho": ParameterSetting(28.0, lo=0.0),
                    "beta": ParameterSetting(8 / 3)},
        initial={"x": 1.0, "y": 1.0, "z": 1.05, "v'": -0.5},
        solver=RunSettings(method="rk4", rtol=1e-6, atol=1e-9, max_step=0.5, dt=0.005, t_start=-1.0,
                              t_end=50.0, samples=1234, steps=77, transient=3.5),
        views={"phase": {"axes": ["x", "z"], "zoom": 1.5, "grid": True, "colour": None, "nested": {"a": [1, [2]]}},
               "time series": {}},
        walkthrough=[WalkthroughStep("Start", "Watch the orbit.", {"t": 0, "params": {"rho": 28.0}}),
                     WalkthroughStep("Bifurcation")],
        notes="Ünïcode notes ✓",
    )


def valid_doc() -> dict:
    return json.loads(dumps(full_project()))


def error_of(doc) -> ProjectError:
    with pytest.raises(ProjectError) as info:
        project_from_dict(doc)
    return info.value


# ---------------------------------------------------------------- round trips

def test_save_load_round_trip(tmp_path):
    p = full_project()
    f = tmp_path / "lorenz.orbitdesk"
    save(f, p)
    q = load(f)
    assert q == p
    assert q.load_warnings == []
    assert isinstance(q.solver.samples, int) and q.parameters["rho"].hi is None


def test_dumps_loads_round_trip_and_format_header():
    p = full_project()
    text = dumps(p)
    doc = json.loads(text)
    assert doc["format"] == FORMAT_NAME and doc["version"] == FORMAT_VERSION
    assert loads(text) == p
    assert project_from_dict(project_to_dict(p)) == p
    assert loads(dumps(Project())) == Project()


def test_project_to_dict_returns_plain_copies():
    p = full_project()
    p.views["phase"]["axes"] = ("x", "z")  # tuples from the UI become lists
    d = project_to_dict(p)
    assert d["views"]["phase"]["axes"] == ["x", "z"]
    d["views"]["phase"]["zoom"] = 99
    assert p.views["phase"]["zoom"] == 1.5


def test_invalid_project_cannot_be_saved(tmp_path):
    p = full_project()
    p.views["phase"]["zoom"] = math.nan
    with pytest.raises(ProjectError, match=r"\$\.views\.phase\.zoom: expected a finite number"):
        save(tmp_path / "x.orbitdesk", p)
    assert not (tmp_path / "x.orbitdesk").exists()
    p = full_project()
    p.parameters["sigma"] = 10.0  # not a ParameterSetting
    with pytest.raises(ProjectError):
        dumps(p)


# ---------------------------------------------------------------- corrupted files

@pytest.mark.parametrize("content, expect", [
    (lambda good: good[: len(good) // 2], r"not valid JSON: .* at line \d+ column \d+"),
    (lambda good: b"\x89PNG\r\n\x1a\n" + bytes(range(1, 256)) * 4, r"not valid UTF-8 .*offset 0"),
    (lambda good: good.replace(b'"model"', b'"m\xc3\x28del"'), r"not valid UTF-8"),
    (lambda good: good[:40] + b"\x00\x00\x00" + good[40:], r"NUL bytes .*byte 40"),
    (lambda good: b"", r"not valid JSON: Expecting value at line 1 column 1"),
    (lambda good: b"[1, 2, 3]", r"^\$: expected an object, got array"),
    (lambda good: b'{"format": "something-else", "version": 1}', r"\$\.format: expected 'orbitdesk-project'"),
    (lambda good: b'{"version": 1}', r"\$\.format: missing"),
])
def test_corrupted_file_refused_and_left_byte_identical(tmp_path, content, expect):
    good = dumps(full_project()).encode()
    f = tmp_path / "bad.orbitdesk"
    f.write_bytes(content(good))
    before = f.read_bytes()
    with pytest.raises(ProjectError, match=expect):
        load(f)
    assert f.read_bytes() == before
    # saving over it is refused too (it cannot be read), unless forced
    with pytest.raises(ProjectError, match="refusing to overwrite"):
        save(f, full_project())
    assert f.read_bytes() == before
    assert not Path(str(f) + ".bak").exists()


def test_force_replaces_unreadable_file_without_touching_backup(tmp_path):
    f = tmp_path / "p.orbitdesk"
    first = Project(name="first")
    save(f, first)
    save(f, Project(name="second"))
    f.write_bytes(b"{ garbage")
    save(f, Project(name="third"), force=True)
    assert load(f).name == "third"
    assert load(str(f) + ".bak").name == "first"  # the unreadable file never became the backup


def test_missing_and_directory_paths(tmp_path):
    with pytest.raises(ProjectError, match="no such file"):
        load(tmp_path / "nope.orbitdesk")
    with pytest.raises(ProjectError, match="cannot read|not a regular file"):
        load(tmp_path)


def test_oversized_file_refused_before_parsing(tmp_path):
    f = tmp_path / "big.orbitdesk"
    f.write_bytes(b"[" * (pj.MAX_FILE_BYTES + 10))
    with pytest.raises(ProjectError, match="too large"):
        load(f)
    with pytest.raises(ProjectError, match="too large"):
        loads(" " * (pj.MAX_FILE_BYTES + 1))


@pytest.mark.parametrize("text", ["[" * 100_000, '{"a":' * 100_000, '{"format": "orbitdesk-project", "views": ' +
                                  '{"v": ' * 70 + "1" + "}" * 70 + "}"])
def test_deep_nesting_refused_without_recursion_error(text):
    with pytest.raises(ProjectError, match="nested deeper than 64 levels at line 1"):
        loads(text)


def test_brackets_inside_strings_do_not_count_as_nesting():
    p = Project(model="[" * 5000 + '\\"{' * 100, notes="]" * 3000)
    assert loads(dumps(p)) == p


def test_deep_python_data_refused_in_free_objects():
    v: dict = {}
    for _ in range(200):
        v = {"k": v}
    with pytest.raises(ProjectError, match="nested deeper"):
        dumps(Project(views={"deep": v}))
    cyclic: dict = {}
    cyclic["self"] = cyclic
    with pytest.raises(ProjectError, match="nested deeper"):
        dumps(Project(views={"loop": cyclic}))


# ---------------------------------------------------------------- structure errors name the path

@pytest.mark.parametrize("mutate, where, what", [
    (lambda d: d["solver"].__setitem__("rtol", "1e-8"), "$.solver.rtol", "expected a number, got string"),
    (lambda d: d["solver"].__setitem__("rtol", -1), "$.solver.rtol", "expected a positive number"),
    (lambda d: d["solver"].__setitem__("samples", 10.5), "$.solver.samples", "expected an integer, got number"),
    (lambda d: d["solver"].__setitem__("samples", True), "$.solver.samples", "expected an integer, got boolean"),
    (lambda d: d["solver"].__setitem__("samples", 1), "$.solver.samples", "from 2 to"),
    (lambda d: d["solver"].__setitem__("method", "euler"), "$.solver.method", "expected one of dop853"),
    (lambda d: d["solver"].__setitem__("max_step", 0), "$.solver.max_step", "positive"),
    (lambda d: d["solver"].__setitem__("t_end", d["solver"]["t_start"]), "$.solver.t_end", "differ"),
    (lambda d: d.__setitem__("solver", []), "$.solver", "expected an object, got array"),
    (lambda d: d["parameters"]["sigma"].__setitem__("value", None), "$.parameters.sigma.value",
     "expected a number, got null"),
    (lambda d: d["parameters"]["sigma"].pop("value"), "$.parameters.sigma.value", "missing"),
    (lambda d: d["parameters"]["sigma"].__setitem__("lo", 30), "$.parameters.sigma.hi", "below lower bound"),
    (lambda d: d["parameters"].__setitem__("2bad", {"value": 1}), '$.parameters["2bad"]', "not a valid name"),
    (lambda d: d["initial"].__setitem__("x\n", 1), '$.initial["x\\n"]', "not a valid name"),
    (lambda d: d["initial"].__setitem__("x", [1]), "$.initial.x", "expected a number, got array"),
    (lambda d: d["initial"].__setitem__("v'", "0"), "$.initial[\"v'\"]", "expected a number, got string"),
    (lambda d: d.__setitem__("model", 42), "$.model", "expected a string, got number"),
    (lambda d: d.__setitem__("model", "x" * (pj.MAX_TEXT + 1)), "$.model", "string too long"),
    (lambda d: d.__setitem__("notes", "a\x00b"), "$.notes", "NUL"),
    (lambda d: d["views"].__setitem__("phase", [1, 2]), "$.views.phase", "expected an object, got array"),
    (lambda d: d["views"]["phase"].__setitem__("zoom", math.inf), "$.views.phase.zoom", "finite"),
    (lambda d: d["views"]["phase"]["nested"]["a"].append(10**30), '$.views.phase.nested.a[2]', "out of range"),
    (lambda d: d["views"]["phase"]["nested"].__setitem__("\ud800", 1), '$.views.phase.nested["\\ud800"]',
     "surrogate"),
    (lambda d: d.__setitem__("walkthrough", {}), "$.walkthrough", "expected an array, got object"),
    (lambda d: d["walkthrough"][1].__setitem__("title", 3), "$.walkthrough[1].title", "expected a string"),
    (lambda d: d["walkthrough"][0].pop("title"), "$.walkthrough[0].title", "missing"),
    (lambda d: d["walkthrough"][0].__setitem__("snapshot", "x"), "$.walkthrough[0].snapshot",
     "expected an object, got string"),
    (lambda d: d.__setitem__("version", "1"), "$.version", "expected an integer, got string"),
])
def test_wrong_types_name_the_exact_path(mutate, where, what):
    d = valid_doc()
    mutate(d)
    e = error_of(d)
    assert e.path == where, str(e)
    assert what in e.message
    assert str(e) == f"{where}: {e.message}"


def test_nan_and_infinity_literals_refused_where_numbers_expected():
    text = dumps(full_project())
    for literal in ("NaN", "Infinity", "-Infinity", "1e999"):
        bad = text.replace('"rtol": 1e-06', f'"rtol": {literal}')
        assert bad != text
        with pytest.raises(ProjectError, match=r"^\$\.solver\.rtol: expected a finite number"):
            loads(bad)
    bad = text.replace('"zoom": 1.5', '"zoom": NaN')
    with pytest.raises(ProjectError, match=r"^\$\.views\.phase\.zoom: expected a finite number"):
        loads(bad)


def test_duplicate_keys_and_huge_integers_refused():
    text = dumps(full_project())
    with pytest.raises(ProjectError, match=r"^\$\.solver\.rtol: duplicate key"):
        loads(text.replace('"rtol": 1e-06', '"rtol": 1e-06, "rtol": 1'))
    with pytest.raises(ProjectError, match="not valid JSON"):
        loads(text.replace('"zoom": 1.5', '"zoom": ' + "9" * 5000))


def test_unknown_keys_are_ignored_with_warnings():
    d = valid_doc()
    d["colour_scheme"] = "dark"
    d["solver"]["order"] = 5
    d["parameters"]["sigma"]["step"] = 0.1
    d["walkthrough"][0]["audio"] = "x.ogg"
    p = project_from_dict(d)
    assert p == full_project()
    assert sorted(p.load_warnings) == ["$.colour_scheme: unknown key ignored",
                                       "$.parameters.sigma.step: unknown key ignored",
                                       "$.solver.order: unknown key ignored",
                                       "$.walkthrough[0].audio: unknown key ignored"]
    assert "colour_scheme" not in dumps(p)


def test_bom_is_accepted():
    p = full_project()
    assert loads("\ufeff" + dumps(p)) == p


def test_missing_optional_fields_take_defaults():
    p = project_from_dict({"format": FORMAT_NAME, "version": 1})
    assert p == Project()


def test_nothing_from_the_file_is_executed():
    source = Path(pj.__file__).read_text()
    for banned in ("eval(", "exec(", "pickle", "import Py", "from Py", "__import__", "marshal"):
        assert banned not in source


# ---------------------------------------------------------------- versions

def test_newer_version_refused_with_clear_message():
    d = valid_doc()
    d["version"] = FORMAT_VERSION + 6
    e = error_of(d)
    assert e.path == "$.version"
    assert f"version {FORMAT_VERSION + 6}" in e.message and "newer OrbitDesk" in e.message


def test_version_0_migrates(tmp_path):
    old = {
        "format": FORMAT_NAME, "version": 0, "name": "old lorenz",
        "equations": "x' = sigma*(y - x)",
        "parameters": {"sigma": 10, "rho": 28.0},
        "ranges": {"sigma": [0, 20], "ghost": [1, 2]},
        "initial": {"x": 1},
        "solver": {"method": "rk45", "t_end": 20},
        "views": {"phase": {"axes": ["x", "y"]}},
    }
    f = tmp_path / "old.orbitdesk"
    f.write_text(json.dumps(old))
    p = load(f)
    assert p == Project(name="old lorenz", model="x' = sigma*(y - x)",
                        parameters={"sigma": ParameterSetting(10.0, 0.0, 20.0), "rho": ParameterSetting(28.0)},
                        initial={"x": 1.0}, solver=RunSettings(method="rk45", t_end=20.0),
                        views={"phase": {"axes": ["x", "y"]}}, walkthrough=[])
    assert p.load_warnings == ['$.ranges.ghost: range for unknown parameter ignored']
    save(f, p)  # saved in the current version; the old document becomes the backup
    assert json.loads(f.read_text())["version"] == FORMAT_VERSION
    assert json.loads(Path(str(f) + ".bak").read_text()) == old


def test_version_0_errors_name_old_paths():
    e = error_of({"format": FORMAT_NAME, "version": 0, "equations": ["x"]})
    assert e.path == "$.equations"
    e = error_of({"format": FORMAT_NAME, "version": 0, "parameters": {"a": "1"}})
    assert e.path == "$.parameters.a" and "expected a number, got string" in e.message
    e = error_of({"format": FORMAT_NAME, "version": 0, "parameters": {"a": 1}, "ranges": {"a": [0]}})
    assert e.path == "$.ranges.a"
    e = error_of({"format": FORMAT_NAME, "version": -1})
    assert e.path == "$.version"


# ---------------------------------------------------------------- saving

def test_save_keeps_previous_complete_document_as_backup(tmp_path):
    f = tmp_path / "p.orbitdesk"
    bak = Path(str(f) + ".bak")
    a, b, c = Project(name="A", model="x' = 1"), Project(name="B"), full_project()
    save(f, a)
    assert not bak.exists()
    save(f, b)
    assert load(bak) == a and load(f) == b
    save(f, c)
    assert load(bak) == b and load(f) == c
    assert sorted(x.name for x in tmp_path.iterdir()) == ["p.orbitdesk", "p.orbitdesk.bak"]  # no temp files left


def test_save_preserves_file_mode_and_writes_through_symlink(tmp_path):
    real = tmp_path / "real.orbitdesk"
    save(real, Project(name="one"))
    os.chmod(real, 0o640)
    link = tmp_path / "link.orbitdesk"
    link.symlink_to(real)
    save(link, Project(name="two"))
    assert link.is_symlink() and load(real).name == "two"
    assert (real.stat().st_mode & 0o777) == 0o640
    assert load(str(real) + ".bak").name == "one"


def test_save_into_read_only_directory_fails_and_keeps_old_file(tmp_path, monkeypatch):
    d = tmp_path / "ro"
    d.mkdir()
    f = d / "p.orbitdesk"
    save(f, Project(name="old"))
    before = f.read_bytes()
    os.chmod(d, 0o500)
    try:
        if os.geteuid() == 0:  # root ignores directory permissions: simulate the refusal
            def deny(*args, **kwargs):
                raise PermissionError(13, "Permission denied")
            monkeypatch.setattr(os, "replace", deny)
        with pytest.raises(ProjectError, match="could not save .*Permission denied"):
            save(f, Project(name="new"))
    finally:
        os.chmod(d, 0o700)
    assert f.read_bytes() == before
    assert sorted(x.name for x in d.iterdir()) == ["p.orbitdesk"]  # no temp file, no partial backup


@pytest.mark.parametrize("fail_on_call", [1, 2, 3])
def test_fsync_failure_leaves_old_file_intact(tmp_path, monkeypatch, fail_on_call):
    f = tmp_path / "p.orbitdesk"
    save(f, Project(name="first"))
    save(f, Project(name="old"))
    before = f.read_bytes()
    real_fsync, calls = os.fsync, []

    def flaky(fd):
        calls.append(fd)
        if len(calls) == fail_on_call:  # 1: backup temp, 2: directory after backup, 3: new temp file
            raise OSError(5, "Input/output error")
        return real_fsync(fd)

    monkeypatch.setattr(os, "fsync", flaky)
    with pytest.raises(ProjectError, match="could not save .*Input/output error"):
        save(f, Project(name="new"))
    assert f.read_bytes() == before
    assert load(str(f) + ".bak").name in ("first", "old")
    assert not [x for x in tmp_path.iterdir() if x.name.endswith(".tmp")]


# ---------------------------------------------------------------- property test

_json = st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats() | st.text(max_size=20),
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=8), inner, max_size=4),
    max_leaves=20,
)


def _slots(value, trail=()):
    yield trail
    if isinstance(value, dict):
        for k, v in value.items():
            yield from _slots(v, trail + (k,))
    elif isinstance(value, list):
        for i, v in enumerate(value):
            yield from _slots(v, trail + (i,))


# deep fuzz runs set ORBITDESK_FUZZ_EXAMPLES (see test_fuzz_parser.py)
_DEEP = int(os.environ.get("ORBITDESK_FUZZ_EXAMPLES", "0"))


@settings(max_examples=_DEEP or 300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.data(), value=_json, new_key=st.booleans())
def test_random_json_anywhere_only_raises_project_error(data, value, new_key):
    doc = valid_doc()
    slots = list(_slots(doc))
    trail = data.draw(st.sampled_from(slots[1:]))
    parent = doc
    for step in trail[:-1]:
        parent = parent[step]
    if new_key and isinstance(parent, dict):
        parent[data.draw(st.text(max_size=8))] = value
    else:
        parent[trail[-1]] = value
    for attempt in (lambda: project_from_dict(doc), lambda: loads(json.dumps(doc))):
        try:
            p = attempt()
        except ProjectError as e:
            assert e.path.startswith("$") and e.message
        else:
            assert loads(dumps(p)) == p  # whatever is accepted can be saved and read back


@settings(max_examples=_DEEP or 300, deadline=None)
@given(text=st.text(alphabet=st.sampled_from('{}[]":,.-+eE0123456789 \\ntrufalsNIy\x00\ud800'), max_size=60)
       | st.binary(max_size=60).map(lambda b: b.decode("latin-1")))
def test_random_text_only_raises_project_error(text):
    try:
        loads(text)
    except ProjectError:
        pass
