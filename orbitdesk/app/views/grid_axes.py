"""The two axes of a grid view, shared by the basins (two states) and the two-parameter map (two
parameters): for each axis a name, a range and a number of values; their saved settings (``{"x": {NOUN,
"from", "to", "count"}, "y": {...}}``, document/view_settings.py), the rows of controls, the names offered
and the values a computation runs over."""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import QRectF
from PySide6.QtWidgets import QSpinBox

from orbitdesk.app.plots.plot_style import NumberBox
from orbitdesk.app.views.common import (SessionView, apply_numbers, combo_box, control_row, fill_combo,
                                        follow_forcing_period, quiet, select_text)

AXES = (("x", "Across", "across"), ("y", "Up", "up"))


def count_box(value: int, maximum: int, tip: str = "How many values, evenly spaced"):
    """A spin box for the number of grid values along one axis (2 .. ``maximum``)."""
    box = QSpinBox()
    box.setRange(2, maximum)
    box.setValue(value)
    box.setKeyboardTracking(False)
    box.setToolTip(tip)
    return box


def grid_rect(xs, ys):
    """The rectangle an image of one cell per grid point covers: cells centred on the values."""
    dx = (xs[-1] - xs[0]) / (xs.size - 1) if xs.size > 1 else 1.0
    dy = (ys[-1] - ys[0]) / (ys.size - 1) if ys.size > 1 else 1.0
    return QRectF(xs[0] - dx / 2, ys[0] - dy / 2, dx * xs.size, dy * ys.size)


def grid_export(result):
    """(header, rows) of a grid result for the view's data export: one row per grid point (the command
    line's CSV is the same table, exports/csv_table.grid_table); None without a result."""
    if result is None:
        return None
    from orbitdesk.exports.csv_table import grid_table

    header, columns = grid_table(result)
    return header, np.column_stack(columns)


class GridView(SessionView):
    """An analysis view over a grid of two axes (``self.axes``: GridAxes), with ``info`` (status words),
    ``strip`` (its JobStrip), ``period`` (a forced flow's period box, ``_user_period`` once typed) and
    ``_show(result or None)``: the basins and the two-parameter map."""

    on_request = True

    def export_data(self):
        return grid_export(self.result)

    def show_no_result(self) -> None:
        self._show(None)

    def _want_axes(self, d: dict) -> None:
        """The saved axes, applied now if the model's names are there, else once they are."""
        self.axes.want(d)
        if self.system is not None:
            self.axes.apply_wanted()

    def _run_grid(self, key: str, job, what: str, skip=None) -> None:
        """Start the grid's computation (``job``, saying ``what`` it does): the result goes to ``_adopt``."""
        self.begin_computing(skip=skip)
        self.info.setText("")
        if getattr(self, "image", None) is not None and self.image.image is None:
            # an empty plot shows the grid being computed (its axes' names and ranges), not -0.5 to 0.5
            xn, xs, yn, ys = self.axes.chosen()
            self.plot.setLabel("bottom", xn)
            self.plot.setLabel("left", yn)
            self.plot.setRange(xRange=(float(xs[0]), float(xs[-1])), yRange=(float(ys[0]), float(ys[-1])), padding=0.02)
        self.strip.what = what
        self.strip.run(key, job, self._adopt, on_error=lambda m: self.info.setText(m[:1].upper() + m[1:]))

    def _adopt(self, result) -> None:
        self.keep_result(result)

    def _on_values(self) -> None:
        if self.system is not None and self.system.kind != "map":
            follow_forcing_period(self.period, self.system, self.session.param_vector(), self._user_period)

    def _show(self, result) -> None:
        raise NotImplementedError


class GridAxes:
    """``noun``: "state" or "parameter" (the key of the name in the settings); ``defaults``: {"x": (lo, hi,
    count), "y": (...)}; at most ``max_side`` values along an axis."""

    def __init__(self, noun: str, defaults: dict, max_side: int):
        self.noun = noun
        self.combo, self.lo, self.hi, self.count = {}, {}, {}, {}
        for key, _label, where in AXES:
            lo, hi, count = defaults[key]
            self.combo[key] = combo_box(f"The {noun} {where}")
            self.lo[key], self.hi[key] = NumberBox(lo, step=0.1), NumberBox(hi, step=0.1)
            self.count[key] = count_box(count, max_side)
        self._wanted: dict = {}

    def row(self, key: str, unit: str, *more, **options):
        """The row of one axis: "Across NAME from LO to HI N UNIT" and ``more`` (control_row's items)."""
        label = dict((k, lab) for k, lab, _w in AXES)[key]
        return control_row(label, self.combo[key], "from", self.lo[key], "to", self.hi[key], self.count[key], unit,
                           *more, **options)

    def name(self, key: str) -> str:
        return self.combo[key].currentText()

    def values(self, key: str) -> np.ndarray:
        return np.linspace(self.lo[key].value(), self.hi[key].value(), self.count[key].value())

    def chosen(self):
        """(x name, x values, y name, y values); ValueError in plain words when both axes name the same."""
        if self.name("x") == self.name("y"):
            raise ValueError(f"Choose two different {self.noun}s")
        return self.name("x"), self.values("x"), self.name("y"), self.values("y")

    def set_range(self, key: str, lo: float, hi: float) -> None:
        with quiet(self.lo[key], self.hi[key]):
            self.lo[key].setValue(float(min(lo, hi)))
            self.hi[key].setValue(float(max(lo, hi)))

    # ------------------------------------------------------------ settings
    def settings(self) -> dict:
        return {key: {self.noun: self.name(key), "from": float(self.lo[key].value()),
                      "to": float(self.hi[key].value()), "count": self.count[key].value()} for key, _l, _w in AXES}

    def want(self, d: dict) -> None:
        """Saved settings to apply once the names are there (``apply_wanted``)."""
        self._wanted = {k: d[k] for k, _l, _w in AXES if isinstance(d.get(k), dict)}

    def apply_wanted(self) -> None:
        wanted, self._wanted = self._wanted, {}
        for key, _label, _where in AXES:
            d = wanted.get(key)
            if d:
                with quiet(self.combo[key]):
                    select_text(self.combo[key], d.get(self.noun))
                apply_numbers(d, ((self.lo[key], "from", float), (self.hi[key], "to", float),
                                  (self.count[key], "count", int)))

    def offer(self, names, first=None) -> None:
        """Offer these names on both axes: the names chosen before stay, else ``first`` (x, y), else the
        first two."""
        names = list(names)
        keep = (self.name("x"), self.name("y"))
        start = first if first is not None else names[:2]
        with quiet(self.combo["x"], self.combo["y"]):
            for key, default, kept in zip(("x", "y"), list(start) + [None, None], keep):
                fill_combo(self.combo[key], names)
                select_text(self.combo[key], default)
                select_text(self.combo[key], kept)
