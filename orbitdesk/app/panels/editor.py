"""The model text editor: line numbers, colouring, diagnostics as wavy underlines with their
message on hover, and a list of the diagnostics that moves the cursor to each one."""

from __future__ import annotations

from dataclasses import dataclass

from PySide6.QtCore import QEvent, QPoint, QRect, QSize, Qt, QTimer, Signal
from PySide6.QtGui import (QAction, QColor, QFontDatabase, QIcon, QKeySequence, QPainter, QPainterPath,
                           QPalette, QPen, QPixmap, QPolygonF, QTextCharFormat, QTextCursor)
from PySide6.QtWidgets import (QListView, QListWidget, QListWidgetItem, QMenu, QPlainTextEdit, QStyledItemDelegate,
                               QTextEdit, QToolTip, QWidget)

from orbitdesk.language.diagnostics import ERROR, INFO, WARNING, Diagnostic, apply_fix, quick_fix

from orbitdesk.app.panels.highlighter import ModelHighlighter, is_dark

INDENT = "    "
COMMENT_PREFIX = "# "

# (light background, dark background) for each severity; distinct in hue and in lightness.
SEVERITY_COLOURS = {
    ERROR: ("#c8323c", "#ff7b82"),
    WARNING: ("#b8860b", "#f2c14e"),
    INFO: ("#2f7fb8", "#7fb8e6"),
}
SEVERITY_RANK = {ERROR: 0, WARNING: 1, INFO: 2}


def severity_colour(severity: str, palette: QPalette | None = None) -> QColor:
    dark = is_dark(palette or QPalette())
    return QColor(SEVERITY_COLOURS.get(severity, SEVERITY_COLOURS[INFO])[1 if dark else 0])


def severity_icon(severity: str, palette: QPalette | None = None, size: int = 16) -> QIcon:
    """A small mark per severity: a filled disc (error), a triangle (warning), a ring (info)."""
    colour = severity_colour(severity, palette)
    icon = QIcon()
    for scale in (1, 2):
        pm = QPixmap(size * scale, size * scale)
        pm.setDevicePixelRatio(scale)
        pm.fill(Qt.GlobalColor.transparent)
        p = QPainter(pm)
        p.setRenderHint(QPainter.RenderHint.Antialiasing)
        s = float(size)
        if severity == ERROR:
            p.setPen(Qt.PenStyle.NoPen)
            p.setBrush(colour)
            p.drawEllipse(QRect(int(s * 0.2), int(s * 0.2), int(s * 0.6), int(s * 0.6)))
        elif severity == WARNING:
            p.setPen(Qt.PenStyle.NoPen)
            p.setBrush(colour)
            p.drawPolygon(QPolygonF([QPoint(int(s * 0.5), int(s * 0.16)), QPoint(int(s * 0.88), int(s * 0.82)),
                                     QPoint(int(s * 0.12), int(s * 0.82))]))
        else:
            p.setPen(QPen(colour, 1.8))
            p.setBrush(Qt.BrushStyle.NoBrush)
            p.drawEllipse(QRect(int(s * 0.25), int(s * 0.25), int(s * 0.5), int(s * 0.5)))
        p.end()
        icon.addPixmap(pm)
    return icon


@dataclass
class Mark:
    """One diagnostic placed in the document; ``cursor`` is live and follows later edits."""
    diagnostic: Diagnostic
    cursor: QTextCursor

    @property
    def start(self) -> int:
        return self.cursor.selectionStart()

    @property
    def end(self) -> int:
        return self.cursor.selectionEnd()


class _LineNumberArea(QWidget):
    def __init__(self, editor: "EquationEditor"):
        super().__init__(editor)
        self.editor = editor
        self.setToolTip("Line numbers; a mark shows the most serious diagnostic on that line")

    def sizeHint(self) -> QSize:
        return QSize(self.editor.line_number_width(), 0)

    def paintEvent(self, event) -> None:
        self.editor.paint_line_numbers(self, event)


