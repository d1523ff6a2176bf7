"""Measured data sets: reading CSV / whitespace-separated text, validation, storage in a project.

A data file has one header line, then one row per sample. The first column is the time (or the step
``n`` of a map); every other column is a measured quantity named after a state or a derived quantity
of the model (or mapped to one). A unit may follow the name in brackets, ``x [mm]`` or ``x (mm)``; it
is kept as a label. A column ``sd(x)`` holds the standard deviation of each value of ``x`` (the fit
weights that value by 1/sd). Lines starting with ``#`` are comments.

Nothing is imported half: ``read_data_file`` either returns a complete ``DataSet`` or raises
``DataError`` naming the line and column of the first problem. Nothing read is ever run as code.
"""

from __future__ import annotations

import csv
import hashlib
import io
import math
import os
import re
from dataclasses import dataclass, field

import numpy as np

from orbitdesk.language.model_file import read_regular

MAX_DATA_BYTES = 8 * 1024 * 1024     # one data file
MAX_ROWS = 200_000                   # samples of one data set
MAX_COLUMNS = 64                     # measured columns of one data set
MAX_DATASETS = 64                    # data sets in one project
MAX_LABEL = 200                      # a header cell
_NAME_RE = re.compile(r"[A-Za-z_][A-Za-z0-9_]*'*")
_LABEL_RE = re.compile(r"^\s*(?P<name>[^\[\(]*?)\s*(?:[\[\(]\s*(?P<unit>[^\]\)]*?)\s*[\]\)])?\s*$")
_SD_RE = re.compile(r"^(?:sd|sigma|std)\s*\(\s*(?P<of>[A-Za-z_][A-Za-z0-9_]*'*)\s*\)$")
_SD_LABEL_RE = re.compile(r"^\s*(?:sd|sigma|std)\s*\(\s*(?P<of>[A-Za-z_][A-Za-z0-9_]*'*)\s*\)\s*"
                          r"(?:\[\s*(?P<unit>[^\]]*?)\s*\])?\s*$")
_CHECKSUM_RE = re.compile(r"[0-9a-f]{64}")


class DataError(ValueError):
    """A data file or stored data set that cannot be used; ``line``/``column`` are 1-based (0 = unknown)."""

    def __init__(self, message: str, line: int = 0, column: int = 0, source: str = ""):
        where = []
        if line:
            where.append(f"line {line}")
        if column:
            where.append(f"column {column}")
        prefix = (source + ": " if source else "") + (" ".join(where) + ": " if where else "")
        super().__init__(prefix + message)
        self.line, self.column, self.source, self.message = line, column, source, message


@dataclass
class DataColumn:
    """One measured quantity: ``name`` as in the file, ``target`` the model quantity it is compared with."""

    name: str
    values: np.ndarray
    unit: str = ""
    target: str = ""               # a state or derived quantity of the model; "" = same as name
    sd: np.ndarray | None = None   # standard deviation of each value, from an sd(NAME) column
    weight: float = 1.0            # used when there is no sd column

    @property
    def quantity(self) -> str:
        return self.target or self.name

    @property
    def label(self) -> str:
        return f"{self.name} [{self.unit}]" if self.unit else self.name


@dataclass
class DataSet:
    """One experiment: sample times, measured columns and the experiment's own starting values."""

    name: str
    time: np.ndarray
    columns: list[DataColumn]
    time_label: str = "t"
    source: str = ""               # the file name it was read from (no directory)
    checksum: str = ""             # SHA-256 of the file's bytes
    initial: dict[str, float] = field(default_factory=dict)
    parameters: dict[str, float] = field(default_factory=dict)

    @property
    def n_samples(self) -> int:
        return int(self.time.size)

    def column(self, quantity: str) -> DataColumn | None:
        for c in self.columns:
            if c.quantity == quantity:
                return c
        return None

    def quantities(self) -> list[str]:
        return [c.quantity for c in self.columns]

    def with_mapping(self, mapping: dict[str, str]) -> "DataSet":
        """A copy whose columns named in ``mapping`` compare with the model quantity given there."""
        cols = [DataColumn(c.name, c.values, c.unit, mapping.get(c.name, c.target), c.sd, c.weight)
                for c in self.columns]
        _check_targets(cols)
        return DataSet(self.name, self.time, cols, self.time_label, self.source, self.checksum,
                       dict(self.initial), dict(self.parameters))

    def unmatched(self, names) -> list[str]:
        """Columns whose quantity is not among ``names`` (the model's states and derived quantities)."""
        names = set(names)
        return [c.name for c in self.columns if c.quantity not in names]


