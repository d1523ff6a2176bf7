"""Nothing a user types or a file holds is run as code.

Two checks: a static scan of every module under orbitdesk/ for calls that turn text into code
(eval, exec, compile, sympify, parse_expr, pickle and friends), and a run of the parser and
compiler over the hostile corpus (tests/data/hostile) with those entry points, os.system,
subprocess and file deletion replaced by traps that record and refuse.
"""

from __future__ import annotations

import ast
import builtins
import contextlib
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from orbitdesk.core.model import parse_model
from orbitdesk.core.model_file import read_model_file
from orbitdesk.core.system import UndefinedValue, compile_model

ROOT = Path(__file__).resolve().parents[2]
PACKAGE = ROOT / "orbitdesk"
HOSTILE_DIR = ROOT / "tests" / "data" / "hostile"

TEXT_TO_CODE = {"eval", "exec", "compile", "execfile", "sympify", "parse_expr", "parse_latex", "parse_mathematica"}
UNSAFE_MODULES = {"pickle", "cPickle", "_pickle", "dill", "cloudpickle", "marshal", "shelve", "jsonpickle"}


def _dotted(node) -> str:
    parts = []
    while isinstance(node, ast.Attribute):
        parts.append(node.attr)
        node = node.value
    if isinstance(node, ast.Name):
        parts.append(node.id)
    return ".".join(reversed(parts))


def _keyword_is(call: ast.Call, name: str, value) -> bool:
    return any(k.arg == name and isinstance(k.value, ast.Constant) and k.value.value == value
               for k in call.keywords)


def _is_text(node) -> bool:
    return isinstance(node, ast.Constant) and isinstance(node.value, str) or isinstance(node, ast.JoinedStr)


# Functions that compile code they printed themselves from sympy trees the parser built (like
# sympy.lambdify does), never model or file text. Each entry is a reviewed exception:
# (file, function) -> why it is safe.
GENERATED_CODE_RUNNERS = {
    ("orbitdesk/core/system.py", "_compile_binder"): "evaluator source printed from the compiled sympy trees",
}


def _enclosing_functions(tree) -> dict:
    """id(node) -> name of the innermost function around it."""
    owner = {}

    def visit(node, name):
        for child in ast.iter_child_nodes(node):
            inner = child.name if isinstance(child, (ast.FunctionDef, ast.AsyncFunctionDef)) else name
            owner[id(child)] = inner
            visit(child, inner)

    visit(tree, None)
    return owner


def code_from_text_calls(source: str, filename: str = "<text>") -> list[str]:
    """Places in ``source`` that could run text as code."""
    found = []
    tree = ast.parse(source, filename)
    owner = _enclosing_functions(tree)

    def flag(node, what):
        if isinstance(node, ast.Call) and (filename, owner.get(id(node))) in GENERATED_CODE_RUNNERS \
                and what in ("exec()", "compile()"):
            return
        found.append(f"{filename}:{node.lineno}: {what}")

    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.split(".")[0] in UNSAFE_MODULES:
                    flag(node, f"import {alias.name}")
        elif isinstance(node, ast.ImportFrom) and node.module:
            if node.module.split(".")[0] in UNSAFE_MODULES or node.module.startswith("sympy.parsing"):
                flag(node, f"from {node.module} import ...")
            for alias in node.names:
                if alias.name in TEXT_TO_CODE:
                    flag(node, f"from {node.module} import {alias.name}")
        elif isinstance(node, ast.Call):
            name = _dotted(node.func)
            last = name.split(".")[-1]
            head = name.split(".")[0]
            if isinstance(node.func, ast.Name) and node.func.id in TEXT_TO_CODE:
                if not (node.func.id == "sympify" and _keyword_is(node, "strict", True)):
                    flag(node, f"{name}()")
            elif isinstance(node.func, ast.Attribute) and last in ("sympify", "parse_expr", "parse_latex", "S"):
                if last == "S" and node.args and isinstance(node.args[0], ast.Constant) \
                        and isinstance(node.args[0].value, (int, float)):
                    continue  # sp.S(1): a number, not text
                if not (last == "sympify" and _keyword_is(node, "strict", True)):
                    flag(node, f"{name}()")
            elif head in ("builtins", "__builtins__") and last in TEXT_TO_CODE | {"__import__"}:
                flag(node, f"{name}()")
            elif head in UNSAFE_MODULES:
                flag(node, f"{name}()")
            elif last in ("load", "loads") and head in ("yaml", "ruamel"):
                flag(node, f"{name}()")
            elif last == "load" and _keyword_is(node, "allow_pickle", True):
                flag(node, f"{name}(allow_pickle=True)")
            elif last in ("read_pickle", "unsafe_load", "full_load"):
                flag(node, f"{name}()")
            elif last == "subs" and any(_is_text(a) for a in node.args):
                flag(node, f"{name}() of a string (sympify)")
            elif last == "lambdify" and len(node.args) > 1 and _is_text(node.args[1]):
                flag(node, f"{name}() of a string (sympify)")
    return found


def test_the_scan_finds_every_form():
    bad = """
eval(text)
exec(code)
compile(text, "f", "exec")
import pickle
from pickle import loads
import marshal, dill
from sympy import sympify
from sympy.parsing.sympy_parser import parse_expr
sp.sympify(text)
sympy.parse_expr(text)
sp.S(text)
builtins.eval(text)
pickle.loads(data)
yaml.load(stream)
np.load(path, allow_pickle=True)
expr.subs("x", 1)
sp.lambdify(args, "x**2")
pd.read_pickle(path)
"""
    assert len(code_from_text_calls(bad)) == 20
    fine = """
app.exec()
dialog.exec()
re.compile(pattern)
sp.lambdify([t, *u], exprs, modules="math")
sp.sympify(value, strict=True)
sp.S(1)
np.load(path)
expr.subs(x, 1)
json.loads(text)
"""
    assert code_from_text_calls(fine) == []
    allowed = "def _compile_binder(source):\n    exec(compile(source, 'f', 'exec'), {})\n"
    assert code_from_text_calls(allowed, "orbitdesk/core/system.py") == []
    assert len(code_from_text_calls(allowed, "orbitdesk/core/model.py")) == 2


