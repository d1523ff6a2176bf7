"""The OrbitDesk project document: a versioned JSON file (``*.orbitdesk``).

Plain data in and out. Loading validates every field and names the JSON path of
the first problem; unknown keys are ignored and recorded in
``Project.load_warnings``. Saving is atomic and keeps ``NAME.orbitdesk.bak``; it refuses to overwrite
a file that changed on disk since it was read (``expected=``) or that is read-only, keeps hard links
joined, and cleans up temporary files of interrupted saves (see safe_files.py).
Nothing read from a file is ever executed.

Version history:
  0  ``{"format", "version": 0, "name", "equations": str, "parameters": {name: number},
     "ranges": {name: [lo, hi]}, "initial", "solver", "views"}`` (no walkthrough, no notes)
  1  current: see ``project_to_dict``. Optional ``datasets`` (measured records, see core/datasets.py) and
     ``parameter_sets`` ({name: {parameter: value}}) were added within version 1; files without them load.
"""

from __future__ import annotations

import hashlib
import json
import math
import numbers
import os
import re
import stat
from dataclasses import dataclass, field

from orbitdesk.document import safe_files
from orbitdesk.engine.settings import RULES, SAVED, RunSettings, SettingsError
from orbitdesk.document.safe_files import DiskState, current_state, state_of
from orbitdesk.engine import limits
from orbitdesk.document.view_settings import clean_settings
from orbitdesk.language.model_file import read_regular

FORMAT_NAME = "orbitdesk-project"
FORMAT_VERSION = 1
MAX_FILE_BYTES = 20 * 1024 * 1024
MAX_DEPTH = 64
MAX_TEXT = 1024 * 1024          # model text, notes, any string
MAX_KEY = 1000                  # keys of free objects
MAX_NAME = 100                  # parameter / state names
MAX_INT = 2**63
MAX_PARAMETER_SETS = 100        # kept alternative parameter sets
_NAME_RE = re.compile(r"[A-Za-z_][A-Za-z0-9_]*'*")
_PLAIN_KEY_RE = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
_TOKEN_RE = re.compile(r'"[^"\\]*(?:\\.[^"\\]*)*"|[\[\]{}]', re.S)
_REQUIRED = object()


class ProjectError(Exception):
    """A project document that cannot be read or written; ``path`` is a JSON path like ``$.solver.rtol``."""

    def __init__(self, path: str, message: str):
        super().__init__(f"{path}: {message}")
        self.path = path
        self.message = message


@dataclass
class ParameterSetting:
    value: float
    lo: float | None = None
    hi: float | None = None


@dataclass
class WalkthroughStep:
    title: str
    note: str = ""
    snapshot: dict = field(default_factory=dict)


@dataclass
class Project:
    name: str = "Untitled"
    model: str = ""
    parameters: dict[str, ParameterSetting] = field(default_factory=dict)
    initial: dict[str, float] = field(default_factory=dict)
    solver: RunSettings = field(default_factory=RunSettings)
    views: dict[str, dict] = field(default_factory=dict)
    walkthrough: list[WalkthroughStep] = field(default_factory=list)
    notes: str = ""
    datasets: list = field(default_factory=list)          # core.datasets.DataSet, measured records
    parameter_sets: dict[str, dict[str, float]] = field(default_factory=dict)  # kept alternatives (fits)
    load_warnings: list[str] = field(default_factory=list, compare=False, repr=False)


# ---------------------------------------------------------------- validation helpers

def _sub(path: str, key) -> str:
    if isinstance(key, int):
        return f"{path}[{key}]"
    if _PLAIN_KEY_RE.fullmatch(key):
        return f"{path}.{key}"
    shown = key if len(key) <= 60 else key[:60] + "..."
    return f"{path}[{json.dumps(shown)}]"


def _kind(v) -> str:
    if v is None:
        return "null"
    if isinstance(v, bool):
        return "boolean"
    if isinstance(v, numbers.Real):
        return "number"
    if isinstance(v, str):
        return "string"
    if isinstance(v, (list, tuple)):
        return "array"
    if isinstance(v, dict):
        return "object"
    return type(v).__name__


def _expected(what: str, v, path: str) -> ProjectError:
    return ProjectError(path, f"expected {what}, got {_kind(v)}")


def _text(v, path: str, limit: int = MAX_TEXT) -> str:
    if not isinstance(v, str):
        raise _expected("a string", v, path)
    if len(v) > limit:
        raise ProjectError(path, f"string too long ({len(v)} characters, limit {limit})")
    if "\x00" in v:
        raise ProjectError(path, "string contains a NUL character")
    try:
        v.encode("utf-8")
    except UnicodeEncodeError:
        raise ProjectError(path, "string contains an unpaired surrogate") from None
    return str(v)


