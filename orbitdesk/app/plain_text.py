"""Text from files shown as text: never as markup, never as a menu shortcut.

Qt guesses whether a label's, message box's or tool tip's text is HTML (``Qt.AutoText``), so a
project named ``<img src=...>`` or a message quoting a file would be drawn as an image, a link or a
headline. Everything here shows such text literally:

* ``plain_message(parent, kind, title, text)``: a message box whose text format is plain text (the
  replacement for ``QMessageBox.critical/warning/information/question`` wherever the text holds a
  file name, a project name or words from a file);
* ``plain_label(text)`` / ``make_plain(label)``: a label that shows its text as plain text;
* ``html_text(text)``: text escaped for a place that is always rich text (tool tips next to our own
  markup, ``setHtml``), line breaks kept;
* ``menu_text(text)``: text for a menu entry or button, with ``&`` doubled so it is not a shortcut.
"""

from __future__ import annotations

import html
import os

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QLabel, QMessageBox

_ICONS = {"critical": QMessageBox.Icon.Critical, "warning": QMessageBox.Icon.Warning,
          "information": QMessageBox.Icon.Information, "question": QMessageBox.Icon.Question}


def html_text(text) -> str:
    """``text`` as HTML that shows exactly these characters (line breaks as breaks)."""
    return html.escape(str(text), quote=True).replace("\n", "<br>")


def rich_tip(text) -> str:
    """A tool tip that shows ``text`` literally (tool tips are rich text whenever Qt thinks so)."""
    return f"<p style='white-space:pre-wrap'>{html_text(text)}</p>"


def menu_text(text) -> str:
    return str(text).replace("&", "&&")


def make_plain(label: QLabel) -> QLabel:
    label.setTextFormat(Qt.TextFormat.PlainText)
    return label


def plain_label(text: str = "", parent=None) -> QLabel:
    label = make_plain(QLabel(parent))
    label.setText(str(text))
    return label


def message_box(parent, kind: str, title: str, text: str, buttons=None, default=None) -> QMessageBox:
    """The message box ``plain_message`` shows (built, not shown)."""
    box = QMessageBox(parent)
    box.setIcon(_ICONS[kind])
    box.setWindowTitle(str(title))
    box.setTextFormat(Qt.TextFormat.PlainText)
    box.setText(str(text))
    if buttons is None:
        buttons = (QMessageBox.StandardButton.Yes | QMessageBox.StandardButton.No if kind == "question"
                   else QMessageBox.StandardButton.Ok)
    box.setStandardButtons(buttons)
    if default is not None:
        box.setDefaultButton(default)
    return box


def show_box(box: QMessageBox, kind: str):
    """Run the box modally and return the standard button chosen (tests replace this). With dialogs
    switched off (``ORBITDESK_NO_DIALOGS``) nothing is shown and the answer is Cancel when offered."""
    if os.environ.get("ORBITDESK_NO_DIALOGS"):
        cancel = QMessageBox.StandardButton.Cancel
        return cancel if box.standardButtons() & cancel else QMessageBox.StandardButton.NoButton
    box.exec()
    return box.standardButton(box.clickedButton()) if box.clickedButton() else QMessageBox.StandardButton.NoButton


def plain_message(parent, kind: str, title: str, text: str, buttons=None, default=None):
    """Like ``QMessageBox.<kind>(parent, title, text, buttons, default)`` with ``text`` shown as plain text."""
    return show_box(message_box(parent, kind, title, text, buttons, default), kind)


__all__ = ["html_text", "make_plain", "menu_text", "message_box", "plain_label", "plain_message", "rich_tip",
           "show_box"]
