"""Names that the generated code, sympy, numpy and Python use themselves (``pow``, ``where``, ``math``,
``_f0`` of the shared subexpressions, ``_Dummy_1``, ``_u1`` and ``_t`` of the plain symbols, ...) as a
model's own names: every evaluator, from the right side to a delay's history and the explanation of an
undefined value, must give bit for bit what the same model gives with harmless names.

The model is tests/data/hostile/names_of_generated_code.txt; its twin renames every name to ``q0``, ``q1``...
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from orbitdesk.language.model import parse_model
from orbitdesk.system.compiled_system import compile_model

HOSTILE = Path(__file__).resolve().parents[1] / "data" / "hostile" / "names_of_generated_code.txt"


def twin(text: str, names) -> str:
    """The text with each of ``names`` renamed to a harmless one (whole names only, comments too)."""
    for k, name in enumerate(sorted(names, key=len, reverse=True)):
        text = re.sub(rf"(?<![A-Za-z0-9_]){re.escape(name)}(?![A-Za-z0-9_])", f"q{k}", text)
    return text


def model_and_twin(text: str):
    model = parse_model(text)
    assert model.ok, model.errors
    names = [*model.states, *model.parameters, *(getattr(model, "derived", None) or {})]
    plain = parse_model(twin(text, names))
    assert plain.ok, plain.errors
    return compile_model(model), compile_model(plain)


def test_a_model_named_like_the_generated_code_evaluates_as_its_plain_twin():
    text = HOSTILE.read_text(encoding="utf-8")
    system, plain = model_and_twin(text)
    assert system.parameters[:2] == ["pow", "where"] and system.states == ["_u1", "x0"]
    rng = np.random.default_rng(3)
    for _ in range(20):
        t, u, p = rng.uniform(-2, 2), rng.uniform(-3, 3, 2), system.param_values * rng.uniform(0.5, 1.5, 12)
        assert system.rhs(t, u, p).tolist() == plain.rhs(t, u, p).tolist()
        assert system.jac(t, u, p).tolist() == plain.jac(t, u, p).tolist()
        assert np.array_equal(system.rhs_vec(t, u[:, None], p), plain.rhs_vec(t, u[:, None], p))
        assert system.explain_undefined(t, u, p) is None  # nothing is undefined here
    Y = rng.uniform(-3, 3, (2, 7))
    assert system.derived_values(np.linspace(0, 1, 7), Y)["energy"].tolist() == \
        list(plain.derived_values(np.linspace(0, 1, 7), Y).values())[0].tolist()
    # the value of the right side by hand at one point: t = 0, _u1 = 0.6, x0 = -1.2, the file's values
    u1, x0 = 0.6, -1.2
    energy = 1.3 * u1 ** 2 + 0.7 * x0 ** 2
    expected = [-1.3 * abs(x0) ** 1.3 + 0.7 * -0.25 + np.floor(0.9 * x0) - 1.5 * np.sin(u1) + 0.5 * energy,
                u1 - 0.1 * x0 + 3 * (u1 % 1) ** 1.5 - 0.75]
    assert system.rhs(0.0, [u1, x0]) == pytest.approx(expected, rel=1e-14)


def test_an_undefined_value_is_named_the_same_with_any_names():
    text = "pow = 2\nwhere = 0.5\nx' = -pow*x + log(where - x)\nx(0) = 0\n"
    system, plain = model_and_twin(text)
    said = system.explain_undefined(0.0, [1.0])
    assert said == plain.explain_undefined(0.0, [1.0]).replace("q0", "where").replace("q1", "pow") \
        or said.startswith("log(where - x) is undefined"), said
    assert said.startswith("log(where - x) is undefined")
    assert system.explain_undefined(0.0, [0.25]) is None


def test_a_delay_history_named_like_the_generated_code():
    from orbitdesk.engine.delay import history_functions

    text = "pow = 1.3\nwhere = 0.5\nx' = -x(t - 1) + where*x\nx(t) = pow^1.5 + if(t > -where, pow, where) for t <= 0\n"
    system, plain = model_and_twin(text)
    for t in (-2.0, -0.7, -0.25, 0.0):
        value = history_functions(system, system.param_values, system.initial)[0](t)
        assert value == history_functions(plain, plain.param_values, plain.initial)[0](t)
        assert value == 1.3 ** 1.5 + (1.3 if t > -0.5 else 0.5)
