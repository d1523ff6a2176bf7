"""The LaTeX export compiled and read back as a person reads the page: pdflatex makes the PDF, pdftotext gives its
text, and each sample's equations, parameters with their ranges, events, angles and initial values are there.

Skipped, saying so, where pdflatex or pdftotext is not installed (texlive-latex-base, poppler-utils)."""

import re
import shutil
import subprocess
import unicodedata

import pytest

from orbitdesk.document.project import load
from orbitdesk.exports.latex import model_latex, project_latex
from orbitdesk.samples import sample_path

MISSING = [tool for tool in ("pdflatex", "pdftotext") if shutil.which(tool) is None]
pytestmark = pytest.mark.skipif(bool(MISSING), reason=f"{' and '.join(MISSING)} not installed: the LaTeX export is "
                                                      "checked as text only (tests/core/test_exports.py)")


def page_text(tmp_path, document: str, name: str = "model") -> str:
    """The PDF's text, compiled from ``document``; NFC (a dot over a letter as one character where Unicode has
    one, as pdftotext may give either) and without spaces or line ends, so the checks read the symbols."""
    (tmp_path / f"{name}.tex").write_text(document, encoding="utf-8")
    done = subprocess.run(["pdflatex", "-interaction=nonstopmode", "-halt-on-error", "-no-shell-escape",
                           f"{name}.tex"], cwd=tmp_path, capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stdout[-3000:]
    assert "Overfull \\hbox" not in done.stdout or name == "hostile", "a line runs past the margin"
    out = subprocess.run(["pdftotext", "-layout", f"{name}.pdf", "-"], cwd=tmp_path, capture_output=True,
                         text=True, timeout=60)
    assert out.returncode == 0
    return re.sub(r"\s+", "", unicodedata.normalize("NFC", out.stdout))


def nfc(text: str) -> str:
    return unicodedata.normalize("NFC", text.replace(" ", ""))


DOT, DDOT = "\u0307", "\u0308"  # combining dot and two dots above: x' and x''

# what the page says for each sample, read off the sample's model text (the equation as typed, in the order
# sympy prints a sum); the shaken beam is the two-well Duffing equation of Guckenheimer & Holmes, Nonlinear
# Oscillations (1983), sec. 2.2, and the moths the logistic map of May, Nature 261 (1976) (both forms from memory)
SAMPLES = {
    "shaken_beam": [  # forced: the time in the equation
        f"x{DDOT}=−δx{DOT}+γcos(ωt)−x3+x", "Withtheparameters:", "δ=0.3in[0,1]", "γ=0.5in[0,0.8]", "ω=1.2in[0.5,2]",
        "Withthederivedquantities:", "energy=", "Andtheinitialvalues:", "x(0)=1", f"x{DOT}(0)=0"],
    "insect_generations": [  # a map: x_{n+1} and x_0
        "xn+1=rxn(1−xn)", "r=2.8in[2.5,4]", "x0=0.1"],
    "rattling_flap": [  # events
        f"x{DDOT}=Acos(wt)−cx{DOT}−kx", "k=1", "c=0.05in[0,0.5]", "gap=1in[0,1.5]",
        "Withtheevents(eachappliedatthecrossing;rightsidesusethevaluesbeforeit):",
        f"whenx>gapbecomestrue:x{DOT}←−rx{DOT}", "x(0)=0"],
    "pendulum": [  # an angle (a fraction's numerator is read on the line above its equation)
        "gsin(θ)", f"θ{DDOT}=−cθ{DOT}−", "g=9.81in[1,20]", "Wheretheanglesarereadmodulo2π(andshownwrappedto(−π,π]):",
        "θ≡θ+2π", "θ(0)=0.3", f"θ{DOT}(0)=0"],
}


@pytest.mark.parametrize("name", sorted(SAMPLES))
def test_each_sample_compiles_and_its_page_names_each_equation(tmp_path, name):
    project = load(sample_path(name))
    text = page_text(tmp_path, project_latex(project, standalone=True))
    assert text.startswith(nfc(project.name)), text[:80]  # the heading: the project's own name
    at = 0
    for part in SAMPLES[name]:  # each in the order the page gives it
        found = text.find(nfc(part), at)
        assert found >= 0, (name, part, text)
        at = found


def test_numbered_states_are_listed_in_counting_order_with_the_dot_on_the_letter(tmp_path):
    # a chain of ten masses: the sum of the positions reads x1 + x2 + ... + x10 on the page, not x1 + x10 + x2 ...
    chain = "".join(f"x_{i}'' = -x_{i}\n" for i in range(1, 11)) + "total = sum(x_{j}, j in 1..10)\n"
    text = page_text(tmp_path, model_latex(chain, standalone=True, title="Chain"))
    assert "total=x1+x2+x3+x4+x5+x6+x7+x8+x9+x10" in text
    assert nfc(f"x{DDOT}10=−x10") in text and nfc(f"x{DOT}10(0)=0") in text


def test_a_title_with_tex_specials_is_printed_as_typed(tmp_path):
    title = r"50% off } \end{document} $x$ & #1 ~ \input{/etc/passwd} Émile"
    text = page_text(tmp_path, model_latex("x' = -x\n", standalone=True, title=title), "hostile")
    # every character on the page as typed (the underscore and tilde are drawn, not read back as letters)
    assert nfc(r"50%off}\end{document}$x$&#1") in text and nfc(r"\input{/etc/passwd}Émile") in text
    assert nfc(f"x{DOT}=−x") in text
