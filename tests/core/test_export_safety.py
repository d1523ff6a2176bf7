"""What a user types or a file holds cannot change how an exported file is read (issue 10, item 1).

* The standalone script: every Python source-encoding trick (PEP 263 ``coding:`` declarations that
  turn escapes in comments into live code: ``raw_unicode_escape``, ``unicode_escape``, ``utf-7``;
  BOMs; form feeds before a declaration) and every character some tool treats as a line end, in the
  title and in model comments. The script's syntax tree must be exactly the one of the same export
  with a harmless title and no comments, and running the script must not create a marker file.
* LaTeX: titles with ``\\input``, ``\\write18``, ``^^5c`` character codes, ``%``, braces, blank lines.
* HTML report: every user string with markup; the element structure equals that of harmless text.
* CSV: formula-looking cells neutralised, quoting read back by the csv module, no partial file when
  writing fails.
Every file of the hostile model corpus (tests/data/hostile) is also used as a title, a comment, a
project name and a note.
"""

from __future__ import annotations

import ast
import csv
import html.parser
import os
import re
import subprocess
import types
import sys
from pathlib import Path

import pytest

from orbitdesk.engine.runs import RunSettings
from orbitdesk.exports.csv_table import text_cell, write_csv
from orbitdesk.exports.latex import model_latex, tex_escape
from orbitdesk.exports.run_script import comment_text, run_script
from orbitdesk.language.model import parse_model
from orbitdesk.document.project import Project, WalkthroughStep
from orbitdesk.exports.report import render_report
from orbitdesk.system.compiled_system import compile_model

ROOT = Path(__file__).resolve().parents[2]
HOSTILE_DIR = ROOT / "tests" / "data" / "hostile"
MARKER = "pwned_marker"
PAYLOAD = f"open({MARKER!r}, 'w').close()"
# every character that Python, str.splitlines, editors or terminals may take as the end of a line
LINE_ENDS = ["\n", "\r", "\r\n", "\x0b", "\x0c", "\x1c", "\x1d", "\x1e", "\x85", "\u2028", "\u2029"]
ENCODING_TRICKS = ["coding: raw_unicode_escape", "# -*- coding: unicode_escape -*-", "coding=utf-7",
                   "vim: set fileencoding=raw_unicode_escape :", "coding: utf-16", "coding: latin-1"]
TITLES = (ENCODING_TRICKS
          + [f"x{end}# coding: raw_unicode_escape" for end in LINE_ENDS]
          + [f"x{end}{PAYLOAD}" for end in LINE_ENDS]
          + ["\x0c# coding: raw_unicode_escape", "\n\x0c\x0c  # coding: unicode_escape",
             "\ufeff# coding: utf-7", "\ufeff\ufeff", "\x00 NUL", "\u202e evil \u2066", "\\", "x\\\n" + PAYLOAD,
             "'''\"\"\"", "é ✓ \U0001f600", "\ud800 lone surrogate"])
# model comments that a decoder would turn into a line of code
COMMENT_PAYLOADS = ([f"# \\u000a{PAYLOAD}", f"# \\n{PAYLOAD}", f"# \\x0a{PAYLOAD}", f"# \\12{PAYLOAD}",
                     f"# +AAo-{PAYLOAD}", f"# \\N{{LINE FEED}}{PAYLOAD}"]
                    + [f"# {end}{PAYLOAD}" for end in LINE_ENDS if end not in ("\n", "\r\n")]
                    + ["# coding: raw_unicode_escape", "# \ufeff", "# trailing backslash \\"])
MODEL = "k = 0.5\nx' = -k*x\nx(0) = 1\n"
HOSTILE_MODEL = ("k = 0.5  # coding: unicode_escape \\u000a" + PAYLOAD + "\nx' = -k*x\nx(0) = 1\n"
                 + "\n".join(COMMENT_PAYLOADS) + "\n")
SETTINGS = RunSettings(t_end=1.0, samples=11)
PRINTABLE_ASCII = set(map(chr, range(32, 127))) | {"\n"}


def _tree(script: str) -> tuple:
    """The code Python compiles from the script's bytes (so a coding declaration would apply): every code
    object's instructions, names and constants, without line numbers. (Three times faster than comparing
    ast.dump of the syntax tree, which kept the deep fuzz run of the exports from finishing.)"""
    return _code_print(compile(script.encode("utf-8", "surrogatepass"), "<export>", "exec", dont_inherit=True))