def _obj(v, path: str) -> dict:
    if not isinstance(v, dict):
        raise _expected("an object", v, path)
    for key in getattr(v, "duplicates", ()):
        raise ProjectError(_sub(path, key), "duplicate key")
    for key in v:
        if not isinstance(key, str):
            raise ProjectError(path, f"object key {key!r} is not a string")
        _text(key, _sub(path, key), MAX_KEY)
    return v


def _num(v, path: str) -> float:
    if isinstance(v, bool) or not isinstance(v, numbers.Real):
        raise _expected("a number", v, path)
    try:
        f = float(v)
    except OverflowError:
        raise ProjectError(path, "number out of range") from None
    if not math.isfinite(f):
        raise ProjectError(path, f"expected a finite number, got {f}")
    return f


def _opt_num(v, path: str) -> float | None:
    return None if v is None else _num(v, path)


def _positive(v, path: str) -> float:
    f = _num(v, path)
    if f <= 0:
        raise ProjectError(path, f"expected a positive number, got {f}")
    return f


def _int_in(lo: int, hi: int):
    def check(v, path: str) -> int:
        if isinstance(v, float) and v.is_integer() and abs(v) <= MAX_INT:
            v = int(v)
        if isinstance(v, bool) or not isinstance(v, numbers.Integral):
            raise _expected("an integer", v, path)
        if not lo <= v <= hi:
            raise ProjectError(path, f"expected an integer from {lo} to {hi}, got {v}")
        return int(v)
    return check


def _name(key: str, path: str) -> str:
    if not (len(key) <= MAX_NAME and _NAME_RE.fullmatch(key)):
        raise ProjectError(_sub(path, key), "not a valid name (letters, digits, _ and trailing primes only)")
    return key


def _free(v, path: str, depth: int = 0):
    """Deep-copy a free JSON value into plain dict/list/str/int/float/bool/None, validating it."""
    if depth > MAX_DEPTH:
        raise ProjectError(path, f"nested deeper than {MAX_DEPTH} levels")
    if v is None or isinstance(v, bool):
        return v
    if isinstance(v, numbers.Integral):
        if abs(v) > MAX_INT:
            raise ProjectError(path, "integer out of range")
        return int(v)
    if isinstance(v, numbers.Real):
        return _num(v, path)
    if isinstance(v, str):
        return _text(v, path)
    if isinstance(v, (list, tuple)):
        return [_free(x, _sub(path, i), depth + 1) for i, x in enumerate(v)]
    if isinstance(v, dict):
        return {k: _free(x, _sub(path, k), depth + 1) for k, x in _obj(v, path).items()}
    raise _expected("a JSON value", v, path)


def _free_obj(v, path: str) -> dict:
    return _free(_obj(v, path), path)


def _fields(v, path: str, schema: dict, warnings: list[str]) -> dict:
    """Check object ``v`` against ``schema`` {key: (check, default)}; unknown keys become warnings."""
    obj = _obj(v, path)
    for key in obj:
        if key not in schema:
            warnings.append(f"{_sub(path, key)}: unknown key ignored")
    out = {}
    for key, (check, default) in schema.items():
        if key in obj:
            out[key] = check(obj[key], _sub(path, key))
        elif default is _REQUIRED:
            raise ProjectError(_sub(path, key), "missing")
        else:
            out[key] = default
    return out


def _named(check):
    def check_map(v, path: str) -> dict:
        return {_name(k, path): check(x, _sub(path, k)) for k, x in _obj(v, path).items()}
    return check_map


# ---------------------------------------------------------------- dict <-> Project

def _migrate_v0(d: dict, warnings: list[str]) -> dict:
    """Version 0 -> 1: ``equations`` becomes ``model``; plain parameter numbers plus ``ranges`` become settings."""
    d = dict(d)
    if "equations" in d:
        d["model"] = _text(d.pop("equations"), "$.equations")
    ranges = _obj(d.pop("ranges", {}), "$.ranges")
    params = {}
    for k, v in _obj(d.get("parameters", {}), "$.parameters").items():
        params[k] = {"value": _num(v, _sub("$.parameters", k))}
    for k, r in ranges.items():
        p = _sub("$.ranges", k)
        if not (isinstance(r, list) and len(r) == 2):
            raise _expected("an array [lo, hi]", r, p)
        if k not in params:
            warnings.append(f"{p}: range for unknown parameter ignored")
            continue
        params[k]["lo"], params[k]["hi"] = _opt_num(r[0], _sub(p, 0)), _opt_num(r[1], _sub(p, 1))
    d["parameters"] = params
    d["version"] = 1
    return d


