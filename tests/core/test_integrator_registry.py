"""The method registry, the run settings and the status table of orbitdesk.engine."""

import pytest
import scipy.integrate

from orbitdesk.engine import METHODS, RunSettings, SettingsError, method
from orbitdesk.engine import status

pytestmark = pytest.mark.fallback  # published values: run with the compiler and without


def test_every_scipy_name_is_a_scipy_solver():
    # scipy's solve_ivp documentation lists RK45, RK23, DOP853, Radau, BDF, LSODA as OdeSolver classes
    for entry in METHODS.values():
        if entry.scipy_name is not None:
            assert issubclass(getattr(scipy.integrate, entry.scipy_name), scipy.integrate.OdeSolver)
        assert entry.adaptive == (entry.scipy_name is not None)


def test_unknown_method_names_the_choices():
    with pytest.raises(ValueError, match="choose one of dop853"):
        method("euler")


@pytest.mark.parametrize("changes, field", [
    ({"method": "euler"}, "method"), ({"rtol": 0.0}, "rtol"), ({"rtol": float("nan")}, "rtol"),
    ({"samples": 1}, "samples"), ({"samples": 2.5}, "samples"), ({"steps": 0}, "steps"),
    ({"transient": -1.0}, "transient"), ({"max_step": -1.0}, "max_step"), ({"t_end": 0.0}, "t_end"),
    ({"dt": True}, "dt"),
])
def test_settings_refuse_values_out_of_range_naming_the_field(changes, field):
    with pytest.raises(SettingsError) as caught:
        RunSettings(**changes)
    assert caught.value.name == field
    with pytest.raises(SettingsError):
        RunSettings().replace(**changes)


def test_settings_normalise_numbers():
    s = RunSettings(rtol=1, samples=300.0, max_step=None)
    assert isinstance(s.rtol, float) and s.samples == 300 and isinstance(s.samples, int)


def test_status_table_round_trips_between_words_and_codes():
    codes = [code for code, _, _ in status.TABLE]
    assert list(status.words(codes)) == [word for _, word, _ in status.TABLE]
    assert all(status.CODE[status.word(c)] == c for c in codes)


def test_a_tolerance_below_its_bound_is_refused_in_words_not_by_a_crash():
    # found by the project fuzz: atol = 2.2250738585e-313 (below the bound 1e-300, which has no upper end)
    from orbitdesk.document.project import ProjectError, project_from_dict
    from orbitdesk.engine.settings import RunSettings, SettingsError

    with pytest.raises(SettingsError, match="at least 1e-300"):
        RunSettings(atol=2.2250738585e-313)
    with pytest.raises(ProjectError, match="atol: expected a number of at least"):
        project_from_dict({"format": "orbitdesk-project", "version": 1, "model": "x' = -x\n",
                           "solver": {"atol": 2.2250738585e-313}})


def test_every_method_without_a_scipy_solver_has_its_loop_in_the_exported_script():
    # the script runs scipy's solver by its name, or a fixed-step loop written into it: a method with
    # neither would be exported as some other method
    from orbitdesk.exports import run_script

    for entry in METHODS.values():
        if entry.scipy_name is None:
            assert f"def {entry.name}(" in run_script._FLOW_RUN, entry.name
