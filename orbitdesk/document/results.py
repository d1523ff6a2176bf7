"""Computed results of the open project, each kept once, in the live document (headless, no Qt).

A result is kept under its kind (``KINDS``: which core dataclass it is, and which view shows it) with
what it was computed for (``Basis``: parameter values, initial values, the model text's digest and, for
results that depend on them, the solver settings). It is stale when the document's model or values
differ from that basis (a swept parameter is left out of the comparison); a stale result is kept and
shown with a note, never silently replaced. ``LiveDocument`` (document/live.py) holds a ``Results``,
announces every change with its ``result`` event, and writes the results into the project file (under
``RESULTS_KEY`` in ``Project.views``) and reads them back with the same stale rule.

``pack`` turns a result dataclass (fields of numbers, text, lists, numpy arrays and lists of small records
such as the attractors of a basin map) into plain JSON data (NaN and infinities as null); ``unpack``
rebuilds it, refusing anything that does not fit the dataclass. Nothing read back is ever run: only
numbers, text, lists and records of them (two levels deep at most) are accepted. A result made of nested
parts (the bifurcation diagram's branches, a fit's estimates) gives its own plain form: a ``to_saved()``
method and a ``from_saved(data)`` classmethod that reads numbers and text back (KeyError, TypeError or
ValueError when they do not fit); ``pack`` checks that form is plain JSON data (``MAX_DEPTH`` levels,
``MAX_NUMBERS`` values) and ``unpack`` checks it again before ``from_saved`` reads it.
"""

from __future__ import annotations

import dataclasses
import hashlib
import importlib
import math

import numpy as np

RESULTS_KEY = "_results"      # in Project.views, beside the views' own settings
MAX_NUMBERS = 400_000         # a result larger than this is not kept in the file (the file stays small)
MAX_DEPTH = 8                 # nesting of a result's own plain form (to_saved)
_KINDS = {"f": float, "i": int, "U": str, "b": bool}

# kind (= the id of the view that shows it) -> the core dataclasses it may be (module, class name),
# imported when first needed; a file names the class (the first when it names none)
KINDS = {
    "sweep": (("orbitdesk.analyses.sweep", "SweepResult"),),
    "lyapunov": (("orbitdesk.analyses.lyapunov", "LyapunovResult"),),
    "sections": (("orbitdesk.analyses.sections", "SectionResult"),),
    "basins": (("orbitdesk.analyses.basins", "BasinResult"),),
    "parameter_map": (("orbitdesk.analyses.parameter_maps", "PeriodGrid"),
                      ("orbitdesk.analyses.sweep", "LyapunovGrid")),
    "bifurcation": (("orbitdesk.analyses.continuation.results", "ContinuationResult"),),
    "bifurcation_locus": (("orbitdesk.analyses.continuation.results", "Locus"),),   # the two-parameter tab
    "fit": (("orbitdesk.analyses.fitting", "FitResult"),),
}


def result_class(kind: str, name: str | None = None):
    """The core dataclass of a result of ``kind`` called ``name`` (None: the kind's first); None if unknown."""
    for module, class_name in KINDS[kind]:
        if name is None or name == class_name:
            return getattr(importlib.import_module(module), class_name)
    return None


