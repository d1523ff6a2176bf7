"""Consistency checks between the packaging files and the package itself.

Nothing here needs Qt or a display: PNG sizes are read from the IHDR header,
the desktop entry with configparser, pyproject with tomllib.
"""

from __future__ import annotations

import ast
import configparser
import fnmatch
import shlex
import struct
import tomllib
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
PACKAGING = ROOT / "packaging"
DESKTOP = PACKAGING / "orbitdesk.desktop"
MIME_XML = PACKAGING / "orbitdesk-mime.xml"
SPEC = PACKAGING / "orbitdesk.spec"
INSTALL_SH = PACKAGING / "install_desktop_files.sh"
RENDER = PACKAGING / "render_icons.py"
SVG = ROOT / "resources" / "icon.svg"
ICON_DIR = ROOT / "resources" / "icons"
PACKAGE_RES = ROOT / "orbitdesk" / "resources"
ICON_SIZES = (16, 32, 48, 64, 128, 256, 512)

MIME_NS = "{http://www.freedesktop.org/standards/shared-mime-info}"
SVG_NS = "{http://www.w3.org/2000/svg}"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


# -- helpers -----------------------------------------------------------------

def pyproject() -> dict:
    with open(ROOT / "pyproject.toml", "rb") as fh:
        return tomllib.load(fh)


def desktop_entry() -> configparser.SectionProxy:
    parser = configparser.ConfigParser(interpolation=None, strict=True)
    parser.optionxform = str  # desktop keys are case-sensitive
    parser.read(DESKTOP, encoding="utf-8")
    return parser["Desktop Entry"]


def mime_type_element() -> ET.Element:
    root = ET.parse(MIME_XML).getroot()
    assert root.tag == f"{MIME_NS}mime-info"
    types = root.findall(f"{MIME_NS}mime-type")
    assert len(types) == 1
    return types[0]


def png_size(path: Path) -> tuple[int, int]:
    with open(path, "rb") as fh:
        head = fh.read(33)
    assert head[:8] == PNG_SIGNATURE, f"{path.name} is not a PNG"
    length, chunk = struct.unpack(">I4s", head[8:16])
    assert chunk == b"IHDR" and length == 13
    width, height = struct.unpack(">II", head[16:24])
    return width, height


def project_suffix() -> str:
    return ".orbitdesk"  # the project file suffix the README documents


def spec_string_constants() -> dict[str, str]:
    """Module-level NAME = os.path.join(ROOT, "a", "b") assignments in the spec, resolved."""
    tree = ast.parse(SPEC.read_text(encoding="utf-8"), filename=str(SPEC))
    found: dict[str, str] = {}
    for node in tree.body:
        if not (isinstance(node, ast.Assign) and len(node.targets) == 1
                and isinstance(node.targets[0], ast.Name)):
            continue
        call = node.value
        if (isinstance(call, ast.Call) and isinstance(call.func, ast.Attribute)
                and call.func.attr == "join" and call.args
                and isinstance(call.args[0], ast.Name) and call.args[0].id == "ROOT"
                and all(isinstance(a, ast.Constant) and isinstance(a.value, str)
                        for a in call.args[1:])):
            found[node.targets[0].id] = str(ROOT.joinpath(*(a.value for a in call.args[1:])))
    return found


# -- desktop entry -------------------------------------------------------------

def test_desktop_entry_parses_with_required_keys():
    entry = desktop_entry()
    assert entry["Type"] == "Application"
    assert entry["Name"] == "OrbitDesk"
    assert entry["Icon"] == "orbitdesk"
    assert entry["Terminal"] == "false"
    assert entry.get("Comment", "").strip()
    categories = [c for c in entry["Categories"].split(";") if c]
    for wanted in ("Science", "Education", "Math", "Physics"):
        assert wanted in categories
    assert entry["Categories"].endswith(";")
    assert entry["MimeType"].endswith(";")


