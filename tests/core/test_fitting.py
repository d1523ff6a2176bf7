"""Parameter estimation against references outside the project.

Synthetic noisy records are generated here with scipy (solve_ivp) or closed forms; the fitted values
are compared with the truth (within three standard errors) and with scipy.optimize.least_squares
run on a hand-written model of the same data (to 1e-6 relative); standard errors with the closed
form of ordinary linear regression; sensitivities with central finite differences.
"""

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.optimize import least_squares

from orbitdesk.document.datasets import DataColumn, DataSet
from orbitdesk.analyses.fitting import FitError, FitSettings, fit, predict
from orbitdesk.engine.progress import CancelToken, Cancelled
from orbitdesk.analyses.sensitivity import Observer, Sensitivities
from orbitdesk.system.compiled_system import compile_model

TIGHT = dict(rtol=1e-11, atol=1e-13, tolerance=1e-12)
REF = dict(method="trf", ftol=1e-14, xtol=1e-14, gtol=1e-14, jac="3-point")

OSCILLATOR = """c = 0.4 in [0, 2]
k = 2 in [0.1, 10]
x'' = -c*x' - k*x
x(0) = 1
x'(0) = 0
"""


def oscillator_closed_form(t, c, k, x0):
    """x'' + c x' + k x = 0, x(0) = x0, x'(0) = 0, underdamped (any vibrations textbook)."""
    w = np.sqrt(k - c * c / 4)
    return x0 * np.exp(-c * t / 2) * (np.cos(w * t) + c / (2 * w) * np.sin(w * t))


def assert_within_three_sigma(result, truth):
    for e in result.estimates:
        assert e.stderr is not None and e.stderr > 0
        assert abs(e.value - truth[e.name]) < 3 * e.stderr, (e.name, e.value, truth[e.name], e.stderr)


def test_damped_oscillator_recovered_and_equal_to_least_squares_on_closed_form():
    rng = np.random.default_rng(7)
    t = np.linspace(0, 15, 150)
    truth = {"c": 0.25, "k": 3.0, "x": 1.2}
    sol = solve_ivp(lambda _t, y: [y[1], -truth["c"] * y[1] - truth["k"] * y[0]], (0, 15), [truth["x"], 0],
                    t_eval=t, rtol=1e-12, atol=1e-12)
    y = sol.y[0] + 0.03 * rng.standard_normal(t.size)
    result = fit(compile_model(OSCILLATOR), [DataSet("shaker", t, [DataColumn("x", y)])],
                 FitSettings(parameters=["c", "k"], initial=["x"], **TIGHT))
    assert result.status == "ok" and not result.warnings
    assert_within_three_sigma(result, truth)
    ref = least_squares(lambda q: oscillator_closed_form(t, *q) - y, [0.4, 2.0, 1.0], **REF)
    np.testing.assert_allclose([e.value for e in result.estimates], ref.x, rtol=1e-6)
    np.testing.assert_allclose(result.residual_rms["x"], np.sqrt(np.mean(ref.fun ** 2)), rtol=1e-6)
    assert result.correlation.shape == (3, 3)
    np.testing.assert_allclose(np.diag(result.correlation), 1.0)


REACTION = """k1 = 0.5 in [0, 5]
k2 = 0.5 in [0, 5]
a' = -k1*a
b' = k1*a - k2*b
total = a + b
a(0) = 1
b(0) = 0
"""


def bateman(t, k1, k2, a0):
    """A -> B -> C, first order, b(0) = 0 (Bateman's solution)."""
    a = a0 * np.exp(-k1 * t)
    b = a0 * k1 / (k2 - k1) * (np.exp(-k1 * t) - np.exp(-k2 * t))
    return a, b


