"""Fewer points for the screen, never for the data: min/max per pixel column, screen-resolution paths.

``minmax_decimate(x, y, n_bins)`` cuts the x range into ``n_bins`` equal columns (one per pixel)
and keeps, in each column, the points where y is smallest and largest, in their original order,
plus the first and last point. A line through the kept points covers the same pixels as the full
series; the full arrays stay with the run for export and analysis. NaN values (gaps) are kept.
"""

from __future__ import annotations

import numpy as np


def minmax_decimate(x, y, n_bins: int) -> tuple[np.ndarray, np.ndarray]:
    """At most ``2 * n_bins + 2`` points of (x, y) drawing like the whole; x must be non-decreasing."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    n_bins = max(1, int(n_bins))
    if x.size <= 2 * n_bins + 2:
        return x, y
    lo, hi = x[0], x[-1]
    span = hi - lo
    if not (np.isfinite(span) and span > 0):
        return x[[0, -1]], y[[0, -1]]
    column = np.minimum(((x - lo) / span * n_bins).astype(np.int64), n_bins - 1)
    starts = np.searchsorted(column, np.arange(n_bins), side="left")
    present = starts < np.searchsorted(column, np.arange(n_bins), side="right")
    starts = starts[present]
    finite_y = np.where(np.isnan(y), np.inf, y)
    low = np.minimum.reduceat(finite_y, starts)
    high = np.maximum.reduceat(np.where(np.isnan(y), -np.inf, y), starts)
    index = np.arange(x.size)
    # position of each column's minimum and maximum: the first index reaching them
    is_low = finite_y == np.repeat(low, np.diff(np.append(starts, x.size)))
    is_high = np.where(np.isnan(y), -np.inf, y) == np.repeat(high, np.diff(np.append(starts, x.size)))
    first_low = np.minimum.reduceat(np.where(is_low, index, x.size), starts)
    first_high = np.minimum.reduceat(np.where(is_high, index, x.size), starts)
    keep = np.zeros(x.size, dtype=bool)
    keep[first_low[first_low < x.size]] = True
    keep[first_high[first_high < x.size]] = True
    keep[0] = keep[-1] = True
    keep |= np.isnan(y)  # gaps stay gaps
    return x[keep], y[keep]


def _joins(finite: np.ndarray) -> np.ndarray:
    """connect[i]: point i joins point i + 1 (both finite); the last entry is False."""
    out = np.zeros(finite.size, dtype=bool)
    out[:-1] = finite[:-1] & finite[1:]
    return out


def screen_path(x, y, view, size, ordered_x: bool = False):
    """The part of the polyline (x, y) worth drawing in a plot of ``size`` = (width, height) pixels
    showing ``view`` = ((x0, x1), (y0, y1)); returns (x, y, connect) with ``connect[i]`` True when
    point i is joined to point i + 1. Nothing visible is lost: at most half a pixel moves.

    * ``ordered_x`` (time series): the points within one pixel column of each other are replaced by
      their extremes in their own order (``minmax_decimate``) after cutting away what lies beyond the
      left and right edges (one point past each edge is kept so the line runs to the edge).
    * otherwise (phase portraits): a point in the same half-pixel cell as the one before it is dropped
      (a run of a million samples draws as a few thousand segments) and segments wholly beyond one edge
      of the view are left out.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    (x0, x1), (y0, y1) = view
    width, height = max(1.0, float(size[0])), max(1.0, float(size[1]))
    spans_ok = all(np.isfinite(v) for v in (x0, x1, y0, y1)) and x1 > x0 and y1 > y0
    if x.size < 3 or not spans_ok:
        return x, y, _joins(np.isfinite(x) & np.isfinite(y))
    if ordered_x:
        a = max(0, int(np.searchsorted(x, x0, side="left")) - 1)
        b = min(x.size, int(np.searchsorted(x, x1, side="right")) + 1)
        xs, ys = minmax_decimate(x[a:b], y[a:b], int(round(width)))
        return xs, ys, _joins(np.isfinite(xs) & np.isfinite(ys))
    px = np.clip((x - x0) * (width / (x1 - x0)), -1e7, 1e7)
    py = np.clip((y - y0) * (height / (y1 - y0)), -1e7, 1e7)
    finite = np.isfinite(px) & np.isfinite(py)
    seg = finite[:-1] & finite[1:]
    margin = 2.0
    for side in (px < -margin, px > width + margin, py < -margin, py > height + margin):
        seg &= ~(side[:-1] & side[1:])
    qx = np.floor(np.where(finite, px, 0.0) * 2).astype(np.int64)
    qy = np.floor(np.where(finite, py, 0.0) * 2).astype(np.int64)
    # collapse runs of points in one cell into their first point
    same = np.zeros(x.size, dtype=bool)
    same[1:] = (qx[1:] == qx[:-1]) & (qy[1:] == qy[:-1]) & seg
    keep = ~same
    keep[-1] = True
    idx = np.flatnonzero(keep)
    bad = np.concatenate([[0], np.cumsum(~seg)])  # invalid segments before each point
    joined = bad[idx[1:]] == bad[idx[:-1]]        # a kept segment is valid if none between is invalid
    connect = np.zeros(idx.size, dtype=bool)
    connect[:-1] = joined
    used = connect.copy()
    used[1:] |= joined
    return x[idx][used], y[idx][used], connect[used]
