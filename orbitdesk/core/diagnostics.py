"""Diagnostics: what the parser says about a model, with exact positions.

Lines and columns are 1-based; ``end_column`` is exclusive (the column just past the span).
"""

from __future__ import annotations

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


class ParseError(Exception):
    """Raised inside the parser; turned into an error diagnostic at (column, end_column)."""

    def __init__(self, message: str, column: int, end_column: int | None = None, fix: str | None = None):
        super().__init__(message)
        self.message = message
        self.column = column
        self.end_column = end_column if end_column is not None else column + 1
        self.fix = fix
