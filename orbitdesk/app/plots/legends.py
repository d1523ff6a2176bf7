"""Legends placed where they cover the least data: of the plot's four corners, the one whose box holds the
fewest drawn points (top right on a tie), chosen again whenever the range or the size changes. Used by
the views' plots and by the exported figures."""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg

MARGIN = 8  # pixels between the legend and the plot's edge
CLEARANCE = 24  # pixels around the legend where drawn points and names still count against a corner
CORNERS = ((1, 0), (0, 0), (1, 1), (0, 1))  # (right?, bottom?): top right first, the tie's winner


def legend_box(view_box, legend, corner) -> tuple[float, float, float, float]:
    """(left, top, right, bottom) in the view box's pixels of ``legend`` anchored in ``corner``."""
    W, H = view_box.width(), view_box.height()
    rect = legend.boundingRect()
    w, h = rect.width(), rect.height()
    right, bottom = corner
    left = W - w - MARGIN if right else MARGIN
    top = H - h - MARGIN if bottom else MARGIN
    return left, top, left + w, top + h


def drawn_points(plot_item) -> np.ndarray:
    """Every drawn point of the plot's curves and scatters, as view-box pixels (2 x N)."""
    view_box = plot_item.getViewBox()
    (x0, x1), (y0, y1) = view_box.viewRange()
    W, H = view_box.width(), view_box.height()
    if x1 <= x0 or y1 <= y0 or W <= 0 or H <= 0:
        return np.zeros((2, 0))
    parts = []
    for item in plot_item.items:
        if not item.isVisible() or not isinstance(item, (pg.PlotDataItem, pg.ScatterPlotItem)):
            continue
        x, y = item.getData()
        if x is None or y is None or len(x) == 0:
            continue
        x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
        if isinstance(item, pg.PlotDataItem) and x.size > 1:  # a line covers what lies between its points
            x = np.interp(np.arange(0, x.size - 0.5, 0.25), np.arange(x.size), x)
            y = np.interp(np.arange(0, y.size - 0.5, 0.25), np.arange(y.size), y)
        parts.append(np.vstack([(x - x0) / (x1 - x0) * W, (y1 - y) / (y1 - y0) * H]))
    for item in plot_item.items:  # names written in the plot (a special point's "fold"): their box's outline
        if isinstance(item, pg.TextItem) and item.isVisible():
            r = view_box.mapRectFromScene(item.sceneBoundingRect())
            gx, gy = np.meshgrid(np.linspace(r.left(), r.right(), 5), np.linspace(r.top(), r.bottom(), 3))
            parts.append(np.vstack([gx.ravel(), gy.ravel()]))
    return np.hstack(parts) if parts else np.zeros((2, 0))


def _grown(box, by: float):
    left, top, right, bottom = box
    return left - by, top - by, right + by, bottom + by


def covered(points: np.ndarray, box) -> int:
    left, top, right, bottom = box
    px, py = points
    with np.errstate(invalid="ignore"):
        return int(np.count_nonzero((px >= left) & (px <= right) & (py >= top) & (py <= bottom)))


def place_legend(plot_item, make_room: bool = False) -> tuple[int, int] | None:
    """Anchor the plot's legend in the corner where it covers the fewest drawn points (its entries in one
    row when every corner covers some); with ``make_room``, when even then no corner is free, the view
    range grows upward to leave a free band for it at the top. Returns the corner (right?, bottom?), or
    None when the plot has no legend with entries."""
    legend = plot_item.legend
    if legend is None or not legend.items:
        return None
    view_box = plot_item.getViewBox()
    points = drawn_points(plot_item)

    def best():
        legend.layout.activate()  # (its size after a change of columns)
        legend.updateSize()
        # fewest points under it, then fewest close by (a name or a marker just beside it), then top right first
        ranked = min(((covered(points, legend_box(view_box, legend, c)),
                       covered(points, _grown(legend_box(view_box, legend, c), CLEARANCE)), k), c)
                     for k, c in enumerate(CORNERS))
        return ranked[0][0], ranked[1]

    if legend.columnCount != 1:
        legend.setColumnCount(1)
    count, corner = best()
    if count:
        legend.setColumnCount(len(legend.items))  # one row: a thin strip
        count, corner = best()
    if count and make_room:
        corner = CORNERS[0]
        _make_room(view_box, points, legend_box(view_box, legend, corner))
    right, bottom = corner
    legend.anchor(itemPos=corner, parentPos=corner,
                  offset=(-MARGIN if right else MARGIN, -MARGIN if bottom else MARGIN))
    return corner


def _make_room(view_box, points, box) -> None:
    """Raise the top of the view range until no point under ``box`` (a top corner's) is higher than its
    bottom edge plus the margin."""
    (x0, x1), (y0, y1) = view_box.viewRange()
    H = view_box.height()
    left, _top, right, bottom = box
    px, py = points
    under = (px >= left) & (px <= right)
    if not under.any() or H <= 0:
        return
    highest = y1 - float(np.nanmin(py[under])) / H * (y1 - y0)  # the highest point there, in data units
    free = (bottom + MARGIN) / H  # the part of the height the legend's band takes
    if free >= 0.6 or not np.isfinite(highest):
        return
    view_box.setYRange(y0, (highest - free * y0) / (1 - free), padding=0)


def keep_legend_clear(plot_item) -> None:
    """Place the plot's legend now (making room for it if need be: call after fitting the range to new
    data) and again, in a corner, whenever its range or size changes."""
    view_box = plot_item.getViewBox()
    if not getattr(plot_item, "_legend_follows", False):
        plot_item._legend_follows = True
        view_box.sigRangeChanged.connect(lambda *_a: place_legend(plot_item))
        view_box.sigResized.connect(lambda *_a: place_legend(plot_item))
    place_legend(plot_item, make_room=True)
