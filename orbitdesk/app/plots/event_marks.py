"""Marks of the model's events on a plot: where each event happened, and the jump it made.

A view holds one ``EventMarks`` per plot and calls ``show(trajectory, pairs)`` after drawing, with
``pairs`` = [(x name, y name, colour)] of what it plots ("t" for the time). Each event is a hollow
ring at the values before it and a filled dot at the values after it, joined by a dashed line (a
reset of a speed is a vertical jump in the time series, a jump across the phase plane); hovering a
mark names the event's line and rule. The marks only present the run's record
(``Trajectory.model_events``); nothing here computes.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt

from orbitdesk.app.plots.plot_style import number_text

MAX_MARKED = 2_000  # events drawn per plot (the first ones); the rest are counted in the note


class EventMarks:
    def __init__(self, plot):
        self.plot = plot
        self.jumps = pg.PlotDataItem(connect="pairs")
        self.before = pg.ScatterPlotItem(hoverable=True, tip=_tip)
        self.after = pg.ScatterPlotItem(hoverable=True, tip=_tip)
        for item in (self.jumps, self.before, self.after):
            item.setZValue(20)
            plot.addItem(item)
        self.count = 0

    def clear(self) -> None:
        self.jumps.setData([], [])
        self.before.clear()
        self.after.clear()
        self.count = 0

    def show(self, trajectory, pairs) -> str:
        """Mark the events of ``trajectory`` for each (x, y, colour) of ``pairs``; a note in words."""
        self.clear()
        events = list(trajectory.model_events) if trajectory is not None else []
        if not events:
            return ""
        shown = events[:MAX_MARKED]
        jx, jy, before, after = [], [], [], []
        for x_name, y_name, colour in pairs:
            for ev in shown:
                xb, yb = _value(ev, ev.before, x_name), _value(ev, ev.before, y_name)
                xa, ya = _value(ev, ev.after, x_name), _value(ev, ev.after, y_name)
                if None in (xb, yb, xa, ya):
                    continue
                data = f"line {ev.line}: {ev.rule}\nat t = {number_text(ev.t)}"
                before.append({"pos": (xb, yb), "data": data + " (before)", "brush": pg.mkBrush(None),
                               "pen": pg.mkPen(colour, width=1.4)})
                after.append({"pos": (xa, ya), "data": data + " (after)", "brush": pg.mkBrush(colour),
                              "pen": pg.mkPen(colour, width=1.0)})
                if (xb, yb) != (xa, ya):
                    jx += [xb, xa]
                    jy += [yb, ya]
        self.before.setData(before, size=8, symbol="o")
        self.after.setData(after, size=6, symbol="o")
        if jx:
            colour = pairs[0][2] if len(pairs) == 1 else (150, 150, 150)
            self.jumps.setData(np.array(jx), np.array(jy), pen=pg.mkPen(colour, width=1.0, style=Qt.PenStyle.DashLine))
        self.count = len(events)
        more = f" (the first {MAX_MARKED:,} are marked)" if len(events) > MAX_MARKED else ""
        return f"{len(events):,} event{'s' if len(events) != 1 else ''}{more}: ring before, dot after"


TIME_NAMES = ("t", "n")


def through_events(trajectory, names, columns, time=None):
    """``columns`` (the run's values of ``names`` at the sample times ``time``, by default the run's own)
    broken at each of the run's events, the one way every view draws a trajectory of a model with events
    (time series, phase plane, 3D, their exported pictures): a drawn line ends on the boundary the event
    fired at and goes on from the values the event set (the marks' dashed line is the jump), instead of a
    straight line from the last sample before the event to the first after it (a vertical line in the time
    series where a speed is reset). Each event puts in its values before and after it at its time with a
    gap (NaN) between; the time column ("t", "n") holds the event's time in all three rows, so it stays
    ordered. A column the event's record does not hold (a derived quantity) gets NaN there: the line is
    still broken. Where the samples already hold the event's time twice (every step kept, stiff methods:
    before, then after), only the gap goes between them. Returns a list of arrays."""
    columns = [None if c is None else np.asarray(c, dtype=float) for c in columns]
    events = list(getattr(trajectory, "model_events", None) or []) if trajectory is not None else []
    time = np.asarray(trajectory.time if time is None and trajectory is not None else time, dtype=float)
    if not events or time.size == 0 or any(c is None or c.shape != time.shape for c in columns):
        return columns
    at, rows = [], []
    for ev in events:
        t = float(ev.t)
        if not time[0] <= t <= time[-1]:  # (in a transient left out, or beyond what is drawn)
            continue
        gap = [t if n in TIME_NAMES else np.nan for n in names]
        left, right = int(np.searchsorted(time, t, side="left")), int(np.searchsorted(time, t, side="right"))
        if right - left >= 2:  # the samples hold the values before and after: break between them
            at.append(left + 1)
            rows.append(gap)
            continue
        before = [_known(_value(ev, ev.before, n)) for n in names]
        after = [_known(_value(ev, ev.after, n)) for n in names]
        if right - left == 1 and _same(before, [c[left] for c in columns]):
            at += [right, right]  # the one sample at the event holds the values before it
            rows += [gap, after]
        else:
            at += [left] * 3
            rows += [before, gap, after]
    if not at:
        return columns
    at = np.asarray(at, dtype=np.int64)
    values = np.asarray(rows, dtype=float)
    return [np.insert(c, at, values[:, k]) for k, c in enumerate(columns)]


def _known(value):
    return np.nan if value is None else value


def _same(a, b) -> bool:
    return all(np.isnan(u) or u == v for u, v in zip(a, b))


def _value(ev, values: dict, name: str):
    if name in ("t", "n"):
        return float(ev.t)
    value = values.get(name)
    return None if value is None else float(value)


def _tip(x, y, data):
    return str(data)


__all__ = ["EventMarks", "MAX_MARKED", "TIME_NAMES", "through_events"]
