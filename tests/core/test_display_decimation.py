"""Display decimation keeps what a pixel column shows: its extremes, in order, within a point budget."""

import numpy as np

from orbitdesk.analyses.decimate import minmax_decimate


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


# ---------------------------------------------------------------- screen-resolution paths
def test_a_time_series_path_keeps_each_pixel_columns_extremes_of_what_is_in_view():
    from orbitdesk.analyses.decimate import screen_path

    x = np.linspace(0.0, 100.0, 400_001)
    y = np.sin(x) * np.exp(-x / 50)
    xs, ys, connect = screen_path(x, y, ((20.0, 30.0), (-1.0, 1.0)), (500, 300), ordered_x=True)
    assert xs.size <= 2 * 500 + 4 and np.all(np.diff(xs) >= 0)
    assert xs[0] < 20.0 <= xs[1] and xs[-2] <= 30.0 < xs[-1]  # one point past each edge, nothing more
    inside = (x >= 20.0) & (x <= 30.0)
    # the drawn extremes are the data's (reference: the full series in the window)
    assert ys.max() == y[inside | (np.abs(x - 20.0) < 1e-3) | (np.abs(x - 30.0) < 1e-3)].max()
    assert connect[:-1].all() and not connect[-1]


def test_a_portrait_path_stays_within_half_a_pixel_and_breaks_at_gaps():
    from orbitdesk.analyses.decimate import screen_path

    t = np.linspace(0.0, 20 * np.pi, 1_000_000)
    x, y = np.cos(t), np.sin(t)
    y[500_000] = np.nan  # a gap in the data stays a gap
    xs, ys, connect = screen_path(x, y, ((-1.2, 1.2), (-1.2, 1.2)), (400, 400))
    assert xs.size < 60_000  # ten turns of a circle 330 px across, drawn at half-pixel resolution
    assert np.all(np.isfinite(xs) & np.isfinite(ys))
    # every kept point is a data point (on the unit circle), and every data point is within half a
    # pixel (2.4 / 400 / 2 in data units) of a drawn segment's end
    np.testing.assert_allclose(np.hypot(xs, ys), 1.0, atol=1e-12)
    angle = np.sort(np.arctan2(ys, xs))
    assert np.max(np.diff(angle)) * 1.0 < 2 * 2.4 / 400
    assert connect.sum() < xs.size - 1  # the gap (and nothing else) breaks the line
    assert xs.size - 1 - connect.sum() <= 2


def test_a_portrait_path_leaves_out_segments_beyond_the_view():
    from orbitdesk.analyses.decimate import screen_path

    x = np.linspace(-100.0, 100.0, 20_001)
    y = np.zeros_like(x)
    xs, _ys, connect = screen_path(x, y, ((-1.0, 1.0), (-1.0, 1.0)), (200, 200))
    drawn = xs[:-1][connect[:-1]]
    assert drawn.size and drawn.min() >= -1.1 and drawn.max() <= 1.1
