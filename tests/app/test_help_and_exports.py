"""Help > Model Language shows orbitdesk/help/language.md; Help > Sample Projects lists the samples and asks
about unsaved work; File > Export writes LaTeX, a script that reproduces the run, and an HTML report
with pictures of the open views."""

import base64
import csv
import html as html_lib
import re
import subprocess
import sys

import numpy as np
import pytest
from PySide6.QtWidgets import QFileDialog, QMessageBox

from orbitdesk.app import exports
from orbitdesk.app import help as help_ui

from .conftest import wait_for_trajectory

# x'' = -w^2 x with x(0) = 1, x'(0) = 0 has x(t) = cos(w t) (closed form); its only equilibrium, the
# origin, is a centre with eigenvalues +-i w.
SPRING = """# spring
x'' = -w^2*x
w = 2 in [0.5, 4]
x(0) = 1
x'(0) = 0
"""


def markdown_headings(text: str) -> list[str]:
    """ATX headings outside fenced code blocks (the reference, read independently of Qt)."""
    out, fenced = [], False
    for line in text.splitlines():
        if line.startswith("```"):
            fenced = not fenced
        elif not fenced:
            m = re.match(r"^(#{1,6})\s+(.*?)\s*#*\s*$", line)
            if m:
                out.append(m.group(2))
    return out


def open_spring(qtbot, window, tmp_path, w=None):
    path = tmp_path / "spring.txt"
    path.write_text(SPRING, encoding="utf-8")
    s = window.session
    wait_for_trajectory(qtbot, s, lambda: window.open_path(path, ask=False))
    wait_for_trajectory(qtbot, s, lambda: s.set_solver(t_end=10.0, samples=501))
    if w is not None:
        wait_for_trajectory(qtbot, s, lambda: s.set_param("w", w))
    return s


def save_dialog(monkeypatch, path, chosen=""):
    monkeypatch.setattr(QFileDialog, "getSaveFileName", staticmethod(lambda *a, **k: (str(path), chosen)))


# ---------------------------------------------------------------- help

def test_language_reference_shows_the_headings_of_language_md(qtbot, window, artifacts):
    expected = markdown_headings(help_ui.LANGUAGE_FILE.read_text(encoding="utf-8"))
    assert "The model language" in expected and len(expected) >= 3
    window.language_action.trigger()
    ref = window.language_reference
    qtbot.waitExposed(ref)
    assert ref.heading_texts() == expected
    assert [ref.contents.item(i).text().strip() for i in range(ref.contents.count())] == expected
    text = ref.browser.toPlainText()
    assert "x[n+1] = EXPR" in text and "heaviside" in text  # table cells and lists came through
    assert "```" not in text and "|---" not in text          # rendered, not shown as markup
    ref.find_box.setText("Lyapunov")
    assert ref.find_next()
    ref.find_box.setText("no such words here")
    assert not ref.find_next() and ref.find_status.text() == "not found"
    ref.grab().save(f"{artifacts}/language_reference.png")
    ref.close()


def test_sample_projects_menu_asks_about_unsaved_work(qtbot, window, tmp_path, message_boxes):
    menu = window.samples_menu
    menu.aboutToShow.emit()
    listed = sorted(a.data() for a in menu.actions() if a.data())
    assert listed == sorted(str(p) for p in help_ui.SAMPLES_DIR.glob("*.orbitdesk"))
    s = open_spring(qtbot, window, tmp_path)
    s.set_param("w", 3.0)
    assert s.dirty
    pendulum = next(a for a in menu.actions() if a.data().endswith("pendulum.orbitdesk"))
    message_boxes.answer = QMessageBox.StandardButton.Cancel
    pendulum.trigger()
    assert message_boxes.texts("question") and s.project.name == "spring"  # nothing replaced
    message_boxes.answer = QMessageBox.StandardButton.Discard
    pendulum.trigger()
    assert s.project.name == "A swinging pendulum" and s.path is None and not s.dirty
    assert "theta" in s.text and len(window.walkthrough_panel.steps) > 0


# ---------------------------------------------------------------- exports

def test_export_latex_document_and_snippet(qtbot, window, tmp_path, monkeypatch):
    open_spring(qtbot, window, tmp_path, w=3.0)
    target = tmp_path / "spring.tex"
    save_dialog(monkeypatch, tmp_path / "spring", exports.LATEX_DOCUMENT)
    assert exports.export_latex_dialog(window)
    tex = target.read_text(encoding="utf-8")
    assert tex.startswith("\\documentclass") and "\\begin{align*}" in tex and "\\end{document}" in tex
    assert "\\ddot{x}" in tex and re.search(r"w &= 3(\.0)?\b", tex)  # the value on screen, not the typed 2
    save_dialog(monkeypatch, target, exports.LATEX_SNIPPET)
    assert exports.export_latex_dialog(window)
    snippet = target.read_text(encoding="utf-8")
    assert "\\documentclass" not in snippet and "\\begin{align*}" in snippet


