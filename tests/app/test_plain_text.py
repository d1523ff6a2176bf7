"""Text from files is shown as text, never as markup (issue 10, item 8).

A project whose name, step titles or error messages hold ``<h1>``, ``<img src=...>`` and ``<a href>``
is opened; every place that shows that text must show those characters: message boxes and labels
in plain-text format, tool tips (always rich text in Qt) escaped so that Qt's own rich-text
renderer (QTextDocument) gives back exactly the original characters, menu entries with ``&``
doubled so no character becomes a shortcut.
"""

from __future__ import annotations

import json

from hypothesis import given
from hypothesis import strategies as st
from PySide6.QtCore import Qt
from PySide6.QtGui import QTextDocument
from PySide6.QtWidgets import QLabel

from orbitdesk.document import project as core_project
from orbitdesk.document.project import Project, WalkthroughStep
from orbitdesk.app.plain_text import html_text, menu_text, plain_label, rich_tip
from tests.core.test_fuzz_parser import budget

MARKUP = '<h1>big</h1><img src="/etc/passwd"><a href="file:///">link</a> & <b>bold</b>'
MODEL = "w = 2\nx'' = -w^2*x\nx(0) = 1\n"


def shown_by_qt(rich: str) -> str:
    """What Qt's rich-text renderer shows for ``rich``."""
    document = QTextDocument()
    document.setHtml(rich)
    return document.toPlainText()


def _box_label(box) -> QLabel:
    label = box.findChild(QLabel, "qt_msgbox_label")
    assert label is not None
    return label


def test_could_not_open_dialog_shows_the_file_text_literally(qtbot, window, tmp_path, message_boxes):
    bad = tmp_path / "bad.orbitdesk"
    bad.write_text(json.dumps({"format": "orbitdesk-project", "version": 1, "solver": {"method": MARKUP}}),
                   encoding="utf-8")
    assert not window.open_path(bad, ask=False)
    assert len(message_boxes.boxes) == 1
    box = message_boxes.boxes[0]
    assert box.textFormat() == Qt.TextFormat.PlainText
    assert _box_label(box).textFormat() == Qt.TextFormat.PlainText
    assert "<h1>big</h1><img src=" in box.text()
    assert any("<img src=" in t for t in message_boxes.texts("critical"))


def test_a_project_named_with_markup_is_shown_as_text_everywhere(qtbot, window, tmp_path, message_boxes):
    path = tmp_path / "marked.orbitdesk"
    core_project.save(path, Project(name=MARKUP, model=MODEL,
                                    walkthrough=[WalkthroughStep(MARKUP, "a *note*", {})]))
    assert window.open_path(path, ask=False)
    assert window.session.name == MARKUP
    assert MARKUP in window.windowTitle()  # window titles are never rich text
    # the step list's tool tip and the step's title label
    panel = window.walkthrough_panel
    item = panel.step_list.item(0)
    assert shown_by_qt(item.toolTip()) == MARKUP
    panel.show_step(0)
    assert panel.title_label.textFormat() == Qt.TextFormat.PlainText and panel.title_label.text() == MARKUP
    # the recent-files menu: the entry is the file name, its tool tip the whole path
    window._fill_recent()
    entry = window.recent_menu.actions()[0]
    assert shown_by_qt(entry.toolTip()) == str(path.resolve())
    # closing with unsaved changes asks in plain text
    window.session.set_param("w", 3.0)
    message_boxes.answer = None
    window.maybe_save()
    box = message_boxes.boxes[-1]
    assert box.textFormat() == Qt.TextFormat.PlainText and MARKUP in box.text()


def test_recent_file_names_with_ampersands_and_markup(qtbot, window, tmp_path):
    path = tmp_path / "R&D <b>x.orbitdesk"
    core_project.save(path, Project(name="r", model=MODEL))
    window.add_recent(path)
    window._fill_recent()
    entry = window.recent_menu.actions()[0]
    assert entry.text() == "R&&D <b>x.orbitdesk"  # shown as "R&D <b>x.orbitdesk", no shortcut
    assert shown_by_qt(entry.toolTip()) == str(path.resolve())


def test_sample_that_cannot_be_opened_is_reported_in_plain_text(qtbot, window, tmp_path, message_boxes):
    from orbitdesk.app.help import open_sample

    bad = tmp_path / "<img src=x>.orbitdesk"
    bad.write_text("{" + MARKUP, encoding="utf-8")
    assert not open_sample(window, bad)
    box = message_boxes.boxes[-1]
    assert box.textFormat() == Qt.TextFormat.PlainText and "<img src=x>.orbitdesk" in box.text()


def test_helpers(qtbot):
    assert shown_by_qt(rich_tip(MARKUP + "\nsecond line")) == MARKUP + "\nsecond line"
    assert shown_by_qt(html_text(MARKUP)) == MARKUP
    assert menu_text("A&B") == "A&&B"
    label = plain_label(MARKUP)
    assert label.textFormat() == Qt.TextFormat.PlainText and label.text() == MARKUP


MARKUP_PIECES = ["<h1>", "</h1>", "<img src=x onerror=y>", "<a href='file:///'>", "</a>", "&amp;", "&lt;", "&#60;",
                 "<!--", "-->", "<br>", "<qt>", "<p style='x'>", "&", "<", ">", '"', "'", "\n", " ", "  ", "\t"]


@budget(300)
@given(st.lists(st.one_of(st.sampled_from(MARKUP_PIECES),
                          st.characters(min_codepoint=32, max_codepoint=0x2000, exclude_categories=("Cc", "Cs", "Zl",
                                                                                                      "Zp"))),
                max_size=30).map("".join))
def test_any_text_in_a_tool_tip_is_shown_as_itself(text):
    # (QTextDocument.toPlainText gives no-break spaces back as plain spaces)
    assert shown_by_qt(rich_tip(text)) == text.replace("\xa0", " ")


def test_imported_data_names_and_errors_are_shown_literally(qtbot, window, tmp_path, message_boxes, monkeypatch):
    from PySide6.QtWidgets import QDialog

    from orbitdesk.app.panels import data_import

    window.session.set_text("x' = -x\nx(0) = 1\n")
    window.session.validate_now()
    qtbot.waitUntil(lambda: window.session.system is not None, timeout=10000)
    bad = tmp_path / "bad.csv"
    bad.write_text("t,x\n0,1\n1,<img src=x>\n")
    assert data_import.import_file(window, bad) is None
    box = message_boxes.boxes[-1]
    assert box.textFormat() == Qt.TextFormat.PlainText
    seen = {}

    def look(dialog):
        seen["labels"] = [(label.text(), label.textFormat()) for label in dialog.findChildren(QLabel)]
        seen["tips"] = [shown_by_qt(c.toolTip()) for c in dialog.choices.values()]
        return QDialog.DialogCode.Rejected

    monkeypatch.setattr(data_import.MappingDialog, "exec", look)
    path = tmp_path / "run <b>1.csv"
    path.write_text("t,disp [<h1>mm</h1>]\n0,1\n1,0.5\n")  # a unit may be any text
    assert data_import.import_file(window, path) is None
    assert ("disp [<h1>mm</h1>]", Qt.TextFormat.PlainText) in seen["labels"]
    assert all(fmt == Qt.TextFormat.PlainText for text, fmt in seen["labels"] if "<" in text)
    assert any("run <b>1.csv" in text for text, _ in seen["labels"])
