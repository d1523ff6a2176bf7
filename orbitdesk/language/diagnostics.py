"""Diagnostics: what the parser says about a model, with exact positions.

Lines and columns are 1-based; ``end_column`` is exclusive (the column just past the span).
"""

from __future__ import annotations

import re
from dataclasses import asdict, dataclass

ERROR = "error"
WARNING = "warning"
INFO = "info"
SEVERITIES = (ERROR, WARNING, INFO)


@dataclass(frozen=True)
class Diagnostic:
    line: int
    column: int
    end_column: int
    severity: str
    message: str
    fix: str | None = None

    def format(self) -> str:
        text = f"{self.line}:{self.column}: {self.severity}: {self.message}"
        return text

    def to_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class QuickFix:
    """An edit that certainly repairs a diagnostic: the text from ``column`` to ``end_column`` (1-based,
    exclusive end) on ``line`` becomes ``text``; ``label`` says it in words."""
    line: int
    column: int
    end_column: int
    text: str
    label: str


_DID_YOU_MEAN = re.compile(r"^did you mean '([A-Za-z_][A-Za-z0-9_]*'*)'\?$")
_MISSING_CLOSE = re.compile(r"^expected (?:',' or )?'\)', found the end of the line$")


def quick_fix(d: Diagnostic) -> QuickFix | None:
    """The certain repair of ``d``, if there is one: the one close name the parser suggests for an unknown
    name, or the closing parenthesis a line ends without."""
    m = _DID_YOU_MEAN.match(d.fix or "")
    if m:
        return QuickFix(d.line, d.column, d.end_column, m.group(1), f"write '{m.group(1)}'")
    if d.severity == ERROR and _MISSING_CLOSE.match(d.message):
        return QuickFix(d.line, d.column, d.column, ")", "close the parenthesis")
    return None


def apply_fix(text: str, fix: QuickFix) -> str:
    """``text`` with ``fix`` applied (unchanged when the fix no longer fits the text)."""
    lines = text.split("\n")
    if not 1 <= fix.line <= len(lines):
        return text
    line = lines[fix.line - 1]
    start, end = fix.column - 1, fix.end_column - 1
    if not 0 <= start <= end or start > len(line):
        return text
    if start == end:  # an insertion goes right after the expression, before spaces and a comment
        start = end = len(line[:start].rstrip())
    lines[fix.line - 1] = line[:start] + fix.text + line[end:]
    return "\n".join(lines)


class ParseError(Exception):
    """Raised inside the parser; turned into an error diagnostic at (column, end_column)."""

    def __init__(self, message: str, column: int, end_column: int | None = None, fix: str | None = None):
        super().__init__(message)
        self.message = message
        self.column = column
        self.end_column = end_column if end_column is not None else column + 1
        self.fix = fix
