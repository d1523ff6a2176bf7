"""Parts of the 3D scene that do not depend on the view: GL items with one shader program per context,
thinning, round tick values, the data box and its frame (grid, edges, tick numbers and names), solid colour
arrays, and lines broken at gaps (the model's events) and where a wrapped angle goes round (one strip with
invisible joins)."""

from __future__ import annotations

import math

import numpy as np
from PySide6.QtGui import QColor, QFont

from orbitdesk.app.plots.plot_style import number_text, readable_span, rgba

_ITEM_CLASSES: dict = {}


def _gl_item_classes(gl):
    """Line and point items that keep one shader program per OpenGL context.

    pyqtgraph 0.14 caches each item class's shader program for the first context that drew it, so
    a second 3D scene (another view, or this one re-created) would draw with a program from a
    foreign context (pyqtgraph issue #3455). These subclasses swap the cached program per context.
    """
    if _ITEM_CLASSES:
        return _ITEM_CLASSES["line"], _ITEM_CLASSES["points"]
    from PySide6.QtGui import QOpenGLContext

    def per_context(base):
        programs: dict[int, object] = {}

        def paint(self):
            ctx = QOpenGLContext.currentContext()
            key = id(ctx)
            if key not in programs and ctx is not None:
                programs[key] = None
                ctx.aboutToBeDestroyed.connect(lambda k=key: programs.pop(k, None))
            base._shaderProgram = programs.get(key)
            try:
                base.paint(self)
            finally:
                programs[key] = base._shaderProgram

        return type(base.__name__, (base,), {"paint": paint})

    _ITEM_CLASSES["line"] = per_context(gl.GLLinePlotItem)
    _ITEM_CLASSES["points"] = per_context(gl.GLScatterPlotItem)
    return _ITEM_CLASSES["line"], _ITEM_CLASSES["points"]


def thin_indices(n: int, limit: int) -> np.ndarray:
    """Evenly spaced indices (first and last kept) so that at most ``limit`` of ``n`` points remain."""
    if n <= limit:
        return np.arange(n)
    return np.unique(np.linspace(0, n - 1, limit).round().astype(np.int64))


def nice_ticks(lo: float, hi: float, count: int = 5) -> np.ndarray:
    """Round tick values (1, 2, 5 times a power of ten) inside [lo, hi]."""
    span = hi - lo
    if not (math.isfinite(span) and span > 0):
        return np.array([lo])
    raw = span / max(count, 1)
    mag = 10 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 5, 10) if m * mag >= raw)
    first = math.ceil(lo / step - 1e-9) * step
    ticks = np.arange(first, hi + step * 1e-9, step)
    return np.where(np.abs(ticks) < step * 1e-9, 0.0, ticks)


def data_box(arrays, pad: float = 0.04):
    """(lo, hi) per axis over the finite values of the given (N, 3) arrays, padded a little."""
    lo, hi = np.full(3, np.inf), np.full(3, -np.inf)
    for a in arrays:
        if a is None or a.size == 0:
            continue
        finite = a[np.all(np.isfinite(a), axis=1)]
        if finite.size:
            lo, hi = np.minimum(lo, finite.min(axis=0)), np.maximum(hi, finite.max(axis=0))
    out = []
    for k in range(3):
        a, b = lo[k], hi[k]
        if not (math.isfinite(a) and math.isfinite(b)):
            a, b = -1.0, 1.0
        a, b = readable_span(a, b)  # a flat axis: a span around its value (the 2D plots' rule)
        d = (b - a) * pad
        out.append((a - d, b + d))
    return out


def _solid(colour: str, alpha: float, n: int) -> np.ndarray:
    """One colour for n points as an (n, 4) array (items that once had per-point colours need arrays)."""
    return _solid_rgba(QColor(colour), alpha, n)


def _solid_rgba(colour, alpha: float, n: int) -> np.ndarray:
    return np.tile(np.array(rgba(colour, alpha), dtype=np.float32), (max(n, 0), 1))


def wrap_breaks(xyz: np.ndarray, wrapped_columns) -> np.ndarray | None:
    """Indices i where the line from point i to i + 1 must not be drawn: a wrapped angle column jumps by more
    than pi there (it went round); None when nothing breaks."""
    if not wrapped_columns or xyz.shape[0] < 2:
        return None
    with np.errstate(invalid="ignore"):
        jumps = np.any(np.abs(np.diff(xyz[:, list(wrapped_columns)], axis=0)) > np.pi, axis=1)
    return np.flatnonzero(jumps) if jumps.any() else None