def _code_print(code: types.CodeType) -> tuple:
    consts = tuple(_code_print(c) if isinstance(c, types.CodeType) else (type(c).__name__, repr(c))
                   for c in code.co_consts)
    return (code.co_code, code.co_exceptiontable, code.co_names, code.co_varnames, code.co_freevars,
            code.co_cellvars, code.co_argcount, code.co_posonlyargcount, code.co_kwonlyargcount, code.co_flags,
            code.co_name, consts)


@pytest.fixture(scope="module")
def baseline():
    system = compile_model(MODEL)
    return _tree(run_script(system, SETTINGS, title="Harmless title", output="run.csv"))


@pytest.fixture(scope="module")
def hostile_system():
    model = parse_model(HOSTILE_MODEL)
    assert model.ok, model.errors
    return compile_model(model)


def test_hostile_model_comments_are_accepted_by_the_parser(hostile_system):
    assert hostile_system.model.text.count(PAYLOAD) == len(COMMENT_PAYLOADS) - 3 + 1


@pytest.mark.parametrize("title", TITLES, ids=[ascii(t)[1:40] for t in TITLES])
def test_script_reads_the_same_whatever_the_title_and_comments(title, baseline, hostile_system):
    script = run_script(hostile_system, SETTINGS, title=title, output="run.csv")
    assert set(script) <= PRINTABLE_ASCII  # no character any decoder or editor could read otherwise
    lines = script.split("\n")
    assert lines[:2] == ["#!/usr/bin/env python3", "# -*- coding: utf-8 -*-"]
    assert _tree(script) == baseline  # exactly the statements the generator wrote
    for line in lines:
        assert PAYLOAD not in line or line.lstrip().startswith("#"), line


