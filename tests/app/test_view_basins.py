"""The basins view: the two wells of the unforced Duffing oscillator, coloured as single runs end, with the
stable manifolds of the saddle between them drawn over."""

import numpy as np
from scipy.integrate import solve_ivp

from .conftest import load_model, open_view

# x'' = -0.3 x' + x - x^3: stable foci at x = +-1, a saddle at the origin (closed form)
WELLS = "x'' = -0.3*x' + x - x^3\nx(0) = 0.5\n"


def test_two_wells_with_the_saddle_manifolds_between(qtbot, session, artifacts):
    view = open_view(qtbot, session, "basins", (900, 700))
    load_model(qtbot, session, WELLS, dict(t_end=20.0, samples=500))
    view.apply_view_settings({"x": {"state": "x", "from": -2.0, "to": 2.0, "count": 40},
                              "y": {"state": "x'", "from": -2.0, "to": 2.0, "count": 30},
                              "transient": 120.0, "manifolds": True})
    with qtbot.waitSignal(view.resultChanged, timeout=120000, check_params_cb=lambda r: r is not None):
        view.compute()
    r = view.result
    assert sorted(round(a["centre"]["x"], 3) for a in r.attractors) == [-1.0, 1.0]
    sign = {a["label"]: np.sign(a["centre"]["x"]) for a in r.attractors}
    for j, i in ((3, 5), (15, 20), (27, 33), (10, 30)):
        ref = solve_ivp(lambda t, u: [u[1], -0.3 * u[1] + u[0] - u[0] ** 3], (0, 150), [r.xs[i], r.ys[j]],
                        rtol=1e-10, atol=1e-12)
        assert sign[r.labels[j, i]] == np.sign(ref.y[0, -1]), (r.xs[i], r.ys[j])
    assert "2 attractors" in view.legend.text() and "equilibrium" in view.legend.text()
    qtbot.waitUntil(lambda: len(view.manifold_items) == 2, timeout=60000)  # the saddle's two stable branches
    x, y = view.manifold_items[0].getData()
    assert abs(x[0]) < 1e-6 and abs(y[0]) < 1e-6  # they start at the saddle
    header, rows = view.export_data()
    assert header[:2] == ["x", "x'"] and rows.shape == (1200, 3)
    view.grab().save(f"{artifacts}/basins_wells.png")
