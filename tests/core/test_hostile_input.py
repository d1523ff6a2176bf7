"""Hostile and broken model input: every case ends in a clear diagnostic, nothing runs, nothing hangs.

The cases are the files in tests/data/hostile (see its README for what each one is) and the
large ones built by ``GENERATED`` below. All of them are parsed in one child process, one case
at a time; a case on which the child spends ``HANG_LIMIT`` processor seconds without an answer
fails as a hang (processor time, so a machine whose cores are shared does not fail it). That limit
is a hang detector, not a speed test (typical cases take milliseconds). Run this file with
``-s`` to see the time each case took.
"""

from __future__ import annotations

import json
import math
import os
import random
import selectors
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest

from orbitdesk.language.diagnostics import ERROR, ParseError
from orbitdesk.language.expression import MAX_DEPTH, MAX_LINE_LENGTH, _Parser, parse_expression, tokenize
from orbitdesk.language.model import MAX_MODEL_CHARS, MAX_STATEMENTS, parse_model
from orbitdesk.language.model_file import MAX_MODEL_FILE_BYTES, read_model_file

ROOT = Path(__file__).resolve().parents[2]
HOSTILE_DIR = ROOT / "tests" / "data" / "hostile"
HANG_LIMIT = 20.0  # processor seconds of the child for one case; only catches hangs
WALL_LIMIT = 10 * HANG_LIMIT  # and the wall-clock bound, should the child not be scheduled at all


def corpus() -> dict[str, str]:
    """file name -> expected outcome, read from the corpus README table."""
    expected = {}
    for line in (HOSTILE_DIR / "README.md").read_text(encoding="utf-8").splitlines():
        if line.startswith("| `"):
            cells = [c.strip() for c in line.strip().strip("|").split(" | ")]
            expected[cells[0].strip("`")] = cells[2][1:-1]
    return expected


def _lines(prefix: str, count: int, body) -> str:
    return prefix + "".join(body(i) for i in range(count))


