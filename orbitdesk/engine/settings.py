"""One settings dataclass for runs, checked when it is made.

``RunSettings`` is what the engine runs with, what a project stores under ``solver``, what a
walkthrough step may change and what the command line fills from its options. ``RULES`` is the one
table of what each field accepts; ``check_value`` applies it to one value (the project loader and
walkthroughs use it to name the field at fault), ``RunSettings(...)`` applies it to all of them.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass, fields, replace

from orbitdesk.engine.methods import DEFAULT, NAMES


class SettingsError(ValueError):
    """A setting out of its range; ``name`` is the field, the message says what it accepts."""

    def __init__(self, name: str, message: str):
        super().__init__(f"{name}: {message}")
        self.name, self.message = name, message


SCHEMES = {"milstein": "Milstein (order 1)", "euler_maruyama": "Euler–Maruyama (order 1/2)"}  # strong orders

# field: (kind, low, high, allow None); kinds: method, scheme, positive, number, nonneg, count
RULES = {
    "method": ("method", None, None, False),
    "rtol": ("positive", 1e-15, 1.0, False),
    "atol": ("positive", 1e-300, None, False),
    "max_step": ("positive", None, None, True),
    "dt": ("positive", None, None, False),
    "t_start": ("number", None, None, False),
    "t_end": ("number", None, None, False),
    "samples": ("count", 0, 10**7, False),  # 0 (or 1): every step of an adaptive method
    "steps": ("count", 1, 10**8, False),
    "bound": ("positive", None, None, False),
    "transient": ("nonneg", None, None, False),
    "scheme": ("scheme", None, None, False),  # models with noise: the fixed-step scheme (engine/stochastic.py)
    "seed": ("count", 0, 2**31 - 1, False),  # models with noise: every run from one seed is the same
    "realisations": ("count", 1, 100_000, False),
    "event_rate": ("positive", None, None, False),
}
SAVED = ("method", "rtol", "atol", "max_step", "dt", "t_start", "t_end", "samples", "steps", "transient",
         "event_rate", "scheme", "seed", "realisations")
SAVED_IF_CHANGED = ("event_rate",)  # written into a project only when it differs from the default


def check_value(name: str, value):
    """``value`` as the field ``name`` holds it; SettingsError in plain words when it does not fit."""
    if name not in RULES:
        raise SettingsError(name, "there is no such setting")
    kind, low, high, allow_none = RULES[name]
    if value is None:
        if allow_none:
            return None
        raise SettingsError(name, "a value is needed")
    if kind == "method":
        if value not in NAMES:
            raise SettingsError(name, f"expected one of {', '.join(NAMES)}, got {value!r}")
        return value
    if kind == "scheme":
        if not isinstance(value, str) or value not in SCHEMES:
            raise SettingsError(name, f"expected one of {', '.join(SCHEMES)}, got {value!r}")
        return value
    if kind == "count":
        if isinstance(value, float) and value.is_integer():
            value = int(value)
        if isinstance(value, bool) or not isinstance(value, numbers.Integral):
            raise SettingsError(name, f"expected a whole number, got {value!r}")
        if not low <= value <= high or (name == "samples" and value == 1):
            raise SettingsError(name, f"expected 0 (every step) or a number from 2 to {high}" if name == "samples"
                                else f"expected a whole number from {low} to {high}, got {value}")
        return int(value)
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise SettingsError(name, f"expected a number, got {value!r}")
    value = float(value)
    if not math.isfinite(value):
        raise SettingsError(name, f"expected a finite number, got {value}")
    if kind == "positive" and not value > 0:
        raise SettingsError(name, f"expected a positive number, got {value:g}")
    if kind == "nonneg" and value < 0:
        raise SettingsError(name, f"must not be negative, got {value:g}")
    if low is not None and value < low or high is not None and value > high:
        if high is None:
            raise SettingsError(name, f"expected a number of at least {low:g}, got {value:g}")
        if low is None:
            raise SettingsError(name, f"expected a number of at most {high:g}, got {value:g}")
        raise SettingsError(name, f"expected a number from {low:g} to {high:g}, got {value:g}")
    return value


@dataclass(frozen=True)
class RunSettings:
    method: str = DEFAULT
    rtol: float = 1e-8
    atol: float = 1e-10
    max_step: float | None = None
    dt: float = 0.01  # fixed step of rk4
    t_start: float = 0.0
    t_end: float = 100.0
    samples: int = 4000  # output points over [t_start, t_end]; 0 = every step
    steps: int = 1000  # iterations of a map
    bound: float = 1e10  # |state| beyond this counts as blow-up
    transient: float = 0.0  # output before t_start + transient is dropped
    event_rate: float = 10_000.0  # model events per unit time beyond which a run ends as chattering
    scheme: str = "milstein"  # models with noise: fixed step dt, realisations from seed
    seed: int = 1
    realisations: int = 20

    def __post_init__(self):
        for f in fields(self):
            object.__setattr__(self, f.name, check_value(f.name, getattr(self, f.name)))
        if self.t_end == self.t_start:
            raise SettingsError("t_end", "must differ from the start time")

    def replace(self, **changes) -> "RunSettings":
        """A checked copy with ``changes``."""
        return replace(self, **changes)

    def saved(self) -> dict:
        """The fields a project stores."""
        return {name: getattr(self, name) for name in SAVED
                if name not in SAVED_IF_CHANGED or getattr(self, name) != getattr(RunSettings, name)}

    @classmethod
    def from_mapping(cls, values: dict, base: "RunSettings | None" = None) -> "RunSettings":
        """``base`` (default: the defaults) with the known keys of ``values``; unknown keys raise."""
        base = base or cls()
        unknown = [k for k in values if k not in RULES]
        if unknown:
            raise SettingsError(unknown[0], "there is no such setting")
        return replace(base, **values)

    @property
    def method_info(self):
        from orbitdesk.engine.methods import method

        return method(self.method)


def defaults() -> dict:
    """Every field's default value."""
    return {f.name: f.default for f in fields(RunSettings)}


__all__ = ["RunSettings", "SettingsError", "RULES", "SAVED", "SCHEMES", "check_value", "defaults"]
