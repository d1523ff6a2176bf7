"""The bifurcation diagram's second tab: a fold or Hopf point followed as two parameters move (the
continuation's ``Locus``), its cusp, Bogdanov-Takens and generalised Hopf points marked and listed, the
region between two fold curves meeting at a cusp shaded. The curve is the live document's result of kind
"bifurcation_locus" (document/results.py), computed in a session job; a click sets both parameters."""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QPointF
from PySide6.QtGui import QColor, QPolygonF
from PySide6.QtWidgets import (QAbstractItemView, QGraphicsPolygonItem, QHeaderView, QTableWidget, QTableWidgetItem,
                               QVBoxLayout, QWidget)

from orbitdesk.app.plots.plot_style import NumberBox
from orbitdesk.app.views import series_colour
from orbitdesk.app.views.common import clicked_point, combo_box, control_row, push_button

LOCUS_KIND = "bifurcation_locus"   # the live document's kind of result (document/results.py)
# a marker shape per kind of point (pyqtgraph symbols); colours come from the series palette
SYMBOLS = {"fold": "d", "hopf": "star", "branch point": "+", "cycle fold": "d", "period doubling": "s",
           "torus": "o", "cusp": "t", "bogdanov-takens": "p", "generalised hopf": "h"}
SYMBOL_COLOUR = {"fold": 1, "cycle fold": 1, "hopf": 4, "branch point": 5, "period doubling": 2, "torus": 6,
                 "cusp": 1, "bogdanov-takens": 5, "generalised hopf": 4}
MEANINGS = {"cusp": "two fold curves meet: the region of two steady states ends here",
            "bogdanov-takens": "the Hopf curve ends on the fold curve (zero frequency)",
            "generalised hopf": "the onset of oscillation turns from soft to hard"}


def label_anchor(x, span):
    """Labels right of a point in the left part of the plot, left of it in the right part (never clipped)."""
    lo, hi = span
    return (1.1, 1.1) if x > lo + 0.7 * (hi - lo) else (-0.15, 1.1)