# name -> (what it is, builder returning bytes, expected outcome as in the README)
GENERATED = {
    "nested_parentheses_100k": (
        "100,000 nested parentheses on one line",
        lambda: ("x' = " + "(" * 100_000 + "x" + ")" * 100_000).encode(), "line is longer than"),
    "nested_parentheses_9000": (
        "9,000 nested parentheses within the line limit (the depth limit answers)",
        lambda: ("x' = " + "(" * 9000 + "x" + ")" * 9000).encode(), f"nested more than {MAX_DEPTH} levels"),
    "nested_unary_minus": (
        "19,000 unary minus signs", lambda: ("x' = " + "-" * 19_000 + "x").encode(), "nested more than"),
    "nested_power_tower": (
        "x^x^...^x with 9,000 powers", lambda: ("x' = " + "x^" * 9000 + "x").encode(), "nested more than"),
    "nested_function_calls": (
        "3,900 nested sin( calls", lambda: ("x' = " + "sin(" * 3900 + "x" + ")" * 3900).encode(), "nested more than"),
    "nested_in_range": (
        "9,000 nested parentheses inside a slider range",
        lambda: ("a = 1 in [" + "(" * 9000 + "0" + ")" * 9000 + ", 1]\nx' = a").encode(), "nested more than"),
    "nested_in_initial_value": (
        "9,000 nested parentheses in an initial value",
        lambda: ("x' = 1\nx(0) = " + "(" * 9000 + "1" + ")" * 9000).encode(), "nested more than"),
    "line_of_one_megabyte": (
        "one line of almost 1 MB (x+x+...)",
        lambda: ("x' = " + "x+" * 499_000 + "x").encode(), "line is longer than"),
    "file_of_50_megabytes": (
        "50 MB of text (a comment)", lambda: b"x' = -x\n# " + b"a" * 50_000_000, "read: model files are limited"),
    "million_lines": (
        "one equation and 999,000 empty lines", lambda: b"x' = -x\n" + b"\n" * 999_000,
        f"more than {MAX_STATEMENTS} lines"),
    "million_statements": (
        "a million copies of an equation (7 MB)", lambda: b"x' = x\n" * 1_000_000, "read: model files are limited"),
    "million_comment_lines": (
        "a million comment lines (2 MB, within the file limit)", lambda: b"#\n" * 1_000_000,
        "larger than 1000000 characters"),
    "parameters_5000": (
        "5,000 parameters and one equation",
        lambda: _lines("", 5000, lambda i: f"p{i} = {i}\n").encode() + b"x' = p1*x", f"more than {MAX_STATEMENTS} lines"),
    "parameters_4998_legal": (
        "4,998 parameters, one equation using 500 of them and its initial value (5,000 lines): legal",
        lambda: (_lines("", 4998, lambda i: f"p{i} = {i}\n")
                 + "x' = -(" + "+".join(f"p{i}" for i in range(0, 4998, 10)) + ")*x\nx(0) = 1").encode(), "ok"),
    "errors_on_every_line": (
        "5,000 lines, each a syntax error", lambda: b"x' = $\n" * 5000, "unexpected character '$'"),
    "unknown_names_2400": (
        "2,400 parameters and 2,400 definitions using unknown names (did-you-mean cost)",
        lambda: (_lines("", 2400, lambda i: f"p{i} = 1\n") + _lines("", 2400, lambda i: f"d{i} = pp{i}\n")
                 + "x' = 1").encode(), "unknown name"),
    "cycles_dense_300": (
        "300 definitions, each using all 300 (tens of thousands of loops)",
        lambda: (_lines("", 300, lambda i: "a%d = x + %s\n" % (i, "+".join(f"a{j}" for j in range(300))))
                 + "x' = a0").encode(), "depend on each other in a loop"),
    "product_of_huge_constants": (
        "x + 10^299*10^299*... with 2,800 factors",
        lambda: ("x' = x + " + "*".join(["10^299"] * 2800)).encode(), "too large to represent"),
    "sum_of_2000_decimals_legal": (
        "2,000 different decimals added (exact sum with a huge denominator): legal",
        lambda: ("x' = x + " + "+".join(f"1.{i:05d}7" for i in range(1, 2000))).encode(), "ok"),
    "product_of_2000_decimals_legal": (
        "2,000 different decimals multiplied: legal",
        lambda: ("x' = x * " + "*".join(f"1.{i:05d}7" for i in range(1, 2000))).encode(), "ok"),
    "tower_of_39_roots_legal": (
        "39 nested square roots, as deep as an equation may be: legal",
        lambda: ("x' = -x + " + "sqrt(1+" * 39 + "x" + ")" * 39 + "\n").encode(), "ok"),
    "long_sum_legal": (
        "a sum of 10,000 terms on one line: legal", lambda: ("x' = " + "x+" * 9990 + "x").encode(), "ok"),
    "nonsmooth_2800_legal": (
        "2,800 abs() calls (as many warnings): legal",
        lambda: ("x' = " + "+".join(["abs(x)"] * 2800)).encode(), "ok"),
    "range_keyword_repeated": (
        "'in[' repeated 6,000 times (regular-expression backtracking)",
        lambda: ("a = 1 " + "in[" * 6000 + "]\nx' = a").encode(), "a range is written"),
    "primes_19000": (
        "a left side with 19,000 primes", lambda: ("x" + "'" * 19_000 + " = 1").encode(), "derivatives above order"),
    "random_bytes": (
        "100 kB of random bytes (seeded)", lambda: random.Random(7).randbytes(100_000), "read: "),
    "random_printable": (
        "100 kB of random printable ASCII (seeded)",
        lambda: "".join(random.Random(8).choices([chr(c) for c in range(32, 127)] + ["\n"] * 2, k=100_000)).encode(),
        "error"),
}


# ---------------------------------------------------------------- the child process


def _bytes_of(case: str) -> bytes:
    if case in GENERATED:
        return GENERATED[case][1]()
    return (HOSTILE_DIR / case).read_bytes()