def test_no_module_turns_text_into_code():
    files = sorted(PACKAGE.rglob("*.py"))
    assert len(files) > 10
    found = []
    for path in files:
        found += code_from_text_calls(path.read_text(encoding="utf-8"), str(path.relative_to(ROOT)))
    assert found == []


# ---------------------------------------------------------------- at run time


class Traps:
    """Replacements that record a call and refuse it."""

    def __init__(self):
        self.calls: list[str] = []
        self.generated_sources: list[str] = []
        self.real_import = builtins.__import__

    def refuse(self, what):
        def trap(*args, **kwargs):
            self.calls.append(f"{what}{args[:1]!r}"[:200])
            raise PermissionError(f"{what} called while parsing model text")

        return trap

    def generated(self, what, real):
        """sympy.lambdify compiles and runs code it generated from the whitelisted tree: allowed, inspected.

        (Python's import machinery also executes the code objects of library modules it loads.)
        """

        def guard(source, *args, **kwargs):
            frame = sys._getframe(1)
            caller = frame.f_globals.get("__name__", "")
            runner = (caller.replace(".", "/") + ".py", frame.f_code.co_name)
            if caller == "sympy.utilities.lambdify" or runner in GENERATED_CODE_RUNNERS:
                if isinstance(source, str):
                    self.generated_sources.append(source)
                return real(source, *args, **kwargs)
            if caller.startswith("importlib._bootstrap") and not isinstance(source, str):
                return real(source, *args, **kwargs)  # a library module being imported from its file
            return self.refuse(what)(source)

        return guard

    def import_(self, name, *args, **kwargs):
        # a library module importing os while it is itself being loaded is not model text at work
        loading = sys._getframe(1).f_code.co_name == "<module>"
        if not loading and name.split(".")[0] in {"os", "subprocess", "shutil", "pty", "socket", "ctypes"} | UNSAFE_MODULES:
            return self.refuse("__import__")(name)
        return self.real_import(name, *args, **kwargs)


@contextlib.contextmanager
def traps():
    """Install the traps for the body of a with-block only (pytest itself compiles when reporting)."""
    # warm up: let the parser, compiler and sympy do their lazy imports before the traps go in
    system = compile_model(parse_model("x' = sin(x)*abs(y) + max(x, 2)\ny' = -x + t\nx(0) = 1\nq = x*y"))
    system.rhs(0.0, system.initial)
    system.jac(0.0, system.initial)
    system.derived_values([0.0], [[1.0], [2.0]])
    trap = Traps()
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(builtins, "eval", trap.refuse("eval"))
        patch.setattr(builtins, "compile", trap.generated("compile", builtins.compile))
        patch.setattr(builtins, "exec", trap.generated("exec", builtins.exec))
        patch.setattr(builtins, "__import__", trap.import_)
        for name in ("system", "popen", "execv", "execve", "execvp", "spawnv", "spawnl", "fork", "remove",
                     "unlink", "rmdir", "kill"):
            if hasattr(os, name):
                patch.setattr(os, name, trap.refuse(f"os.{name}"))
        patch.setattr(subprocess, "Popen", trap.refuse("subprocess.Popen"))
        patch.setattr(shutil, "rmtree", trap.refuse("shutil.rmtree"))
        yield trap


def test_traps_catch_what_they_guard():
    refused = []
    with traps() as trap:
        for attempt in (lambda: eval("1"), lambda: os.system("true"), lambda: __import__("subprocess")):  # noqa: S307
            try:
                attempt()
            except PermissionError:
                refused.append(True)
    assert refused == [True, True, True] and len(trap.calls) == 3


def _read(path: Path) -> str:
    try:
        return read_model_file(path)
    except ValueError:
        return path.read_bytes().decode("utf-8", "replace")


def test_parsing_and_compiling_the_hostile_corpus_runs_nothing():
    files = sorted(p for p in HOSTILE_DIR.iterdir() if p.name != "README.md")
    texts = {path.name: _read(path) for path in files}
    accepted_injections, compiled = [], []
    with traps() as trap:
        for name, text in texts.items():
            model = parse_model(text)
            if name.startswith("inject_") and model.ok:
                accepted_injections.append(name)
            if model.ok:
                system = compile_model(model)
                try:
                    system.rhs(0.0, system.initial)
                    system.jac(0.0, system.initial)
                except UndefinedValue:
                    pass
                compiled.append(name)
    assert len(files) >= 60 and sum(n.startswith("inject_") for n in texts) >= 30
    assert accepted_injections == []
    assert trap.calls == []
    assert compiled and trap.generated_sources
    for source in trap.generated_sources:
        assert "__import__" not in source and "system" not in source and "os." not in source


def test_compiled_code_comes_from_the_tree_not_the_text():
    # a legal model whose names look like Python: the generated code uses plain symbols only
    with traps() as trap:
        system = compile_model("system' = -system + exec_rate\nexec_rate = 2\nos_level = system*2")
        value = system.rhs(0.0, [1.0])[0]
        derived = system.derived_values([0.0], [[1.0]])["os_level"][0]
    assert value == 1.0 and derived == 2.0
    assert trap.calls == []
    assert trap.generated_sources
    for source in trap.generated_sources:
        assert "system" not in source and "exec_rate" not in source
