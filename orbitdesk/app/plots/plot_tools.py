"""Reading values off plots, for every plot of every view:

* a readout in the plot's corner: the coordinates under the mouse, and in a plot against time the
  value of each curve at that time;
* a measurement between two points: Ctrl+click one point, then another; the readout gives Δx, Δy, the
  distance and 1/Δx (a period read as a frequency); a third Ctrl+click starts a new one;
* names with units for the quantities on the axes ("x" shown as "position (m)"), kept in the view's
  settings under ``axis_names`` and applied wherever the view puts that quantity on an axis.
"""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QObject, Qt

from orbitdesk.app.plots.plot_style import number_text

SETTINGS_KEY = "axis_names"


def is_tool_item(item) -> bool:
    """Items these tools add to a plot (left out of exports and reports)."""
    return bool(getattr(item, "_plot_tool", False))


def _label(plot_item, name: str, fallback: str) -> str:
    axis = plot_item.getAxis(name)
    text = str(axis.labelText or "").strip()
    return text or fallback


def curve_values_at(plot_item, x: float) -> list[tuple[str, float]]:
    """(name, value) of each visible named curve at ``x`` (linear between samples; x must not decrease)."""
    out = []
    for item in plot_item.items:
        if not isinstance(item, pg.PlotDataItem) or not item.isVisible() or not item.name() or is_tool_item(item):
            continue
        xs, ys = item.getOriginalDataset()
        if xs is None or len(xs) < 2 or not (xs[0] <= x <= xs[-1]):
            continue
        k = int(np.searchsorted(xs, x))
        k = min(max(k, 1), len(xs) - 1)
        x0, x1 = float(xs[k - 1]), float(xs[k])
        w = 0.0 if x1 == x0 else (x - x0) / (x1 - x0)
        value = float(ys[k - 1] + w * (ys[k] - ys[k - 1]))
        if np.isfinite(value):  # (not in a gap: a curve broken at an event)
            out.append((str(item.name()), value))
    return out


def measurement_text(a, b, x_name: str, y_name: str) -> str:
    """Δx, Δy, the distance and 1/Δx between two points (a, b) of a plot."""
    dx, dy = b[0] - a[0], b[1] - a[1]
    parts = [f"Δ{x_name} = {number_text(dx, 5)}", f"Δ{y_name} = {number_text(dy, 5)}"]
    if dx != 0:
        parts.append(f"1/Δ{x_name} = {number_text(1 / dx, 5)}")
    parts.append(f"distance {number_text(math.hypot(dx, dy), 5)}")
    return "   ".join(parts)


class PlotReadout(QObject):
    """The readout and the two-point measurement of one plot (see the module's text). ``along_x``:
    the plot's curves are against an x that never decreases (time), so their values are read too."""

    def __init__(self, plot_widget, along_x: bool = False):
        super().__init__(plot_widget)
        self.widget = plot_widget
        self.plot = plot_widget.getPlotItem()
        self.vb = self.plot.getViewBox()
        self.along_x = along_x
        self.points: list[tuple[float, float]] = []
        self.hover = ""
        self.measure = ""
        self.label = pg.TextItem(anchor=(0, 0))
        self.label.setParentItem(self.vb)
        self.label.setPos(6, 4)
        self.label.setZValue(1000)
        self.marks = pg.ScatterPlotItem(size=9, symbol="+")
        self.line = pg.PlotDataItem()
        for item in (self.marks, self.line, self.label):
            item._plot_tool = True
        self.plot.addItem(self.line, ignoreBounds=True)
        self.plot.addItem(self.marks, ignoreBounds=True)
        self.restyle()
        scene = plot_widget.scene()
        scene.sigMouseMoved.connect(self._moved)
        scene.sigMouseClicked.connect(self._clicked)

    def restyle(self) -> None:
        pal = self.widget.palette()
        text, base = pal.color(pal.ColorRole.Text), pal.color(pal.ColorRole.Base)
        base.setAlpha(215)
        self.label.setColor(text)
        self.label.fill = pg.mkBrush(base)
        self.marks.setPen(pg.mkPen(text, width=1.6))
        self.line.setPen(pg.mkPen(text, width=1, style=Qt.PenStyle.DashLine))
        self._show()

    def names(self) -> tuple[str, str]:
        curves = [str(i.name()) for i in self.plot.items if isinstance(i, pg.PlotDataItem) and i.name()
                  and i.isVisible() and not is_tool_item(i)]
        y_default = curves[0] if self.along_x and len(curves) == 1 else "value" if self.along_x else "y"
        return _label(self.plot, "bottom", "x"), _label(self.plot, "left", y_default)

    def _moved(self, pos) -> None:
        if not self.vb.sceneBoundingRect().contains(pos):
            self.hover = ""
            self._show()
            return
        p = self.vb.mapSceneToView(pos)
        x_name, y_name = self.names()
        x, y = p.x(), p.y()
        log_x, log_y = self.plot.getAxis("bottom").logMode, self.plot.getAxis("left").logMode
        x, y = (10 ** x if log_x else x), (10 ** y if log_y else y)
        parts = [f"{x_name} = {number_text(x, 5)}"]
        values = curve_values_at(self.plot, x) if self.along_x and not log_x else []
        if values:
            parts += [f"{name} = {number_text(v, 5)}" for name, v in values]
        else:
            parts.append(f"{y_name} = {number_text(y, 5)}")
        self.hover = "   ".join(parts)
        self._show()

    def _clicked(self, event) -> None:
        if (event.button() != Qt.MouseButton.LeftButton
                or not event.modifiers() & Qt.KeyboardModifier.ControlModifier):
            return
        pos = event.scenePos()
        if not self.vb.sceneBoundingRect().contains(pos):
            return
        p = self.vb.mapSceneToView(pos)
        self.add_point(p.x(), p.y())
        event.accept()

    def add_point(self, x: float, y: float) -> None:
        """One end of a measurement (plot coordinates): the first, the second, or a new first."""
        if len(self.points) >= 2:
            self.points = []
        self.points.append((float(x), float(y)))
        xs, ys = [p[0] for p in self.points], [p[1] for p in self.points]
        self.marks.setData(xs, ys)
        self.line.setData(xs, ys)
        x_name, y_name = self.names()
        self.measure = (measurement_text(self.points[0], self.points[1], x_name, y_name)
                        if len(self.points) == 2 else "Ctrl+click the second point")
        self._show()

    def clear(self) -> None:
        self.points, self.measure = [], ""
        self.marks.setData([], [])
        self.line.setData([], [])
        self._show()

    def text(self) -> str:
        return "\n".join(t for t in (self.hover, self.measure) if t)

    def _show(self) -> None:
        text = self.text()
        self.label.setText(text)
        self.label.setVisible(bool(text))