def _run_case(case: str, workdir: str) -> dict:
    from orbitdesk.system.compiled_system import UndefinedValue, compile_model

    data = _bytes_of(case)
    path = Path(workdir) / "case.txt"
    path.write_bytes(data)
    out: dict = {"case": case, "bytes": len(data)}
    start = time.perf_counter()
    try:
        text = read_model_file(path)
        out["read_error"] = None
    except ValueError as err:
        out["read_error"] = str(err)
        text = data.decode("utf-8", "replace").replace("\x00", "\ufffd")
    out["read_seconds"] = time.perf_counter() - start
    start = time.perf_counter()
    try:
        model = parse_model(text)
    except BaseException as exc:  # noqa: BLE001  (any escape is the failure being tested for)
        out["raised"] = f"{type(exc).__name__}: {exc}"[:500]
        return out
    out["parse_seconds"] = time.perf_counter() - start
    n_lines = text.count("\n") + 1
    out["ok"] = model.ok
    out["errors"] = [d.format()[:300] for d in model.errors[:5]]
    out["n_diagnostics"] = len(model.diagnostics)
    out["bad_positions"] = [d.format()[:200] for d in model.diagnostics
                            if not (1 <= d.column < d.end_column and 1 <= d.line <= max(n_lines, MAX_STATEMENTS + 1))][:5]
    if model.ok:
        start = time.perf_counter()
        try:
            system = compile_model(model)
            value = system.rhs(0.0, system.initial)
            out["rhs"] = [float(v) for v in value[:3]]
            # the vectorized evaluator and the Jacobian (used by ensembles, equilibria, the stiff method)
            out["vec"] = [float(v) for v in system.rhs_vec(0.0, system.initial.reshape(-1, 1))[:3, 0]]
            out["jac"] = system.jac(0.0, system.initial)[:3, :3].tolist()
        except UndefinedValue as exc:
            out["rhs"] = f"UndefinedValue: {exc}"[:200]
        except BaseException as exc:  # noqa: BLE001
            out["raised"] = f"compile/rhs {type(exc).__name__}: {exc}"[:500]
        out["compile_seconds"] = time.perf_counter() - start
    return out


def _worker():
    """Child process: read case names from stdin, answer one JSON line per case."""
    with tempfile.TemporaryDirectory() as workdir:
        for line in sys.stdin:
            result = _run_case(line.strip(), workdir)
            sys.stdout.write(json.dumps(result) + "\n")
            sys.stdout.flush()


class _Child:
    def __init__(self):
        self.proc = subprocess.Popen(
            [sys.executable, "-c", "from tests.core.test_hostile_input import _worker; _worker()"],
            cwd=ROOT, stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True,
            env={**os.environ, "PYTHONPATH": str(ROOT)})
        self.selector = selectors.DefaultSelector()
        self.selector.register(self.proc.stdout, selectors.EVENT_READ)

    def cpu_seconds(self) -> float | None:
        """The child's processor time (Linux /proc), None where it cannot be read."""
        try:
            fields = Path(f"/proc/{self.proc.pid}/stat").read_text().rsplit(")", 1)[1].split()
            return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")
        except (OSError, ValueError, IndexError):
            return None

    def ask(self, case: str, limit: float) -> dict | None:
        """The child's answer, or None when it spent ``limit`` processor seconds on the case without one
        (judged on processor time, so a loaded machine that shares its cores does not look like a hang)."""
        self.proc.stdin.write(case + "\n")
        self.proc.stdin.flush()
        start_cpu, start_wall = self.cpu_seconds(), time.perf_counter()
        while not self.selector.select(timeout=1.0):
            cpu, wall = self.cpu_seconds(), time.perf_counter() - start_wall
            spent = wall if cpu is None or start_cpu is None else cpu - start_cpu
            if spent > limit or wall > WALL_LIMIT:
                return None
        line = self.proc.stdout.readline()
        return json.loads(line) if line else {"case": case, "raised": "the child process died"}

    def close(self):
        self.selector.close()
        if self.proc.poll() is None:
            self.proc.kill()
        self.proc.wait()