def _check_targets(cols):
    seen = {}
    for i, c in enumerate(cols):
        if c.quantity in seen:
            raise DataError(f"columns '{seen[c.quantity]}' and '{c.name}' both stand for '{c.quantity}'")
        seen[c.quantity] = c.name


# ---------------------------------------------------------------- reading files

def read_bytes(path) -> bytes:
    """The bytes of a regular file no larger than MAX_DATA_BYTES; FIFOs and devices are refused unopened."""
    path = os.fspath(path)
    try:
        data = read_regular(path, MAX_DATA_BYTES)[0]
    except OSError as e:
        raise DataError(f"cannot read the file: {e.strerror or e}", source=os.path.basename(path)) from None
    except ValueError as e:
        raise DataError(f"{e} (a pipe, device or folder cannot be imported)",
                        source=os.path.basename(path)) from None
    if len(data) > MAX_DATA_BYTES:
        raise DataError(f"file too large (over {MAX_DATA_BYTES // (1024 * 1024)} MiB)", source=os.path.basename(path))
    return data


def read_data_file(path, name: str | None = None, kind: str = "flow") -> DataSet:
    """Read a CSV or whitespace-separated data file into a DataSet (``kind`` 'map' wants integer steps)."""
    source = os.path.basename(os.fspath(path))
    data = read_bytes(path)
    try:
        return parse_data(data, name or os.path.splitext(source)[0] or "data", source=source, kind=kind)
    except DataError as e:
        raise DataError(e.message, e.line, e.column, source) from None


def _split_label(text: str, line: int, column: int) -> tuple[str, str]:
    if len(text) > MAX_LABEL:
        raise DataError(f"column heading longer than {MAX_LABEL} characters", line, column)
    sd = _SD_LABEL_RE.match(text)
    if sd:
        return f"sd({sd.group('of')})", (sd.group("unit") or "").strip()
    m = _LABEL_RE.match(text)
    if not m or not m.group("name"):
        raise DataError(f"empty or unreadable column heading {text!r}", line, column)
    name, unit = m.group("name").strip(), (m.group("unit") or "").strip()
    if not _NAME_RE.fullmatch(name):
        raise DataError(f"column heading {name!r} is not a name (letters, digits, _ and trailing primes; "
                        "a unit goes in brackets: 'x [mm]')", line, column)
    return name, unit


def _rows(text: str):
    """(line number, cells) for every non-blank, non-comment line; CSV when the header has commas."""
    lines = [(i + 1, s) for i, s in enumerate(text.splitlines()) if s.strip() and not s.lstrip().startswith("#")]
    if not lines:
        return []
    comma = "," in lines[0][1]
    semicolon = not comma and ";" in lines[0][1]
    out = []
    for number, s in lines:
        if comma or semicolon:
            cells = next(csv.reader(io.StringIO(s), delimiter="," if comma else ";"))
            cells = [c.strip() for c in cells]
        else:
            cells = s.split()
        out.append((number, cells))
    return out


