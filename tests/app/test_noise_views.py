"""Views of a model with noise: the time series draws realisations faintly with their mean and a
+-1 standard deviation band, its spectrum is averaged over the realisations, and the Noise statistics
view shows the histogram of a state. Checked against the Ornstein-Uhlenbeck closed form (stationary
standard deviation sigma / sqrt(2 theta); Gardiner, Handbook of Stochastic Methods, 4.5.4)."""

import numpy as np
import pytest

from .conftest import ARTIFACTS, load_model, open_view

OU = "x' = -theta*x + sigma*noise\ntheta = 1\nsigma = 1\nx(0) = 2\n"
SOLVER = dict(t_end=40.0, samples=801, dt=0.01, realisations=60, seed=4)


def test_time_series_draws_realisations_mean_and_band(qtbot, session):
    traj = load_model(qtbot, session, OU, SOLVER)
    R = traj.realisations
    assert R is not None and R.count == 60
    ts = open_view(qtbot, session, "timeseries", (900, 500))
    ts.set_series(["x"])
    curve = ts._curves["x"]
    assert np.array_equal(curve.xData, R.time) and np.allclose(curve.yData, R.mean[0], equal_nan=True)
    faint = [item for item in ts._noise_items if hasattr(item, "xData") and item.xData is not None]
    assert len(faint) >= 12 and "60 realisations, seed 4" in ts.note.text()
    header, rows = ts.export_data()
    assert header == ["t", "x", "mean(x)", "std(x)"] and np.allclose(rows[:, 3], R.std[0])
    ts.grab().save(f"{ARTIFACTS}/noise_timeseries.png")
    ts.spectrum.setChecked(True)
    assert "averaged over 60 realisations" in ts.note.text()
    ts.grab().save(f"{ARTIFACTS}/noise_spectrum.png")


def test_noise_statistics_histogram_of_the_stationary_part(qtbot, session):
    traj = load_model(qtbot, session, OU, SOLVER)
    view = open_view(qtbot, session, "noise_statistics", (700, 450))
    r = view.result
    assert r is not None and r.mode == "stationary" and r.time == pytest.approx(20.0)
    assert r.count == 60 * 401  # every sample of every realisation from t = 20 on (20, 20.05, ..., 40)
    # closed form: standard deviation 1/sqrt(2) = 0.7071; the pooled samples are correlated over about
    # 1/theta, so the effective sample is about 60 * 20 = 1200: standard error of the std about 0.015
    assert abs(r.std - 1 / np.sqrt(2)) < 0.06 and abs(r.mean) < 0.08
    assert np.sum(r.density * np.diff(r.edges)) == pytest.approx(1.0)
    assert "from 60 realisations" in view.summary.text()
    view.grab().save(f"{ARTIFACTS}/noise_histogram.png")
    view.mode.setCurrentIndex(1)  # at one time: one value per realisation, at the end by default
    assert view.result.mode == "time" and view.result.count == 60 and view.result.time == pytest.approx(40.0)
    assert view.view_settings()["mode"] == "time"


def test_noise_statistics_says_what_it_is_for_without_noise(qtbot, session):
    load_model(qtbot, session, "x' = -x\nx(0) = 1\n", dict(t_end=5.0, samples=51))
    view = open_view(qtbot, session, "noise_statistics")
    assert view.result is None and view.empty.isVisible()


def test_views_that_assume_determinism_say_they_use_the_noise_free_part(qtbot, session):
    load_model(qtbot, session, OU, SOLVER)
    view = open_view(qtbot, session, "equilibria")
    assert view.noise_note.isVisible() and "noise-free part" in view.noise_note.text()
    load_model(qtbot, session, "x' = -x\nx(0) = 1\n", dict(t_end=5.0, samples=51))
    assert not view.noise_note.isVisible()


def test_the_spectrum_axis_is_chosen_from_where_the_power_is(qtbot, session):
    # a lightly damped oscillator shaken by white noise (the rocking-buoy sample's model): its displacement's
    # spectrum peaks at sqrt(k - c^2/2) / (2 pi) = 0.3175 cycles per unit time (closed form); samples every
    # 0.02 reach frequencies up to 25, where the power is a hundred million times below the peak
    text = "k = 4\nc = 0.2\nx'' = -k*x - c*x' + 0.3*noise\nx(0) = 0.5\nx'(0) = 0\n"
    load_model(qtbot, session, text, dict(t_end=60.0, samples=3001, dt=0.01, realisations=20, seed=1))
    ts = open_view(qtbot, session, "timeseries", (900, 500))
    ts.set_series(["x"])
    ts.spectrum.setChecked(True)
    header, rows = ts.export_data()
    peak = rows[np.argmax(rows[:, 1]), 0]
    assert peak == pytest.approx(np.sqrt(4 - 0.02) / (2 * np.pi), abs=1 / 60)
    (x0, x1), (y0, y1) = ts.plot.viewRange()
    assert x0 <= 0.0 and x1 < 5.0
    assert 0.2 <= (peak - x0) / (x1 - x0) <= 0.8, (x0, x1, peak)  # the peak in the middle of the axis
    assert y1 >= np.log10(rows[:, 1].max())  # (log axis) the peak is not cut off
    ts.grab().save(f"{ARTIFACTS}/noise_spectrum_axis.png")