class EquationEditor(QPlainTextEdit):
    """Plain-text model editor bound to a session: typing calls ``session.set_text``; parses
    arriving on ``session.modelParsed`` refresh the underlines; ``session.textChanged`` replaces
    the text without echoing it back."""

    diagnosticsUpdated = Signal(list)  # list[Diagnostic] now shown

    def __init__(self, session, parent=None):
        super().__init__(parent)
        self.session = session
        self._applying = False
        self._marks: list[Mark] = []
        self._diagnostics: list[Diagnostic] = []
        self._line_severity: dict[int, str] = {}
        self._formats: dict[str, QTextCharFormat] = {}

        font = QFontDatabase.systemFont(QFontDatabase.SystemFont.FixedFont)
        font.setPointSizeF(max(font.pointSizeF(), 10.5))
        self.setFont(font)
        self.setLineWrapMode(QPlainTextEdit.LineWrapMode.NoWrap)
        self.setTabStopDistance(self.fontMetrics().horizontalAdvance(" ") * len(INDENT))
        self.setPlaceholderText("x' = -x   # one statement per line")
        self.setToolTip("")
        self.setWhatsThis("The model: one statement per line, such as x' = ..., x'' = ..., x[n+1] = ..., "
                          "x(0) = ..., name = 2.5 in [0, 5] for a parameter, name = expression for a derived "
                          "quantity. '#' starts a comment.")
        # The session's undo stack is the one history; the document keeps none of its own.
        self.document().setUndoRedoEnabled(False)

        self.highlighter = ModelHighlighter(self.document(), self.palette())
        self._numbers = _LineNumberArea(self)
        self.blockCountChanged.connect(self._update_margin)
        self.updateRequest.connect(self._scroll_numbers)
        self.cursorPositionChanged.connect(self._on_cursor_moved)
        self._current_block = 0
        self._update_margin()
        self._build_formats()

        self.comment_action = QAction("Toggle comment", self)
        self.comment_action.setShortcut(QKeySequence("Ctrl+/"))
        self.comment_action.setShortcutContext(Qt.ShortcutContext.WidgetShortcut)
        self.comment_action.setToolTip("Comment or uncomment the selected lines (Ctrl+/)")
        self.comment_action.triggered.connect(self.toggle_comment)
        self.addAction(self.comment_action)

        text = session.text
        if text:
            self._replace_text(text)
        self.textChanged.connect(self._on_user_edit)
        session.textChanged.connect(self.on_session_text)
        session.modelParsed.connect(self.on_model_parsed)
        if session.parsed is not None:
            self.on_model_parsed(session.parsed)

    # ------------------------------------------------------------ public API
    def diagnostics(self) -> list[Diagnostic]:
        return list(self._diagnostics)

    def marks(self) -> list[Mark]:
        """The underlined spans (live document positions) with their diagnostics."""
        return list(self._marks)

    def diagnostic_span(self, diagnostic: Diagnostic) -> tuple[int, int] | None:
        """(start, end) document positions underlined for ``diagnostic``, if shown."""
        for mark in self._marks:
            if mark.diagnostic is diagnostic:
                return mark.start, mark.end
        return None

    def diagnostics_at(self, position: int) -> list[Diagnostic]:
        return [m.diagnostic for m in self._marks if m.start <= position < m.end]

    def position_of(self, line: int, column: int) -> int:
        """Document position of 1-based (line, column), clamped into the text."""
        doc = self.document()
        block = doc.findBlockByNumber(max(0, min(line, doc.blockCount()) - 1))
        return block.position() + max(0, min(column - 1, block.length() - 1))

    def go_to(self, line: int, column: int = 1) -> None:
        cursor = self.textCursor()
        cursor.setPosition(self.position_of(line, column))
        self.setTextCursor(cursor)
        self.centerCursor()
        self.setFocus(Qt.FocusReason.OtherFocusReason)

    def set_diagnostics(self, diagnostics: list[Diagnostic]) -> None:
        """Place underlines for ``diagnostics`` (positions refer to the current text)."""
        self._diagnostics = sorted(diagnostics, key=lambda d: (d.line, d.column, SEVERITY_RANK.get(d.severity, 3)))
        doc = self.document()
        marks, lines = [], {}
        for d in self._diagnostics:
            if d.line > doc.blockCount():
                continue
            block = doc.findBlockByNumber(d.line - 1)
            n = block.length() - 1  # characters on the line
            start, end = min(d.column - 1, n), min(d.end_column - 1, n)
            if end <= start:  # a span past the end of the line: mark its last character
                start, end = max(0, n - 1), n
            if end > start:
                cursor = QTextCursor(doc)
                cursor.setPosition(block.position() + start)
                cursor.setPosition(block.position() + end, QTextCursor.MoveMode.KeepAnchor)
                marks.append(Mark(d, cursor))
            best = lines.get(d.line)
            if best is None or SEVERITY_RANK.get(d.severity, 3) < SEVERITY_RANK.get(best, 3):
                lines[d.line] = d.severity
        # Draw the most serious last so it stays visible where spans overlap.
        marks.sort(key=lambda m: -SEVERITY_RANK.get(m.diagnostic.severity, 3))
        self._marks = marks
        self._line_severity = lines
        self._refresh_selections()
        self._numbers.update()
        self.diagnosticsUpdated.emit(self.diagnostics())

    def toggle_comment(self) -> None:
        """Comment the selected lines (or the current one), or uncomment them if all are comments."""
        cursor = self.textCursor()
        doc = self.document()
        first = doc.findBlock(cursor.selectionStart())
        last = doc.findBlock(cursor.selectionEnd())
        if cursor.hasSelection() and last.position() == cursor.selectionEnd() and last != first:
            last = last.previous()
        blocks = []
        b = first
        while b.isValid():
            blocks.append(b)
            if b == last:
                break
            b = b.next()
        code = [b for b in blocks if b.text().strip()]
        uncomment = bool(code) and all(b.text().lstrip().startswith("#") for b in code)
        indent = min((len(b.text()) - len(b.text().lstrip()) for b in code), default=0)
        edit = QTextCursor(doc)
        edit.beginEditBlock()
        for b in blocks:
            text = b.text()
            if not text.strip():
                continue
            lead = len(text) - len(text.lstrip())
            if uncomment:
                width = 2 if text[lead:lead + 2] == COMMENT_PREFIX else 1
                edit.setPosition(b.position() + lead)
                edit.setPosition(b.position() + lead + width, QTextCursor.MoveMode.KeepAnchor)
                edit.removeSelectedText()
            else:
                edit.setPosition(b.position() + indent)
                edit.insertText(COMMENT_PREFIX)
        edit.endEditBlock()

    # ------------------------------------------------------------ session signals
    def on_session_text(self, text: str) -> None:
        if text != self.toPlainText():
            self._replace_text(text)

    def on_model_parsed(self, parsed) -> None:
        if parsed is None:
            return
        self.highlighter.set_model(parsed)
        if parsed.text != self.toPlainText():
            return  # an older parse; the one for the current text follows
        self.set_diagnostics(list(parsed.diagnostics))

    # ------------------------------------------------------------ text in and out
    def _on_user_edit(self) -> None:
        if not self._applying:
            self.session.set_text(self.toPlainText())

    def _replace_text(self, text: str) -> None:
        """Edit only the part that differs, so scrolling, colouring and marks elsewhere stay put;
        the cursor goes to the end of the change (or to the start when the whole text is new)."""
        old = self.toPlainText()
        prefix = 0
        limit = min(len(old), len(text))
        while prefix < limit and old[prefix] == text[prefix]:
            prefix += 1
        suffix = 0
        while suffix < limit - prefix and old[-1 - suffix] == text[-1 - suffix]:
            suffix += 1
        whole = (len(text) - prefix - suffix) > len(text) // 2 and prefix + suffix <= len(old) // 2
        self._applying = True
        try:
            edit = QTextCursor(self.document())
            edit.setPosition(prefix)
            edit.setPosition(len(old) - suffix, QTextCursor.MoveMode.KeepAnchor)
            edit.insertText(text[prefix:len(text) - suffix])
        finally:
            self._applying = False
        if whole:
            cursor = self.textCursor()
            cursor.setPosition(0)
            self.setTextCursor(cursor)
        else:
            cursor = self.textCursor()
            cursor.setPosition(len(text) - suffix)
            self.setTextCursor(cursor)
            self.ensureCursorVisible()

    # ------------------------------------------------------------ keys
    def event(self, event) -> bool:
        if event.type() == QEvent.Type.ShortcutOverride:
            if event.matches(QKeySequence.StandardKey.Undo) or event.matches(QKeySequence.StandardKey.Redo):
                event.accept()
                return True
        return super().event(event)

    def keyPressEvent(self, event) -> None:
        stack = self.session.undo_stack
        if event.matches(QKeySequence.StandardKey.Undo):
            stack.undo()
            return
        if event.matches(QKeySequence.StandardKey.Redo):
            stack.redo()
            return
        mods = event.modifiers() & ~(Qt.KeyboardModifier.ShiftModifier | Qt.KeyboardModifier.KeypadModifier)
        if event.key() == Qt.Key.Key_Slash and mods == Qt.KeyboardModifier.ControlModifier:
            self.toggle_comment()
            return
        if event.key() == Qt.Key.Key_Tab and not event.modifiers() & ~Qt.KeyboardModifier.KeypadModifier:
            cursor = self.textCursor()
            if cursor.hasSelection() and "\u2029" in cursor.selectedText():
                self._indent_lines(+1)
            else:
                column = cursor.positionInBlock()
                cursor.insertText(" " * (len(INDENT) - column % len(INDENT)))
            return
        if event.key() == Qt.Key.Key_Backtab:
            self._indent_lines(-1)
            return
        if event.key() in (Qt.Key.Key_Return, Qt.Key.Key_Enter) and not event.modifiers():
            # Keep the indentation of the line above.
            line = self.textCursor().block().text()
            lead = line[:len(line) - len(line.lstrip(" "))]
            self.textCursor().insertText("\n" + lead)
            self.ensureCursorVisible()
            return
        super().keyPressEvent(event)

    def _indent_lines(self, direction: int) -> None:
        cursor = self.textCursor()
        doc = self.document()
        first = doc.findBlock(cursor.selectionStart())
        last = doc.findBlock(cursor.selectionEnd())
        edit = QTextCursor(doc)
        edit.beginEditBlock()
        b = first
        while b.isValid():
            if direction > 0:
                edit.setPosition(b.position())
                edit.insertText(INDENT)
            else:
                text = b.text()
                width = min(len(INDENT), len(text) - len(text.lstrip(" ")))
                if width:
                    edit.setPosition(b.position())
                    edit.setPosition(b.position() + width, QTextCursor.MoveMode.KeepAnchor)
                    edit.removeSelectedText()
            if b == last:
                break
            b = b.next()
        edit.endEditBlock()

    # ------------------------------------------------------------ hover
    def viewportEvent(self, event) -> bool:
        if event.type() == QEvent.Type.ToolTip:
            text = self._tooltip_at(event.pos())
            if text:
                QToolTip.showText(event.globalPos(), text, self.viewport())
            else:
                QToolTip.hideText()
                event.ignore()
            return True
        return super().viewportEvent(event)

    def _tooltip_at(self, point: QPoint) -> str:
        found = []
        for mark in sorted(self._marks, key=lambda m: SEVERITY_RANK.get(m.diagnostic.severity, 3)):
            a, b = QTextCursor(mark.cursor), QTextCursor(mark.cursor)
            a.setPosition(mark.start)
            b.setPosition(mark.end)
            left, right = self.cursorRect(a), self.cursorRect(b)
            rect = QRect(left.left(), left.top(), max(right.left() - left.left(), 4), left.height())
            if rect.adjusted(0, -1, 0, 2).contains(point):
                found.append(mark.diagnostic)
        return "<br>".join(_diagnostic_html(d) for d in found)

    # ------------------------------------------------------------ painting
    def changeEvent(self, event) -> None:
        super().changeEvent(event)
        if event.type() in (QEvent.Type.PaletteChange, QEvent.Type.ApplicationPaletteChange):
            self.highlighter.set_palette(self.palette())
            self._build_formats()
            self.set_diagnostics(self._diagnostics)

    def _build_formats(self) -> None:
        self._formats = {}
        for severity in (ERROR, WARNING, INFO):
            fmt = QTextCharFormat()
            fmt.setUnderlineStyle(QTextCharFormat.UnderlineStyle.WaveUnderline)
            fmt.setUnderlineColor(severity_colour(severity, self.palette()))
            if severity != INFO:  # a faint tint makes the span easy to find; notes stay plain
                tint = severity_colour(severity, self.palette())
                tint.setAlphaF(0.13 if severity == ERROR else 0.10)
                fmt.setBackground(tint)
            self._formats[severity] = fmt

    def _on_cursor_moved(self) -> None:
        number = self.textCursor().blockNumber()
        if number != self._current_block:
            self._current_block = number
            self.viewport().update()
            self._numbers.update()

    def _refresh_selections(self) -> None:
        selections = []
        for mark in self._marks:
            sel = QTextEdit.ExtraSelection()
            sel.cursor = mark.cursor
            sel.format = self._formats.get(mark.diagnostic.severity, self._formats[INFO])
            selections.append(sel)
        self.setExtraSelections(selections)

    def paintEvent(self, event) -> None:
        # The current line gets a faint tint, painted under the text (a full-width extra
        # selection would hide it behind coloured text).
        block = self.textCursor().block()
        rect = self.blockBoundingGeometry(block).translated(self.contentOffset()).toRect()
        if rect.intersects(event.rect()):
            painter = QPainter(self.viewport())
            painter.fillRect(QRect(0, rect.top(), self.viewport().width(), rect.height()), self._current_line_colour())
            painter.end()
        super().paintEvent(event)

    def _current_line_colour(self) -> QColor:
        base = self.palette().color(QPalette.ColorRole.Base)
        tint = self.palette().color(QPalette.ColorRole.Highlight)
        mix = 0.07
        return QColor.fromRgbF(base.redF() * (1 - mix) + tint.redF() * mix,
                               base.greenF() * (1 - mix) + tint.greenF() * mix,
                               base.blueF() * (1 - mix) + tint.blueF() * mix)

    def line_number_width(self) -> int:
        digits = max(2, len(str(self.blockCount())))
        return 14 + self.fontMetrics().horizontalAdvance("9") * digits + 6

    def _update_margin(self, *_args) -> None:
        self.setViewportMargins(self.line_number_width(), 0, 0, 0)

    def _scroll_numbers(self, rect, dy) -> None:
        if dy:
            self._numbers.scroll(0, dy)
        else:
            self._numbers.update(0, rect.y(), self._numbers.width(), rect.height())
        if rect.contains(self.viewport().rect()):
            self._update_margin()

    def resizeEvent(self, event) -> None:
        super().resizeEvent(event)
        cr = self.contentsRect()
        self._numbers.setGeometry(QRect(cr.left(), cr.top(), self.line_number_width(), cr.height()))

    def paint_line_numbers(self, area: QWidget, event) -> None:
        painter = QPainter(area)
        pal = self.palette()
        painter.fillRect(event.rect(), pal.color(QPalette.ColorRole.Window))
        muted = pal.color(QPalette.ColorRole.PlaceholderText)
        strong = pal.color(QPalette.ColorRole.Text)
        current = self.textCursor().blockNumber()
        painter.setFont(self.font())
        fh = self.fontMetrics().height()
        block = self.firstVisibleBlock()
        top = round(self.blockBoundingGeometry(block).translated(self.contentOffset()).top())
        bottom = top + round(self.blockBoundingRect(block).height())
        width = area.width()
        painter.setRenderHint(QPainter.RenderHint.Antialiasing)
        while block.isValid() and top <= event.rect().bottom():
            if block.isVisible() and bottom >= event.rect().top():
                number = block.blockNumber() + 1
                painter.setPen(strong if block.blockNumber() == current else muted)
                painter.drawText(0, top, width - 8, fh, Qt.AlignmentFlag.AlignRight, str(number))
                severity = self._line_severity.get(number)
                if severity:
                    painter.setPen(Qt.PenStyle.NoPen)
                    painter.setBrush(severity_colour(severity, pal))
                    r = max(2.5, fh * 0.16)
                    path = QPainterPath()
                    path.addEllipse(6 - r + 1, top + fh / 2 - r, 2 * r, 2 * r)
                    painter.drawPath(path)
            block = block.next()
            top = bottom
            bottom = top + round(self.blockBoundingRect(block).height())
        painter.end()


