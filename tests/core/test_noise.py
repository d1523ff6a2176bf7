"""Noise in the language and the stochastic engine, checked against closed forms.

References: the Ornstein-Uhlenbeck process dX = -theta X dt + sigma dW has stationary variance
sigma^2 / (2 theta) and autocorrelation exp(-theta s) (closed form; Gardiner, Handbook of Stochastic
Methods, 4.5.4); geometric Brownian motion dX = mu X dt + sigma X dW has the exact solution
X = X0 exp((mu - sigma^2/2) t + sigma W_t) and mean X0 exp(mu t); Euler-Maruyama has strong order 1/2
and Milstein's scheme strong order 1 (Kloeden and Platen 1992, Numerical Solution of Stochastic
Differential Equations, theorems 10.2.2 and 10.3.5; the test set-up of Higham 2001, SIAM Review 43:525).
Every statistical tolerance is a multiple of a standard error measured from the sample itself.
"""

import numpy as np
import pytest

from orbitdesk.engine import stochastic
from orbitdesk.engine import runs
from orbitdesk.engine.settings import RunSettings, SettingsError
from orbitdesk.language.model import parse_model
from orbitdesk.system.codegen import noise_terms
from orbitdesk.system.compiled_system import compile_model


def simulate(*args, **kwargs):
    """A run with its realisations (the default run of a model with noise is its noise-free part)."""
    return runs.simulate(*args, noise=True, **kwargs)

OU = "x' = -theta*x + sigma*noise\ntheta = 1\nsigma = 1\nx(0) = 0\n"
GBM = "x' = mu*x + sigma*x*noise\nmu = 2\nsigma = 1\nx(0) = 1\n"


def _errors(text):
    return [(d.line, d.column, d.end_column, d.message) for d in parse_model(text).errors]


# ---------------------------------------------------------------- language

def test_noise_splits_into_drift_and_diffusion():
    model = parse_model("x'' = -x - c*x' + a*noise(1)\ny' = -y + b*x*noise(1) + 2*noise\nc = 1\na = 3\nb = 2\n")
    assert model.ok and model.stochastic
    x, xd, y = (model.symbols[s] for s in ("x", "x'", "y"))
    c, a, b = (model.symbols[s] for s in "cab")
    assert model.equations["x'"] == -x - c * xd  # the drift: what every deterministic analysis sees
    assert model.equations["y"] == -y
    assert model.diffusion == {"x'": {"(1)": a}, "y": {"(1)": b * x, "y'": 2}}  # noise(1) shared by both
    system = compile_model(model)
    assert system.noise_sources == ["(1)", "y'"]
    assert [[str(g) for g in row] for row in system.diffusion] == [["0", "0"], ["a", "0"], ["b*x", "2"]]


def test_plain_noise_is_a_source_per_equation():
    system = compile_model("x' = noise\ny' = noise\n")
    assert system.noise_sources == ["x'", "y'"]
    assert [[int(g) for g in row] for row in system.diffusion] == [[1, 0], [0, 1]]


@pytest.mark.parametrize("text, column, words", [
    ("x' = sin(noise)", 10, "inside sin()"),
    ("x' = noise*noise", 6, "two noise terms"),
    ("x' = -x + noise^2", 11, "power"),
    ("x' = 1/noise", 8, "cannot divide"),
    ("x' = if(x > 0, noise, 0)", 16, "inside if()"),
    ("x' = -x + noise(1, 2)", 11, "one source name"),
    ("x' = -x + noise(1.5)", 11, "whole number or a name"),
    ("x[n+1] = x + noise", 14, "belongs to flows"),
])
def test_noise_in_the_wrong_place_is_refused_with_a_reason(text, column, words):
    errors = _errors(text)
    assert len(errors) == 1
    line, col, end, message = errors[0]
    assert (line, col) == (1, column) and words in message


def test_noise_outside_equations_is_refused():
    errors = _errors("a = 2*noise\nx' = a\n")
    assert errors[0][:2] == (1, 7) and "in the equations themselves" in errors[0][3]


