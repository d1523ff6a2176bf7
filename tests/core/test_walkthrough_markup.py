"""Walkthrough note markup renders in linear time and stays safe HTML (issue 10, item 3).

The markup rules are defined by the three patterns below (code spans, then strong, then emphasis
over the escaped text): the renderer must give exactly what they give, but a backtracking engine
needs time quadratic in the length of unclosed markup (a 64 KB note took 22 s). Linearity is
checked by the scaling of the work (operation counts of the renderer's Python code, and the ratio
of processor times for an input and one sixteen times as long), never by an absolute time.
"""

from __future__ import annotations

import html
import html.parser
import re
import sys
import time
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from orbitdesk.document import walkthrough
from orbitdesk.document.project import MAX_TEXT
from orbitdesk.document.walkthrough import render_note
from tests.core.test_fuzz_parser import budget

HOSTILE_DIR = Path(__file__).resolve().parents[1] / "data" / "hostile"

# The markup's definition (the renderer used these patterns directly until it was made linear).
_CODE = re.compile(r"`([^`\n]+)`")
_STRONG = re.compile(r"\*\*(?=\S)(.+?)(?<=\S)\*\*")
_EMPH = re.compile(r"(?<![\w*])\*(?=[^\s*])(.+?)(?<=[^\s*])\*(?![\w*])")


def defined_inline(text: str) -> str:
    def styled(t):
        t = html.escape(t, quote=False)
        return _EMPH.sub(r"<em>\1</em>", _STRONG.sub(r"<strong>\1</strong>", t))

    parts, last = [], 0
    for m in _CODE.finditer(text):
        parts += [styled(text[last:m.start()]), f"<code>{html.escape(m.group(1), quote=False)}</code>"]
        last = m.end()
    return "".join(parts + [styled(text[last:])])


ALLOWED = {"p": set(), "em": set(), "strong": set(), "code": set(), "ul": set(), "ol": {"start"}, "li": set()}


class _Tags(html.parser.HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=False)
        self.problems = []

    def handle_starttag(self, tag, attrs):
        if tag not in ALLOWED or {k for k, _ in attrs} - ALLOWED[tag]:
            self.problems.append((tag, attrs))

    def handle_comment(self, data):
        self.problems.append(("comment", data))

    def handle_decl(self, decl):
        self.problems.append(("decl", decl))

    def unknown_decl(self, data):
        self.problems.append(("decl", data))

    def handle_pi(self, data):
        self.problems.append(("pi", data))


def assert_safe_html(out: str) -> None:
    assert re.search(r"<(?!/?(p|em|strong|code|ul|ol|li)[ >])", out) is None
    if len(out) > 200_000:
        return  # the pattern above is the check for very long outputs
    parser = _Tags()
    parser.feed(out)
    parser.close()
    assert parser.problems == []


