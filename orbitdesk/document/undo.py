"""Undoable commands and the undo stack of the live document (plain Python, no Qt).

A ``Command`` has ``redo()`` (also run when it is pushed), ``undo()``, a ``label`` and optionally a
``merge_id``: a pushed command with the same ``merge_id`` as the one on top is offered to it through
``merge(other)`` (typing and slider moves become one step). A merged command whose result equals its
start is marked ``obsolete`` and leaves the stack. Macros group several commands into one step.
Merging never reaches across the saved (clean) state. ``on_change`` callbacks run after every change
of the stack (the Qt adapter turns them into signals for the Undo and Redo menu entries).
"""

from __future__ import annotations


class Command:
    """One undoable change; subclasses set ``label`` and implement ``redo`` and ``undo``."""

    merge_id: object = None

    def __init__(self, label: str = ""):
        self.label = label
        self.obsolete = False

    def redo(self) -> None:
        raise NotImplementedError

    def undo(self) -> None:
        raise NotImplementedError

    def merge(self, other: "Command") -> bool:
        """Take ``other`` (pushed after this one, same ``merge_id``) into this command; True when taken."""
        return False


class Macro(Command):
    """Several commands done and undone as one step."""

    def __init__(self, label: str):
        super().__init__(label)
        self.children: list[Command] = []

    def redo(self) -> None:
        for c in self.children:
            c.redo()

    def undo(self) -> None:
        for c in reversed(self.children):
            c.undo()


class UndoStack:
    def __init__(self):
        self.commands: list[Command] = []
        self.index = 0              # how many of ``commands`` are done
        self.clean_index = 0        # the index at the last save (-1: the saved state cannot be reached)
        self._macros: list[Macro] = []
        self._listeners: list = []

    # ------------------------------------------------------------ reading
    def count(self) -> int:
        return len(self.commands)

    def can_undo(self) -> bool:
        return not self._macros and self.index > 0

    def can_redo(self) -> bool:
        return not self._macros and self.index < len(self.commands)

    def undo_label(self) -> str:
        return self.commands[self.index - 1].label if self.can_undo() else ""

    def redo_label(self) -> str:
        return self.commands[self.index].label if self.can_redo() else ""

    def is_clean(self) -> bool:
        return not self._macros and self.clean_index == self.index

    def on_change(self, fn):
        """``fn()`` after every change of the stack; returns a function that removes it."""
        self._listeners.append(fn)
        return lambda: self._listeners.remove(fn) if fn in self._listeners else None

    # ------------------------------------------------------------ changing
    def push(self, cmd: Command) -> None:
        """Do ``cmd`` and keep it (merged into the previous step when both say so)."""
        cmd.redo()
        if self._macros:
            children = self._macros[-1].children
            if not (children and self._try_merge(children[-1], cmd)):
                children.append(cmd)
            return
        del self.commands[self.index:]
        if self.clean_index > self.index:
            self.clean_index = -1
        top = self.commands[-1] if self.commands else None
        if top is not None and self.index != self.clean_index and self._try_merge(top, cmd):
            if top.obsolete:
                self.commands.pop()
                self.index -= 1
                if self.clean_index > self.index:
                    self.clean_index = -1
        else:
            self.commands.append(cmd)
            self.index += 1
        self._changed()

    @staticmethod
    def _try_merge(top: Command, cmd: Command) -> bool:
        return top.merge_id is not None and top.merge_id == cmd.merge_id and top.merge(cmd)

    def undo(self) -> None:
        if not self.can_undo():
            return
        self.index -= 1
        self.commands[self.index].undo()
        self._changed()

    def redo(self) -> None:
        if not self.can_redo():
            return
        self.commands[self.index].redo()
        self.index += 1
        self._changed()

    def begin_macro(self, label: str) -> None:
        """Commands pushed until the matching ``end_macro`` become one step named ``label``."""
        macro = Macro(label)
        if self._macros:
            self._macros[-1].children.append(macro)
        self._macros.append(macro)
        self._changed()

    def end_macro(self) -> None:
        if not self._macros:
            raise RuntimeError("end_macro without begin_macro")
        macro = self._macros.pop()
        if self._macros:
            return
        del self.commands[self.index:]
        if self.clean_index > self.index:
            self.clean_index = -1
        self.commands.append(macro)
        self.index += 1
        self._changed()

    def set_clean(self) -> None:
        self.clean_index = self.index
        self._changed()

    def clear(self) -> None:
        self.commands, self.index, self.clean_index, self._macros = [], 0, 0, []
        self._changed()

    def _changed(self) -> None:
        for fn in list(self._listeners):
            fn()
