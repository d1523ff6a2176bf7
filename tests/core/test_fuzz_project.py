"""Property-based fuzzing of project documents (hypothesis): solver settings and view settings of any
shape and size either load, within the limits of limits.py and view_settings.BOUNDS, or are refused
with a ProjectError; nothing else escapes. Budget as in test_fuzz_parser: ORBITDESK_FUZZ_EXAMPLES=N."""

from __future__ import annotations

import math

from hypothesis import given
from hypothesis import strategies as st

from orbitdesk.engine import limits
from orbitdesk.document.project import FORMAT_NAME, ProjectError, project_from_dict
from orbitdesk.document.view_settings import BOUNDS, NUMBER_SPAN, VIEW_SETTINGS

from .test_fuzz_parser import budget

hostile_numbers = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True), st.integers(-10**20, 10**20),
    st.sampled_from([0, -1, 1e-300, 1e300, 3e9, 1e308, -1e308, 2**63, 0.5]))
scalars = st.one_of(hostile_numbers, st.booleans(), st.none(), st.text(max_size=8))
nested = st.recursive(scalars, lambda inner: st.one_of(st.lists(inner, max_size=4),
                                                      st.dictionaries(st.text(max_size=6), inner, max_size=4)),
                      max_leaves=12)
# mostly plain values, one level of wrong shape, sometimes deep nesting (a deep nesting for every value made
# the deep run spend most of its time drawing examples)
values = st.one_of(scalars, scalars, scalars, st.lists(scalars, max_size=3),
                   st.dictionaries(st.text(max_size=6), scalars, max_size=3), nested)


def settings_for(view_id):
    """Any subset of a view's keys, nested groups too."""
    return st.fixed_dictionaries({}, optional={
        k: st.fixed_dictionaries({}, optional={kk: values for kk in v}) if isinstance(v, dict) else values
        for k, v in VIEW_SETTINGS[view_id].items()})


solver = st.fixed_dictionaries({}, optional={k: scalars for k in ["method", "rtol", "atol", "max_step", "dt",
                                                                   "t_start", "t_end", "samples", "steps",
                                                                   "transient"]})
views = st.lists(st.sampled_from(sorted(VIEW_SETTINGS)), max_size=4, unique=True).flatmap(
    lambda ids: st.fixed_dictionaries({k: settings_for(k) for k in ids}))


def _within(view_id, schema, settings, prefix=""):
    for key, value in settings.items():
        kind, path = schema.get(key), prefix + key
        if isinstance(kind, dict):
            _within(view_id, kind, value, path + ".")
        elif kind in ("number", "integer"):
            assert isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)
            lo, hi = BOUNDS.get((view_id, path), (-NUMBER_SPAN, NUMBER_SPAN))
            assert lo <= value <= hi or (kind == "integer" and 0 <= value <= 1_000_000), (view_id, path, value)
        elif kind == "bool":
            assert isinstance(value, bool)


@budget(400)
@given(solver, views)
def test_any_solver_and_view_settings_load_within_bounds_or_are_refused(solver_settings, view_settings):
    doc = {"format": FORMAT_NAME, "version": 1, "model": "x' = -x\n", "solver": solver_settings,
           "views": view_settings}
    try:
        p = project_from_dict(doc)
    except ProjectError as err:
        assert err.message
        return
    s = p.solver
    span = abs(s.t_end - s.t_start)  # the transient is part of the run
    assert all(math.isfinite(v) and abs(v) <= limits.DEFAULTS.span for v in (s.t_start, s.t_end, s.transient))
    assert span / s.dt <= limits.DEFAULTS.steps
    for view_id, settings in p.views.items():
        _within(view_id, VIEW_SETTINGS[view_id], settings)