ALL_CASES = sorted(corpus()) + sorted(GENERATED)


@pytest.fixture(scope="module")
def outcomes():
    results = {}
    child = _Child()
    try:
        # the first answer includes the child's start-up and imports
        for case in ALL_CASES:
            started = time.perf_counter()
            answer = child.ask(case, HANG_LIMIT + (30 if not results else 0))
            if answer is None:
                results[case] = {"case": case, "hung": time.perf_counter() - started}
                child.close()
                child = _Child()
                continue
            results[case] = answer
    finally:
        child.close()
    print("\nhostile input: read + parse (+ compile) seconds")
    for case, r in results.items():
        parse = r.get("parse_seconds", float("nan"))
        print(f"  {case:40s} read {r.get('read_seconds', float('nan')):7.3f}  parse {parse:7.3f}"
              f"  compile {r.get('compile_seconds', 0.0):6.3f}  {'ok' if r.get('ok') else (r.get('errors') or [''])[0][:60]}")
    return results


def expected_of(case: str) -> str:
    return GENERATED[case][2] if case in GENERATED else corpus()[case]


@pytest.mark.parametrize("case", ALL_CASES)
def test_hostile_case_ends_in_the_expected_diagnostic(case, outcomes):
    result = outcomes[case]
    assert "hung" not in result, f"{case}: no answer within {HANG_LIMIT} processor seconds"
    assert "raised" not in result, result["raised"]
    assert result["bad_positions"] == []
    expected = expected_of(case)
    if expected == "ok":
        assert result["read_error"] is None
        assert result["ok"], result["errors"]
        assert "rhs" in result
        return
    if expected.startswith("read:"):
        # refused when read; the text decoded with replacement characters was still parsed safely
        assert result["read_error"] is not None and expected[5:].strip() in result["read_error"]
        return
    assert result["read_error"] is None, result["read_error"]
    assert not result["ok"], f"{case} parsed without errors"
    if expected != "error":
        assert any(expected in e for e in result["errors"]), result["errors"]


def test_corpus_index_and_files_agree():
    files = {p.name for p in HOSTILE_DIR.iterdir()} - {"README.md"}
    assert files == set(corpus())
    assert len(files) >= 60


