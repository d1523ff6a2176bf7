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


def through_events(trajectory, x_name: str, y_name: str, x, y):
    """``x``, ``y`` (the run's values of ``x_name``, ``y_name`` at its samples) with each event's values
    before and after it put in at its time and the line broken between them: a drawn curve ends on the
    boundary the event fired at and goes on from the values the event set (the marks' dashed line is
    the jump), instead of a straight line from the last sample before the event to the first after it."""
    events = list(getattr(trajectory, "model_events", None) or []) if trajectory is not None else []
    if not events or x is None or len(x) != len(trajectory.time):
        return x, y
    put, xs, ys = [], [], []
    for ev in events:
        xb, yb = _value(ev, ev.before, x_name), _value(ev, ev.before, y_name)
        xa, ya = _value(ev, ev.after, x_name), _value(ev, ev.after, y_name)
        if None in (xb, yb, xa, ya):
            continue
        put.append(ev.t)
        xs += [xb, np.nan, xa]
        ys += [yb, np.nan, ya]
    if not put:
        return x, y
    at = np.repeat(np.searchsorted(trajectory.time, np.asarray(put, dtype=float), side="right"), 3)
    return np.insert(np.asarray(x, dtype=float), at, xs), np.insert(np.asarray(y, dtype=float), at, ys)


def _value(ev, values: dict, name: str):
    if name in ("t", "n"):
        return float(ev.t)
    value = values.get(name)
    return None if value is None else float(value)


def _tip(x, y, data):
    return str(data)


__all__ = ["EventMarks", "MAX_MARKED", "through_events"]