def test_two_species_reaction_joint_fit_of_two_batches_with_sd_column_and_derived_quantity():
    rng = np.random.default_rng(11)
    k1, k2 = 0.8, 0.3
    t = np.linspace(0.25, 12, 40)
    sets, data = [], []
    for name, a0 in (("batch 1", 1.0), ("batch 2", 2.0)):
        a, b = bateman(t, k1, k2, a0)
        sd = 0.01 + 0.02 * b
        ya, yb = a + 0.01 * rng.standard_normal(t.size), b + sd * rng.standard_normal(t.size)
        tot = a + b + 0.02 * rng.standard_normal(t.size)
        cols = [DataColumn("a", ya), DataColumn("b", yb, sd=sd), DataColumn("total", tot, weight=0.5)]
        sets.append(DataSet(name, t, cols, initial={"a": a0}))
        data.append((a0, ya, yb, sd, tot))
    result = fit(compile_model(REACTION), sets, FitSettings(parameters=["k1", "k2"], **TIGHT))
    assert result.status == "ok"
    assert_within_three_sigma(result, {"k1": k1, "k2": k2})

    def residuals(q):
        out = []
        for a0, ya, yb, sd, tot in data:
            a, b = bateman(t, q[0], q[1], a0)
            out += [a - ya, (b - yb) / sd, 0.5 * (a + b - tot)]
        return np.concatenate(out)

    ref = least_squares(residuals, [0.5, 0.4], **REF)
    np.testing.assert_allclose([e.value for e in result.estimates], ref.x, rtol=1e-6)
    assert set(result.residual_rms) == {"a", "b", "total"}


def test_per_experiment_parameters():
    """One rate shared, one fitted per data set: equal to least_squares on the hand-written Bateman model."""
    rng = np.random.default_rng(3)
    t = np.linspace(0.5, 10, 30)
    sets, data = [], []
    for name, k2 in (("cold", 0.2), ("warm", 0.45)):
        a, b = bateman(t, 0.9, k2, 1.0)
        ya, yb = a + 0.01 * rng.standard_normal(t.size), b + 0.01 * rng.standard_normal(t.size)
        sets.append(DataSet(name, t, [DataColumn("a", ya), DataColumn("b", yb)]))
        data.append((ya, yb))
    result = fit(compile_model(REACTION.replace("total = a + b\n", "")), sets,
                 FitSettings(parameters=["k1"], local=["k2"], **TIGHT))
    names = [e.name for e in result.estimates]
    assert names == ["k1", "k2 (cold)", "k2 (warm)"]

    def residuals(q):
        out = []
        for k2, (ya, yb) in zip(q[1:], data):
            a, b = bateman(t, q[0], k2, 1.0)
            out += [a - ya, b - yb]
        return np.concatenate(out)

    ref = least_squares(residuals, [0.5, 0.4, 0.3], **REF)
    np.testing.assert_allclose([e.value for e in result.estimates], ref.x, rtol=1e-6)
    assert_within_three_sigma(result, {"k1": 0.9, "k2 (cold)": 0.2, "k2 (warm)": 0.45})
    assert result.datasets[1]["parameters"]["k2"] == pytest.approx(ref.x[2], rel=1e-6)


LOGISTIC = """r = 3.0 in [2.5, 4]
x[n+1] = r*x*(1 - x)
x[0] = 0.3
"""


def test_logistic_map_recovered_and_equal_to_least_squares_on_hand_iteration():
    rng = np.random.default_rng(5)
    r_true, x0_true = 3.2, 0.21
    n = np.arange(0, 25)

    def orbit(r, x0):
        out = np.empty(n.size)
        x = x0
        for i in range(n.size):
            out[i] = x
            x = r * x * (1 - x)
        return out

    y = orbit(r_true, x0_true) + 0.005 * rng.standard_normal(n.size)
    result = fit(compile_model(LOGISTIC), [DataSet("census", n.astype(float), [DataColumn("x", y)])],
                 FitSettings(parameters=["r"], initial=["x"], tolerance=1e-12))
    assert result.status == "ok"
    assert_within_three_sigma(result, {"r": r_true, "x": x0_true})
    ref = least_squares(lambda q: orbit(*q) - y, [3.0, 0.3], bounds=([2.5, -np.inf], [4, np.inf]), **REF)
    np.testing.assert_allclose([e.value for e in result.estimates], ref.x, rtol=1e-6)