def parse_data(data: bytes | str, name: str = "data", source: str = "", kind: str = "flow") -> DataSet:
    """Parse the text of a data file; raises DataError with the line and column of the first problem."""
    raw = data.encode("utf-8") if isinstance(data, str) else bytes(data)
    if len(raw) > MAX_DATA_BYTES:
        raise DataError(f"file too large (over {MAX_DATA_BYTES // (1024 * 1024)} MiB)")
    if b"\x00" in raw:
        raise DataError("contains NUL bytes: not a text file", raw[:raw.index(b"\x00")].count(b"\n") + 1)
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as e:
        raise DataError(f"not UTF-8 text (bad byte at offset {e.start})",
                        raw[:e.start].count(b"\n") + 1) from None
    rows = _rows(text)
    if not rows:
        raise DataError("the file is empty (a header line and at least one row of numbers are needed)")
    header_line, header = rows[0]
    if len(header) < 2:
        raise DataError("the header needs a time column and at least one measured column", header_line, 1)
    if len(header) - 1 > MAX_COLUMNS:
        raise DataError(f"too many columns ({len(header)}, limit {MAX_COLUMNS + 1})", header_line, MAX_COLUMNS + 2)
    labels = [_split_label(h, header_line, j + 1) for j, h in enumerate(header)]
    seen: dict[str, int] = {}
    for j, (n, _) in enumerate(labels):
        if n in seen:
            raise DataError(f"column '{n}' appears twice (also column {seen[n]})", header_line, j + 1)
        seen[n] = j + 1
    body = rows[1:]
    if not body:
        raise DataError("no rows of numbers below the header", header_line)
    if len(body) > MAX_ROWS:
        raise DataError(f"too many rows ({len(body)}, limit {MAX_ROWS})", body[MAX_ROWS][0])
    width = len(header)
    table = np.empty((len(body), width))
    for r, (number, cells) in enumerate(body):
        if len(cells) > width:
            raise DataError(f"{len(cells)} values where the header has {width} columns", number, width + 1)
        for j in range(width):
            cell = cells[j] if j < len(cells) else ""
            if cell == "":
                raise DataError(f"missing value in column '{labels[j][0]}'", number, j + 1)
            try:
                v = float(cell)
            except ValueError:
                shown = cell if len(cell) <= 30 else cell[:30] + "..."
                raise DataError(f"{shown!r} is not a number (column '{labels[j][0]}')", number, j + 1) from None
            if not math.isfinite(v):
                raise DataError(f"{cell!r} is not a finite number (column '{labels[j][0]}')", number, j + 1)
            table[r, j] = v
    time = table[:, 0]
    for r in range(1, len(body)):
        if not time[r] > time[r - 1]:
            raise DataError(f"the {'step' if kind == 'map' else 'time'} {body[r][1][0]} does not increase "
                            f"(line {body[r - 1][0]} has {body[r - 1][1][0]})", body[r][0], 1)
    if kind == "map":
        bad = np.flatnonzero((time != np.round(time)) | (time < 0))
        if bad.size:
            raise DataError(f"the step {body[bad[0]][1][0]} of a map must be a whole number n >= 0", body[bad[0]][0], 1)
    sd_of = {}
    for j, (n, _) in enumerate(labels[1:], start=1):
        m = _SD_RE.match(n)
        if m:
            sd_of[m.group("of")] = j
    columns = []
    for j, (n, unit) in enumerate(labels[1:], start=1):
        if _SD_RE.match(n):
            of = _SD_RE.match(n).group("of")
            if of not in seen:
                raise DataError(f"'{n}' gives standard deviations of '{of}', which is not a column", header_line, j + 1)
            continue
        sd = None
        if n in sd_of:
            k = sd_of[n]
            sd = table[:, k].copy()
            bad = np.flatnonzero(sd <= 0)
            if bad.size:
                raise DataError(f"standard deviation {body[bad[0]][1][k]} is not positive", body[bad[0]][0], k + 1)
        columns.append(DataColumn(n, table[:, j].copy(), unit, "", sd))
    if not columns:
        raise DataError("no measured column (only standard deviations)", header_line, 2)
    checksum = hashlib.sha256(raw).hexdigest()
    return DataSet(name, time.copy(), columns, labels[0][0] + (f" [{labels[0][1]}]" if labels[0][1] else ""),
                   source, checksum)


# ---------------------------------------------------------------- project storage

def dataset_to_json(d: DataSet) -> dict:
    return {
        "name": d.name, "source": d.source, "sha256": d.checksum, "time_label": d.time_label,
        "time": [float(v) for v in d.time],
        "columns": [{"name": c.name, "unit": c.unit, "target": c.target, "weight": float(c.weight),
                     "values": [float(v) for v in c.values],
                     "sd": None if c.sd is None else [float(v) for v in c.sd]} for c in d.columns],
        "initial": {k: float(v) for k, v in d.initial.items()},
        "parameters": {k: float(v) for k, v in d.parameters.items()},
    }


def dataset_digest(d: DataSet) -> str:
    """SHA-256 of what a data set holds (times, columns, what they compare with, weights, its own values):
    a result computed from it (a fit) is stale when this changes."""
    import json

    return hashlib.sha256(json.dumps(dataset_to_json(d), sort_keys=True).encode("utf-8")).hexdigest()