_MIGRATIONS = {0: _migrate_v0}


def project_from_dict(d) -> Project:
    """Validate (and migrate, if older) a decoded document; raises ProjectError naming the JSON path."""
    warnings: list[str] = []
    d = _obj(d, "$")
    if "format" not in d:
        raise ProjectError("$.format", "missing (this is not an OrbitDesk project)")
    if d["format"] != FORMAT_NAME:
        raise ProjectError("$.format", f"expected {FORMAT_NAME!r}, got {_text(d['format'], '$.format', 200)!r}")
    if "version" not in d:
        raise ProjectError("$.version", "missing")
    version = d["version"]
    if isinstance(version, bool) or not isinstance(version, int):
        raise _expected("an integer", version, "$.version")
    if version < 0:
        raise ProjectError("$.version", f"unknown project format version {version}")
    if version > FORMAT_VERSION:
        raise ProjectError("$.version", f"this file is project format version {version}, but this OrbitDesk "
                           f"only understands up to version {FORMAT_VERSION}; open it with a newer OrbitDesk")
    while version < FORMAT_VERSION:
        d = _MIGRATIONS[version](d, warnings)
        version += 1

    def solver(v, path):
        values = {}
        for key, x in _obj(v, path).items():
            if key not in SAVED:
                warnings.append(f"{_sub(path, key)}: unknown key ignored")
                continue
            kind = RULES[key][0]
            if x is not None and kind == "count":
                x = _int_in(-MAX_INT, MAX_INT)(x, _sub(path, key))
            elif x is not None and kind not in ("method", "scheme"):
                x = _num(x, _sub(path, key))
            values[key] = x
        try:
            settings = RunSettings.from_mapping(values)
            limits.check_run_settings(settings)  # stored steps and times that would make a run endless
        except SettingsError as problem:
            raise ProjectError(_sub(path, problem.name), problem.message) from None
        except limits.LimitExceeded as problem:
            raise ProjectError(path, str(problem)) from None
        return settings

    def parameter(v, path):
        p = ParameterSetting(**_fields(v, path, {"value": (_num, _REQUIRED), "lo": (_opt_num, None),
                                                 "hi": (_opt_num, None)}, warnings))
        if p.lo is not None and p.hi is not None and p.lo > p.hi:
            raise ProjectError(_sub(path, "hi"), f"range upper bound {p.hi} is below lower bound {p.lo}")
        return p

    def step(v, path):
        return WalkthroughStep(**_fields(v, path, {"title": (_text, _REQUIRED), "note": (_text, ""),
                                                   "snapshot": (_free_obj, {})}, warnings))

    def steps(v, path):
        if not isinstance(v, (list, tuple)):
            raise _expected("an array", v, path)
        return [step(x, _sub(path, i)) for i, x in enumerate(v)]

    def views(v, path):
        out = {}
        for k, x in _obj(v, path).items():
            # every view setting is checked and clamped here, once (a count of 3e9, a range of 1e308)
            out[k], notes = clean_settings(k, _free_obj(x, _sub(path, k)))
            warnings.extend(f"{path}.{note}" for note in notes)
        return out

    def datasets(v, path):
        from orbitdesk.document.datasets import datasets_from_json
        return datasets_from_json(v, path, warnings)

    def parameter_sets(v, path):
        obj = _obj(v, path)
        if len(obj) > MAX_PARAMETER_SETS:
            raise ProjectError(path, f"too many parameter sets ({len(obj)}, limit {MAX_PARAMETER_SETS})")
        return {_text(k, _sub(path, k), MAX_NAME): _named(_num)(x, _sub(path, k)) for k, x in obj.items()}

    const = lambda v, p: v  # noqa: E731  (format/version already checked)
    f = _fields(d, "$", {
        "format": (const, None), "version": (const, None), "name": (_text, "Untitled"), "model": (_text, ""),
        "parameters": (_named(parameter), {}), "initial": (_named(_num), {}), "solver": (solver, RunSettings()),
        "views": (views, {}), "walkthrough": (steps, []), "notes": (_text, ""),
        "datasets": (datasets, []), "parameter_sets": (parameter_sets, {})}, warnings)
    del f["format"], f["version"]
    return Project(**f, load_warnings=warnings)


def _datasets_json(sets) -> dict:
    if not sets:
        return {}
    from orbitdesk.document.datasets import dataset_to_json  # only when there are data sets: project.py stands alone otherwise
    return {"datasets": [dataset_to_json(d) for d in sets]}


