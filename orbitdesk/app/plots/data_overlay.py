"""Measured data drawn over a view's plot: points, and residual lines to the model when asked for.

A view makes one ``DataOverlay(session, plot_item, pairs)`` where ``pairs()`` returns what it shows
now as ``[(x_quantity, y_quantity, QColor)]`` (``x_quantity`` is ``"time"`` for plots against t or
n), and calls ``refresh()`` after it redraws. The overlay follows the project's data sets itself.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtGui import QColor

from orbitdesk.app.datastore import data_store
from orbitdesk.app.plain_text import rich_tip

SYMBOLS = ["o", "s", "t", "d", "+", "x", "star", "p"]
TIME = "time"


class DataOverlay:
    def __init__(self, session, plot, pairs):
        self.session, self.plot, self.pairs = session, plot, pairs
        self.items: list = []
        self.store = data_store(session)
        self.store.changed.connect(self.refresh)

    def refresh(self) -> None:
        try:
            for item in self.items:
                self.plot.removeItem(item)
        except RuntimeError:  # the plot was deleted with its view
            return
        self.items = []
        sets = self.store.datasets
        if not sets:
            return
        pairs = self.pairs()
        for k, ds in enumerate(sets):
            symbol = SYMBOLS[k % len(SYMBOLS)]
            model = self.store.residuals.get(ds.name, {}) if self.store.show_residuals else {}
            for xq, yq, colour in pairs:
                ycol = ds.column(yq)
                if ycol is None:
                    continue
                if xq == TIME:
                    x = ds.time
                else:
                    xcol = ds.column(xq)
                    if xcol is None:
                        continue
                    x = xcol.values
                self._points(x, ycol.values, colour, symbol, f"{ds.name}: {ycol.label}", hollow=k % 2 == 0)
                if xq == TIME and yq in model:
                    self._residuals(x, ycol.values, np.asarray(model[yq]), colour)

    def _points(self, x, y, colour: QColor, symbol: str, name: str, hollow: bool) -> None:
        """Data points behind the model's curve (so the curve stays visible), smaller when dense;
        data sets alternate between hollow and filled marks."""
        size = 7 if x.size <= 60 else 5 if x.size <= 250 else 4
        fill = QColor(colour)
        fill.setAlpha(0 if hollow else 150)
        item = pg.PlotDataItem(x, y, pen=None, symbol=symbol, symbolSize=size, symbolBrush=fill,
                               symbolPen=pg.mkPen(colour, width=1.0), name=name)
        item.setToolTip(rich_tip(f"measured: {name}"))
        item.setZValue(-1)
        self.plot.addItem(item)
        self.items.append(item)

    def _residuals(self, x, y, model, colour: QColor) -> None:
        xs = np.repeat(x, 2)
        ys = np.column_stack([y, model]).ravel()
        pen = pg.mkPen(colour, width=1)
        item = pg.PlotDataItem(xs, ys, pen=pen, connect="pairs")
        item.setZValue(-1)
        self.plot.addItem(item)
        self.items.append(item)
