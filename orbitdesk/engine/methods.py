"""The one registry of integration methods.

Every method is declared here once; the engine, project validation, the app's method menu, the
exported script, the report and the command line read this table. Adding a method means one entry
here, its stepper in this package (``explicit_rk.py`` for an explicit Runge-Kutta pair, ``stiff.py``
for a scipy stiff solver) and its tests; DEVELOPERS.md walks through it.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Method:
    name: str  # stored in projects and walkthroughs, typed on the command line
    label: str  # what the method menu and the report show
    order: int
    adaptive: bool
    stiff: bool
    family: str  # "explicit_rk" (the compiled loop of explicit_rk.py), "stiff" (scipy, stiff.py)
    scipy_name: str | None  # the scipy solve_ivp method the exported script uses (None: a loop in the script)
    tableau: str | None = None  # explicit_rk: the tableau's name in explicit_rk.KINDS

    @property
    def summary(self) -> str:
        step = "adaptive" if self.adaptive else "fixed step"
        return f"{self.label} ({step}, order {self.order}{', for stiff systems' if self.stiff else ''})"


METHODS: dict[str, Method] = {m.name: m for m in (
    Method("dop853", "Dormand–Prince 8(5,3)", 8, True, False, "explicit_rk", "DOP853", "dop853"),
    Method("rk45", "Dormand–Prince 5(4)", 5, True, False, "explicit_rk", "RK45", "dopri5"),
    Method("stiff", "Radau IIA (implicit)", 5, True, True, "stiff", "Radau"),
    Method("bdf", "BDF (implicit, variable order)", 5, True, True, "stiff", "BDF"),
    Method("rk4", "Classical Runge–Kutta", 4, False, False, "explicit_rk", None, "rk4"),
)}
NAMES = tuple(METHODS)
DEFAULT = "dop853"


def method(name: str) -> Method:
    """The method called ``name``; ValueError naming the choices otherwise."""
    try:
        return METHODS[name]
    except (KeyError, TypeError):
        raise ValueError(f"unknown method {name!r}; choose one of {', '.join(NAMES)}") from None


__all__ = ["Method", "METHODS", "NAMES", "DEFAULT", "method"]