def test_standard_errors_equal_closed_form_of_linear_regression():
    """x' = a + b t, x(0) = x0 has x = x0 + a t + b t^2/2: linear in (x0, a, b), so the fit is ordinary
    least squares with design X = [1, t, t^2/2]: cov = s^2 (X^T X)^-1, s^2 = RSS/(N-3); intervals from
    the t distribution (any regression textbook, e.g. Draper & Smith, Applied Regression Analysis, ch. 5)."""
    from scipy import stats
    rng = np.random.default_rng(2)
    t = np.linspace(0, 4, 25)
    y = 0.5 + 1.5 * t - 0.8 * t * t / 2 + 0.1 * rng.standard_normal(t.size)
    model = compile_model("a = 0 in [-10, 10]\nb = 0 in [-10, 10]\nx' = a + b*t\nx(0) = 0\n")
    result = fit(model, [DataSet("line", t, [DataColumn("x", y)])],
                 FitSettings(parameters=["a", "b"], initial=["x"], **TIGHT))
    X = np.column_stack([t, t * t / 2, np.ones_like(t)])
    beta, rss, *_ = np.linalg.lstsq(X, y, rcond=None)
    s2 = rss[0] / (t.size - 3)
    cov = s2 * np.linalg.inv(X.T @ X)
    se = np.sqrt(np.diag(cov))
    np.testing.assert_allclose([e.value for e in result.estimates], beta, rtol=1e-7, atol=1e-9)
    np.testing.assert_allclose([e.stderr for e in result.estimates], se, rtol=1e-6)
    q = stats.t.ppf(0.975, t.size - 3)
    np.testing.assert_allclose([e.interval for e in result.estimates], np.column_stack([beta - q * se, beta + q * se]),
                               rtol=1e-6)
    np.testing.assert_allclose(result.correlation, cov / np.outer(se, se), atol=1e-7)
    assert result.dof == t.size - 3


def central_differences(fn, x, h):
    cols = []
    for j in range(len(x)):
        up, down = np.array(x, float), np.array(x, float)
        up[j] += h
        down[j] -= h
        cols.append((fn(up) - fn(down)) / (2 * h))
    return np.stack(cols, axis=-1)


@pytest.mark.parametrize("text, params", [
    ("sigma = 10\nrho = 28\nbeta = 2.6666\nx' = sigma*(y - x)\ny' = x*(rho - z) - y\nz' = x*y - beta*z\n"
     "x(0) = 1\ny(0) = 1\nz(0) = 1.05\nenergy = x^2 + sin(y)*z\n", ["sigma", "rho", "beta"]),
    ("a = 1.3\nb = 0.3\nx[n+1] = 1 - a*x^2 + y\ny[n+1] = b*x\nx[0] = 0.1\ny[0] = 0.2\nenergy = x*y + b*x^2\n",
     ["a", "b"]),
])
def test_sensitivities_equal_central_finite_differences(text, params):
    """Lorenz (t to 1.5) and Hénon (12 steps): dU/dp and dU/du0 against central differences."""
    system = compile_model(text)
    sel = [system.parameters.index(n) for n in params]
    sens = Sensitivities(system, sel)
    times = np.array([0.3, 0.9, 1.5]) if system.kind == "flow" else np.array([3.0, 7.0, 12.0])
    p0, u0 = system.param_values, system.initial
    run = sens.run(u0, p0, 0.0, times, rtol=1e-12, atol=1e-13)

    def states_at(p, u):
        return sens.run(u, p, 0.0, times, rtol=1e-12, atol=1e-13).states

    def with_params(q):
        p = p0.copy()
        p[sel] = q
        return states_at(p, u0)

    fd_p = central_differences(with_params, p0[sel], 1e-6)               # (n, T, m)
    np.testing.assert_allclose(run.dparams.transpose(0, 2, 1), fd_p, rtol=1e-5, atol=1e-6)
    fd_u = central_differences(lambda u: states_at(p0, u), u0, 1e-6)      # (n, T, n)
    np.testing.assert_allclose(run.dstart.transpose(0, 2, 1), fd_u, rtol=1e-5, atol=1e-6)
    obs = Observer(system, ["energy"])
    value, du, dp = obs.observe("energy", run, p0)
    fd_e = central_differences(lambda u: Observer(system, ["energy"]).observe(
        "energy", type(run)(times, u.reshape(-1, 1).repeat(times.size, 1), run.dparams, run.dstart), p0)[0],
        run.states[:, -1], 1e-6)
    np.testing.assert_allclose(du[:, -1], fd_e[-1], rtol=1e-6, atol=1e-8)


