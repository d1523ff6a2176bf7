"""Which changes of a view's controls are the user's gestures (an edit of the project: an undo step when
they change what the view computes, LiveDocument.change_view_settings) and which are the program's: what a
view sets while it is built, while it applies settings or takes in a new system or project (the methods
SessionView wraps with ``not_a_gesture``), and while the session answers the document or a job
(``Session.program``). ``change_signal``: the signal by which a control says it changed."""

from __future__ import annotations

from PySide6.QtWidgets import (QAbstractButton, QAbstractSpinBox, QComboBox, QDoubleSpinBox, QLineEdit, QListWidget,
                               QSpinBox, QTableWidget)

_BUILDING = [0]   # views being built now (their __init__ runs)


def building() -> bool:
    return _BUILDING[0] > 0


def while_building(init):
    """``init`` (a view's __init__) run as building: nothing it sets on the controls is a gesture."""
    def wrapped(self, *args, **kwargs):
        _BUILDING[0] += 1
        try:
            init(self, *args, **kwargs)
        finally:
            _BUILDING[0] -= 1

    wrapped.__name__, wrapped.__doc__, wrapped.__wrapped__ = init.__name__, init.__doc__, init
    return wrapped


def not_a_gesture(method):
    """``method`` of a view run as the program's setting of its controls (see SessionView.not_a_gesture)."""
    def wrapped(self, *args, **kwargs):
        self._applying += 1
        try:
            return method(self, *args, **kwargs)
        finally:
            self._applying -= 1

    wrapped.__name__, wrapped.__doc__, wrapped.__wrapped__ = method.__name__, method.__doc__, method
    return wrapped


def change_signal(widget):
    """The signal a control emits when the user changes it (None: not a control that holds a setting)."""
    if isinstance(widget, QComboBox):
        return widget.currentIndexChanged
    if isinstance(widget, QAbstractButton):
        return widget.toggled if widget.isCheckable() else None
    if isinstance(widget, (QSpinBox, QDoubleSpinBox)):
        return widget.valueChanged
    if isinstance(widget, QLineEdit) and not isinstance(widget.parent(), (QAbstractSpinBox, QComboBox)):
        return widget.textChanged
    if isinstance(widget, QListWidget):
        return widget.itemChanged      # ticked entries
    if isinstance(widget, QTableWidget):
        return widget.itemSelectionChanged
    return None