def _escape(text: str) -> str:
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


def _diagnostic_html(d: Diagnostic) -> str:
    html = f"<b>{d.severity.capitalize()}</b>: {_escape(d.message)}"
    if d.fix and d.fix not in d.message:
        html += f"<br><i>Fix:</i> {_escape(d.fix)}"
    return html


def diagnostic_label(d: Diagnostic) -> str:
    text = f"{d.line}:{d.column}  {d.message}"
    fix = quick_fix(d)
    if fix is not None:
        text += f"\n      quick fix: {fix.label} (double-click)"
    elif d.fix and d.fix not in d.message:
        text += f"\n      fix: {d.fix}"
    return text


class _TopAligned(QStyledItemDelegate):
    """Icon and text start at the top of an item, so a wrapped message reads from its mark."""

    def initStyleOption(self, option, index) -> None:
        super().initStyleOption(option, index)
        option.decorationAlignment = Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignTop
        option.displayAlignment = Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignTop


class DiagnosticsList(QListWidget):
    """The current diagnostics, most serious first within each line; clicking one moves the
    editor's cursor to it (connect ``diagnosticActivated`` or pass ``editor``)."""

    diagnosticActivated = Signal(int, int)  # line, column (1-based)

    def __init__(self, session, parent=None, editor: EquationEditor | None = None):
        super().__init__(parent)
        self.session = session
        self.editor = None
        self._diagnostics: list[Diagnostic] = []
        self.setToolTip("Problems the model text has; click one to go to it")
        self.setAlternatingRowColors(False)
        self.setUniformItemSizes(False)
        self.setWordWrap(True)
        self.setTextElideMode(Qt.TextElideMode.ElideNone)
        self.setVerticalScrollMode(QListWidget.ScrollMode.ScrollPerPixel)
        self.setSpacing(2)
        self.setResizeMode(QListView.ResizeMode.Adjust)
        self.setItemDelegate(_TopAligned(self))
        self.setIconSize(QSize(14, 14))
        self.itemClicked.connect(self._activate)
        self.itemActivated.connect(self._activate)
        # after the click is handled: applying rebuilds the list under the item
        self.itemDoubleClicked.connect(lambda item: QTimer.singleShot(0, lambda: self.apply_fix_of(self.row(item))))
        self.setContextMenuPolicy(Qt.ContextMenuPolicy.CustomContextMenu)
        self.customContextMenuRequested.connect(self._context_menu)
        session.modelParsed.connect(self.on_model_parsed)
        if editor is not None:
            self.set_editor(editor)
        self.on_model_parsed(session.parsed)

    def set_editor(self, editor: EquationEditor) -> None:
        if self.editor is not None:
            self.diagnosticActivated.disconnect(self.editor.go_to)
        self.editor = editor
        self.diagnosticActivated.connect(editor.go_to)

    def diagnostics(self) -> list[Diagnostic]:
        return list(self._diagnostics)

    def on_model_parsed(self, parsed) -> None:
        if parsed is None:
            self.set_diagnostics([])
            return
        if self.editor is not None and parsed.text != self.editor.toPlainText():
            return
        self.set_diagnostics(list(parsed.diagnostics))

    def set_diagnostics(self, diagnostics: list[Diagnostic]) -> None:
        ordered = sorted(diagnostics, key=lambda d: (d.line, SEVERITY_RANK.get(d.severity, 3), d.column))
        if ordered == self._diagnostics and self.count():
            return
        self._diagnostics = ordered
        self.clear()
        if not ordered:
            item = QListWidgetItem("No problems")
            item.setFlags(Qt.ItemFlag.NoItemFlags)
            item.setToolTip("The model text has no errors, warnings or notes")
            self.addItem(item)
            return
        for d in ordered:
            item = QListWidgetItem(severity_icon(d.severity, self.palette()), diagnostic_label(d))
            item.setData(Qt.ItemDataRole.UserRole, (d.line, d.column))
            item.setToolTip(_diagnostic_html(d) + f"<br><small>line {d.line}, column {d.column}</small>")
            self.addItem(item)

    def fix_of(self, row: int):
        return quick_fix(self._diagnostics[row]) if 0 <= row < len(self._diagnostics) else None

    def apply_fix_of(self, row: int) -> bool:
        """Apply the quick fix of the problem in ``row`` to the model text (one undoable edit); False if it
        has none."""
        fix = self.fix_of(row)
        if fix is None:
            return False
        text = self.editor.toPlainText() if self.editor is not None else self.session.text
        parsed = self.session.parsed
        if parsed is None or parsed.text != text:
            return False  # the list is of an older text: its fixes may no longer fit
        new = apply_fix(text, fix)
        if new == text:
            return False
        self.session.set_text(new)
        self.session.validate_now()
        return True

    def _context_menu(self, pos) -> None:
        item = self.itemAt(pos)
        row = self.row(item) if item is not None else -1
        fix = self.fix_of(row)
        if fix is None:
            return
        menu = QMenu(self)
        menu.addAction(f"Quick fix: {fix.label}", lambda: self.apply_fix_of(row))
        menu.exec(self.viewport().mapToGlobal(pos))

    def _activate(self, item: QListWidgetItem) -> None:
        if item is None:
            return
        where = item.data(Qt.ItemDataRole.UserRole)
        if where:
            self.diagnosticActivated.emit(int(where[0]), int(where[1]))
