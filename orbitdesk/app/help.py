"""Help: the model-language quick reference (``orbitdesk/help/language.md``, the same text the README
links) in a window of its own, and the Help > Sample Projects menu."""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import Qt
from PySide6.QtGui import QKeySequence, QPalette, QTextBlockFormat, QTextCursor, QTextDocument, QTextFormat
from PySide6.QtWidgets import (QHBoxLayout, QLabel, QLineEdit, QListWidget, QListWidgetItem, QMenu, QSplitter,
                               QTextBrowser, QVBoxLayout, QWidget)

from orbitdesk.document import project as core_project
from orbitdesk.document.project import ProjectError
from orbitdesk.samples import SAMPLES_DIR, sample_paths  # noqa: F401 (SAMPLES_DIR: where the menu reads)

LANGUAGE_FILE = Path(__file__).resolve().parent.parent / "help" / "language.md"
REFERENCE_CSS = ("code { font-family: monospace; } pre { font-family: monospace; } "
                 "td, th { padding: 3px 10px 3px 0; } th { text-align: left; }")


def language_text() -> str:
    try:
        return LANGUAGE_FILE.read_text(encoding="utf-8")
    except OSError as e:
        return f"# The model language\n\nThe reference could not be read ({e.strerror or e})."


def headings(document: QTextDocument) -> list[tuple[int, str, int]]:
    """(level, text, position) of every heading block of a document made from markdown."""
    out, block = [], document.begin()
    while block.isValid():
        level = block.blockFormat().headingLevel()
        if level > 0 and block.text().strip():
            out.append((level, block.text().strip(), block.position()))
        block = block.next()
    return out


def _space_out(document: QTextDocument, code_background) -> None:
    """Air above headings and a quiet background behind code blocks (markdown import sets neither)."""
    cursor = QTextCursor(document)
    block = document.begin()
    while block.isValid():
        fmt = block.blockFormat()
        change = QTextBlockFormat()
        if fmt.headingLevel() > 0:
            change.setTopMargin(18 if fmt.headingLevel() > 1 else 4)
            change.setBottomMargin(6)
        elif fmt.hasProperty(QTextFormat.Property.BlockCodeFence) or fmt.nonBreakableLines():
            change.setBackground(code_background)
            change.setLeftMargin(6)
        else:
            block = block.next()
            continue
        cursor.setPosition(block.position())
        cursor.mergeBlockFormat(change)
        block = block.next()


class LanguageReference(QWidget):
    """The quick reference: contents on the left, the text on the right, and a find box."""

    def __init__(self, parent=None):
        super().__init__(parent, Qt.WindowType.Window)
        self.setWindowTitle("Model Language — OrbitDesk")
        self.setObjectName("language_reference")
        self.browser = QTextBrowser()
        self.browser.setOpenExternalLinks(True)
        self.browser.document().setDefaultStyleSheet(REFERENCE_CSS)
        self.browser.document().setDocumentMargin(14)
        self.contents = QListWidget()
        self.contents.setToolTip("Jump to a section")
        self.contents.setFrameShape(QListWidget.Shape.NoFrame)
        self.contents.itemActivated.connect(self._jump)
        self.contents.itemClicked.connect(self._jump)
        self.find_box = QLineEdit()
        self.find_box.setPlaceholderText("Find in the reference")
        self.find_box.setToolTip("Type a word and press Enter to find the next place it appears")
        self.find_box.setClearButtonEnabled(True)
        self.find_box.returnPressed.connect(self.find_next)
        self.find_status = QLabel()
        self.find_status.setStyleSheet("color: palette(placeholder-text);")
        self.find_status.setMinimumWidth(self.find_status.fontMetrics().horizontalAdvance("not found") + 8)

        side = QWidget()
        side_layout = QVBoxLayout(side)
        side_layout.setContentsMargins(0, 0, 0, 0)
        heading = QLabel("Contents")
        heading.setStyleSheet("font-weight: 600; padding: 4px 2px;")
        side_layout.addWidget(heading)
        side_layout.addWidget(self.contents, 1)
        splitter = QSplitter(Qt.Orientation.Horizontal)
        splitter.addWidget(side)
        splitter.addWidget(self.browser)
        splitter.setStretchFactor(1, 1)
        splitter.setSizes([190, 640])
        top = QHBoxLayout()
        top.addWidget(self.find_box, 1)
        top.addWidget(self.find_status)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(8, 8, 8, 8)
        layout.addLayout(top)
        layout.addWidget(splitter, 1)
        self.resize(900, 680)
        self.reload()

    def reload(self) -> None:
        self.browser.setMarkdown(language_text())
        _space_out(self.browser.document(), self.palette().color(QPalette.ColorRole.AlternateBase))
        self.contents.clear()
        for level, text, position in headings(self.browser.document()):
            item = QListWidgetItem(("    " * (level - 1)) + text)
            item.setData(Qt.ItemDataRole.UserRole, position)
            item.setToolTip(text)
            self.contents.addItem(item)

    def heading_texts(self) -> list[str]:
        return [text for _level, text, _pos in headings(self.browser.document())]

    def _jump(self, item) -> None:
        cursor = QTextCursor(self.browser.document())
        cursor.setPosition(int(item.data(Qt.ItemDataRole.UserRole)))
        self.browser.setTextCursor(cursor)
        rect = self.browser.cursorRect(cursor)
        bar = self.browser.verticalScrollBar()
        bar.setValue(bar.value() + rect.top() - 6)

    def find_next(self) -> bool:
        text = self.find_box.text()
        if not text:
            self.find_status.setText("")
            return False
        found = self.browser.find(text)
        if not found:  # wrap around once
            self.browser.moveCursor(QTextCursor.MoveOperation.Start)
            found = self.browser.find(text)
        self.find_status.setText("" if found else "not found")
        return found

    def keyPressEvent(self, event) -> None:
        if event.matches(QKeySequence.StandardKey.Find):
            self.find_box.setFocus()
            self.find_box.selectAll()
            return
        if event.key() == Qt.Key.Key_Escape:
            self.close()
            return
        super().keyPressEvent(event)


