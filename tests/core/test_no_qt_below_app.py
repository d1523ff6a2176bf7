"""Nothing below orbitdesk/app imports Qt, pyqtgraph or OpenGL: every headless folder (language, system,
engine, analyses, document, exports, cli, samples) is read from the source and checked by importing it."""

import ast
import json
import subprocess
import sys
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[2] / "orbitdesk"
HEADLESS = ("language", "system", "engine", "analyses", "document", "exports", "cli", "samples")
FORBIDDEN = ("PySide6", "PySide2", "PyQt5", "PyQt6", "shiboken6", "shiboken2", "pyqtgraph", "OpenGL", "qtpy")


def _top(name: str | None) -> str:
    return (name or "").split(".")[0]


def forbidden_imports(source: str, filename: str = "<text>") -> list[str]:
    """Forbidden modules named by import statements or by import calls with a literal name."""
    found = []
    for node in ast.walk(ast.parse(source, filename)):
        names = []
        if isinstance(node, ast.Import):
            names = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom) and node.level == 0:
            names = [node.module]
        elif isinstance(node, ast.Call) and node.args and isinstance(node.args[0], ast.Constant):
            func = node.func
            called = func.id if isinstance(func, ast.Name) else func.attr if isinstance(func, ast.Attribute) else ""
            if called in ("__import__", "import_module") and isinstance(node.args[0].value, str):
                names = [node.args[0].value]
        found += [f"{filename}:{node.lineno}: {n}" for n in names if _top(n) in FORBIDDEN]
    return found


def test_the_scan_recognises_every_form_of_import():
    text = ("import PySide6\nfrom PySide6.QtCore import Qt\nimport pyqtgraph as pg\nimport OpenGL.GL\n"
            "from shiboken6 import isValid\nimportlib.import_module('PySide6.QtGui')\n__import__('pyqtgraph')\n"
            "import numpy\nfrom . import model\nfrom .engine import simulate\n")
    assert [line.split(": ")[1] for line in forbidden_imports(text)] == [
        "PySide6", "PySide6.QtCore", "pyqtgraph", "OpenGL.GL", "shiboken6", "PySide6.QtGui", "pyqtgraph"]


def test_no_core_source_imports_qt_or_opengl():
    assert sorted(p.name for p in PACKAGE.iterdir() if (p / "__init__.py").is_file()) == sorted(HEADLESS + ("app",))
    files = sorted(f for folder in HEADLESS for f in (PACKAGE / folder).rglob("*.py"))
    assert len(files) > 40
    found = []
    for path in files:
        found += forbidden_imports(path.read_text(encoding="utf-8"), str(path.relative_to(PACKAGE.parent)))
    assert found == []


def test_importing_every_core_module_loads_no_qt():
    script = r"""
import importlib, json, pkgutil, sys
names = []
for folder in %r:
    package = importlib.import_module("orbitdesk." + folder)
    names += sorted(m.name for m in pkgutil.walk_packages(package.__path__, package.__name__ + "."))
for name in names:
    importlib.import_module(name)
forbidden = sorted(m for m in sys.modules if m.split(".")[0] in %r)
print(json.dumps({"modules": names, "forbidden": forbidden}))
""" % (HEADLESS, FORBIDDEN)
    done = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=300,
                          cwd=PACKAGE.parent)
    assert done.returncode == 0, done.stderr
    report = json.loads(done.stdout.strip().splitlines()[-1])
    assert "orbitdesk.language.model" in report["modules"] and "orbitdesk.system.compiled_system" in report["modules"]
    assert report["forbidden"] == []