@pytest.mark.parametrize("title", [t for t in ENCODING_TRICKS if "utf-16" not in t and "latin" not in t])
def test_running_the_exported_script_runs_nothing_injected(tmp_path, title, hostile_system):
    script = tmp_path / "exported.py"
    script.write_text(run_script(hostile_system, SETTINGS, title=title, output="run.csv"), encoding="utf-8")
    done = subprocess.run([sys.executable, str(script)], cwd=tmp_path, capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == 0, done.stderr
    assert (tmp_path / "run.csv").exists()
    assert not (tmp_path / MARKER).exists()


@pytest.mark.parametrize("declaration, comment", [("raw_unicode_escape", f"# \\u000a{PAYLOAD}"),
                                                  ("unicode_escape", f"# \\n{PAYLOAD}"),
                                                  ("utf-7", f"# +AAo-{PAYLOAD}")])
def test_the_tricks_are_real(tmp_path, declaration, comment):
    """The checks above can fail: a declaration in the first two lines turns these comments into code."""
    script = tmp_path / "trick.py"
    script.write_text(f"#!/usr/bin/env python3\n# coding: {declaration}\n{comment}\n", encoding="ascii")
    subprocess.run([sys.executable, str(script)], cwd=tmp_path, check=True, timeout=60)
    assert (tmp_path / MARKER).exists()


def test_comment_text_escapes_everything_but_printable_ascii():
    assert comment_text("x' = -x  # ok") == "x' = -x  # ok"
    assert comment_text("a\nb\rc\u2028d\x85e\x0cf") == "a\\nb\\rc\\u2028d\\x85e\\x0cf"
    assert comment_text("décroissance \u202e") == "d\\xe9croissance \\u202e"


# ---------------------------------------------------------------- the hostile corpus as text

def _corpus_texts():
    for path in sorted(HOSTILE_DIR.iterdir()):
        if path.name != "README.md" and path.stat().st_size <= 200_000:
            yield path.name, path.read_bytes().decode("utf-8", "replace")


@pytest.mark.parametrize("name, text", list(_corpus_texts()), ids=lambda v: v if len(v) < 60 else None)
def test_corpus_texts_as_titles_and_comments(name, text, baseline, hostile_system):
    script = run_script(hostile_system, SETTINGS, title=text, output="run.csv")
    assert set(script) <= PRINTABLE_ASCII
    assert _tree(script) == baseline
    escaped = tex_escape(text)
    _check_tex_text(escaped)
    model = parse_model(text)
    if model.ok:  # a legal model: its own script's tree is that of the model without comments
        stripped = "\n".join(line.split("#", 1)[0] for line in text.split("\n"))
        system = compile_model(model)
        script = run_script(system, SETTINGS, title=name, output="run.csv")
        assert set(script) <= PRINTABLE_ASCII
        assert _tree(script) == _tree(run_script(compile_model(stripped), SETTINGS, title="t", output="run.csv"))
        _check_tex_commands(model_latex(model, standalone=True, title=text))


# ---------------------------------------------------------------- LaTeX

TEX_TITLES = [r"\input{/etc/passwd}", r"\immediate\write18{touch pwned}", "^^5cinput{/etc/passwd}",
              "50% off } \\end{document}", "{", "}}}", "a\n\nb", "a\r\n\r\nb", "a\u2028\u2029b", "$x$ & #1 _ ~",
              "\\catcode`\\@=0 @input x", "\x00\x0c\x1b[31m", "\u202etxet", "Émile ✓", "\\\\"]
_TEX_ESCAPES = re.compile(r"\\(textbackslash\{\}|[{}$&#%_]|\^\{\}|~\{\})")


def _check_tex_text(escaped: str) -> None:
    """Only our escapes may carry a backslash or brace; no special character is left bare."""
    bare = _TEX_ESCAPES.sub("", escaped)
    assert not set(bare) & set("\\{}$&#%_^~"), escaped
    assert "\n" not in escaped and "\r" not in escaped
    assert all(c.isprintable() for c in escaped), escaped


DANGEROUS_TEX = {"input", "include", "write", "immediate", "openout", "openin", "read", "catcode", "def", "edef",
                 "gdef", "let", "csname", "special", "newcommand", "renewcommand", "usepackage", "documentclass",
                 "end", "begin", "makeatletter", "string", "jobname", "loop", "expandafter"}
OUR_TEX = {"documentclass", "usepackage", "begin", "end"}  # used once each by our own document frame


def _check_tex_commands(document: str) -> None:
    # ours, from the tree: if() is printed by sympy's printer as a cases environment; the equations stand in an
    # align* environment, each part after them (parameters, initial values, ...) in an alignat*{2}
    envs = re.findall(r"\\(begin|end)\{(cases|align\*|alignat\*)\}", document)
    assert [k for k, _ in envs].count("begin") == [k for k, _ in envs].count("end") and envs[0] == ("begin", "align*")
    words = re.findall(r"\\([A-Za-z]+)", re.sub(r"\\(begin|end)\{(cases|align\*|alignat\*)\}", "", document))
    assert not (set(words) & DANGEROUS_TEX) - OUR_TEX, set(words) & DANGEROUS_TEX
    assert words.count("documentclass") <= 1 and words.count("usepackage") <= 1
    assert [w for w in words if w in ("begin", "end")] in (["begin", "end"], [])  # the document, when standalone


def test_latex_names_like_tex_primitives_stay_names():
    names = ["input", "write", "immediate", "catcode", "openout", "special", "csname", "expandafter", "jobname"]
    text = "".join(f"{n} = 1\n" for n in names) + "x' = " + " + ".join(names) + " + input_write*x\ninput_write = 2\n"
    document = model_latex(text, standalone=True, title="T")
    _check_tex_commands(document)
    assert r"\mathit{input}" in document and r"\mathit{input}_{\mathit{write}}" in document


@pytest.mark.parametrize("title", TEX_TITLES)
def test_latex_title_is_text_only(title):
    document = model_latex(MODEL, standalone=True, title=title)
    harmless = model_latex(MODEL, standalone=True, title="Harmless")
    heading = re.search(r"\\section\*\{(.*)\}\n", document).group(1)
    _check_tex_text(heading)
    commands = set(re.findall(r"\\[A-Za-z]+", document.replace(heading, "")))
    assert commands == set(re.findall(r"\\[A-Za-z]+", harmless.replace("Harmless", "")))
    assert document.replace(heading, "T") == harmless.replace("Harmless", "T")


def test_latex_escapes_each_special():
    assert tex_escape(r"\{}$&#^_%~") == (r"\textbackslash{}\{\}\$\&\#\^{}\_\%\~{}")
    assert tex_escape("a\n\nb\tc\u2028d") == "a b c d"


# ---------------------------------------------------------------- HTML report

MARKUP = '<h1>big</h1><img src="/etc/passwd" onerror="alert(1)"><a href="file:///">link</a>"\'&amp;'


NOTE_TAGS = {"p", "em", "strong", "code", "ul", "ol", "li"}  # what a note's own light markup may add


class _Structure(html.parser.HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags = []

    def handle_starttag(self, tag, attrs):
        if tag not in NOTE_TAGS:
            self.tags.append((tag, tuple(k for k, _ in attrs)))

    def handle_endtag(self, tag):
        if tag not in NOTE_TAGS:
            self.tags.append(("/" + tag, ()))

    def handle_comment(self, data):
        self.tags.append(("<!--", ()))

    def handle_decl(self, decl):
        self.tags.append(("<!", (decl,)))

    def unknown_decl(self, data):
        self.tags.append(("<![", ()))


def _structure(text: str):
    parser = _Structure()
    parser.feed(text)
    return parser.tags


def _hostile_project(s: str) -> Project:
    return Project(name=s, model=MODEL + "# " + s.replace("\n", " ") + "\n", notes=s,
                   walkthrough=[WalkthroughStep(s, s, {"parameters": {"k": 2.0}, "open_views": [s],
                                                       "section": {"plane": s, "direction": s}})])


@pytest.mark.parametrize("s", [MARKUP, "<script>alert(1)</script>", "</pre><b>", "<!-- x -->", "]]><![CDATA[",
                               "plain"])
def test_report_shows_user_text_as_text(s):
    from tests.core.test_exports import tiny_png

    system = compile_model(MODEL)
    text = render_report(_hostile_project(s), system, {s: tiny_png()})
    harmless = render_report(_hostile_project("plain"), system, {"plain": tiny_png()})
    assert _structure(text) == _structure(harmless)
    assert "<h1>" + html.escape(s) + "</h1>" in text


# ---------------------------------------------------------------- CSV

@pytest.mark.parametrize("cell", ["=HYPERLINK(\"http://x\")", "+1+1", "-2+3", "@SUM(A1)", "\t=1", "\r=1",
                                  "=cmd|' /C calc'!A0", "a,b", 'say "hi"', "two\nlines", "x'", "plain"])
def test_csv_text_cells_are_never_formulas(tmp_path, cell):
    path = tmp_path / "t.csv"
    write_csv(path, ["t", cell], [[0.0, -1.5], [1.0, float("nan")]])
    with open(path, newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    shown = rows[0][1]
    assert not shown.startswith(("=", "+", "-", "@", "\t", "\r"))
    assert shown.lstrip("'") == cell  # the text itself survives; numbers stay numbers
    assert rows[1] == ["0.0", "-1.5"] and rows[2][1] == "nan"
    assert text_cell("x") == "x" and text_cell("-x") == "'-x"


def test_csv_export_that_fails_while_writing_leaves_no_partial_file(tmp_path, monkeypatch):
    from orbitdesk.document import safe_files

    path = tmp_path / "out.csv"
    real_fdopen = os.fdopen

    class FullDisk:  # a file that takes part of the data, then reports a full disk
        def __init__(self, handle):
            self.handle = handle

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            self.handle.close()

        def write(self, data):
            self.handle.write(data[: len(data) // 2])
            raise OSError(28, "No space left on device")

        def __getattr__(self, name):
            return getattr(self.handle, name)

    monkeypatch.setattr(safe_files.os, "fdopen", lambda fd, *a, **k: FullDisk(real_fdopen(fd, *a, **k)))
    for existing in (None, "old,content\n"):
        if existing is not None:
            path.write_text(existing)
        with pytest.raises(OSError, match="No space left"):
            write_csv(path, ["a", "b"], [[float(i), 2.0] for i in range(1000)])
        assert [p.name for p in tmp_path.iterdir()] == ([] if existing is None else ["out.csv"])
        if existing is not None:
            assert path.read_text() == existing


def test_csv_export_that_fails_leaves_no_partial_file(tmp_path):
    path = tmp_path / "out.csv"

    def rows():
        yield [1.0, 2.0]
        raise OSError(28, "No space left on device")

    with pytest.raises(OSError):
        write_csv(path, ["a", "b"], rows())
    assert list(tmp_path.iterdir()) == []  # neither the file nor a temporary one
    path.write_text("old,content\n")
    with pytest.raises(OSError):
        write_csv(path, ["a", "b"], rows())
    assert path.read_text() == "old,content\n" and len(list(tmp_path.iterdir())) == 1


def test_csv_into_an_unwritable_folder_is_an_error_without_a_file(tmp_path, monkeypatch):
    from orbitdesk.cli.common import CommandError
    from orbitdesk.cli.common import write_csv as cli_write_csv
    from orbitdesk.document import safe_files

    real_open = os.open

    def refusing_open(path, flags, *args):  # the folder refuses new files (works even as root)
        if str(path).startswith(str(tmp_path)) and flags & os.O_CREAT:
            raise PermissionError(13, "Permission denied", str(path))
        return real_open(path, flags, *args)

    monkeypatch.setattr(safe_files.os, "open", refusing_open)
    with pytest.raises(CommandError, match="cannot write .*Permission denied"):
        cli_write_csv(str(tmp_path / "x.csv"), ["t"], [[0.0, 1.0]])
    assert list(tmp_path.iterdir()) == []