def _raw(p: Project) -> dict:
    try:
        return {
            "format": FORMAT_NAME, "version": FORMAT_VERSION, "name": p.name, "model": p.model,
            "parameters": {k: {"value": v.value, "lo": v.lo, "hi": v.hi} for k, v in p.parameters.items()},
            "initial": dict(p.initial),
            "solver": p.solver.saved(),
            "views": dict(p.views),
            "walkthrough": [{"title": w.title, "note": w.note, "snapshot": w.snapshot} for w in p.walkthrough],
            "notes": p.notes,
            **_datasets_json(p.datasets),
            **({"parameter_sets": {k: dict(v) for k, v in p.parameter_sets.items()}} if p.parameter_sets else {}),
        }
    except (AttributeError, TypeError) as e:
        raise ProjectError("$", f"not a valid Project: {e}") from None


def project_to_dict(p: Project) -> dict:
    """Return the current-version document for ``p`` as plain JSON data; raises ProjectError if ``p`` is invalid."""
    return _raw(project_from_dict(_raw(p)))  # validating round trip: never emit what we would refuse to load


# ---------------------------------------------------------------- text and files

class _DupDict(dict):
    """A decoded JSON object that had repeated keys (reported by ``_obj`` with their path)."""
    duplicates: tuple = ()


def _pairs(pairs):
    obj, dups = {}, []
    for k, v in pairs:
        if k in obj:
            dups.append(k)
        obj[k] = v
    if dups:
        obj = _DupDict(obj)
        obj.duplicates = dups
    return obj


def dumps(p: Project) -> str:
    """Serialise a project to JSON text (validated, UTF-8 safe, no NaN/Infinity)."""
    return json.dumps(project_to_dict(p), indent=2, ensure_ascii=False, allow_nan=False) + "\n"


def loads(text: str) -> Project:
    """Parse JSON text into a Project; raises ProjectError for bad JSON (with line:column) or bad structure."""
    if not isinstance(text, str):
        raise ProjectError("$", f"expected text, got {type(text).__name__}")
    if len(text) > MAX_FILE_BYTES:
        raise ProjectError("$", f"document too large ({len(text)} characters, limit {MAX_FILE_BYTES})")
    text = text.removeprefix("\ufeff")
    if "\x00" in text:
        raise ProjectError("$", "contains NUL characters (not a text file)")
    depth = 0
    for m in _TOKEN_RE.finditer(text):
        c = m.group()
        if c in "[{":
            depth += 1
            if depth > MAX_DEPTH:
                line = text.count("\n", 0, m.start()) + 1
                col = m.start() - text.rfind("\n", 0, m.start())
                raise ProjectError("$", f"JSON nested deeper than {MAX_DEPTH} levels at line {line} column {col}")
        elif c in "]}":
            depth -= 1
    try:
        data = json.loads(text, object_pairs_hook=_pairs, parse_constant=float)
    except json.JSONDecodeError as e:
        raise ProjectError("$", f"not valid JSON: {e.msg} at line {e.lineno} column {e.colno}") from None
    except (ValueError, RecursionError) as e:  # e.g. integers with too many digits
        raise ProjectError("$", f"not valid JSON: {e}") from None
    return project_from_dict(data)


def _read(path: str) -> tuple[bytes, os.stat_result] | None:
    """Bytes of a regular file and its fstat (None if it does not exist), refusing oversized or special
    files (a FIFO, device, socket or folder unopened)."""
    try:
        data, st = read_regular(path, MAX_FILE_BYTES)
    except FileNotFoundError:
        return None
    except OSError as e:
        raise ProjectError("$", f"cannot read {path!r}: {e.strerror or e}") from None
    except ValueError as e:
        raise ProjectError("$", f"cannot read {path!r}: {e}") from None
    if len(data) > MAX_FILE_BYTES:
        raise ProjectError("$", f"file too large (over {MAX_FILE_BYTES} bytes): {path!r}")
    return data, st


def _decode(data: bytes) -> Project:
    nul = data.find(b"\x00")
    if nul >= 0:
        raise ProjectError("$", f"contains NUL bytes (first at byte {nul}); not a project file")
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as e:
        raise ProjectError("$", f"not valid UTF-8 text (bad byte at offset {e.start})") from None
    return loads(text)


def load_with_state(path) -> tuple[Project, DiskState]:
    """Read and validate a project file; also returns what the file was (for ``save(expected=...)``)."""
    path = os.fspath(path)
    got = _read(path)
    if got is None:
        raise ProjectError("$", f"cannot read {path!r}: no such file")
    return _decode(got[0]), state_of(*got)


def load(path) -> Project:
    """Read and validate a project file; never modifies the file. Raises ProjectError on any problem."""
    return load_with_state(path)[0]