# ---------------------------------------------------------------- sample projects

def sample_label(path: Path) -> tuple[str, str]:
    """(menu text, tooltip) of a sample project: its name and the first sentence of its notes."""
    try:
        project = core_project.load(path)
    except ProjectError:
        return path.stem.replace("_", " ").capitalize(), str(path)
    first = project.notes.strip().split("\n\n")[0].replace("\n", " ")
    steps = len(project.walkthrough)
    tip = (first + " " if first else "") + (f"({steps} walkthrough steps)" if steps else "")
    return project.name or path.stem, tip.strip() or path.name


def open_sample(window, path) -> bool:
    """Open a sample as a new, unsaved copy (Save asks where), after asking about unsaved work."""
    if not window.maybe_save():
        return False
    try:
        project = core_project.load(path)
    except ProjectError as e:
        from orbitdesk.app.plain_text import plain_message

        plain_message(window, "critical", "Could not open the sample", f"{Path(path).name}: {e.message}")
        return False
    window.session.load_project(project, None)
    window.documentOpened.emit()
    window.statusBar().showMessage(f"Opened the sample “{project.name}”; Save keeps your own copy", 8000)
    return True


def fill_samples_menu(window, menu: QMenu, directory: Path | None = None) -> None:
    menu.clear()
    paths = sample_paths(directory)
    for path in paths:
        text, tip = sample_label(path)
        action = menu.addAction(text)
        action.setToolTip(tip)
        action.setStatusTip(tip)
        action.setData(str(path))
        action.triggered.connect(lambda _=False, p=path: open_sample(window, p))
    if not paths:
        none = menu.addAction("No sample projects found")
        none.setEnabled(False)


def show_language_reference(window) -> LanguageReference:
    ref = getattr(window, "language_reference", None)
    if ref is None:
        ref = LanguageReference(window)
        window.language_reference = ref
    ref.show()
    ref.raise_()
    ref.activateWindow()
    return ref


def install(window) -> None:
    """Help > Model Language (F1) and Help > Sample Projects, above About."""
    menu = window.help_menu
    first = menu.actions()[0] if menu.actions() else None
    reference = menu.addAction("Model &Language")
    reference.setShortcut(QKeySequence.StandardKey.HelpContents)
    reference.setToolTip("The quick reference of the model language (F1)")
    reference.setStatusTip(reference.toolTip())
    reference.triggered.connect(lambda: show_language_reference(window))
    samples = QMenu("&Sample Projects", menu)
    samples.setToolTipsVisible(True)
    samples.setToolTip("Small studies with walkthroughs, opened as unsaved copies")
    samples.addAction("Sample projects").setEnabled(False)  # filled when opened (reading them waits till then)
    samples.aboutToShow.connect(lambda: fill_samples_menu(window, samples))
    menu.insertAction(first, reference)
    menu.insertMenu(first, samples)
    menu.insertSeparator(first)
    window.language_action, window.samples_menu = reference, samples