def test_a_model_that_defines_noise_keeps_its_meaning():
    model = parse_model("noise = 0.2\nx' = -x + noise\n")
    assert model.ok and not model.stochastic and "noise" in model.parameters


def test_commuting_and_non_commuting_sources():
    assert noise_terms(compile_model("x' = -x + s*x*noise(1) + noise(2)\ns = 1\n"))[2] is False
    assert noise_terms(compile_model("x' = -x + s*x*noise\ny' = y*noise\ns = 1\n"))[2] is True  # diagonal
    assert noise_terms(compile_model("x' = y*noise(1)\ny' = 2*noise(1)\n"))[2] is True  # one source


# ---------------------------------------------------------------- engine

@pytest.mark.fallback
def test_same_seed_same_run_and_realisation_r_independent_of_count_and_chunks(monkeypatch):
    system = compile_model(OU)
    settings = RunSettings(t_end=2, dt=0.01, samples=21, seed=7, realisations=3)
    a = simulate(system, settings).realisations
    b = simulate(system, settings.replace(realisations=5)).realisations
    monkeypatch.setattr(stochastic, "_CHUNK_DRAWS", 17)  # many small chunks of increments
    c = simulate(system, settings).realisations
    d = simulate(system, settings.replace(seed=8)).realisations
    assert a.states.shape == (3, 1, 21) and np.allclose(a.time, np.linspace(0, 2, 21))
    assert np.array_equal(a.states, b.states[:3]) and np.array_equal(a.states, c.states)
    assert not np.allclose(a.states, d.states)


def test_settings_check_the_noise_fields():
    with pytest.raises(SettingsError, match="scheme"):
        RunSettings(scheme="heun")
    with pytest.raises(SettingsError, match="realisations"):
        RunSettings(realisations=0)
    assert RunSettings().saved()["seed"] == 1


def test_ornstein_uhlenbeck_stationary_variance_and_autocorrelation():
    # closed form: Var = sigma^2/(2 theta) = 0.5, corr(s) = exp(-theta s). Euler-Maruyama's own stationary
    # law with step h has Var_h = sigma^2/(theta (2 - theta h)) and corr_h(s) = (1 - theta h)^(s/h) (exact
    # for the recursion), less than 0.003 away at h = 0.01: inside the tolerance, and checked separately.
    theta, sigma, h = 1.0, 1.0, 0.01
    system = compile_model(OU)
    run = simulate(system, RunSettings(t_end=50, dt=h, samples=0, realisations=400, seed=3, transient=10))
    R = run.realisations
    x = R.series("x")  # (400, K), every step after the transient
    assert R.count == 400 and x.shape[1] == 4001
    groups = np.array_split(x, 20)
    variances = np.array([np.mean(g ** 2) for g in groups])
    var, se = variances.mean(), variances.std(ddof=1) / np.sqrt(len(variances))
    assert se < 0.01  # the sample is large enough for the check to mean something
    assert abs(var - sigma ** 2 / (2 * theta)) < 4 * se + 0.003
    for s in (0.5, 1.0, 2.0):
        lag = int(round(s / h))
        corr = np.array([np.mean(g[:, :-lag] * g[:, lag:]) / np.mean(g ** 2) for g in groups])
        est, se_c = corr.mean(), corr.std(ddof=1) / np.sqrt(len(corr))
        assert se_c < 0.02
        assert abs(est - np.exp(-theta * s)) < 4 * se_c + 0.003, (s, est, np.exp(-theta * s))


def test_geometric_brownian_motion_mean():
    # closed form: E X(t) = X0 exp(mu t); standard error from the sample's own spread
    system = compile_model("x' = mu*x + sigma*x*noise\nmu = 0.5\nsigma = 0.4\nx(0) = 1\n")
    R = simulate(system, RunSettings(t_end=1, dt=1e-3, samples=11, realisations=4000, seed=11)).realisations
    for k in (5, 10):
        t = R.time[k]
        values = R.series("x")[:, k]
        se = values.std(ddof=1) / np.sqrt(values.size)
        assert abs(values.mean() - np.exp(0.5 * t)) < 4 * se + 2e-3  # + the schemes' weak bias, O(h)
        assert abs(R.mean[0, k] - values.mean()) < 1e-12


