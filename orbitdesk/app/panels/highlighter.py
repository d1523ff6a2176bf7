"""Syntax colouring for model text: comments, numbers, functions and the left side of each
statement by what it defines (flow equation, map equation, initial value, parameter, derived); the
``angle`` declaration as a keyword with its states."""

from __future__ import annotations

import re

from PySide6.QtGui import QColor, QFont, QPalette, QSyntaxHighlighter, QTextCharFormat

from orbitdesk.language.expression import CONSTANTS, FUNCTIONS, is_event_line

FLOW_EQ, MAP_EQ, INITIAL, PARAMETER, DERIVED = "flow", "map", "initial", "parameter", "derived"
COMMENT, NUMBER, FUNCTION, CONSTANT, RANGE = "comment", "number", "function", "constant", "range"
KEYWORD = "keyword"  # declarations such as angle

# (light background, dark background); muted hues of our own that read on either.
PALETTE = {
    FLOW_EQ: ("#1f5f9e", "#8fbdeb"),
    MAP_EQ: ("#7b3f8c", "#d2a6e0"),
    INITIAL: ("#8a5a14", "#e0bf7e"),
    PARAMETER: ("#2f7041", "#98d1a6"),
    DERIVED: ("#9c4a2f", "#eea98c"),
    NUMBER: ("#0f6f6a", "#7fcfc6"),
    FUNCTION: ("#4e4aa8", "#aeb0f2"),
    CONSTANT: ("#4e4aa8", "#aeb0f2"),
    RANGE: ("#6b6f76", "#9aa0a8"),
    KEYWORD: ("#4e4aa8", "#aeb0f2"),
    COMMENT: ("#7a7f87", "#8d939b"),
}

_NUMBER = re.compile(r"(?<![A-Za-z_0-9.])(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?")
_WORD = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
_EVENT_WORDS = re.compile(r"^\s*(when)\b|\b(then)\b|(?:\bthen|,)\s*(stop)\s*(?=,|$)")  # stop: as an action
_WORD_PRIMED = re.compile(r"[A-Za-z_][A-Za-z0-9_]*'*")
_RANGE = re.compile(r"\bin\s*\[")


def _forms():
    """The statement forms and the angle declaration of the language (``language.model``, which imports
    sympy: loaded on the first colouring, after the window shows)."""
    from orbitdesk.language.model import _ANGLE, _LHS_FORMS

    return _LHS_FORMS, _ANGLE


def is_dark(palette: QPalette) -> bool:
    return palette.color(QPalette.ColorRole.Base).lightness() < 128


def colour(role: str, dark: bool) -> QColor:
    return QColor(PALETTE[role][1 if dark else 0])


def classify_lhs(lhs: str, rhs: str, kinds: dict[str, str] | None = None) -> str | None:
    """What a statement with this left side defines; ``kinds`` (name -> PARAMETER/DERIVED, from the
    last parse) settles ``name = ...`` lines, else a constant-looking right side means a parameter."""
    for form, pattern in _forms()[0]:
        m = pattern.match(lhs)
        if not m:
            continue
        if form == "ode":
            return FLOW_EQ
        if form == "map":
            return MAP_EQ
        if form in ("init", "mapinit"):
            return INITIAL
        name = m.group(1)
        if kinds and name in kinds:
            return kinds[name]
        value = _NUMBER.sub("0", _RANGE.split(rhs, 1)[0])
        return PARAMETER if set(_WORD.findall(value)) <= set(CONSTANTS) else DERIVED
    return None


class ModelHighlighter(QSyntaxHighlighter):
    """Colours one line at a time; all state it keeps is the name -> kind map of the last parse."""

    def __init__(self, document, palette: QPalette | None = None):
        super().__init__(document)
        self._kinds: dict[str, str] = {}
        self._functions: frozenset[str] = frozenset()  # the model's own functions
        self._formats: dict[str, QTextCharFormat] = {}
        self.set_palette(palette or QPalette())

    def set_palette(self, palette: QPalette) -> None:
        dark = is_dark(palette)
        self._formats = {}
        for role in PALETTE:
            fmt = QTextCharFormat()
            fmt.setForeground(colour(role, dark))
            if role in (FLOW_EQ, MAP_EQ, INITIAL, PARAMETER, DERIVED, KEYWORD):
                fmt.setFontWeight(QFont.Weight.DemiBold)
            if role == COMMENT:
                fmt.setFontItalic(True)
            self._formats[role] = fmt
        self.rehighlight()

    def format_for(self, role: str) -> QTextCharFormat:
        return self._formats[role]

    def set_model(self, parsed) -> None:
        """Take parameter/derived names from a parse; re-colours only when they changed."""
        kinds = {name: PARAMETER for name in parsed.parameters}
        kinds.update({name: DERIVED for name in parsed.derived})
        functions = frozenset(parsed.function_arguments)
        if kinds != self._kinds or functions != self._functions:
            self._kinds, self._functions = kinds, functions
            self.rehighlight()

    def highlightBlock(self, text: str) -> None:
        code, hash_, _ = text.partition("#")
        if hash_:
            self.setFormat(len(code), len(text) - len(code), self._formats[COMMENT])
        if is_event_line(code):  # when COND then ASSIGN, ... | stop
            self._expression(code, 0)
            for m in _EVENT_WORDS.finditer(code.rstrip()):
                for group in (1, 2, 3):
                    if m.group(group):
                        self.setFormat(m.start(group), len(m.group(group)), self._formats[KEYWORD])
            return
        eq = code.find("=")
        if eq < 0 and code.lstrip().startswith("angle") and self._angle_line(code):
            return
        rhs_start = 0
        if eq > 0:
            lhs_raw = code[:eq]
            lhs = lhs_raw.strip()
            role = classify_lhs(lhs, code[eq + 1:], self._kinds)
            if role is not None:
                start = len(lhs_raw) - len(lhs_raw.lstrip())
                self.setFormat(start, len(lhs), self._formats[role])
                rhs_start = eq + 1
        self._expression(code, rhs_start)

    def _expression(self, code: str, rhs_start: int) -> None:
        """Numbers, functions, constants and the words of conditions and ranges from ``rhs_start`` on."""
        rhs = code[rhs_start:]
        for m in _NUMBER.finditer(rhs):
            self.setFormat(rhs_start + m.start(), m.end() - m.start(), self._formats[NUMBER])
        for m in _WORD.finditer(rhs):
            word = m.group(0)
            if word in FUNCTIONS or word in ("if", "sum") or word in self._functions:
                role = FUNCTION
            elif word in ("and", "or", "not", "for"):
                role = RANGE
            elif word in CONSTANTS:
                role = CONSTANT
            elif word == "in" and _RANGE.match(rhs, m.start()):
                role = RANGE
            else:
                continue
            self.setFormat(rhs_start + m.start(), len(word), self._formats[role])

    def _angle_line(self, code: str) -> bool:
        """``angle theta, phi``: the word as a keyword, each name in the colour of a state's equation."""
        m = _forms()[1].match(code)
        if not m:
            return False
        keyword = self._formats[KEYWORD]
        self.setFormat(len(m.group(1)), len("angle"), keyword)
        for name in _WORD_PRIMED.finditer(code, m.start(2)):
            self.setFormat(name.start(), name.end() - name.start(), self._formats[FLOW_EQ])
        return True
