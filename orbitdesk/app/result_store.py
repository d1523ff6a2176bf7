"""Computed results kept in the project file, so that reopening a project shows them again.

``pack`` turns a core result dataclass (fields of numbers, text, lists, numpy arrays and lists of small
records such as the attractors of a basin map) into plain JSON data (NaN and infinities as null);
``unpack`` rebuilds it, refusing anything that does not fit the dataclass. Nothing read back is ever run:
only numbers, text, lists and records of them (two levels deep at most) are accepted.
"""

from __future__ import annotations

import dataclasses
import hashlib
import math

import numpy as np

RESULTS_KEY = "_results"      # in Project.views, beside the views' own settings
MAX_NUMBERS = 400_000         # a result larger than this is not kept (the file stays small)
_KINDS = {"f": float, "i": int, "U": str, "b": bool}


def text_digest(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


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
