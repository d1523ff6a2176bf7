"""The walkthrough panel: a project's recorded steps, shown one at a time, with Previous and Next.

Showing a step puts its snapshot on screen (values, solver settings, which views are open and how they
are set, the 3D camera, the selected equilibrium, the section, the time cursor) without touching the
undo history; leaving the walkthrough gives the user's own state back. Recording, deleting, moving and
editing steps are undoable edits of the live document. ``walkthrough_screen.capture_state`` and
``put_on_screen`` translate between the window and the snapshot shape of ``orbitdesk.document.walkthrough``.
"""

from __future__ import annotations

import html

from PySide6.QtCore import QByteArray, QEvent, Qt, QTimer, Signal
from PySide6.QtGui import QFont, QPalette
from PySide6.QtWidgets import (QAbstractItemView, QAbstractSlider, QAbstractSpinBox, QApplication, QComboBox,
                               QDockWidget, QFrame, QHBoxLayout, QLabel, QLineEdit, QListWidget, QListWidgetItem,
                               QPlainTextEdit, QPushButton, QSizePolicy, QSplitter, QTextBrowser, QTextEdit,
                               QToolButton, QVBoxLayout, QWidget)

from orbitdesk.document.project import WalkthroughStep
from orbitdesk.document.views import title_of
from orbitdesk.document.walkthrough import apply_step, delete_step, move_step, record_step, render_note

from orbitdesk.app.dock_layout import keep_side_widths
from orbitdesk.app.layouts import column
from orbitdesk.app.plain_text import rich_tip
from orbitdesk.app.panels.walkthrough_screen import apply_to_view, capture_state, model_info, put_on_screen

_SELECTED = object()   # the row selected now
TITLE_SCALE = (1.3, 2.3)       # step title: normal, presenting (times the panel's font)
NOTE_SCALE = (1.0, 1.75)       # note text
PRESENT_WIDTH = 0.32           # share of the window the panel takes while presenting
WALKTHROUGH_WIDTH = 340       # width of the dock when a project with steps opens
NOTE_CSS = "code { font-family: monospace; } li { margin-bottom: 4px; } p { margin-bottom: 8px; }"
MARKUP_HINT = ("Note markup: a blank line starts a paragraph; *emphasis*, **strong**, `code`, "
               "lines starting with - or 1. make lists.")
PRESENT_KEYS = {Qt.Key.Key_Right: "next", Qt.Key.Key_PageDown: "next", Qt.Key.Key_Left: "previous",
                Qt.Key.Key_PageUp: "previous", Qt.Key.Key_Escape: "stop"}
KEYPAD = Qt.KeyboardModifier.KeypadModifier


# ---------------------------------------------------------------- the panel

def _tool(text: str, tip: str, slot, checkable: bool = False) -> QToolButton:
    b = QToolButton()
    b.setText(text)
    b.setToolTip(tip)
    b.setCheckable(checkable)
    b.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextOnly)
    (b.toggled if checkable else b.clicked).connect(slot)
    return b


