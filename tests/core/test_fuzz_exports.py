"""Property-based fuzzing of the exports (hypothesis): whatever text a user or a file supplies,

(a) an exported script reads exactly as the same export with a harmless title and no comments
    (its syntax tree, built from its bytes, so a coding declaration would count) and is pure ASCII;
(b) a LaTeX title is text only (only our escapes carry a backslash or a brace);
(c) a CSV text cell reads back as itself and never as a formula;
(d) the HTML report has the element structure of the same report with harmless text.

Uses the budget of test_fuzz_parser: ``ORBITDESK_FUZZ_EXAMPLES=N`` for a deep run.
"""

from __future__ import annotations

import csv
import io

from hypothesis import given
from hypothesis import strategies as st

from orbitdesk.exports.csv_table import FORMULA_STARTS, text_cell
from orbitdesk.exports.latex import tex_escape
from orbitdesk.exports.run_script import run_script
from orbitdesk.language.model import parse_model
from orbitdesk.exports.report import render_report
from orbitdesk.system.compiled_system import compile_model
from tests.core.test_export_safety import (COMMENT_PAYLOADS, ENCODING_TRICKS, LINE_ENDS, MODEL, PRINTABLE_ASCII,
                                           SETTINGS, _check_tex_text, _hostile_project, _structure, _tree)
from tests.core.test_fuzz_parser import budget

_SYSTEM = compile_model(MODEL)
_BASELINE = _tree(run_script(_SYSTEM, SETTINGS, title="Harmless title", output="run.csv"))
_HARMLESS_REPORT = _structure(render_report(_hostile_project("plain"), _SYSTEM))

FRAGMENTS = (ENCODING_TRICKS + LINE_ENDS + COMMENT_PAYLOADS
             + ["\ufeff", "\\u000a", "\\n", "+AAo-", "#", "coding", ":", "=", "\\", "<h1>", "</pre>", "<img src=x>",
                "&amp;", "\\input{", "\\write18", "^^5c", "%", "{", "}", "\u202e", "\x00", "'''", '"'])
hostile_text = st.one_of(
    st.text(st.characters(codec=None, exclude_categories=()), max_size=200),
    st.lists(st.one_of(st.sampled_from(FRAGMENTS), st.characters()), max_size=40).map("".join),
)


@budget(300)
@given(hostile_text)
def test_script_title_never_changes_the_code(title):
    script = run_script(_SYSTEM, SETTINGS, title=title, output="run.csv")
    assert set(script) <= PRINTABLE_ASCII
    assert _tree(script) == _BASELINE


@budget(300)
@given(st.lists(hostile_text, min_size=1, max_size=4))
def test_script_model_comments_never_change_the_code(comments):
    text = MODEL + "".join("# " + c.replace("\n", " ").replace("\r\n", " ") + "\n" for c in comments)
    model = parse_model(text)
    if not model.ok:  # e.g. a NUL character, which the parser refuses anywhere
        return
    script = run_script(compile_model(model), SETTINGS, title="Harmless title", output="run.csv")
    assert set(script) <= PRINTABLE_ASCII
    assert _tree(script) == _BASELINE


@budget(1000)
@given(hostile_text)
def test_latex_text_is_text_only(text):
    _check_tex_text(tex_escape(text))


@budget(1000)
@given(hostile_text)
def test_csv_text_cell_reads_back_and_is_never_a_formula(text):
    buffer = io.StringIO(newline="")
    csv.writer(buffer).writerow([text_cell(text), "1.0"])
    [row] = list(csv.reader(io.StringIO(buffer.getvalue(), newline="")))
    assert not row[0].startswith(FORMULA_STARTS)
    assert row[0] == text or row[0] == "'" + text
    assert row[1] == "1.0"


@budget(150)
@given(hostile_text)
def test_report_structure_never_depends_on_user_text(text):
    assert _structure(render_report(_hostile_project(text), _SYSTEM)) == _HARMLESS_REPORT