def test_legal_hostile_looking_inputs_evaluate_correctly(outcomes):
    # sqrt(b)^(10^12) with b the double nearest 1.000000000001: exp(5e11 * log(b)), log via log1p
    # (b - 1 is exact in floating point), so the reference has no cancellation
    b = 1.000000000001
    assert outcomes["sqrt_power_near_one.txt"]["rhs"][0] == pytest.approx(math.exp(0.5e12 * math.log1p(b - 1)),
                                                                           rel=1e-12)
    # x' = -(p0 + p10 + ... + p4990) x at x = 1, with p_i = i
    assert outcomes["parameters_4998_legal"]["rhs"] == [-float(sum(range(0, 4998, 10)))]
    assert outcomes["long_sum_legal"]["rhs"] == [0.0]
    # constants sympy cannot evaluate exactly are taken in floats: floor of a double beyond 2^53 is
    # itself; the remainder is the exact remainder of the double (Python integer arithmetic)
    assert outcomes["floor_of_large_cosh.txt"]["rhs"] == [math.cosh(690)]
    assert outcomes["mod_of_large_sinh.txt"]["rhs"] == [float(int(math.sinh(690)) % 3),
                                                         float(int(math.sinh(690)) % 7)]
    # the integer 10^299 is taken as the double 1e299 by both evaluators: the C library's sine of it
    huge = outcomes["functions_of_huge_integers.txt"]
    assert huge["vec"] == huge["rhs"] == [math.sin(1e299) + 1.0]
    # x' = y, y' = -x + 0.5 sign(y) + H(x) - 0.1 floor(x) + 0.2 mod(x, 1) + |y| + max(x, y) at (1.25, 0.5):
    # between the jumps d/dx = -1 + 0.2 + 1 (max picks x), d/dy = sign(y) = 1
    smooth_parts = outcomes["nonsmooth_jacobian.txt"]
    assert smooth_parts["jac"] == [[0.0, 1.0], [pytest.approx(0.2), 1.0]]
    assert smooth_parts["rhs"][1] == pytest.approx(-1.25 + 0.5 + 1 - 0.1 + 0.2 * 0.25 + 0.5 + 1.25)
    # comparisons of constants decided in doubles: 1 - tanh(1140) = 2/(e^2280 + 1) and cosh(690) - sinh(690) =
    # e^-690 are far below half an ulp of 1 and of cosh(690), so tanh(1140) = 1.0 and cosh(690) = sinh(690):
    # x' = 2 + 10 - 0, y' = 200 + y at y = 2 (y < 1 fails, and 1 < 1 fails)
    assert math.tanh(1140) == 1.0 and math.cosh(690) == math.sinh(690)
    assert outcomes["condition_between_close_constants.txt"]["rhs"] == [12.0, 202.0]
    # Python's floor-mod of the doubles: 417 % (-pi/2) (sinh(690) = cosh(690) as doubles), and floor(pi) = 3
    assert outcomes["mod_of_cancelling_constants.txt"]["rhs"] == [pytest.approx(417 % (-math.pi / 2) + 3, rel=1e-12)]
    # sin(atan(y)) = y/sqrt(1 + y^2) and y cos(atan(y)) = y/sqrt(1 + y^2): both 1 within 1e-600 for y = 1e300
    assert outcomes["constant_with_huge_parts.txt"]["rhs"] == [pytest.approx(2.0, rel=1e-15)]
    # mod(2.5, e^0) + mod(7, 2^2) at x = 0
    assert outcomes["mod_of_exp_with_huge_coefficient.txt"]["rhs"] == [3.5]
    # Python's floor-mod of the doubles at x = 1, r = 0.325^27 (the file's comment)
    r = 0.325**27
    assert outcomes["mod_of_power_with_huge_exact_exponent.txt"]["rhs"] == [pytest.approx(
        2.5 % math.exp(r) + 2.5 % 1.0 + 2.5 % math.exp(1 + r) + 2.5 % math.pi**r - 1, rel=1e-12)]
    # the chain of conditions over conditions, evaluated step by step in Python at x = 0.5
    a = min(0.5, 1)
    for step in ("sqrt", "sqrt", "sqrt", "sin", "abs", "sin", "min", "min", "tanh", "if", "floor", "if", "tanh",
                 "sin", "if", "mod", "frac", "floor", "tanh", "min", "min", "min", "atan2", "sqrt", "tanh", "exp",
                 "mod", "floor", "sqrt", "floor", "sqrt", "sqrt"):
        a = {"sqrt": lambda v: math.sqrt(1 + v), "sin": math.sin, "abs": abs, "min": lambda v: min(v, 1),
             "tanh": math.tanh, "if": lambda v: 1 if v > 0 else -1, "floor": math.floor,
             "mod": lambda v: math.fmod(v + 1, 3) % 3, "frac": lambda v: v * v / (1 + v * v),
             "atan2": lambda v: math.atan2(v, 2), "exp": lambda v: 0.5 * math.exp(-v)}[step](a)
    assert outcomes["condition_over_conditions_chain.txt"]["rhs"] == [pytest.approx(-0.5 + 0.1 * a, rel=1e-12)]


def test_if_inside_a_condition_keeps_its_meaning():
    """if() inside conditions is written out by substitution (symbolic._fold_condition): the same values
    as the nested conditions read directly, on both sides of every switch."""
    from orbitdesk.system.compiled_system import compile_model

    system = compile_model("x' = if(if(x > 1, x, -x) > 0.5 and not if(y < 0, 1, 0) > 0.5, 1, 2)\n"
                           "y' = if(min(if(x > 0, y, 2*y), 1) >= 0.25, x, y)\n")
    for x in (-2.0, -0.7, -0.3, 0.3, 0.7, 1.2, 3.0):
        for y in (-1.0, 0.1, 0.2, 0.3, 2.0):
            inner = x if x > 1 else -x
            first = 1.0 if inner > 0.5 and not (1 if y < 0 else 0) > 0.5 else 2.0
            second = x if min(y if x > 0 else 2 * y, 1) >= 0.25 else y
            assert list(system.rhs(0.0, [x, y])) == [first, second], (x, y)


