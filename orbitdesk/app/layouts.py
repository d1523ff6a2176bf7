"""Margin-less rows and columns of widgets: the one way panels and views line up their parts; a table's
columns fitted to its width (FittedColumns), a text as tall as its content (WholeText)."""

from __future__ import annotations

import math

from PySide6.QtCore import QEvent, QObject, Qt
from PySide6.QtWidgets import (QBoxLayout, QHBoxLayout, QHeaderView, QLabel, QLayout, QSizePolicy, QTableView,
                               QTextBrowser, QVBoxLayout, QWidget)


def lined_up(layout: QBoxLayout, items, spacing: int) -> QBoxLayout:
    """``layout`` without margins holding ``items`` in order: a widget, a layout, ``(widget, stretch)``,
    text (becomes a label), an int (extra space) or None (a stretch)."""
    layout.setContentsMargins(0, 0, 0, 0)
    layout.setSpacing(spacing)
    for item in items:
        if item is None:
            layout.addStretch(1)
        elif isinstance(item, str):
            layout.addWidget(QLabel(item))
        elif isinstance(item, int):
            layout.addSpacing(item)
        elif isinstance(item, QLayout):
            layout.addLayout(item)
        elif isinstance(item, tuple):
            layout.addWidget(*item)
        else:
            layout.addWidget(item)
    return layout


def column(widget: QWidget | None, *items, spacing: int = 6) -> QVBoxLayout:
    """A column (``lined_up``) set on ``widget`` (None: on none yet)."""
    return lined_up(QVBoxLayout(widget) if widget is not None else QVBoxLayout(), items, spacing)


def row(*items, spacing: int = 4) -> QHBoxLayout:
    """A row (``lined_up``)."""
    return lined_up(QHBoxLayout(), items, spacing)


class FittedColumns(QObject):
    """A table's columns fitted to its width, again whenever the table is resized or ``fit()`` is called:
    every column at its content's width while they all fit; when they do not, the ``elastic`` columns give
    up width (their text elided, so each such cell should carry its full text in its tip) down to their
    header's width, and the last column takes any room left over. Only columns that cannot shrink further
    (many states) leave a horizontal scroll bar."""

    def __init__(self, table: QTableView, elastic=()):
        super().__init__(table)
        self.table, self.elastic = table, set(elastic)
        self._fitting = False
        header = table.horizontalHeader()
        header.setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
        header.setStretchLastSection(False)
        table.setTextElideMode(Qt.TextElideMode.ElideRight)
        table.viewport().installEventFilter(self)  # the viewport: resized after the scroll bars are placed

    def set_elastic(self, columns) -> None:
        self.elastic = set(columns)
        self.fit()

    def eventFilter(self, watched, event) -> bool:
        if event.type() in (QEvent.Type.Resize, QEvent.Type.Show):
            self.fit()
        return False

    def _wanted(self) -> tuple[list[int], list[int]]:
        """Each column's width at its content, and the least it may have."""
        t, header = self.table, self.table.horizontalHeader()
        n = t.model().columnCount() if t.model() is not None else 0
        want = [max(t.sizeHintForColumn(c), header.sectionSizeHint(c)) for c in range(n)]
        return want, [min(header.sectionSizeHint(c), want[c]) if c in self.elastic else want[c] for c in range(n)]

    def least_width(self) -> int:
        """The table's width with every column at its least (and room for a vertical scroll bar)."""
        t = self.table
        return sum(self._wanted()[1]) + 2 * t.frameWidth() + t.verticalScrollBar().sizeHint().width()

    def widths(self, room: int) -> list[int]:
        """The width of each column in ``room`` pixels."""
        want, least = self._wanted()
        n = len(want)
        excess = sum(want) - room
        if excess <= 0:
            if n:
                want[-1] += -excess
            return want
        slack = sum(w - m for w, m in zip(want, least))
        if slack <= excess:
            return least
        # each elastic column gives up width in proportion to what it could give
        return [want[c] - int(math.ceil((want[c] - least[c]) * excess / slack)) for c in range(n)]

    def fit(self) -> None:
        if self._fitting:
            return
        self._fitting = True
        try:
            for c, w in enumerate(self.widths(max(self.table.viewport().width(), 0))):
                self.table.setColumnWidth(c, w)
        finally:
            self._fitting = False


class WholeText(QTextBrowser):
    """Rich text as tall as its content, with no vertical scroll bar of its own: set inside a scroll area, that
    area is the one thing that scrolls (a text that scrolls inside a pane that scrolls shows two bars). Content
    wider than the pane (a wide table) scrolls sideways."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setVerticalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.setSizePolicy(QSizePolicy.Policy.Preferred, QSizePolicy.Policy.Fixed)
        self.document().documentLayout().documentSizeChanged.connect(lambda _size: self._fit_height())

    def resizeEvent(self, event) -> None:
        super().resizeEvent(event)
        self._fit_height()

    def _fit_height(self) -> None:
        size = self.document().size()
        sideways = size.width() > self.viewport().width() + 1
        bar = self.horizontalScrollBar().sizeHint().height() if sideways else 0
        height = int(math.ceil(size.height())) + 2 * self.frameWidth() + bar
        if height != self.height():
            self.setFixedHeight(height)