# ---------------------------------------------------------------- names and units of axis quantities
def _axis_setter(axis, names: dict):
    original = axis.setLabel

    def set_label(text=None, units=None, unitPrefix=None, **args):
        axis._quantity = text
        named = names.get(text) if isinstance(text, str) else None
        if named:
            text, units = named.get("text") or text, named.get("units") or None
        if (not args and unitPrefix is None and text == axis.labelText and (units or "") == (axis.labelUnits or "")
                and axis.label.isVisible() == bool(text or units)):
            return None  # the same label: the axis keeps its cached picture
        return original(text=text, units=units, unitPrefix=unitPrefix, **args)

    return set_label


def install(view) -> None:
    """Readouts, measurements and axis names on every plot of ``view`` (once)."""
    from orbitdesk.app.plots.figures import view_plots

    if getattr(view, "_plot_tools", None) is not None:
        return
    view._plot_tools = {"names": {}, "readouts": []}
    names = view._plot_tools["names"]
    along_x = getattr(view, "view_id", "") in ("timeseries", "lyapunov")
    for choice in view_plots(view):
        widget = choice.plot.getViewWidget()
        view._plot_tools["readouts"].append(PlotReadout(widget, along_x))
        for side in ("bottom", "left"):
            axis = choice.plot.getAxis(side)
            axis._quantity = axis.labelText
            axis.setLabel = _axis_setter(axis, names)


def readouts(view) -> list:
    tools = getattr(view, "_plot_tools", None)
    return list(tools["readouts"]) if tools else []


def settings(view) -> dict:
    """What these tools keep in the view's settings: the axis names, when there are any."""
    names = axis_names(view)
    return {SETTINGS_KEY: names} if names else {}


def axis_names(view) -> dict:
    """{quantity: {"text": ..., "units": ...}} the user gave in this view."""
    tools = getattr(view, "_plot_tools", None)
    return {k: dict(v) for k, v in tools["names"].items()} if tools else {}


def quantities(view) -> list[str]:
    """The quantities on the axes of the view's plots now (what a name can be given to)."""
    from orbitdesk.app.plots.figures import view_plots

    out = []
    for choice in view_plots(view):
        for side in ("bottom", "left"):
            q = getattr(choice.plot.getAxis(side), "_quantity", None)
            if isinstance(q, str) and q and q not in out:
                out.append(q)
    return out


def set_axis_names(view, names) -> None:
    """Give the view's axis quantities names and units (``{quantity: {"text", "units"}}``; anything else
    in ``names`` is ignored) and show them at once."""
    from orbitdesk.app.plots.figures import view_plots

    tools = getattr(view, "_plot_tools", None)
    if tools is None:
        return
    tools["names"].clear()
    if isinstance(names, dict):
        for quantity, entry in names.items():
            if isinstance(quantity, str) and isinstance(entry, dict):
                text, units = entry.get("text", ""), entry.get("units", "")
                if isinstance(text, str) and isinstance(units, str) and (text.strip() or units.strip()):
                    tools["names"][quantity] = {"text": text.strip()[:200], "units": units.strip()[:50]}
    for choice in view_plots(view):
        for side in ("bottom", "left"):
            axis = choice.plot.getAxis(side)
            quantity = getattr(axis, "_quantity", None)
            if isinstance(quantity, str) and quantity:
                axis.setLabel(quantity)
    if hasattr(view, "settings_changed"):
        view.settings_changed()  # the names are kept in the view's settings


def edit_axis_names(view, parent=None) -> bool:
    """A small form: a name and units for each quantity on the view's axes."""
    from PySide6.QtWidgets import QDialog, QDialogButtonBox, QFormLayout, QHBoxLayout, QLineEdit

    names = axis_names(view)
    dialog = QDialog(parent or view)
    dialog.setWindowTitle("Axis Names and Units")
    form = QFormLayout(dialog)
    fields = {}
    for quantity in quantities(view):
        text, units = QLineEdit(names.get(quantity, {}).get("text", "")), QLineEdit(
            names.get(quantity, {}).get("units", ""))
        text.setPlaceholderText(quantity)
        units.setPlaceholderText("units")
        units.setMaximumWidth(110)
        row = QHBoxLayout()
        row.addWidget(text, 1)
        row.addWidget(units)
        form.addRow(quantity, row)
        fields[quantity] = (text, units)
    buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel)
    buttons.accepted.connect(dialog.accept)
    buttons.rejected.connect(dialog.reject)
    form.addRow(buttons)
    if dialog.exec() != QDialog.DialogCode.Accepted:
        return False
    set_axis_names(view, {q: {"text": t.text(), "units": u.text()} for q, (t, u) in fields.items()})
    return True