def test_desktop_exec_is_the_declared_console_script():
    scripts = pyproject()["project"]["scripts"]
    argv = shlex.split(desktop_entry()["Exec"])
    assert argv[0] in scripts, f"Exec runs {argv[0]!r}, not one of {sorted(scripts)}"
    assert argv[1:] == ["open", "%f"]
    assert scripts[argv[0]].split(":")[0].startswith("orbitdesk.")
    if "TryExec" in desktop_entry():
        assert desktop_entry()["TryExec"] == argv[0]


def test_desktop_mime_type_matches_mime_xml():
    declared = [m for m in desktop_entry()["MimeType"].split(";") if m]
    assert declared == [mime_type_element().get("type")]
    assert declared == ["application/x-orbitdesk-project"]


# -- MIME type -------------------------------------------------------------------

def test_mime_glob_matches_project_suffix():
    suffix = project_suffix()
    assert suffix == ".orbitdesk"
    globs = [g.get("pattern") for g in mime_type_element().findall(f"{MIME_NS}glob")]
    assert globs, "no <glob> in the MIME type"
    assert any(fnmatch.fnmatch(f"lorenz{suffix}", g) for g in globs)
    assert not any(fnmatch.fnmatch(f"lorenz{suffix}.bak", g) for g in globs)
    assert mime_type_element().findtext(f"{MIME_NS}comment", "").strip()


def test_mime_magic_names_the_project_format():
    matches = mime_type_element().findall(f"{MIME_NS}magic/{MIME_NS}match")
    values = {m.get("value") for m in matches}
    from orbitdesk.document.project import FORMAT_NAME

    assert FORMAT_NAME in values


# -- icons -------------------------------------------------------------------------

def test_svg_icon_parses_with_svg_root():
    for path in (SVG, PACKAGE_RES / "icon.svg"):
        root = ET.parse(path).getroot()
        assert root.tag == f"{SVG_NS}svg", path
        view_box = [float(v) for v in root.get("viewBox").split()]
        assert view_box[2] == view_box[3], "icon must be square"
    assert (PACKAGE_RES / "icon.svg").read_bytes() == SVG.read_bytes()


@pytest.mark.parametrize("size", ICON_SIZES)
def test_png_renders_exist_with_right_size(size):
    path = ICON_DIR / f"orbitdesk-{size}.png"
    assert path.is_file(), f"missing {path.relative_to(ROOT)}; run packaging/render_icons.py"
    assert png_size(path) == (size, size)


def test_package_png_is_the_256_render():
    packaged = PACKAGE_RES / "icon-256.png"
    assert png_size(packaged) == (256, 256)
    assert packaged.read_bytes() == (ICON_DIR / "orbitdesk-256.png").read_bytes()


def test_render_script_produces_the_sizes_checked_here():
    tree = ast.parse(RENDER.read_text(encoding="utf-8"))
    sizes = next(ast.literal_eval(n.value) for n in tree.body
                 if isinstance(n, ast.Assign) and getattr(n.targets[0], "id", None) == "SIZES")
    assert tuple(sizes) == ICON_SIZES


def test_package_data_globs_cover_the_icons():
    globs = pyproject()["tool"]["setuptools"]["package-data"]["orbitdesk"]
    for name in ("icon.svg", "icon-256.png"):
        assert (PACKAGE_RES / name).is_file()
        rel = f"resources/{name}"
        assert any(fnmatch.fnmatch(rel, g) for g in globs), f"{rel} not matched by {globs}"


# -- PyInstaller spec ------------------------------------------------------------

