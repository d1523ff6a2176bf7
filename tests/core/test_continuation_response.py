"""Frequency-response curves of forced oscillators: closed form (linear) and harmonic balance (Duffing)."""

import numpy as np
import pytest
from scipy.optimize import brentq, minimize_scalar

from orbitdesk.analyses.continuation import FOLD
from orbitdesk.analyses.continuation.response import response_curve, stepped_sweep
from orbitdesk.system.compiled_system import compile_model

LINEAR = "c = 0.1\nF = 0.5\nw = 0.5\nx'' = -c*x' - x + F*cos(w*t)\n"
C, BETA, F = 0.05, 0.1, 0.1
DUFFING = f"c = {C}\nb = {BETA}\nF = {F}\nw = 0.8\nx'' = -c*x' - x - b*x^3 + F*cos(w*t)\n"


def test_linear_oscillator_against_the_closed_form():
    # x'' + c x' + x = F cos(w t): steady amplitude F / sqrt((1 - w^2)^2 + (c w)^2) (closed form), no folds
    curve = response_curve(compile_model(LINEAR), "w", 0.5, 2.0)
    exact = 0.5 / np.sqrt((1 - curve.values ** 2) ** 2 + (0.1 * curve.values) ** 2)
    assert np.max(np.abs(curve.amplitudes / exact - 1)) < 1e-7
    assert curve.values.min() == pytest.approx(0.5) and curve.values.max() == pytest.approx(2.0)
    assert not curve.special and all(curve.stable)


def harmonic_balance():
    """Nayfeh & Mook, Nonlinear Oscillations (1979), first approximation for x'' + c x' + x + b x^3 = F cos(w t):
    [(1 - w^2) A + 3/4 b A^3]^2 + (c w A)^2 = F^2. Returns (peak A, w at peak, jump-down w, jump-up w)."""
    def w_plus(A):
        kappa = 1 + 0.75 * BETA * A * A
        disc = (2 * kappa - C * C) ** 2 - 4 * (kappa * kappa - F * F / (A * A))
        return np.sqrt(((2 * kappa - C * C) + np.sqrt(max(disc, 0.0))) / 2)

    def disc(A):
        kappa = 1 + 0.75 * BETA * A * A
        return (2 * kappa - C * C) ** 2 - 4 * (kappa * kappa - F * F / (A * A))

    peak = brentq(disc, 0.5, 10)
    down = -minimize_scalar(lambda A: -w_plus(A), bounds=(1.0, peak), method="bounded",
                            options={"xatol": 1e-12}).fun
    up = minimize_scalar(w_plus, bounds=(0.3, 1.5), method="bounded", options={"xatol": 1e-12}).fun
    return peak, w_plus(peak), down, up


def test_hardening_duffing_against_harmonic_balance():
    curve = response_curve(compile_model(DUFFING), "w", 0.8, 1.6)
    peak, w_peak, w_down, w_up = harmonic_balance()
    folds = sorted(s.value for s in curve.special if s.type == FOLD)
    assert len(folds) == 2
    # the first approximation neglects the third harmonic (relative size about b A^2 / 32, ~1% here)
    assert folds[0] == pytest.approx(w_up, rel=2e-3)
    assert folds[1] == pytest.approx(w_down, rel=2e-3)
    assert curve.amplitudes.max() == pytest.approx(peak, rel=2e-2)
    assert curve.values[int(np.argmax(curve.amplitudes))] == pytest.approx(w_peak, rel=2e-3)
    # the middle part between the folds is unstable, the outer parts stable
    first, second = sorted(s.index for s in curve.special)
    assert not any(curve.stable[first + 1:second - 1]) and second - first > 3
    assert all(curve.stable[:first - 1]) and all(curve.stable[second + 1:])


def test_stepped_sweeps_show_hysteresis_at_the_folds():
    system = compile_model(DUFFING)
    _, _, w_down, w_up = harmonic_balance()
    up = stepped_sweep(system, "w", 0.9, 1.3, "up", count=21)
    down = stepped_sweep(system, "w", 0.9, 1.3, "down", count=21)
    for sweep, fold, sign in ((up, w_down, -1), (down, w_up, 1)):
        jumps = np.diff(sweep.amplitudes) * sign
        (j,) = np.nonzero(jumps > 0.5)  # one jump, across the fold where the followed response ends
        assert min(sweep.values[j], sweep.values[j + 1]) < fold * 1.002
        assert max(sweep.values[j], sweep.values[j + 1]) > fold * 0.998
    # between the folds the two sweeps show different responses: hysteresis
    inside = (up.values > w_up + 0.01) & (up.values < w_down - 0.01)
    assert np.all(up.amplitudes[inside] > 1.0)
    assert np.all(np.interp(up.values[inside], down.values[::-1], down.amplitudes[::-1]) < 0.6)
    assert all(up.stable) and all(down.stable)