class _Unchecked:
    def __repr__(self) -> str:
        return "UNCHECKED"


UNCHECKED = _Unchecked()  # ``save(expected=UNCHECKED)``: overwrite whatever is on disk


class ProjectConflict(ProjectError):
    """The file changed on disk since it was read or last written (another window or program wrote it)."""

    def __init__(self, target: str, expected: DiskState | None, current: DiskState | None):
        name = os.path.basename(target)
        if current is None:
            what = f"{name} was removed or renamed since it was opened or last saved"
        elif expected is None:
            what = f"{name} was created by someone else in the meantime"
        else:
            what = f"{name} was changed on disk since it was opened or last saved (by another window or program)"
        super().__init__("$", f"{what}; it was not overwritten")
        self.target, self.expected, self.current = target, expected, current


class ProjectReadOnly(ProjectError):
    """The file is marked read-only; it is replaced only with ``overwrite_read_only=True``."""

    def __init__(self, target: str):
        super().__init__("$", f"{os.path.basename(target)} is read-only; it was not overwritten")
        self.target = target


def disk_state(path) -> DiskState | None:
    """What the file at ``path`` is now (None if there is none); raises ProjectError if it cannot be read."""
    try:
        return current_state(os.path.realpath(os.fspath(path)))
    except (OSError, ValueError) as e:
        raise ProjectError("$", f"cannot read {os.fspath(path)!r}: {getattr(e, 'strerror', None) or e}") from None


def check_unchanged(path, expected: DiskState | None) -> None:
    """Raise ProjectConflict unless the file still holds what ``expected`` recorded (None: no file)."""
    current = disk_state(path)
    if not _unchanged(expected, current):
        raise ProjectConflict(os.path.realpath(os.fspath(path)), expected, current)


def _unchanged(expected: DiskState | None, current: DiskState | None) -> bool:
    return current is None if expected is None else expected.same_content(current)


def remove_stale_temps(path) -> list[str]:
    """Remove temporary files that interrupted saves of this project left beside it (and its backup)."""
    return safe_files.remove_stale_temps(os.path.realpath(os.fspath(path)))


def save(path, p: Project, *, force: bool = False, expected=UNCHECKED,
         overwrite_read_only: bool = False) -> DiskState:
    """Write ``p`` to ``path`` safely, first copying the previous document to ``path + '.bak'``; returns
    what the file now is.

    - ``expected``: what the file was when it was read or last saved (``load_with_state``, or None for
      "no file"); if the file differs now, ProjectConflict is raised and nothing is written.
    - A read-only file raises ProjectReadOnly unless ``overwrite_read_only=True`` (its mode is kept).
    - An existing file that is not a valid project is not overwritten unless ``force=True`` (then the
      old ``.bak`` is left alone).
    - Normally: temporary file in the same folder, fsync, rename, fsync the folder. A file with other
      hard links is rewritten in place after the backup, so the links stay joined.
    - Temporary files left by earlier interrupted saves of this file are removed.
    On failure raises ProjectError and the old file is intact.
    """
    target = os.path.realpath(os.fspath(path))
    data = dumps(p).encode("utf-8")
    safe_files.remove_stale_temps(target)
    got = _read(target)
    old = got[0] if got is not None else None
    if expected is not UNCHECKED:
        state = state_of(*got) if got is not None else None
        if not _unchanged(expected, state):
            raise ProjectConflict(target, expected, state)
    if old is not None:
        try:
            _decode(old)
        except ProjectError as e:
            if not force:
                raise ProjectError(e.path, f"refusing to overwrite {target!r}, which is not a readable project "
                                   f"({e.message}); save elsewhere or pass force=True") from None
            old = None  # never back up an unreadable document
    try:
        st = os.stat(target)
    except FileNotFoundError:
        st = None
    except OSError as e:
        raise ProjectError("$", f"could not save {target!r}: {e.strerror or e}") from None
    if st is not None and not overwrite_read_only and safe_files.is_read_only(target, st):
        raise ProjectReadOnly(target)
    mode = stat.S_IMODE(st.st_mode) if st is not None else None
    try:
        if old is not None:
            safe_files.atomic_write(target + ".bak", old, mode)
        if st is not None and st.st_nlink > 1 and old is not None:
            safe_files.write_in_place(target, data)
        else:
            safe_files.atomic_write(target, data, mode)
        written = os.stat(target)
    except OSError as e:
        raise ProjectError("$", f"could not save {target!r}: {e.strerror or e}") from e
    return DiskState(written.st_mtime_ns, len(data), hashlib.sha256(data).hexdigest())