def test_exported_script_reproduces_the_run_on_screen(qtbot, window, tmp_path, monkeypatch):
    s = open_spring(qtbot, window, tmp_path, w=3.0)
    script = tmp_path / "spring_run.py"
    save_dialog(monkeypatch, script)
    assert exports.export_script_dialog(window)
    text = script.read_text(encoding="utf-8")
    assert "import numpy" in text and "OrbitDesk" in text
    done = subprocess.run([sys.executable, str(script)], cwd=tmp_path, capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    with open(tmp_path / "spring_run.csv", encoding="utf-8") as f:
        rows = list(csv.reader(f))
    head, data = rows[0], np.array(rows[1:], dtype=float)
    assert head[:2] == ["t", "x"] and data.shape[0] == 501
    np.testing.assert_allclose(data[:, 1], np.cos(3.0 * data[:, 0]), atol=1e-6)
    # the script steps with scipy's DOP853, the app with its own Dormand-Prince 8(5,3) and dense
    # output, both at rtol 1e-8: they agree to the tolerance's level, not bit for bit
    np.testing.assert_allclose(data[:, 1], s.trajectory.series("x"), atol=1e-7)


def test_html_report_embeds_pictures_of_the_open_views(qtbot, window, tmp_path, monkeypatch):
    s = open_spring(qtbot, window, tmp_path, w=3.0)
    window.walkthrough_panel.record("Spring at w = 3", "An *ellipse* in the phase plane.")
    report = tmp_path / "spring.html"
    save_dialog(monkeypatch, report)
    assert exports.export_report_dialog(window)
    qtbot.waitUntil(report.exists, timeout=30000)
    html = report.read_text(encoding="utf-8")
    images = re.findall(r'<img src="data:image/png;base64,([^"]+)" alt="([^"]*)"', html)
    captions = [html_lib.unescape(alt) for _, alt in images]
    assert any(c.startswith("Time series") for c in captions)
    assert "Phase plane: x' against x" in captions
    for data, _ in images:
        png = base64.b64decode(data)
        assert png[:8] == b"\x89PNG\r\n\x1a\n"
        width, height = int.from_bytes(png[16:20], "big"), int.from_bytes(png[20:24], "big")
        assert width > 200 and height > 150
    section = html[html.index("<h2>Equilibria</h2>"):html.index("<h2>Figures</h2>")]
    assert "centre" in section and "±3i" in section  # eigenvalues +-i w at w = 3
    assert "Spring at w = 3" in html and "<em>ellipse</em>" in html
    assert re.search(r">w</span></td><td[^>]*>3<", html)
    assert "http://" not in html.replace("http://www.w3.org", "")  # self-contained


def test_exports_refuse_a_model_with_errors(qtbot, window, tmp_path, monkeypatch, message_boxes):
    s = open_spring(qtbot, window, tmp_path)
    s.set_text(SPRING + "y' = undefined_name\n")
    s.validate_now()
    target = tmp_path / "broken.tex"
    save_dialog(monkeypatch, target, exports.LATEX_DOCUMENT)
    assert not exports.export_latex_dialog(window)
    assert not target.exists()
    assert any("errors" in t for t in message_boxes.texts("warning"))
    with pytest.raises(exports.ExportError):
        exports.script_text(s)


def test_export_menu_entries(window):
    texts = [a.text().replace("&", "") for a in window.export_menu.actions()]
    assert texts == ["Model as LaTeX…", "Model with These Values…", "Standalone Python Script…", "HTML Report…",
                     "Python Script of the Fit…"]
    assert all(a.toolTip() for a in window.export_menu.actions())
    file_texts = [a.text() for a in window.file_menu.actions()]
    assert file_texts.index("E&xport") < file_texts.index("&Quit")


def test_model_with_these_values_reads_back_as_the_values_on_screen(qtbot, window, tmp_path):
    from orbitdesk.document.project import Project
    from orbitdesk.language.model import parse_model

    s = window.session
    text = "# decay\nx' = -k*x  # first order\nk = 0.5 in [0, 2]  # rate\nx(0) = 2\n"
    wait_for_trajectory(qtbot, s, lambda: s.load_project(Project(name="decay", model=text)))
    s.set_param("k", 0.125)
    s.set_initial("x", 3.5)
    path = exports.export_model_text(window, tmp_path / "decay.txt")
    written = path.read_text(encoding="utf-8")
    parsed = parse_model(written)
    assert parsed.ok and parsed.parameters["k"].value == 0.125 and parsed.initial["x"] == 3.5
    assert (parsed.parameters["k"].lo, parsed.parameters["k"].hi) == (0, 2)
    assert "# rate" in written and "# first order" in written  # the user's comments stay