# ---------------------------------------------------------------- in-process checks of the guards


def test_depth_limit_stops_100k_levels_without_recursion_error():
    text = "(" * 100_000 + "x" + ")" * 100_000
    with pytest.raises(ParseError) as info:
        _Parser(tokenize(text)).parse()
    assert f"nested more than {MAX_DEPTH} levels" in info.value.message
    assert info.value.column == MAX_DEPTH + 1
    with pytest.raises(ParseError, match="line is longer than"):
        parse_expression(text)


def test_size_limits_come_before_any_work():
    big = "x' = -x\n" + "#" * (MAX_MODEL_CHARS + 1)
    model = parse_model(big)
    assert [(d.line, d.column, d.severity) for d in model.diagnostics] == [(1, 1, ERROR)]
    assert "larger than" in model.diagnostics[0].message
    model = parse_model("x' = " + "1+" * (MAX_LINE_LENGTH // 2) + "1")
    assert [d.message for d in model.errors] == [f"line is longer than {MAX_LINE_LENGTH} characters"]


def test_model_file_size_is_refused_from_the_directory_entry(tmp_path):
    path = tmp_path / "huge.txt"
    with open(path, "wb") as handle:  # sparse: 50 MB without writing them
        handle.truncate(50_000_000)
    with pytest.raises(ValueError, match="model files are limited to"):
        read_model_file(path)


@pytest.mark.skipif(not Path("/dev/zero").exists(), reason="needs /dev/zero")
def test_endless_device_is_refused_unopened():
    with pytest.raises(ValueError, match="this is a device, not a regular file"):
        read_model_file("/dev/zero")


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="needs FIFOs")
def test_fifo_folder_and_socket_paths_are_refused_without_blocking(tmp_path):
    # open() of a FIFO with no writer blocks for ever; these are refused from the directory entry
    import socket

    from orbitdesk.document import project

    fifo = tmp_path / "model.txt"
    os.mkfifo(fifo)
    with pytest.raises(ValueError, match="this is a pipe .FIFO., not a regular file"):
        read_model_file(fifo)
    project_fifo = tmp_path / "work.orbitdesk"
    os.mkfifo(project_fifo)
    with pytest.raises(project.ProjectError, match="not a regular file"):
        project.load(project_fifo)
    with pytest.raises(ValueError, match="this is a folder, not a regular file"):
        read_model_file(tmp_path)
    with socket.socket(socket.AF_UNIX) as server:
        server.bind(str(tmp_path / "s.txt"))
        with pytest.raises(ValueError, match="this is a socket, not a regular file"):
            read_model_file(tmp_path / "s.txt")


def test_model_file_decoding(tmp_path):
    path = tmp_path / "m.txt"
    path.write_bytes(b"\xef\xbb\xbfx' = -x\r\nx(0) = 1\r\n")
    assert read_model_file(path) == "x' = -x\r\nx(0) = 1\r\n"
    assert parse_model(read_model_file(path)).ok
    path.write_bytes("x' = -x  # décroissance ✓\n".encode())
    assert "✓" in read_model_file(path)
    path.write_bytes(b"x' = -x\ny' = \xff\n")
    with pytest.raises(ValueError, match=r"not UTF-8 text \(invalid byte 0xff at line 2, byte 6 of the line\)"):
        read_model_file(path)
    path.write_bytes(b"x' = -x\n\n\x00")
    with pytest.raises(ValueError, match="NUL bytes .first at line 3"):
        read_model_file(path)
    path.write_bytes(b"x" * (MAX_MODEL_FILE_BYTES + 1))
    with pytest.raises(ValueError, match="limited to"):
        read_model_file(path)