def text_digest(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


# ---------------------------------------------------------------- what a result was computed for

@dataclasses.dataclass
class Basis:
    """The model and values a result was computed for. ``skip``: parameters the result runs over (a sweep's
    parameter, a map's two axes), left out of the comparison; ``solver``: the solver settings as a list,
    None for results that do not depend on them; ``initial`` None for results that do not depend on the
    initial values (continuation: the state only picks where the search starts); ``data``: the data sets
    the result was computed from (a fit), name -> digest (datasets.dataset_digest; None: no data)."""
    params: dict
    initial: dict | None
    model: str | None            # digest of the model text of the system used (None: unknown)
    solver: list | None = None
    skip: tuple = ()
    data: dict | None = None

    def compared(self) -> tuple:
        return ({n: v for n, v in self.params.items() if n not in self.skip}, self.initial, self.model,
                self.solver, self.data)

    def to_json(self) -> dict:
        return {"params": dict(self.params), "initial": None if self.initial is None else dict(self.initial),
                "model": self.model,
                "solver": self.solver, "skip": list(self.skip), "data": self.data}

    @classmethod
    def from_json(cls, d) -> "Basis | None":
        """The basis stored in a project file, or None when it does not fit (results without one are dropped)."""
        if not isinstance(d, dict):
            return None
        params, initial = d.get("params"), d.get("initial")
        if not (_number_table(params) and (initial is None or _number_table(initial))):
            return None
        model, solver, skip, data = d.get("model"), d.get("solver"), d.get("skip", ()), d.get("data")
        if skip is None:
            skip = ()
        if isinstance(skip, str):          # files of earlier versions wrote one skipped name as text
            skip = (skip,)
        if not isinstance(model, (str, type(None))) or not (
                solver is None or (isinstance(solver, list) and all(isinstance(v, _SCALARS) for v in solver))) \
                or not (isinstance(skip, (list, tuple)) and all(isinstance(n, str) for n in skip)) \
                or not (data is None or (isinstance(data, dict) and all(
                    isinstance(k, str) and isinstance(v, (str, type(None))) for k, v in data.items()))):
            return None
        return cls(dict(params), None if initial is None else dict(initial), model, None if solver is None else list(solver), tuple(skip),
                   None if data is None else dict(data))


def _number_table(d) -> bool:
    return isinstance(d, dict) and all(isinstance(k, str) and isinstance(v, (int, float)) and not isinstance(v, bool)
                                       for k, v in d.items())


def _number(x) -> str:
    text = f"{float(x):.6g}"
    return "0" if text == "-0" else text.replace("-", "−")


def stale_words(then: Basis | None, now: Basis | None) -> str:
    """Plain words for a result computed for ``then`` shown while ``now`` holds ("" when it is current):
    "Computed for r = 28 (now 30); other initial values"."""
    if then is None or now is None or then.compared() == now.compared():
        return ""
    parts = []
    if then.model != now.model:
        parts.append("an earlier version of the model")
    changed = [n for n, v in then.params.items() if n not in then.skip and n in now.params and now.params[n] != v]
    if changed:
        parts.append(", ".join(f"{n} = {_number(then.params[n])} (now {_number(now.params[n])})"
                               for n in changed[:3]) + (", …" if len(changed) > 3 else ""))
    if then.initial != now.initial:
        parts.append("other initial values")
    if then.solver != now.solver:
        parts.append("other solver settings")
    if then.data != now.data:
        gone = [n for n in then.data or {} if (now.data or {}).get(n) is None]
        edited = [n for n in then.data or {} if n not in gone and then.data[n] != now.data[n]]
        if edited:
            parts.append("an earlier version of the data " + ", ".join(edited[:3]))
        if gone:
            parts.append("the data " + ", ".join(gone[:3]) + " (now removed)")
    return "Computed for " + ("; ".join(parts) if parts else "other values")


# ---------------------------------------------------------------- results of earlier files

VIEW_HELD = ("branches", "response", "stepped_sweeps", "locus", "notes")  # the bifurcation view held its results


def results_from_view_settings(settings, params: dict, model_text: str) -> tuple[dict, dict]:
    """Files of earlier versions kept the bifurcation diagram's branches (and its two-parameter curve) in the
    view's own settings: (the view's settings without them, the results data for ``Results.load_json``),
    computed for the file's ``params`` and model (the initial values only picked where the search started).
    Plain data moved, nothing rebuilt here (that happens on first read, by the same checks as any result)."""
    if not isinstance(settings, dict) or not any(settings.get(k) for k in VIEW_HELD):
        return settings, {}
    settings = dict(settings)
    held = {k: settings.pop(k) for k in VIEW_HELD if k in settings}
    numbers = {n: float(v) for n, v in params.items() if isinstance(v, (int, float)) and not isinstance(v, bool)}
    digest = text_digest(model_text)
    out = {}
    if held.get("branches") or held.get("response"):
        data = {k: held[k] for k in ("branches", "response", "stepped_sweeps", "notes") if k in held}
        data.update({k: settings[k] for k in ("follow", "parameter", "from", "to") if k in settings})
        out["bifurcation"] = {"for": Basis(numbers, None, digest, None, (str(settings.get("parameter", "")),)).to_json(),
                              "class": "ContinuationResult", "data": {"saved": data}}
    locus = held.get("locus")
    if isinstance(locus, dict) and locus:
        names = locus.get("parameters")
        skip = tuple(str(n) for n in names) if isinstance(names, list) else ()
        out["bifurcation_locus"] = {"for": Basis(numbers, None, digest, None, skip).to_json(), "class": "Locus",
                                    "data": {"saved": locus}}
    return settings, out


# ---------------------------------------------------------------- the document's results

@dataclasses.dataclass
class Kept:
    value: object   # the core result dataclass (None until first read: ``data`` holds the file's form)
    basis: Basis
    data: dict | None = None   # {"class", "data"} as read from a project file, rebuilt on first read


class Results:
    """The kept results by kind. The live document owns one and announces changes; this class only keeps
    them and turns them into project data and back."""

    def __init__(self):
        self._kept: dict[str, Kept] = {}
        self._foreign: dict = {}   # results of kinds this version does not know, kept as they were in the file

    def get(self, kind: str):
        """The result of ``kind``; one read from a file is rebuilt here, on first use (so that opening a
        project imports no analysis module), and dropped if it does not fit its class."""
        kept = self._kept.get(kind)
        if kept is not None and kept.value is None:
            name = kept.data.get("class")
            cls = result_class(kind, name if isinstance(name, str) else None)
            kept.value = None if cls is None else unpack(cls, kept.data.get("data"))
            kept.data = None
            if kept.value is None:
                del self._kept[kind]
                return None
        return None if kept is None else kept.value

    def basis(self, kind: str) -> Basis | None:
        kept = self._kept.get(kind)
        return None if kept is None else kept.basis

    def kinds(self) -> list[str]:
        return list(self._kept)

    def set(self, kind: str, value, basis: Basis) -> None:
        if kind not in KINDS:
            raise KeyError(f"not a kind of result: {kind}")
        if value is None:
            self._kept.pop(kind, None)
        else:
            self._kept[kind] = Kept(value, basis)

    def clear(self) -> list[str]:
        """Forget every result (another project is opened); returns the kinds that were kept."""
        kinds = list(self._kept)
        self._kept, self._foreign = {}, {}
        return kinds

    def to_json(self) -> dict:
        """Every result small enough to keep, as plain data for the project file."""
        out = dict(self._foreign)
        for kind, kept in self._kept.items():
            if kept.value is None:   # read from the file and not used since: written back as it was
                out[kind] = {"for": kept.basis.to_json(), **kept.data}
                continue
            data = pack(kept.value)
            if data is not None:
                out[kind] = {"for": kept.basis.to_json(), "class": type(kept.value).__name__, "data": data}
        return out

    def load_json(self, data) -> list[str]:
        """Results read from a project file (anything that does not fit is left out); returns the kinds read."""
        self.clear()
        for kind, d in (data.items() if isinstance(data, dict) else ()):
            if kind not in KINDS:
                if isinstance(kind, str):
                    self._foreign[kind] = d
                continue
            if not isinstance(d, dict):
                continue
            basis = Basis.from_json(d.get("for"))
            if basis is None:
                continue
            if "skip" in d and not d["for"].get("skip"):   # files of earlier versions kept skip beside "for"
                basis = Basis.from_json({**d["for"], "skip": d["skip"]}) or basis
            if isinstance(d.get("data"), dict):
                self._kept[kind] = Kept(None, basis, {"class": d.get("class"), "data": d["data"]})
        return list(self._kept)


# ---------------------------------------------------------------- results as plain data

def _plain(value):
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    return value


def pack(result) -> dict | None:
    """The fields of ``result`` as JSON data, or None if it is too large or holds something else."""
    if not dataclasses.is_dataclass(result):
        return None
    if _has_own_form(type(result)):
        data = _plain_json(result.to_saved())
        return {"saved": data} if data is not None else None
    out, numbers = {}, 0
    for f in dataclasses.fields(result):
        value = getattr(result, f.name)
        if isinstance(value, np.ndarray):
            kind = value.dtype.kind
            if kind not in _KINDS:
                return None
            numbers += value.size
            out[f.name] = {"array": _plain(value.astype(_KINDS[kind]).tolist()), "kind": kind,
                           "shape": list(value.shape)}
        elif value is None or isinstance(value, (bool, int, str)):
            out[f.name] = value
        elif isinstance(value, float):
            out[f.name] = {"float": _plain(value)}
        elif isinstance(value, (list, tuple)) and all(isinstance(v, (str, int, float)) for v in value):
            out[f.name] = {"list": _plain(list(value))}
        elif isinstance(value, (list, tuple)) and all(_is_record(v) for v in value):
            out[f.name] = {"records": [_plain_record(v) for v in value]}
            numbers += sum(len(v) for v in value)
        else:
            return None
        if numbers > MAX_NUMBERS:
            return None
    return out


def unpack(cls, data):
    """A ``cls`` rebuilt from ``pack`` data, or None when the data does not fit it."""
    if not isinstance(data, dict) or not dataclasses.is_dataclass(cls):
        return None
    if _has_own_form(cls):
        saved = data.get("saved")
        if not isinstance(saved, dict) or _plain_json(saved) is None:
            return None
        try:
            return cls.from_saved(saved)
        except (KeyError, TypeError, ValueError, AttributeError, IndexError):
            return None
    values = {}
    try:
        for f in dataclasses.fields(cls):
            if f.name not in data:
                continue
            v = data[f.name]
            if isinstance(v, dict) and "array" in v:
                kind = v.get("kind")
                if kind not in _KINDS:
                    return None
                if kind == "f":
                    arr = np.array(_nan_for_none(v["array"]), dtype=float)
                else:
                    arr = np.array(v["array"], dtype=_KINDS[kind])
                values[f.name] = arr.reshape([int(n) for n in v.get("shape", arr.shape)])
            elif isinstance(v, dict) and "float" in v:
                values[f.name] = math.nan if v["float"] is None else float(v["float"])
            elif isinstance(v, dict) and "list" in v:
                values[f.name] = list(v["list"])
            elif isinstance(v, dict) and "records" in v:
                records = v["records"]
                if not isinstance(records, list) or not all(_is_record(r) for r in records):
                    return None
                values[f.name] = [dict(r) for r in records]
            elif v is None or isinstance(v, (bool, int, str)):
                values[f.name] = v
            else:
                return None
        return cls(**values)
    except (TypeError, ValueError):
        return None


_SCALARS = (str, int, float, bool, type(None))


def _has_own_form(cls) -> bool:
    return callable(getattr(cls, "to_saved", None)) and callable(getattr(cls, "from_saved", None))


def _plain_json(value) -> dict | None:
    """``value`` (a result's own plain form) with non-finite numbers as null, or None when it holds anything
    but dicts with text keys, lists, text, numbers, booleans and null, nests deeper than MAX_DEPTH or holds
    more than MAX_NUMBERS values."""
    count = 0

    def plain(v, depth):
        nonlocal count
        count += 1
        if count > MAX_NUMBERS or depth > MAX_DEPTH:
            raise ValueError
        if isinstance(v, float):
            return v if math.isfinite(v) else None
        if isinstance(v, (np.floating, np.integer, np.bool_)):
            return plain(v.item(), depth)
        if isinstance(v, _SCALARS):
            return v
        if isinstance(v, (list, tuple)):
            return [plain(x, depth + 1) for x in v]
        if isinstance(v, dict) and all(isinstance(k, str) for k in v):
            return {k: plain(x, depth + 1) for k, x in v.items()}
        raise ValueError

    try:
        out = plain(value, 0)
    except (ValueError, RecursionError):
        return None
    return out if isinstance(out, dict) else None


def _is_record(value, depth: int = 0) -> bool:
    """A dict with text keys whose values are numbers, text, None, or (one level down) such a dict."""
    return isinstance(value, dict) and len(value) <= 1000 and all(
        isinstance(k, str) and (isinstance(v, _SCALARS) or (depth == 0 and _is_record(v, 1)))
        for k, v in value.items())


def _plain_record(record: dict) -> dict:
    """A record with its non-finite numbers as null (JSON has none)."""
    return {k: _plain_record(v) if isinstance(v, dict) else _plain(v) for k, v in record.items()}


def _nan_for_none(v):
    if isinstance(v, list):
        return [_nan_for_none(x) for x in v]
    return math.nan if v is None else v