def test_multiple_shooting_reaches_the_single_shooting_optimum():
    rng = np.random.default_rng(4)
    t = np.linspace(0, 25, 200)
    sol = solve_ivp(lambda _t, y: [y[1], -0.05 * y[1] - 3.0 * y[0]], (0, 25), [1.0, 0], t_eval=t,
                    rtol=1e-12, atol=1e-12)
    ds = DataSet("long record", t, [DataColumn("x", sol.y[0] + 0.02 * rng.standard_normal(t.size))])
    model = compile_model(OSCILLATOR.replace("k = 2 in", "k = 8 in"))
    single = fit(model, [ds], FitSettings(parameters=["c", "k"], **TIGHT))
    multi = fit(model, [ds], FitSettings(parameters=["c", "k"], multiple_shooting=6, **TIGHT))
    np.testing.assert_allclose([e.value for e in multi.estimates], [e.value for e in single.estimates], rtol=1e-6)
    ref = least_squares(lambda q: oscillator_closed_form(t, q[0], q[1], 1.0) - ds.columns[0].values,
                        [0.05, 3.0], **REF)
    np.testing.assert_allclose([e.value for e in multi.estimates], ref.x, rtol=1e-6)


def test_plain_word_warnings_for_an_ill_determined_fit():
    """x' = -a*b*x: only the product a*b is determined (the Jacobian is singular)."""
    t = np.linspace(0, 3, 20)
    y = np.exp(-0.6 * t)
    model = compile_model("a = 1 in [0.01, 10]\nb = 0.5 in [0.01, 10]\nc = 0 in [0, 1]\nx' = -a*b*x + c\nx(0) = 1\n")
    result = fit(model, [DataSet("d", t, [DataColumn("x", y - 0.02 * t)])],  # c would have to be negative
                 FitSettings(parameters=["a", "b", "c"]))
    text = " ".join(result.warnings)
    assert "nearly singular" in text and "strongly correlated" in text
    assert "c ended at its lower bound 0" in text


def test_setup_errors_and_cancel():
    model = compile_model(OSCILLATOR)
    ds = DataSet("d", np.linspace(0, 1, 5), [DataColumn("y", np.zeros(5))])
    with pytest.raises(FitError, match="'y' is not a state or derived quantity"):
        fit(model, [ds], FitSettings(parameters=["c"]))
    ok = ds.with_mapping({"y": "x"})
    with pytest.raises(FitError, match="nothing to estimate"):
        fit(model, [ok], FitSettings())
    with pytest.raises(FitError, match="'q' is not a parameter"):
        fit(model, [ok], FitSettings(parameters=["q"]))
    token = CancelToken()
    token.cancel()
    with pytest.raises(Cancelled):
        fit(model, [ok], FitSettings(parameters=["c"]), cancel=token)
    np.testing.assert_allclose(predict(model, ok, model.param_values, model.initial)["x"],
                               oscillator_closed_form(ok.time, 0.4, 2.0, 1.0), rtol=1e-7)
