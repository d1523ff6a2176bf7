"""Display decimation keeps what a pixel column shows: its extremes, in order, within a point budget."""

import numpy as np

from orbitdesk.core.decimate import minmax_decimate


def _columns(x, n_bins, lo, hi):
    return np.minimum(((x - lo) / (hi - lo) * n_bins).astype(int), n_bins - 1)


def test_each_column_keeps_its_minimum_and_maximum():
    rng = np.random.default_rng(7)
    x = np.linspace(0.0, 10.0, 200_001)
    y = np.sin(3 * x) + 0.2 * rng.standard_normal(x.size)
    xd, yd = minmax_decimate(x, y, 800)
    assert xd.size <= 2 * 800 + 2
    assert np.all(np.diff(xd) >= 0)  # original order
    full = _columns(x, 800, 0.0, 10.0)
    kept = _columns(xd, 800, 0.0, 10.0)
    # reference: the extremes per column computed directly from the full series
    for column in rng.choice(800, 50, replace=False):
        assert yd[kept == column].min() == y[full == column].min()
        assert yd[kept == column].max() == y[full == column].max()
    assert (xd[0], yd[0], xd[-1], yd[-1]) == (x[0], y[0], x[-1], y[-1])


def test_a_spike_of_one_sample_survives():
    x = np.arange(1_000_000, dtype=float)
    y = np.zeros_like(x)
    y[654_321] = 5.0
    xd, yd = minmax_decimate(x, y, 500)
    assert 5.0 in yd and xd[np.argmax(yd)] == 654_321


def test_gaps_stay_and_small_series_pass_through():
    x = np.linspace(0, 1, 10_000)
    y = np.cos(x)
    y[5000:5010] = np.nan
    xd, yd = minmax_decimate(x, y, 100)
    assert np.isnan(yd).sum() == 10
    small_x, small_y = minmax_decimate(x[:50], y[:50], 100)
    assert small_x.size == 50 and np.array_equal(small_y, y[:50])