ADVERSARIAL = {
    "unclosed emphasis": lambda n: " *a" * (n // 3),
    "unclosed strong": lambda n: "**a " * (n // 4),
    "stars only": lambda n: "*" * n,
    "closers only": lambda n: "a* " * (n // 3),
    "unclosed backticks": lambda n: "`a" * (n // 2),
    "backticks only": lambda n: "`" * n,
    "mixed": lambda n: " *a **b _d" * (n // 10),
    "one open star then text": lambda n: "*" + "ab " * (n // 3),
    "nested lists": lambda n: "".join(f"{' ' * (i % 6)}- *item **{i}\n" for i in range(n // 16)),
    "one list item, long": lambda n: "- *start\n" + "  more *text\n" * (n // 13),
    "numbered": lambda n: "".join(f"{i % 999999}. **x `y\n" for i in range(n // 14)),
}


def _line_events(text: str) -> int:
    """Python lines run inside the walkthrough module while rendering (deterministic work count)."""
    count = 0
    module_file = walkthrough.__file__

    def tracer(frame, event, arg):
        nonlocal count
        if frame.f_code.co_filename != module_file:
            return None
        if event == "line":
            count += 1
        return tracer

    sys.settrace(tracer)
    try:
        render_note(text)
    finally:
        sys.settrace(None)
    return count


def _cpu_seconds(text: str) -> float:
    """Processor time of one rendering: the least of seven, each the mean over as many renderings as take
    20 ms (a few milliseconds alone are at the mercy of other processes' use of the caches)."""
    best = float("inf")
    for _ in range(7):
        count, start = 0, time.process_time()
        while True:
            render_note(text)
            count += 1
            spent = time.process_time() - start
            if spent >= 0.02:
                break
        best = min(best, spent / count)
    return best


@pytest.mark.parametrize("kind", sorted(ADVERSARIAL))
def test_work_grows_linearly_with_the_note(kind):
    make = ADVERSARIAL[kind]
    small, large = make(2_000), make(4_000)
    assert 1.8 < len(large) / len(small) < 2.2
    ratio = _line_events(large) / max(1, _line_events(small))
    assert ratio < 2.5, f"{kind}: twice the text took {ratio:.2f} times the operations"
    # work in C (the regular-expression engine, a rescan from the start of the text) is invisible to the
    # count: compare processor times for 16 KB and 256 KB. A linear renderer takes about sixteen times as
    # long, a quadratic one about 256 times; the bound, 64, is four times either way (two full runs side by
    # side inflated a linear renderer's ratio 2.2-fold through the shared caches, over the 8x bound a
    # comparison of 16 KB with 64 KB had)
    base, sixteenfold = make(16 * 1024), make(256 * 1024)
    ratio = _cpu_seconds(sixteenfold) / max(_cpu_seconds(base), 1e-5)
    assert ratio < 64.0, f"{kind}: sixteen times the text took {ratio:.1f} times as long"
    assert_safe_html(render_note(sixteenfold))


def test_the_largest_note_a_project_allows_renders(monkeypatch):
    for make in (ADVERSARIAL["stars only"], ADVERSARIAL["mixed"]):
        text = make(MAX_TEXT)
        assert len(text) > 0.95 * MAX_TEXT
        out = render_note(text)
        assert_safe_html(out)
        assert out.startswith("<p>")


def test_markup_semantics_are_kept():
    assert render_note("*a* **b** `c`") == "<p><em>a</em> <strong>b</strong> <code>c</code></p>"
    assert render_note("***a***") == f"<p>{defined_inline('***a***')}</p>"
    assert render_note("2*x*3, a * b, snake_case*x*") == "<p>2*x*3, a * b, snake_case*x*</p>"
    assert render_note("** not strong ** and * not em *") == "<p>** not strong ** and * not em *</p>"
    assert render_note("`**x**` **`y`**") == "<p><code>**x**</code> **<code>y</code>**</p>"  # no strong across code
    assert render_note("- one\n  *more*\n- two") == "<ul><li>one <em>more</em></li><li>two</li></ul>"


MARKUP_TEXT = st.lists(st.sampled_from(list("*`ab _-<&1.\t\u00e9") + ["**", " *", "* ", "\n", "\n- ", "\n1. "]),
                       max_size=40).map("".join)


@budget(600)
@given(MARKUP_TEXT)
def test_inline_markup_is_exactly_the_defined_one(text):
    text = text.replace("\n", " ")
    assert walkthrough._inline(text) == defined_inline(text)


@budget(300)
@given(st.one_of(MARKUP_TEXT, st.text(max_size=300)))
def test_any_note_renders_to_safe_html(text):
    assert_safe_html(render_note(text))


def test_corpus_files_as_notes():
    for path in sorted(HOSTILE_DIR.iterdir()):
        if path.name != "README.md" and path.stat().st_size <= 200_000:
            assert_safe_html(render_note(path.read_bytes().decode("utf-8", "replace")))
