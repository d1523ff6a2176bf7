"""The sweep and the two-parameter map integrate with the run's method and tolerances (adaptive), not a fixed
Runge-Kutta step of 0.01, unless the user picks the fixed step; what they hand the core is checked here."""

from orbitdesk.samples.models import DUFFING_REF, model

from .conftest import load_model, open_view

DUFFING = model(DUFFING_REF)


def test_the_sweep_takes_the_runs_tolerances_and_a_fixed_step_only_when_asked(qtbot, session):
    view = open_view(qtbot, session, "sweep", (900, 600))
    load_model(qtbot, session, DUFFING, dict(t_end=20.0, samples=500, rtol=1e-9, atol=1e-11))
    s = view.settings()
    assert s.dt is None and (s.rtol, s.atol) == (1e-9, 1e-11)  # adaptive, as accurate as the run
    view.apply_view_settings({"method": "rk4", "dt": 0.005})
    s = view.settings()
    assert s.dt == 0.005  # the fixed step the user asked for


def test_the_parameter_map_takes_the_runs_method_and_tolerances(qtbot, session, monkeypatch):
    from orbitdesk.analyses import parameter_maps

    seen, computed = [], parameter_maps.period_grid

    def period_grid(system, xn, xs, yn, ys, settings, **kw):
        seen.append(settings)
        return computed(system, xn, xs, yn, ys, settings, **kw)

    monkeypatch.setattr(parameter_maps, "period_grid", period_grid)
    view = open_view(qtbot, session, "parameter_map", (900, 600))
    load_model(qtbot, session, DUFFING, dict(t_end=20.0, samples=500, method="rk45", rtol=1e-9, atol=1e-11))
    view.apply_view_settings({"what": "period", "x": {"parameter": "delta", "from": 0.2, "to": 0.3, "count": 2},
                              "y": {"parameter": "gamma", "from": 0.3, "to": 0.4, "count": 2}, "transient": 20,
                              "max_period": 4})
    with qtbot.waitSignal(view.resultChanged, timeout=120000, check_params_cb=lambda r: r is not None):
        view.compute()
    s = seen[0]
    assert s.dt is None and s.method == "rk45" and (s.rtol, s.atol) == (1e-9, 1e-11)