def strong_orders(seed=5, paths=1000, levels=(4, 5, 6, 7, 8, 9)):
    """Measured strong orders of both schemes on GBM (mu = 2, sigma = 1, X0 = 1, T = 1, as in Higham 2001):
    E|X_h(T) - X(T)| on the same Brownian paths (coarse increments are sums of the finest)."""
    system = compile_model(GBM)
    mu, sigma, T = 2.0, 1.0, 1.0
    finest = 2 ** 9
    rng = np.random.default_rng(seed)
    dW = rng.standard_normal((paths, finest, 1)) * np.sqrt(T / finest)
    exact = np.exp((mu - sigma ** 2 / 2) * T + sigma * dW.sum(axis=(1, 2)))
    orders = {}
    for scheme in ("euler_maruyama", "milstein"):
        hs, errors = [], []
        for k in levels:
            steps = 2 ** k
            coarse = dW.reshape(paths, steps, finest // steps, 1).sum(axis=2)
            final = stochastic.final_states(system, [1.0], system.param_values, 0.0, T / steps, coarse, scheme)
            hs.append(T / steps)
            errors.append(np.mean(np.abs(final[:, 0] - exact)))
        orders[scheme] = float(np.polyfit(np.log(hs), np.log(errors), 1)[0])
    return orders


def test_strong_orders_of_euler_maruyama_and_milstein():
    orders = strong_orders()
    assert 0.35 < orders["euler_maruyama"] < 0.7, orders  # theory: 1/2
    assert 0.85 < orders["milstein"] < 1.2, orders  # theory: 1


def test_non_commuting_sources_are_said():
    run = simulate(compile_model("x' = -x + x*noise(1) + noise(2)\nx(0) = 1\n"), RunSettings(t_end=1, realisations=2))
    assert "do not commute" in run.message


def test_a_blown_up_realisation_is_counted_and_the_others_go_on():
    system = compile_model("x' = x^2 + 3*noise\nx(0) = 0\n")
    run = simulate(system, RunSettings(t_end=20, dt=0.01, samples=101, realisations=8, seed=1, bound=1e6))
    R = run.realisations
    assert R.blown_up >= 1 and "blew up" in " ".join(R.notes)
    alive = np.isfinite(R.states[:, 0, -1])
    assert alive.sum() == R.count - R.blown_up


def test_cli_contract_fields():
    R = simulate(compile_model(OU), RunSettings(t_end=1, samples=11, realisations=4)).realisations
    d = R.to_dict()
    assert set(d) >= {"t", "mean", "std", "states"} and len(d["t"]) == 11
    assert d["states"]["x"] == list(R.states[0, 0]) and len(d["std"]["x"]) == 11


def test_without_noise_a_run_is_the_noise_free_part():
    # what analyses that assume determinism get: x' = -theta x from x(0) = 1 is exp(-t) (closed form)
    run = runs.simulate(compile_model("x' = -x + 3*noise\nx(0) = 1\n"), RunSettings(t_end=2, samples=5))
    assert run.realisations is None and np.allclose(run.states[0], np.exp(-run.time), rtol=1e-7)


def test_a_pure_noise_equation_is_brownian_motion():
    # x' = noise from 0: W(t), mean 0 and variance t (closed form); 2000 realisations, 4 standard errors
    R = simulate(compile_model("x' = noise\n"), RunSettings(t_end=2, dt=0.01, samples=3, realisations=2000,
                                                              seed=9)).realisations
    end = R.series("x")[:, -1]
    assert abs(end.mean()) < 4 * np.sqrt(2 / 2000) and abs(end.var(ddof=1) - 2) < 4 * 2 * np.sqrt(2 / 1999)


def test_the_number_of_sources_is_bounded():
    text = "x' = -x + " + " + ".join(f"noise({k})" for k in range(1, 23))
    errors = _errors(text)
    assert len(errors) == 1 and "at most 20 noise sources" in errors[0][3]
    assert errors[0][1] == text.index("noise(21)") + 1