class _StepList(QListWidget):
    """The steps, numbered; drag to reorder."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setDragDropMode(QAbstractItemView.DragDropMode.InternalMove)
        self.setDefaultDropAction(Qt.DropAction.MoveAction)
        self.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.setAlternatingRowColors(True)
        self.setToolTip("The steps of the walkthrough: click one to show it, drag to reorder")
        self.setSizePolicy(QSizePolicy.Policy.Preferred, QSizePolicy.Policy.Expanding)
        # long titles wrap onto a second line instead of being cut off behind a sideways scroll bar
        self.setWordWrap(True)
        self.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.setResizeMode(QListWidget.ResizeMode.Adjust)


class WalkthroughPanel(QWidget):
    """Dock contents. ``window`` is the MainWindow (views, docks, session)."""

    stepShown = Signal(int)            # index of the step now on screen
    walkthroughLeft = Signal()         # the user's own state is back
    presentingChanged = Signal(bool)

    def __init__(self, window, parent=None):
        super().__init__(parent)
        self.main_window = window
        self.session = window.session
        self.current: int | None = None          # index of the step on screen (None: not in the walkthrough)
        self.problems: list[str] = []             # what the last shown step could not apply
        self.missing_views: list[str] = []
        self.presenting = False
        self._own_state: dict | None = None       # the user's state, kept while the walkthrough is on screen
        self._own_layout: QByteArray | None = None
        self._was_full_screen = self._was_maximized = False
        self._pending: dict[str, tuple] = {}      # module -> (changes, section) for views not created yet
        self._syncing = False
        self._build()
        self.session.projectLoaded.connect(self._on_project_loaded)
        self.session.stepChanged.connect(self._step_text_changed)
        for module, dock in window.view_docks.items():
            dock.visibilityChanged.connect(lambda visible, m=module: visible and self._apply_pending(m))
        self._refresh_list(None)
        self._update_controls()

    # ------------------------------------------------------------ construction
    def _build(self) -> None:
        self.position_label = QLabel()
        self.position_label.setStyleSheet("color: palette(placeholder-text);")
        self.position_label.setToolTip("Where you are in the walkthrough")
        self.title_label = QLabel()
        self.title_label.setWordWrap(True)
        self.title_label.setTextFormat(Qt.TextFormat.PlainText)
        self.title_label.setToolTip("Title of the step")
        self.title_label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.note_view = QTextBrowser()
        self.note_view.setOpenLinks(False)
        self.note_view.setFrameShape(QFrame.Shape.NoFrame)
        self.note_view.viewport().setAutoFillBackground(False)
        self.note_view.setToolTip("What to look at in this step")
        self.note_view.document().setDefaultStyleSheet(NOTE_CSS)
        self.note_view.document().setDocumentMargin(2)
        self.problems_label = QLabel()
        self.problems_label.setWordWrap(True)
        self.problems_label.setTextFormat(Qt.TextFormat.RichText)
        self.problems_label.setToolTip("Parts of this step that no longer fit the model; the rest was applied")
        self.problems_label.hide()
        self.missing_label = QLabel()
        self.missing_label.setTextFormat(Qt.TextFormat.PlainText)  # view names come from the file
        self.missing_label.setWordWrap(True)
        self.missing_label.setStyleSheet("color: palette(placeholder-text);")
        self.missing_label.hide()

        self.previous_button = QPushButton("◀  Previous")
        self.previous_button.setToolTip("Show the previous step (Left arrow or Page Up while presenting)")
        self.previous_button.clicked.connect(self.previous)
        self.next_button = QPushButton("Next  ▶")
        self.next_button.setToolTip("Show the next step (Right arrow or Page Down while presenting)")
        self.next_button.clicked.connect(self.next)
        self.next_button.setDefault(True)
        self.leave_button = QPushButton("Leave")
        self.leave_button.setToolTip("Leave the walkthrough: your own values, views and layout come back, as "
                                     "they were before it started")
        self.leave_button.clicked.connect(self.leave)
        self.present_button = QPushButton("Present")
        self.present_button.setCheckable(True)
        self.present_button.setToolTip("Presenting: large type for a projector or a shared screen, the window "
                                       "full screen, arrow keys for Previous and Next (Esc stops)")
        self.present_button.toggled.connect(self.set_presenting)
        nav = QHBoxLayout()
        nav.setSpacing(6)
        nav.addWidget(self.previous_button)
        nav.addWidget(self.next_button)
        nav.addStretch(1)

        leave_row = QHBoxLayout()
        leave_row.setSpacing(6)
        leave_row.addWidget(self.present_button)
        leave_row.addStretch(1)
        leave_row.addWidget(self.leave_button)
        show = QWidget()
        column(show, self.position_label, self.title_label, (self.note_view, 1), self.problems_label,
               self.missing_label, nav, leave_row)

        # ---- the list of steps and its editing tools
        self.step_list = _StepList()
        self.step_list.itemSelectionChanged.connect(self._on_list_selection)
        self.step_list.model().rowsMoved.connect(lambda *_a: QTimer.singleShot(0, self._on_rows_dropped))
        self.record_button = _tool("Record", "Add a step that shows what is on screen now: values, "
                                   "open views and their settings, camera, section, time cursor", self.record)
        self.update_button = _tool("Update", "Replace the selected step's snapshot with what is on screen now "
                                   "(its title and note stay)", self.update_selected)
        self.up_button = _tool("▲", "Move the selected step up", lambda: self._move_selected(-1))
        self.down_button = _tool("▼", "Move the selected step down", lambda: self._move_selected(+1))
        self.delete_button = _tool("Delete", "Delete the selected step", self.delete_selected)
        self.edit_button = _tool("Edit", "Edit the title and note of the selected step", self._toggle_edit,
                                 checkable=True)
        tools = QHBoxLayout()
        tools.setSpacing(2)
        for b in (self.record_button, self.update_button, self.up_button, self.down_button, self.delete_button):
            tools.addWidget(b)
        tools.addStretch(1)
        tools.addWidget(self.edit_button)

        self.title_edit = QLineEdit()
        self.title_edit.setPlaceholderText("Title of the step")
        self.title_edit.setToolTip("Title of the selected step")
        self.title_edit.textEdited.connect(lambda text: self._edited("title", text))
        self.note_edit = QPlainTextEdit()
        self.note_edit.setPlaceholderText("What should the reader look at? " + MARKUP_HINT)
        self.note_edit.setToolTip(MARKUP_HINT)
        self.note_edit.textChanged.connect(lambda: self._edited("note", self.note_edit.toPlainText()))
        hint = QLabel(MARKUP_HINT)
        hint.setWordWrap(True)
        hint.setStyleSheet("color: palette(placeholder-text);")
        self.edit_box = QWidget()
        column(self.edit_box, self.title_edit, (self.note_edit, 1), hint, spacing=4)
        self.edit_box.hide()

        heading = QLabel("Steps")
        heading.setStyleSheet("font-weight: 600;")
        steps = QWidget()
        column(steps, heading, (self.step_list, 1), tools, (self.edit_box, 2), spacing=4)
        self.steps_box = steps

        self.splitter = QSplitter(Qt.Orientation.Vertical)
        self.splitter.setChildrenCollapsible(False)
        self.splitter.addWidget(show)
        self.splitter.addWidget(steps)
        self.splitter.setStretchFactor(0, 3)
        self.splitter.setStretchFactor(1, 2)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(8, 6, 8, 8)
        layout.addWidget(self.splitter)

        self._apply_fonts()

    # ------------------------------------------------------------ state
    @property
    def steps(self) -> list[WalkthroughStep]:
        return self.session.project.walkthrough

    @property
    def in_walkthrough(self) -> bool:
        return self._own_state is not None

    def selected_index(self) -> int | None:
        rows = [self.step_list.row(i) for i in self.step_list.selectedItems()]
        return rows[0] if rows else None

    # ------------------------------------------------------------ showing steps
    def show_step(self, index: int) -> list[str]:
        """Put step ``index`` on screen (entering the walkthrough if needed); returns its problems."""
        if not 0 <= index < len(self.steps):
            raise IndexError(f"there is no step {index + 1} (the walkthrough has {len(self.steps)})")
        dock = self.parentWidget()
        if isinstance(dock, QDockWidget) and not dock.isVisible():
            dock.show()
        if self._own_state is None:
            self._own_state = capture_state(self.main_window)
            self._own_layout = self.main_window.saveState()
        step = self.steps[index]
        self.current = index
        self._show_snapshot(step)
        self._select_row(index)
        self._show_text(index)
        self._update_controls()
        self.stepShown.emit(index)
        return list(self.problems)

    def _show_snapshot(self, step: WalkthroughStep) -> None:
        new_state, problems = apply_step(step, model_info(self.session), capture_state(self.main_window))
        result = put_on_screen(self.main_window, new_state, step.snapshot if isinstance(step.snapshot, dict) else {},
                               defer=self._defer)
        self.problems = problems + result.problems
        self.missing_views = result.missing_views
        self._show_problems()

    def next(self) -> None:
        if not self.steps:
            return
        if self.current is None:
            start = self.selected_index()
            self.show_step(0 if start is None else start)
        elif self.current + 1 < len(self.steps):
            self.show_step(self.current + 1)

    def previous(self) -> None:
        if self.current is not None and self.current > 0:
            self.show_step(self.current - 1)
        elif self.current is None and self.steps:
            self.show_step(0)

    def leave(self) -> None:
        """Back to the user's own state (values, views, layout) from before the walkthrough."""
        if self._own_state is None:
            return
        own, layout = self._own_state, self._own_layout
        self._own_state, self._own_layout, self.current = None, None, None
        self.set_presenting(False)
        new_state, problems = apply_step(WalkthroughStep("own", "", own), model_info(self.session),
                                         capture_state(self.main_window))
        result = put_on_screen(self.main_window, new_state, own, arrange=False, defer=self._defer)
        if layout is not None:
            self.main_window.restoreState(layout)
        self.problems = [p.replace("this step", "your own state") for p in problems + result.problems]
        self.missing_views = []
        self._show_problems()
        self._show_text(self.selected_index())
        self._update_controls()
        self.walkthroughLeft.emit()

    def _defer(self, module: str, changes: dict, section) -> None:
        self._pending[module] = (changes, section)

    def _apply_pending(self, module: str) -> None:
        if module in self._pending and module in self.main_window.views:
            changes, section = self._pending.pop(module)
            apply_to_view(self.main_window.views[module], changes, section)

    # ------------------------------------------------------------ editing (undoable)
    def _push(self, label: str, new: list, select_new, select_old=_SELECTED) -> None:
        """Replace the steps (record, delete, move) as one undo step; the row to select after redo / undo."""
        select_old = self.selected_index() if select_old is _SELECTED else select_old
        self.session.replace_part("walkthrough", new, label,
                                  after=lambda redone: self._steps_replaced(select_new if redone else select_old))

    def record(self, title: str | None = None, note: str = "") -> WalkthroughStep | None:
        """Add a step showing what is on screen now, after the selected step (else at the end)."""
        at = self.selected_index()
        at = len(self.steps) if at is None else at + 1
        title = title or f"Step {len(self.steps) + 1}"
        try:
            step = record_step(title, note, capture_state(self.main_window))
        except ValueError as e:
            self.main_window.statusBar().showMessage(str(e)[:1].upper() + str(e)[1:], 10_000)
            return None
        new = list(self.steps)
        new.insert(at, step)
        self._push("Record walkthrough step", new, at)
        if self.in_walkthrough:
            self.current = at
        self._update_controls()
        return step

    def update_selected(self) -> None:
        i = self.selected_index()
        if i is None:
            return
        old = self.steps[i]
        try:
            step = record_step(old.title, old.note, capture_state(self.main_window))
        except ValueError as e:
            self.main_window.statusBar().showMessage(str(e)[:1].upper() + str(e)[1:], 10_000)
            return
        new = list(self.steps)
        new[i] = step
        self._push("Update walkthrough step", new, i)

    def delete_step(self, index: int) -> None:
        new = delete_step(self.steps, index)
        if self.current is not None:
            if self.current == index:
                self.current = None
            elif self.current > index:
                self.current -= 1
        self._push("Delete walkthrough step", new, min(index, len(new) - 1) if new else None)
        if self.in_walkthrough and not new:
            self.leave()

    def delete_selected(self) -> None:
        i = self.selected_index()
        if i is not None:
            self.delete_step(i)

    def move_step(self, i: int, j: int) -> None:
        new = move_step(self.steps, i, j)
        if self.current is not None:
            order = list(range(len(self.steps)))
            order.insert(j, order.pop(i))
            self.current = order.index(self.current)
        self._push("Move walkthrough step", new, j)

    def _move_selected(self, delta: int) -> None:
        i = self.selected_index()
        if i is not None and 0 <= i + delta < len(self.steps):
            self.move_step(i, i + delta)

    def set_title(self, index: int, text: str) -> None:
        text = text if text.strip() else self.steps[index].title
        if text != self.steps[index].title:
            self.session.doc.set_step_text(index, "title", text)

    def set_note(self, index: int, text: str) -> None:
        self.session.doc.set_step_text(index, "note", text)

    def _edited(self, field: str, text: str) -> None:
        i = self.selected_index()
        if self._syncing or i is None:
            return
        (self.set_title if field == "title" else self.set_note)(i, text)

    def _on_rows_dropped(self) -> None:
        order = [self.step_list.item(r).data(Qt.ItemDataRole.UserRole) for r in range(self.step_list.count())]
        if order == list(range(len(self.steps))) or sorted(order) != list(range(len(self.steps))):
            return
        moved = self.selected_index()
        new = [self.steps[k] for k in order]
        if self.current is not None:
            self.current = order.index(self.current)
        self._push("Move walkthrough step", new, moved, order[moved] if moved is not None else None)

    # after the document's walkthrough changed
    def _steps_replaced(self, select) -> None:
        steps = self.steps
        if self.current is not None and self.current >= len(steps):
            self.current = len(steps) - 1 if steps else None
        self._refresh_list(select)
        self._update_controls()

    def _step_text_changed(self, index: int) -> None:
        if not 0 <= index < len(self.steps):
            return
        item = self.step_list.item(index)
        if item is not None:
            item.setText(self._item_text(index))
        if self.selected_index() == index:
            self._show_text(index)

    # ------------------------------------------------------------ presenting
    def set_presenting(self, on: bool) -> None:
        on = bool(on)
        if on == self.presenting:
            return
        self.presenting = on
        self.present_button.blockSignals(True)
        self.present_button.setChecked(on)
        self.present_button.blockSignals(False)
        self.present_button.setText("Stop presenting" if on else "Present")
        app = QApplication.instance()
        if on:
            app.installEventFilter(self)
        else:
            app.removeEventFilter(self)
        self.steps_box.setVisible(not on)
        dock = self.parentWidget()
        model_dock = getattr(self.main_window, "model_dock", None)
        if model_dock is not None:  # the editor and the sliders leave the stage while presenting
            if on:
                self._model_dock_was_open = model_dock.isVisible()
                model_dock.hide()
            elif getattr(self, "_model_dock_was_open", False):
                model_dock.show()
        if on:
            self._was_full_screen = self.main_window.isFullScreen()
            self._was_maximized = self.main_window.isMaximized()
            if isinstance(dock, QDockWidget):
                dock.show()
                dock.raise_()
            self.main_window.showFullScreen()
            if isinstance(dock, QDockWidget) and not dock.isFloating():
                self.main_window.resizeDocks([dock], [max(dock.width(), int(self.main_window.width() * PRESENT_WIDTH))],
                                        Qt.Orientation.Horizontal)
            if self.current is None and self.steps:
                self.show_step(self.selected_index() or 0)
        elif not self._was_full_screen:
            if self._was_maximized:
                self.main_window.showMaximized()
            else:
                self.main_window.showNormal()
        self._apply_fonts()
        self.presentingChanged.emit(on)

    def eventFilter(self, obj, event) -> bool:
        """While presenting: arrows and Page Up/Down (what presentation remotes send) step through the
        walkthrough, Esc stops; a field the user is typing in keeps its keys."""
        kind = event.type()
        if (not self.presenting or kind not in (QEvent.Type.KeyPress, QEvent.Type.ShortcutOverride)
                or event.modifiers() & ~KEYPAD):
            return False
        action = PRESENT_KEYS.get(event.key())
        if action is None or not isinstance(obj, QWidget) or obj.window() is not self.main_window:
            return False
        if kind == QEvent.Type.ShortcutOverride:
            # Esc belongs to presenting (a view's Esc-cancels-its-job shortcut must not take it first)
            if action == "stop":
                event.accept()
            return False
        focus = QApplication.focusWidget()
        if action != "stop" and _takes_arrows(focus):
            return False
        {"next": self.next, "previous": self.previous, "stop": lambda: self.set_presenting(False)}[action]()
        return True

    def _apply_fonts(self) -> None:
        base = QFont(self.font())
        size = base.pointSizeF() if base.pointSizeF() > 0 else 10.0
        k = 1 if self.presenting else 0
        title = QFont(base)
        title.setPointSizeF(size * TITLE_SCALE[k])
        title.setWeight(QFont.Weight.DemiBold)
        self.title_label.setFont(title)
        note = QFont(base)
        note.setPointSizeF(size * NOTE_SCALE[k])
        self.note_view.setFont(note)
        self.note_view.document().setDefaultFont(note)
        self.problems_label.setFont(note if self.presenting else base)
        buttons = QFont(base)
        buttons.setPointSizeF(size * (1.3 if self.presenting else 1.0))
        for b in (self.previous_button, self.next_button, self.present_button, self.leave_button):
            b.setFont(buttons)
        self._show_text(self.current if self.current is not None else self.selected_index())

    # ------------------------------------------------------------ display
    def _item_text(self, index: int) -> str:
        return f"{index + 1}.  {self.steps[index].title}"

    def _refresh_list(self, select) -> None:
        self._syncing = True
        self.step_list.blockSignals(True)
        try:
            self.step_list.clear()
            for i in range(len(self.steps)):
                item = QListWidgetItem(self._item_text(i))
                item.setData(Qt.ItemDataRole.UserRole, i)
                item.setToolTip(rich_tip(self.steps[i].title))
                self.step_list.addItem(item)
            if select is not None and 0 <= select < len(self.steps):
                self.step_list.setCurrentRow(select)
        finally:
            self.step_list.blockSignals(False)
            self._syncing = False
        self._show_text(self.selected_index())

    def _select_row(self, index: int) -> None:
        self.step_list.blockSignals(True)
        self.step_list.setCurrentRow(index)
        self.step_list.blockSignals(False)
        item = self.step_list.item(index)
        if item is not None:
            self.step_list.scrollToItem(item)

    def _on_list_selection(self) -> None:
        i = self.selected_index()
        if i is None or self._syncing:
            self._update_controls()
            return
        if self.edit_button.isChecked() and not self.in_walkthrough:
            self._show_text(i)           # editing: choose a step without putting it on screen
            self._update_controls()
        else:
            self.show_step(i)

    def _show_text(self, index) -> None:
        n = len(self.steps)
        if index is None or not 0 <= index < n:
            self.title_label.setText("No walkthrough yet" if n == 0 else "Walkthrough")
            hint = ("<p>A walkthrough is a list of steps a reader replays one by one. Set the values and the "
                    "views as you want them, then press <b>Record</b>; give the step a title and a note "
                    "with <b>Edit</b>.</p>"
                    if n == 0 else
                    f"<p>{n} step{'s' if n != 1 else ''}. Press <b>Start</b> to begin; <b>Leave</b> "
                    "gives you your own values and views back.</p>")
            self.note_view.setHtml(hint)
            self.position_label.setText("")
        else:
            step = self.steps[index]
            self.title_label.setText(step.title)
            self.note_view.setHtml(render_note(step.note) or "<p></p>")
            if self.current == index:
                self.position_label.setText(f"Step {index + 1} of {n}")
            else:
                self.position_label.setText(f"Step {index + 1} of {n} (not on screen)")
        self._syncing = True
        try:
            step = self.steps[index] if index is not None and 0 <= index < n else None
            if self.title_edit.text() != (step.title if step else ""):
                self.title_edit.setText(step.title if step else "")
            if self.note_edit.toPlainText() != (step.note if step else ""):
                self.note_edit.setPlainText(step.note if step else "")
        finally:
            self._syncing = False

    def _show_problems(self) -> None:
        if self.problems:
            items = "".join(f"<li>{_escape(p[:1].upper() + p[1:])}.</li>" for p in self.problems)
            self.problems_label.setText(f"<b>Not all of this step fits the model now:</b>"
                                        f"<ul style='margin-left: -24px'>{items}</ul>")
            pal = self.palette()
            dark = pal.color(QPalette.ColorRole.Base).lightness() < 128
            bg, fg, edge = ("#3a2f1c", "#f1dcb0", "#7d6332") if dark else ("#fdf3dc", "#5a3d06", "#e2c27a")
            self.problems_label.setStyleSheet(f"QLabel {{ background: {bg}; color: {fg}; border: 1px solid {edge};"
                                              f" border-radius: 4px; padding: 6px; }}")
            self.problems_label.show()
        else:
            self.problems_label.hide()
        if self.missing_views:
            names = [title_of(v) for v in self.missing_views]
            self.missing_label.setText(f"This step also uses the {', '.join(names)} "
                                       f"view{'s' if len(names) > 1 else ''}, not in this version of OrbitDesk.")
            self.missing_label.show()
        else:
            self.missing_label.hide()

    def _update_controls(self) -> None:
        n, sel = len(self.steps), self.selected_index()
        cur = self.current
        self.previous_button.setEnabled(n > 0 and (cur is None or cur > 0))
        self.next_button.setEnabled(n > 0 and (cur is None or cur + 1 < n))
        self.next_button.setText("Start  ▶" if cur is None and n else "Next  ▶")
        self.leave_button.setEnabled(self.in_walkthrough)
        self.present_button.setEnabled(n > 0 or self.presenting)
        for b in (self.update_button, self.delete_button):
            b.setEnabled(sel is not None)
        self.up_button.setEnabled(sel is not None and sel > 0)
        self.down_button.setEnabled(sel is not None and sel + 1 < n)
        self.edit_button.setEnabled(sel is not None or self.edit_button.isChecked())
        self.title_edit.setEnabled(sel is not None)
        self.note_edit.setEnabled(sel is not None)
        if cur is not None:
            self.position_label.setText(f"Step {cur + 1} of {n}")

    def _toggle_edit(self, on: bool) -> None:
        self.edit_box.setVisible(on)
        total = sum(self.splitter.sizes()) or self.height()
        share = 0.38 if on else 0.6  # editing: room for the list and the fields
        self.splitter.setSizes([int(total * share), total - int(total * share)])
        if on:
            self.title_edit.setFocus()

    # ------------------------------------------------------------ session events
    def _on_project_loaded(self) -> None:
        self.set_presenting(False)
        if self._own_layout is not None:  # the user's layout from before the walkthrough
            self.main_window.restoreState(self._own_layout)
        self._own_state, self._own_layout, self.current = None, None, None
        self._pending.clear()
        self.problems, self.missing_views = [], []
        self._show_problems()
        self._refresh_list(None)
        self._update_controls()

    def changeEvent(self, event) -> None:
        if event.type() == QEvent.Type.PaletteChange and hasattr(self, "problems_label"):
            self._show_problems()
        super().changeEvent(event)


