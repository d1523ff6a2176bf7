"""The live document's undo stack as the window sees it: Qt signals and the Undo / Redo actions.

``QtUndoStack`` wraps ``document.undo.UndoStack`` (the stack itself stays headless) with the calls and
signals of a QUndoStack the panels use: push, undo, redo, beginMacro/endMacro, setClean, indexChanged,
cleanChanged, createUndoAction/createRedoAction.
"""

from __future__ import annotations

from PySide6.QtCore import QObject, Signal
from PySide6.QtGui import QAction

from orbitdesk.document.undo import Command, UndoStack


class QtUndoStack(QObject):
    indexChanged = Signal(int)       # after every change of the stack (a merged edit too)
    cleanChanged = Signal(bool)
    canUndoChanged = Signal(bool)
    canRedoChanged = Signal(bool)
    undoTextChanged = Signal(str)
    redoTextChanged = Signal(str)

    def __init__(self, stack: UndoStack, parent=None):
        super().__init__(parent)
        self.stack = stack
        self._last = self._state()
        stack.on_change(self._sync)

    def _state(self) -> tuple:
        s = self.stack
        return (s.is_clean(), s.can_undo(), s.can_redo(), s.undo_label(), s.redo_label())

    def _sync(self) -> None:
        state = self._state()
        old, self._last = self._last, state
        self.indexChanged.emit(self.stack.index)
        for signal, before, now in zip((self.cleanChanged, self.canUndoChanged, self.canRedoChanged,
                                        self.undoTextChanged, self.redoTextChanged), old, state):
            if before != now:
                signal.emit(now)

    # ------------------------------------------------------------ QUndoStack's calls
    def push(self, cmd: Command) -> None:
        self.stack.push(cmd)

    def undo(self) -> None:
        self.stack.undo()

    def redo(self) -> None:
        self.stack.redo()

    def beginMacro(self, label: str) -> None:  # noqa: N802 (Qt's names, so the panels read as before)
        self.stack.begin_macro(label)

    def endMacro(self) -> None:  # noqa: N802
        self.stack.end_macro()

    def count(self) -> int:
        return self.stack.count()

    def index(self) -> int:
        return self.stack.index

    def canUndo(self) -> bool:  # noqa: N802
        return self.stack.can_undo()

    def canRedo(self) -> bool:  # noqa: N802
        return self.stack.can_redo()

    def isClean(self) -> bool:  # noqa: N802
        return self.stack.is_clean()

    def setClean(self) -> None:  # noqa: N802
        self.stack.set_clean()

    def clear(self) -> None:
        self.stack.clear()

    def createUndoAction(self, parent, prefix: str = "Undo") -> QAction:  # noqa: N802
        return self._action(parent, prefix, self.undo, self.canUndoChanged, self.undoTextChanged,
                            self.stack.can_undo, self.stack.undo_label)

    def createRedoAction(self, parent, prefix: str = "Redo") -> QAction:  # noqa: N802
        return self._action(parent, prefix, self.redo, self.canRedoChanged, self.redoTextChanged,
                            self.stack.can_redo, self.stack.redo_label)

    @staticmethod
    def _action(parent, prefix, trigger, enabled_signal, text_signal, enabled, label) -> QAction:
        action = QAction(prefix, parent)

        def show(*_args):
            action.setEnabled(enabled())
            action.setText(f"{prefix} {label()}" if label() else prefix)

        action.triggered.connect(trigger)
        enabled_signal.connect(show)
        text_signal.connect(show)
        show()
        return action
