"""Published reference models as model text, for tests, benchmarks and scripts: one copy of each.

``LORENZ``, ``VAN_DER_POL``, ... are the texts with the values of the source named beside each;
``model(REFERENCE, values..., ranges=..., initial=...)`` writes a variant (other values, slider ranges,
other starts) in the same layout: the parameters, then the equations, then the initial values. Values
may be numbers or short expressions the language accepts ("8/3").
"""

from __future__ import annotations

from dataclasses import dataclass, field


@dataclass(frozen=True)
class Reference:
    name: str
    source: str                 # where the model and its values are published
    equations: tuple[str, ...]
    values: dict = field(default_factory=dict)   # parameter -> value, in the order written
    initial: dict = field(default_factory=dict)  # initial-value line's left side -> value ("x(0)", "x'(0)", "x[0]")

    @property
    def text(self) -> str:
        return model(self)


def _number(value) -> str:
    if isinstance(value, str):
        return value
    if isinstance(value, float) and value.is_integer() and abs(value) < 1e15:
        return str(int(value))
    return repr(value)


def model(ref: Reference, ranges: dict | None = None, initial: dict | None = None, **values) -> str:
    """The text of ``ref`` with ``values`` (parameter = value) and ``initial`` (left side of an initial
    line -> value; None leaves the line out) changed and slider ranges ``ranges`` (parameter -> (lo, hi))
    written after the values."""
    unknown = set(values) - set(ref.values)
    if unknown:
        raise KeyError(f"{ref.name} has no parameter(s) {', '.join(sorted(unknown))}")
    ranges = ranges or {}
    lines = []
    for name, value in {**ref.values, **values}.items():
        span = f" in [{_number(ranges[name][0])}, {_number(ranges[name][1])}]" if name in ranges else ""
        lines.append(f"{name} = {_number(value)}{span}")
    lines += ref.equations
    lines += [f"{left} = {_number(v)}" for left, v in {**ref.initial, **(initial or {})}.items() if v is not None]
    return "\n".join(lines) + "\n"


LORENZ_REF = Reference(
    "Lorenz", "Lorenz, Deterministic nonperiodic flow, J. Atmos. Sci. 20 (1963); Strogatz, Nonlinear "
    "Dynamics and Chaos, 2nd ed., sec. 9.2 (sigma = 10, r = 28, beta = 8/3)",
    ("x' = sigma*(y - x)", "y' = x*(r - z) - y", "z' = x*y - beta*z"),
    {"sigma": 10, "r": 28, "beta": "8/3"}, {"x(0)": 1, "y(0)": 1, "z(0)": 1})
VAN_DER_POL_REF = Reference(
    "Van der Pol", "van der Pol, On relaxation-oscillations, Phil. Mag. 2 (1926); Strogatz sec. 7.5",
    ("x'' = mu*(1 - x^2)*x' - x",), {"mu": 1}, {"x(0)": 0.5})
DUFFING_REF = Reference(
    "Duffing (forced, double well)", "Guckenheimer and Holmes, Nonlinear Oscillations, Dynamical Systems and "
    "Bifurcations of Vector Fields (1983), sec. 2.2 (the values delta = 0.3, omega = 1.2: from memory)",
    ("x'' = -delta*x' + x - x^3 + gamma*cos(omega*t)",), {"delta": 0.3, "gamma": 0.5, "omega": 1.2}, {"x(0)": 1})
HENON_REF = Reference(
    "Hénon", "Hénon, A two-dimensional mapping with a strange attractor, Commun. Math. Phys. 50 (1976) "
    "(a = 1.4, b = 0.3)",
    ("x[n+1] = 1 - a*x^2 + y", "y[n+1] = b*x"), {"a": 1.4, "b": 0.3}, {"x[0]": 0.1, "y[0]": 0.1})
LOGISTIC_REF = Reference(
    "logistic map", "May, Simple mathematical models with very complicated dynamics, Nature 261 (1976)",
    ("x[n+1] = r*x*(1 - x)",), {"r": 3.2}, {"x[0]": 0.2})
BRUSSELATOR_REF = Reference(
    "Brusselator", "Prigogine and Lefever, J. Chem. Phys. 48 (1968) (Hopf point at b = 1 + a^2; the "
    "citation from memory)",
    ("x' = a - (b+1)*x + x^2*y", "y' = b*x - x^2*y"), {"a": 1, "b": 2}, {})

LORENZ = LORENZ_REF.text
VAN_DER_POL = VAN_DER_POL_REF.text
DUFFING = DUFFING_REF.text
HENON = HENON_REF.text
LOGISTIC = LOGISTIC_REF.text
BRUSSELATOR = BRUSSELATOR_REF.text

REFERENCES = (LORENZ_REF, VAN_DER_POL_REF, DUFFING_REF, HENON_REF, LOGISTIC_REF, BRUSSELATOR_REF)