def _takes_arrows(widget) -> bool:
    """Widgets in which the arrow keys edit or move something the user chose."""
    if isinstance(widget, (QLineEdit, QAbstractSpinBox, QComboBox)):
        return True
    if isinstance(widget, (QPlainTextEdit, QTextEdit)):
        return not widget.isReadOnly()
    return isinstance(widget, QAbstractSlider)


def _escape(text: str) -> str:
    return html.escape(text, quote=False)


def install(window) -> WalkthroughPanel:
    """Add the Walkthrough dock (right of the views, hidden until a project with steps is opened) and its
    entry in the View menu. Sets ``window.walkthrough_dock`` and ``window.walkthrough_panel``."""
    panel = WalkthroughPanel(window)
    dock = QDockWidget("Walkthrough", window)
    dock.setObjectName("walkthrough")
    dock.setWidget(panel)
    window.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, dock, Qt.Orientation.Horizontal)
    dock.hide()
    toggle = dock.toggleViewAction()
    toggle.setText("Walkthrough")
    toggle.setToolTip("Show or hide the walkthrough: the project's steps, one at a time")
    menu = getattr(window, "view_menu", None)
    if menu is not None:
        actions = menu.actions()
        menu.insertAction(actions[2] if len(actions) > 2 else None, toggle)
    window.walkthrough_dock, window.walkthrough_panel = dock, panel

    def on_loaded():
        if window.session.project.walkthrough and not dock.isVisible():
            widths = keep_side_widths(window, WALKTHROUGH_WIDTH)
            dock.show()
            dock.raise_()
            widths()

    window.session.projectLoaded.connect(on_loaded)
    return panel