def datasets_from_json(v, path: str, warnings: list[str]) -> list[DataSet]:
    """Validate the project's ``datasets`` array; raises ProjectError naming the JSON path."""
    from orbitdesk.document.project import _REQUIRED, ProjectError, _expected, _fields, _named, _num, _sub, _text

    def numbers(x, p, limit=MAX_ROWS):
        if not isinstance(x, list):
            raise _expected("an array of numbers", x, p)
        if len(x) > limit:
            raise ProjectError(p, f"too many values ({len(x)}, limit {limit})")
        return np.array([_num(a, _sub(p, i)) for i, a in enumerate(x)], dtype=float)

    def opt_numbers(x, p):
        return None if x is None else numbers(x, p)

    def name(x, p, empty=True):
        x = _text(x, p, 100)
        if (x or not empty) and not _NAME_RE.fullmatch(x):
            raise ProjectError(p, "not a valid name (letters, digits, _ and trailing primes only)")
        return x

    def column(x, p):
        c = _fields(x, p, {"name": (lambda a, q: name(a, q, False), _REQUIRED),
                           "unit": (lambda a, q: _text(a, q, MAX_LABEL), ""), "target": (name, ""),
                           "weight": (_num, 1.0), "values": (numbers, _REQUIRED), "sd": (opt_numbers, None)}, warnings)
        if c["weight"] <= 0:
            raise ProjectError(_sub(p, "weight"), "must be positive")
        if c["sd"] is not None:
            if c["sd"].size != c["values"].size:
                raise ProjectError(_sub(p, "sd"), "must have as many values as 'values'")
            if np.any(c["sd"] <= 0):
                raise ProjectError(_sub(p, "sd"), "standard deviations must be positive")
        return DataColumn(c["name"], c["values"], c["unit"], c["target"], c["sd"], c["weight"])

    def dataset(x, p):
        f = _fields(x, p, {"name": (lambda a, q: _text(a, q, MAX_LABEL), _REQUIRED),
                           "source": (lambda a, q: _text(a, q, 1000), ""),
                           "sha256": (lambda a, q: _text(a, q, 64), ""),
                           "time_label": (lambda a, q: _text(a, q, MAX_LABEL), "t"),
                           "time": (numbers, _REQUIRED), "columns": (_list(column, MAX_COLUMNS), _REQUIRED),
                           "initial": (_named(_num), {}), "parameters": (_named(_num), {})}, warnings)
        if f["sha256"] and not _CHECKSUM_RE.fullmatch(f["sha256"]):
            raise ProjectError(_sub(p, "sha256"), "expected 64 lowercase hexadecimal digits")
        t = f["time"]
        if t.size == 0:
            raise ProjectError(_sub(p, "time"), "no samples")
        bad = np.flatnonzero(np.diff(t) <= 0)
        if bad.size:
            raise ProjectError(_sub(_sub(p, "time"), int(bad[0]) + 1), "the time does not increase")
        for i, c in enumerate(f["columns"]):
            if c.values.size != t.size:
                raise ProjectError(_sub(_sub(_sub(p, "columns"), i), "values"),
                                   f"{c.values.size} values for {t.size} times")
        try:
            _check_targets(f["columns"])
        except DataError as e:
            raise ProjectError(_sub(p, "columns"), e.message) from None
        if not f["columns"]:
            raise ProjectError(_sub(p, "columns"), "no measured column")
        return DataSet(f["name"], t, f["columns"], f["time_label"], f["source"], f["sha256"], f["initial"],
                       f["parameters"])

    def _list(check, limit):
        def check_list(x, p):
            if not isinstance(x, list):
                raise _expected("an array", x, p)
            if len(x) > limit:
                raise ProjectError(p, f"too many entries ({len(x)}, limit {limit})")
            return [check(a, _sub(p, i)) for i, a in enumerate(x)]
        return check_list

    sets = _list(dataset, MAX_DATASETS)(v, path)
    names = set()
    for i, d in enumerate(sets):
        if d.name in names:
            raise ProjectError(_sub(_sub(path, i), "name"), f"a second data set named {d.name!r}")
        names.add(d.name)
    return sets


def unique_name(name: str, taken) -> str:
    taken = set(taken)
    if name not in taken:
        return name
    k = 2
    while f"{name} ({k})" in taken:
        k += 1
    return f"{name} ({k})"
