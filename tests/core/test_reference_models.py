"""The shared reference models (orbitdesk/samples/models.py) are the published systems they name: their
rest points against closed forms, and variants written the same way."""

import math

import numpy as np
import pytest

from orbitdesk.analyses.equilibria import find_equilibria
from orbitdesk.language.model import parse_model
from orbitdesk.samples.models import (BRUSSELATOR, HENON, LOGISTIC, LORENZ, LORENZ_REF, REFERENCES, VAN_DER_POL,
                                      model)
from orbitdesk.system.compiled_system import compile_model


def points(text):
    """The rest points (flat, sorted by their coordinates)."""
    system = compile_model(parse_model(text))
    return [v for p in sorted(tuple(float(x) for x in e.vector) for e in find_equilibria(system)) for v in p]


def flat(pts):
    return [float(v) for p in sorted(pts) for v in p]


@pytest.mark.parametrize("ref", REFERENCES, ids=lambda r: r.name)
def test_every_reference_parses_cleanly_and_names_its_source(ref):
    parsed = parse_model(ref.text)
    loud = [d.format() for d in parsed.diagnostics if d.severity != "info"]  # info: "starts at 0"
    assert parsed.ok and not loud, (ref.name, loud)
    assert len(ref.source) > 20


def test_rest_points_match_the_closed_forms():
    # Lorenz: origin and (±sqrt(beta (r-1)), ±sqrt(beta (r-1)), r-1) (Strogatz sec. 9.2)
    c = math.sqrt(8 / 3 * 27)
    assert points(LORENZ) == pytest.approx(flat([(0, 0, 0), (c, c, 27), (-c, -c, 27)]), abs=1e-8)
    # Hénon: x = (-(1-b) ± sqrt((1-b)^2 + 4a)) / 2a, y = b x (Hénon 1976)
    a, b = 1.4, 0.3
    xs = [(-(1 - b) + s * math.sqrt((1 - b) ** 2 + 4 * a)) / (2 * a) for s in (1, -1)]
    assert points(HENON) == pytest.approx(flat((x, b * x) for x in xs), abs=1e-8)
    # logistic map at r = 3.2: 0 and 1 - 1/r;  Brusselator: (a, b/a);  Van der Pol: the origin
    assert points(LOGISTIC) == pytest.approx([0.0, 1 - 1 / 3.2], abs=1e-9)
    assert points(BRUSSELATOR) == pytest.approx([1.0, 2.0], abs=1e-9)
    assert points(VAN_DER_POL) == pytest.approx([0.0, 0.0], abs=1e-9)


def test_variants_change_values_ranges_and_starts():
    text = model(LORENZ_REF, r=0.5, ranges={"r": (0, 50)}, initial={"z(0)": None, "x(0)": 2})
    parsed = parse_model(text)
    assert parsed.parameters["r"].value == 0.5 and (parsed.parameters["r"].lo, parsed.parameters["r"].hi) == (0, 50)
    assert (parsed.initial["x"], parsed.initial["y"]) == (2.0, 1.0) and "z(0)" not in text
    assert points(text) == pytest.approx([0.0, 0.0, 0.0], abs=1e-12)  # below r = 1 the origin is the only rest point
    with pytest.raises(KeyError, match="rho"):
        model(LORENZ_REF, rho=28)
