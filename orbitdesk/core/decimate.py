"""Fewer points for the screen, never for the data: min/max per pixel column.

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