class LocusTab(QWidget):
    """The two-parameter tab of ``view`` (a BifurcationView: its session, first parameter and interval)."""

    def __init__(self, view):
        super().__init__()
        self.view = view
        self.region = None  # the shaded region between fold curves meeting at a cusp
        self.kind = combo_box("Which point to follow in two parameters", ["fold", "Hopf"])
        self.param2 = combo_box("The second parameter")
        self.lo2 = NumberBox(-1.0, -1e12, 1e12, step=0.1)
        self.lo2.setToolTip("Lowest value of the second parameter")
        self.hi2 = NumberBox(1.0, -1e12, 1e12, step=0.1)
        self.hi2.setToolTip("Highest value of the second parameter")
        self.button = push_button("Compute", "Follow the fold or Hopf point found on the branch (first tab's "
                                  "parameter and interval) as both parameters move", self.compute)
        self.widget = pg.PlotWidget()
        self.plot = self.widget.getPlotItem()
        self.widget.setToolTip("Click to set both parameters there")
        self.widget.scene().sigMouseClicked.connect(self._on_click)
        self.here = pg.ScatterPlotItem(size=11, symbol="x")
        self.plot.addItem(self.here)
        self.table = QTableWidget(0, 3)
        self.table.setHorizontalHeaderLabels(["Point", "At", "What it means"])
        self.table.verticalHeader().setVisible(False)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.horizontalHeader().setSectionResizeMode(2, QHeaderView.ResizeMode.Stretch)
        self.table.setMaximumHeight(110)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(0, 4, 0, 0)
        layout.addLayout(control_row("Follow the", self.kind, "point in", self.param2, "from", self.lo2, "to",
                                     self.hi2, None, self.button, stretch=False))
        layout.addWidget(self.widget, 1)
        layout.addWidget(self.table)

    @property
    def result(self):
        """The document's two-parameter curve (None: none)."""
        return self.view.session.doc.result(LOCUS_KIND)

    def compute(self) -> None:
        view = self.view
        s = view.system
        if s is None or len(s.parameters) < 2:
            view.info.setText("Two-parameter curves need a model with two parameters")
            return
        name, name2 = view.parameter.currentText(), self.param2.currentText()
        if name == name2:
            view.info.setText("Choose a second parameter other than the first tab's parameter")
            return
        lo, hi = float(view.lo.value()), float(view.hi.value())
        range2 = (float(self.lo2.value()), float(self.hi2.value()))
        kind = "fold" if self.kind.currentIndex() == 0 else "hopf"
        u0, p = view.session.initial_vector(), view.session.param_vector()
        basis = view.values_now((name, name2))

        def job(cancel, report):
            from orbitdesk.analyses.continuation.loci import locus

            return locus(s, kind, name, name2, lo, hi, p, initial=u0, range2=range2, cancel=cancel, progress=report)

        def adopt(result):
            view.tabs.setCurrentWidget(self)
            view.session.set_result(LOCUS_KIND, result, basis)
            view.computed_by_user()

        view.strip.what = f"Following the {kind} point in {name} and {name2}"
        view.strip.run("bifurcation-locus", job, adopt, on_error=lambda m: None)

    def draw(self, box) -> None:
        """Draw the document's curve; ``box``: the computed range (x0, x1, y0, y1) the shaded region is
        closed along."""
        self.plot.clear()
        self.plot.addItem(self.here)
        self.table.setRowCount(0)
        self.region = None
        L = self.result
        if L is None:
            return
        colour = series_colour(1 if L.kind == "fold" else 4, self.view)
        if L.kind == "fold" and any(s["type"] == "cusp" for s in L.special):
            corners = region_between_fold_curves(L.values[0], L.values[1], box)
            if corners is not None:
                fill = QColor(colour)
                fill.setAlpha(45)
                inside = QPolygonF([QPointF(box[0], box[2]), QPointF(box[1], box[2]), QPointF(box[1], box[3]),
                                    QPointF(box[0], box[3])])
                polygon = QPolygonF([QPointF(x, y) for x, y in corners]).intersected(inside)
                self.region = QGraphicsPolygonItem(polygon)
                self.region.setBrush(fill)
                self.region.setPen(pg.mkPen(None))
                self.region.setToolTip("Between the fold curves: two more steady states than outside, so the "
                                       "state depends on the way there (hysteresis)")
                self.plot.addItem(self.region)
        self.plot.plot(L.values[0], L.values[1], pen=pg.mkPen(colour, width=2))
        p1, p2 = L.parameters
        self.plot.setLabel("bottom", p1)
        self.plot.setLabel("left", p2)
        from orbitdesk.analyses.continuation.results import LABELS

        text_colour = self.view.palette().color(self.view.foregroundRole())
        self.table.setRowCount(len(L.special))
        for row, s in enumerate(L.special):
            x, y = s["values"][p1], s["values"][p2]
            symbol_colour = series_colour(SYMBOL_COLOUR.get(s["type"], 1), self.view)
            self.plot.addItem(pg.ScatterPlotItem([x], [y], symbol=SYMBOLS.get(s["type"], "o"), size=13,
                                                 pen=pg.mkPen(symbol_colour), brush=pg.mkBrush(symbol_colour)))
            span = (float(np.min(L.values[0])), float(np.max(L.values[0])))
            label = pg.TextItem(LABELS.get(s["type"], s["type"]), color=text_colour, anchor=label_anchor(x, span))
            label.setPos(x, y)
            self.plot.addItem(label)
            cells = [LABELS.get(s["type"], s["type"]), f"{p1} = {x:.8g}, {p2} = {y:.8g}", MEANINGS.get(s["type"], "")]
            for col, text in enumerate(cells):
                self.table.setItem(row, col, QTableWidgetItem(text))
        self.table.resizeColumnsToContents()
        self.update_marker()

    def update_marker(self) -> None:
        L = self.result
        if L is None:
            self.here.setData([], [])
            return
        a, b = (self.view.session.params.get(n) for n in L.parameters)
        self.here.setData([a], [b]) if a is not None and b is not None else self.here.setData([], [])

    def _on_click(self, event) -> None:
        L = self.result
        point = clicked_point(self.plot, event)
        if point is None or L is None:
            return
        p1, p2 = L.parameters
        s = self.view.session
        s.undo_stack.beginMacro(f"go to {p1}, {p2}")
        try:
            s.set_param(p1, float(point.x()))
            s.set_param(p2, float(point.y()))
        finally:
            s.undo_stack.endMacro()
        event.accept()


def region_between_fold_curves(x, y, box):
    """The polygon between the two arms of a fold curve that meet at a cusp, closed along the edge of the
    computed range ``box`` = (x0, x1, y0, y1) where the arms leave it (through its corner when they leave by
    two adjacent edges); None when an arm ends inside the range or the arms leave by opposite edges (the
    region is then not drawn)."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    if len(x) < 3:
        return None
    size = (max(box[1] - box[0], 1e-300), max(box[3] - box[2], 1e-300))

    def edge(i):
        beyond = [(box[0] - x[i]) / size[0], (x[i] - box[1]) / size[0],
                  (box[2] - y[i]) / size[1], (y[i] - box[3]) / size[1]]
        k = int(np.argmax(beyond))
        return k if beyond[k] > -0.01 else None

    first, last = edge(0), edge(-1)
    if first is None or last is None:
        return None
    points = list(zip(x, y))
    if first != last:
        if {first, last} in ({0, 1}, {2, 3}):
            return None
        vertical = last if last in (0, 1) else first
        horizontal = last if last in (2, 3) else first
        points.append((box[vertical], box[horizontal]))
    return points
