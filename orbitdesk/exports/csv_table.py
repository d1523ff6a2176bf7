"""CSV files of numbers with a header, safe to open in a spreadsheet and never left half-written.

Header cells (and any other text cell) are *neutralised*: a cell that a spreadsheet would read as a
formula — beginning with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return — gets a leading
apostrophe, which spreadsheets take as "this is text". Quoting is the ``csv`` module's (commas,
quotes and line breaks inside a cell are quoted). Numbers are written as the shortest text that reads
back as the same double (``repr``), so ``-1.5`` stays a number. The file is written by
``safe_files.atomic_write``: a failure (full disk, unwritable folder, an error while producing
the rows) leaves no partial file and keeps an existing file as it was.
"""

from __future__ import annotations

import csv
import io
from typing import Iterable, Sequence

import numpy as np

from orbitdesk.document.safe_files import atomic_write

FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def text_cell(value) -> str:
    """A text cell a spreadsheet shows as text, never evaluates."""
    text = str(value)
    return "'" + text if text.startswith(FORMULA_STARTS) else text


def number_cell(value) -> str:
    if isinstance(value, (int, np.integer)) and not isinstance(value, bool):
        return str(int(value))  # a label, a count, a period in iterations: written as the whole number it is
    return repr(float(value))


def whole_columns(rows: np.ndarray) -> list:
    """The rows of a 2-D float array as lists, the columns holding only whole numbers (attractor labels, branch
    numbers, stability flags, periods) as ints, so the file reads ``2``, not ``2.0``."""
    rows = np.atleast_2d(np.asarray(rows, dtype=float))
    whole = [bool(col.size and np.all(np.isfinite(col)) and np.all(col == np.round(col)) and np.all(np.abs(col) < 2.0 ** 53))
             for col in rows.T]
    return [[int(v) if w else v for v, w in zip(row, whole)] for row in rows.tolist()]


def write_csv(path, header: Sequence, rows: Iterable[Sequence]) -> None:
    """Write ``header`` (text cells) and ``rows`` (numbers) to ``path`` atomically; raises OSError."""
    buffer = io.StringIO(newline="")
    writer = csv.writer(buffer)
    writer.writerow([text_cell(h) for h in header])
    for row in rows:
        writer.writerow([number_cell(v) for v in row])
    atomic_write(str(path), buffer.getvalue().encode("utf-8"), None)


def grid_table(result) -> tuple[list[str], list]:
    """A grid result (basins, a two-parameter map of the exponent or the period) as one row per grid point:
    (header, columns) with the two axes' values first, then what was found there (the basins' attractor,
    -1 for escape; the exponent; the period and, for autonomous flows, the period in time)."""
    gx, gy = np.meshgrid(result.xs, result.ys)
    header, columns = [result.x_name, result.y_name], [gx.ravel(), gy.ravel()]
    if hasattr(result, "labels"):
        named = {"attractor (-1: escape)": result.labels}
    elif hasattr(result, "exponent"):
        named = {"largest Lyapunov exponent": result.exponent}
    else:
        named = {f"period ({result.unit})": result.period}
        if getattr(result, "time_period", None) is not None:
            named["period in time"] = result.time_period
    for name, values in named.items():
        header.append(name)
        columns.append(np.asarray(values, dtype=float).ravel())
    return header, columns


__all__ = ["FORMULA_STARTS", "grid_table", "number_cell", "text_cell", "whole_columns", "write_csv"]