def test_spec_compiles_and_its_paths_exist():
    source = SPEC.read_text(encoding="utf-8")
    compile(source, str(SPEC), "exec")
    paths = spec_string_constants()
    for name in ("ENTRY_SCRIPT", "PACKAGE_RESOURCES", "ICON_PNG", "ICON_SVG"):
        assert name in paths, f"{name} not defined in the spec"
        assert Path(paths[name]).exists(), f"{name} -> {paths[name]} missing"
    assert Path(paths["ENTRY_SCRIPT"]) == ROOT / "orbitdesk" / "__main__.py"
    assert Path(paths["SAMPLE_PROJECTS"]) == ROOT / "orbitdesk" / "samples"
    assert '"*.orbitdesk"' in source
    assert 'name="orbitdesk"' in source
    # The bundle ships the desktop integration files; they must all exist.
    for rel in ("orbitdesk.desktop", "orbitdesk-mime.xml", "install_desktop_files.sh"):
        assert f'"{rel}"' in source
        assert (PACKAGING / rel).is_file()


def test_entry_script_runs_the_console_script_target():
    module, func = pyproject()["project"]["scripts"]["orbitdesk"].split(":")
    main_src = (ROOT / "orbitdesk" / "__main__.py").read_text(encoding="utf-8")
    assert f"from {module} import {func}" in main_src


def test_desktop_icon_name_is_installed_by_the_script():
    script = INSTALL_SH.read_text(encoding="utf-8")
    icon = desktop_entry()["Icon"]
    assert f'app_id="{icon}"' in script
    assert f'mime_type="{mime_type_element().get("type")}"' in script
    assert "sizes=(" + " ".join(map(str, ICON_SIZES)) + ")" in script


# -- the wheel ---------------------------------------------------------------

LIST_SAMPLES = """
import json, sys
import orbitdesk
from PySide6.QtWidgets import QApplication, QMenu
from orbitdesk.app.help import fill_samples_menu
app = QApplication([])
menu = QMenu()
fill_samples_menu(None, menu)
print(json.dumps({"package": orbitdesk.__file__,
                  "menu": [[a.text(), a.data()] for a in menu.actions()]}))
"""


@pytest.mark.slow
def test_a_built_wheel_carries_the_samples_and_the_menu_lists_them_from_an_installed_copy(tmp_path):
    import json
    import os
    import shutil
    import subprocess
    import sys
    import zipfile

    from orbitdesk.samples import sample_paths

    # build from a copy, so that nothing is written into the source tree
    src = tmp_path / "src"
    shutil.copytree(ROOT / "orbitdesk", src / "orbitdesk", ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
    for name in ("pyproject.toml", "README.md", "LICENSE"):
        if (ROOT / name).exists():
            shutil.copy2(ROOT / name, src / name)
    dist = tmp_path / "dist"
    subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(dist), str(src)],
                   check=True, cwd=tmp_path, capture_output=True)
    wheel = next(dist.glob("orbitdesk-*.whl"))
    names = set(zipfile.ZipFile(wheel).namelist())
    samples = sample_paths()
    assert len(samples) >= 10
    for path in samples:
        assert f"orbitdesk/samples/{path.name}" in names
    for record in (ROOT / "orbitdesk" / "samples" / "data").iterdir():
        assert f"orbitdesk/samples/data/{record.name}" in names
    site = tmp_path / "site"
    subprocess.run([sys.executable, "-m", "pip", "install", "--no-deps", "--no-index", "-q", "--target", str(site),
                    str(wheel)], check=True, cwd=tmp_path, capture_output=True)
    env = {**os.environ, "PYTHONPATH": str(site), "QT_QPA_PLATFORM": "offscreen", "PYTHONDONTWRITEBYTECODE": "1"}
    out = subprocess.run([sys.executable, "-c", LIST_SAMPLES], check=True, cwd=tmp_path, env=env,
                         capture_output=True, text=True).stdout
    shown = json.loads(out.strip().splitlines()[-1])
    assert Path(shown["package"]).resolve().is_relative_to(site.resolve())
    listed = [Path(data) for _text, data in shown["menu"]]
    assert [p.name for p in listed] == [p.name for p in samples]
    assert all(p.resolve().is_relative_to(site.resolve()) and p.is_file() for p in listed)
