"""Margin-less rows and columns of widgets: the one way panels and views line up their parts."""

from __future__ import annotations

from PySide6.QtWidgets import QBoxLayout, QHBoxLayout, QLabel, QLayout, QVBoxLayout, QWidget


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