def broken_line(pos: np.ndarray, colour: np.ndarray, wrapped_columns):
    """(pos, colour) of a line's finite points as one strip, broken where it must not be drawn on: at a gap
    (points not finite between them: an event's break, a part left out) and where a wrapped angle goes round.
    A break is an invisible join (its two ends again, fully transparent), not separate segments: GL draws a
    strip of short segments solid, the same segments drawn one by one came out dotted."""
    ok = np.all(np.isfinite(pos), axis=1)
    index = np.flatnonzero(ok)
    pos, colour = pos[ok], np.asarray(colour, dtype=np.float32)[ok]
    breaks = np.flatnonzero(np.diff(index) > 1)
    wraps = wrap_breaks(pos, wrapped_columns)
    if wraps is not None:
        breaks = np.union1d(breaks, wraps)
    if not breaks.size:
        return pos, colour
    at = np.repeat(breaks + 1, 2)
    ends = np.column_stack([breaks, breaks + 1]).ravel()  # point i and point i + 1 of each break, again
    hidden = colour[ends].copy()
    hidden[:, 3] = 0.0
    return np.insert(pos, at, pos[ends], axis=0), np.insert(colour, at, hidden, axis=0)


def hidden_joins(colour: np.ndarray) -> np.ndarray:
    """Indices i of a strip made by ``broken_line`` whose segment from point i to i + 1 is not seen."""
    alpha = np.asarray(colour)[:, 3]
    return np.flatnonzero((alpha[:-1] == 0) | (alpha[1:] == 0))


def box_frame(box, half: float, names, font, text_colour):
    """(grid segments, box edges, labels) of the frame around the data ``box`` [(lo, hi)] * 3 drawn as the
    cube [-half, half]^3: a floor grid, two back walls, the three axes with tick values and ``names``.
    Labels are (box position, text, colour, font) each, the names in bold.

    Seen from the starting camera (from +x, -y, above): x runs along the front-left floor edge,
    y along the front-right one, z up the left corner; the walls x = low and y = high are behind."""
    ticks = [nice_ticks(lo, hi, 5) for lo, hi in box]
    tx, ty, tz = ((t - lo) / (hi - lo) * 2 * half - half for t, (lo, hi) in zip(ticks, box))
    h = half
    seg = []
    for x in tx:  # floor, and up the back wall y = high
        seg += [(x, -h, -h), (x, h, -h), (x, h, -h), (x, h, h)]
    for y in ty:  # floor, and up the back wall x = low
        seg += [(-h, y, -h), (h, y, -h), (-h, y, -h), (-h, y, h)]
    for z in tz:  # rungs on both back walls
        seg += [(-h, -h, z), (-h, h, z), (-h, h, z), (h, h, z)]
    edges = [(-h, -h, -h), (h, -h, -h),   # x axis
             (h, -h, -h), (h, h, -h),     # y axis
             (-h, -h, -h), (-h, -h, h),   # z axis
             (-h, h, -h), (-h, h, h), (h, h, -h), (h, h, h), (-h, -h, h), (-h, h, h), (-h, h, h), (h, h, h)]
    bold = QFont(font)
    bold.setBold(True)
    labels = []
    label_pos = [(0.0, -h * 1.28, -h), (h * 1.28, 0.0, -h), (-h * 1.08, -h * 1.08, h * 1.1)]
    for k in range(3):
        for v, b in zip(ticks[k], (tx, ty, tz)[k]):
            if abs(b) > h * 0.94 and (k < 2 or b < 0):
                continue  # keep the corners free for the neighbouring axis
            where = [(b, -h * 1.1, -h), (h * 1.1, b, -h), (-h * 1.08, -h * 1.08, b)][k]
            labels.append((np.array(where, dtype=float), number_text(v, 4), text_colour, font))
        if names[k]:
            labels.append((np.array(label_pos[k], dtype=float), names[k], text_colour, bold))
    return (np.array(seg, dtype=np.float32).reshape(-1, 3), np.array(edges, dtype=np.float32), labels)
