"""The model editor: typing goes to the session, diagnostics come back as underlines and a list."""

import os

from PySide6.QtCore import QEvent, Qt
from PySide6.QtGui import QHelpEvent, QTextCharFormat, QTextCursor
from PySide6.QtWidgets import QApplication, QSplitter, QToolTip

from orbitdesk.language.diagnostics import ERROR, INFO
from orbitdesk.document.project import Project
from orbitdesk.app.panels.editor import DiagnosticsList, EquationEditor
from orbitdesk.app.panels.highlighter import (DERIVED, FLOW_EQ, INITIAL, MAP_EQ, PARAMETER, classify_lhs, colour,
                                      is_dark)

# Lorenz, "Deterministic nonperiodic flow", J. Atmos. Sci. 20 (1963), with the classic values.
LORENZ = """# Lorenz (1963) convection model
x' = sigma*(y - x)
y' = x*(rho - z) - y
z' = x*y - beta*z
sigma = 10 in [0, 20]
rho = 28 in [0, 50]
beta = 8/3
x(0) = 1
y(0) = 1
z(0) = 1
"""


def type_lines(qtbot, widget, lines):
    """Type text the way a person does: one key at a time, Return between lines."""
    for i, line in enumerate(lines):
        if i:
            qtbot.keyClick(widget, Qt.Key.Key_Return)
        qtbot.keyClicks(widget, line)


def make_editor(qtbot, session, with_list=False):
    editor = EquationEditor(session)
    qtbot.addWidget(editor)
    listing = None
    if with_list:
        listing = DiagnosticsList(session, editor=editor)
        qtbot.addWidget(listing)
    editor.resize(560, 320)
    editor.show()
    qtbot.waitExposed(editor)
    editor.setFocus()
    return editor, listing


def errors(editor):
    return [d for d in editor.diagnostics() if d.severity == ERROR]


def marked_text(editor, diagnostic):
    start, end = editor.diagnostic_span(diagnostic)
    cursor = QTextCursor(editor.document())
    cursor.setPosition(start)
    cursor.setPosition(end, QTextCursor.MoveMode.KeepAnchor)
    return cursor.selectedText()


def test_typing_a_misspelt_name_shows_an_error_at_its_columns_then_fixing_clears_it(qtbot, session):
    editor, listing = make_editor(qtbot, session, with_list=True)
    type_lines(qtbot, editor, ["sigma = 2", "x' = -sigam*x"])
    assert session.text == "sigma = 2\nx' = -sigam*x"  # every keystroke reached the session
    qtbot.waitUntil(lambda: any("sigam" in d.message for d in errors(editor)), timeout=3000)
    [err] = errors(editor)
    # 'sigam' spans columns 7..11 of line 2 (1-based, end exclusive 12)
    assert (err.line, err.column, err.end_column) == (2, 7, 12)
    assert editor.diagnostic_span(err) == (editor.position_of(2, 7), editor.position_of(2, 12))
    assert marked_text(editor, err) == "sigam"
    waves = [s for s in editor.extraSelections()
             if s.format.underlineStyle() == QTextCharFormat.UnderlineStyle.WaveUnderline
             and s.cursor.selectedText() == "sigam"]
    assert len(waves) == 1
    assert any("sigam" in listing.item(i).text() and listing.item(i).text().startswith("2:7")
               for i in range(listing.count()))
    # fix it by hand: cursor back over "*x", delete "am", type "ma"
    qtbot.keyClick(editor, Qt.Key.Key_Left)
    qtbot.keyClick(editor, Qt.Key.Key_Left)
    qtbot.keyClick(editor, Qt.Key.Key_Backspace)
    qtbot.keyClick(editor, Qt.Key.Key_Backspace)
    qtbot.keyClicks(editor, "ma")
    assert editor.toPlainText() == "sigma = 2\nx' = -sigma*x"
    qtbot.waitUntil(lambda: not errors(editor) and bool(editor.diagnostics()), timeout=3000)
    # what remains is the note that x has no initial value
    assert [d.severity for d in editor.diagnostics()] == [INFO]
    assert all("sigam" not in listing.item(i).text() for i in range(listing.count()))


def test_underlines_follow_edits_made_before_the_next_parse(qtbot, session):
    editor, _ = make_editor(qtbot, session)
    qtbot.keyClicks(editor, "x' = -kk*x")
    qtbot.waitUntil(lambda: bool(errors(editor)), timeout=3000)
    [err] = errors(editor)
    assert marked_text(editor, err) == "kk"
    cursor = editor.textCursor()
    cursor.setPosition(0)
    editor.setTextCursor(cursor)
    qtbot.keyClicks(editor, "  ")  # shift the line right; the mark moves with its text at once
    assert marked_text(editor, err) == "kk"
    qtbot.waitUntil(lambda: bool(errors(editor)) and errors(editor)[0].column == err.column + 2, timeout=3000)


def test_a_span_past_the_end_of_the_line_still_marks_something(qtbot, session):
    editor, _ = make_editor(qtbot, session)
    qtbot.keyClicks(editor, "x' =")
    qtbot.waitUntil(lambda: bool(errors(editor)), timeout=3000)
    [err] = errors(editor)
    assert "missing the right side" in err.message
    start, end = editor.diagnostic_span(err)
    assert end > start and end == len("x' =")


def test_hovering_an_underline_shows_its_message(qtbot, session):
    editor, _ = make_editor(qtbot, session)
    qtbot.keyClicks(editor, "x' = -x + wobble")
    qtbot.waitUntil(lambda: bool(errors(editor)), timeout=3000)
    [err] = errors(editor)
    start, end = editor.diagnostic_span(err)
    cursor = QTextCursor(editor.document())
    cursor.setPosition((start + end) // 2)
    rect = editor.cursorRect(cursor)
    assert "unknown name 'wobble'" in editor._tooltip_at(rect.center())
    # the same through a real tooltip event on the text area
    help_event = QHelpEvent(QEvent.Type.ToolTip, rect.center(), editor.viewport().mapToGlobal(rect.center()))
    QApplication.sendEvent(editor.viewport(), help_event)
    qtbot.waitUntil(lambda: "wobble" in QToolTip.text(), timeout=2000)
    QToolTip.hideText()
    cursor.setPosition(3)  # the '=' has no diagnostic
    assert editor._tooltip_at(editor.cursorRect(cursor).center()) == ""


def test_clicking_a_diagnostic_moves_the_cursor_to_its_line_and_column(qtbot, session):
    editor, listing = make_editor(qtbot, session, with_list=True)
    listing.resize(520, 200)
    listing.show()
    qtbot.waitExposed(listing)
    session.load_project(Project(model=LORENZ.replace("beta*z", "beta*q")))
    qtbot.waitUntil(lambda: bool(errors(editor)), timeout=3000)
    row = next(i for i in range(listing.count()) if "'q'" in listing.item(i).text())
    item = listing.item(row)
    assert item.text().startswith("4:17")
    qtbot.mouseClick(listing.viewport(), Qt.MouseButton.LeftButton, pos=listing.visualItemRect(item).center())
    cursor = editor.textCursor()
    assert (cursor.blockNumber() + 1, cursor.positionInBlock() + 1) == (4, 17)
    assert editor.document().characterAt(cursor.position()) == "q"


def test_text_from_the_session_replaces_the_editor_without_echo_and_undo_goes_through_the_session(
        qtbot, session):
    editor, _ = make_editor(qtbot, session)
    session.load_project(Project(model=LORENZ))
    assert editor.toPlainText() == LORENZ
    assert session.undo_stack.count() == 0  # nothing was echoed back as a user edit
    cursor = editor.textCursor()
    cursor.setPosition(editor.position_of(7, 9))  # just after "beta = 8"
    editor.setTextCursor(cursor)
    qtbot.keyClicks(editor, "0")
    assert "beta = 80/3" in session.text and session.undo_stack.count() == 1
    qtbot.keyClick(editor, Qt.Key.Key_Z, Qt.KeyboardModifier.ControlModifier)
    assert session.text == LORENZ and editor.toPlainText() == LORENZ
    # the cursor is left at the place of the change
    assert editor.textCursor().blockNumber() == 6
    qtbot.keyClick(editor, Qt.Key.Key_Z, Qt.KeyboardModifier.ControlModifier | Qt.KeyboardModifier.ShiftModifier)
    assert "beta = 80/3" in editor.toPlainText()


def test_toggle_comment_and_tab(qtbot, session):
    editor, _ = make_editor(qtbot, session)
    session.load_project(Project(model="x' = -k*x\nk = 1\n"))
    cursor = editor.textCursor()
    cursor.setPosition(0)
    cursor.setPosition(editor.position_of(2, 3), QTextCursor.MoveMode.KeepAnchor)
    editor.setTextCursor(cursor)
    qtbot.keyClick(editor, Qt.Key.Key_Slash, Qt.KeyboardModifier.ControlModifier)
    assert editor.toPlainText() == "# x' = -k*x\n# k = 1\n"
    assert session.text == editor.toPlainText()
    qtbot.keyClick(editor, Qt.Key.Key_Slash, Qt.KeyboardModifier.ControlModifier)
    assert editor.toPlainText() == "x' = -k*x\nk = 1\n"
    cursor = editor.textCursor()
    cursor.setPosition(editor.position_of(3, 1))
    editor.setTextCursor(cursor)
    qtbot.keyClick(editor, Qt.Key.Key_Tab)
    qtbot.keyClicks(editor, "# note")
    assert editor.toPlainText().endswith("\n    # note")
    assert "\t" not in session.text


def test_colours_say_what_each_left_side_defines(qtbot, session):
    assert classify_lhs("x'", " -x") == FLOW_EQ
    assert classify_lhs("x[n+1]", " r*x*(1 - x)") == MAP_EQ
    assert classify_lhs("x'(0)", " 1") == INITIAL
    assert classify_lhs("r", " 3.7 in [2.5, 4]") == PARAMETER
    assert classify_lhs("w", " 2*pi/1e3") == PARAMETER
    assert classify_lhs("energy", " x^2/2") == DERIVED
    editor, _ = make_editor(qtbot, session)
    session.load_project(Project(model="x'' = -w*x  # spring\nw = 2\nE = x'^2 + w*x^2\nx(0) = 1\n"))
    dark = is_dark(editor.palette())

    def colour_at(line, column):
        block = editor.document().findBlockByNumber(line - 1)
        for fr in block.layout().formats():
            if fr.start <= column - 1 < fr.start + fr.length:
                return fr.format.foreground().color().name()
        return None

    assert colour_at(1, 1) == colour(FLOW_EQ, dark).name()
    assert colour_at(2, 1) == colour(PARAMETER, dark).name()
    assert colour_at(3, 1) == colour(DERIVED, dark).name()
    assert colour_at(4, 1) == colour(INITIAL, dark).name()
    assert colour_at(1, 15) is not None and colour_at(1, 15) != colour_at(1, 1)  # the comment


def test_the_angle_declaration_is_coloured_as_a_keyword_with_its_states(qtbot, session):
    from orbitdesk.app.panels.highlighter import KEYWORD

    editor, _ = make_editor(qtbot, session)
    session.load_project(Project(model="theta'' = -sin(theta)\n  angle theta, theta'  # wrapped\ntheta(0) = 1\n"))
    dark = is_dark(editor.palette())
    block = editor.document().findBlockByNumber(1)
    spans = {(fr.start, fr.length): fr.format.foreground().color().name() for fr in block.layout().formats()}
    assert spans[(2, 5)] == colour(KEYWORD, dark).name()          # "angle"
    assert spans[(8, 5)] == colour(FLOW_EQ, dark).name()          # theta: a state, as its equation is coloured
    assert spans[(15, 6)] == colour(FLOW_EQ, dark).name()         # theta'
    assert any(start == 23 for start, _n in spans)                # the comment keeps its own colour


def test_event_lines_colour_when_then_and_stop_as_keywords(qtbot, session):
    from orbitdesk.app.panels.highlighter import FUNCTION, KEYWORD

    editor, _ = make_editor(qtbot, session)
    session.load_project(Project(model="e = 0.8\nx'' = -1\nwhen x < 0 then x' = -e*abs(x'), stop  # hit\n"))
    dark = is_dark(editor.palette())
    block = editor.document().findBlockByNumber(2)
    spans = {(fr.start, fr.length): fr.format.foreground().color().name() for fr in block.layout().formats()}
    keyword = colour(KEYWORD, dark).name()
    assert spans[(0, 4)] == keyword and spans[(11, 4)] == keyword   # "when", "then"
    assert spans[(33, 4)] == keyword                                 # "stop" as the action
    assert spans[(24, 3)] == colour(FUNCTION, dark).name()           # abs


def test_screenshot_editor_with_diagnostics(qtbot, session, artifacts):
    editor = EquationEditor(session)
    listing = DiagnosticsList(session, editor=editor)
    splitter = QSplitter(Qt.Orientation.Vertical)
    splitter.addWidget(editor)
    splitter.addWidget(listing)
    splitter.setSizes([300, 110])
    qtbot.addWidget(splitter)
    splitter.resize(560, 420)
    splitter.show()
    qtbot.waitExposed(splitter)
    text = LORENZ.replace("beta*z", "beta*zz").replace("rho = 28 in [0, 50]", "rho = 28 in [0, 50]\nscale = abs(x)")
    session.load_project(Project(model=text))
    qtbot.waitUntil(lambda: bool(errors(editor)), timeout=3000)
    qtbot.wait(150)  # let the list lay out its wrapped rows
    path = os.path.join(artifacts, "editor.png")
    assert splitter.grab().save(path)
    assert listing.count() == len(editor.diagnostics()) >= 2


def test_quick_fixes_from_the_problem_list(qtbot, session):
    editor, listing = make_editor(qtbot, session, with_list=True)
    listing.resize(520, 200)
    listing.show()
    qtbot.waitExposed(listing)
    # a misspelt parameter and a line that ends before its parenthesis closes
    broken = LORENZ.replace("sigma*(y - x)", "sgima*(y - x)").replace("x*y - beta*z", "x*(y - beta*z  # heat")
    session.load_project(Project(model=broken))
    qtbot.waitUntil(lambda: len(errors(editor)) == 2, timeout=3000)
    labels = [listing.item(i).text() for i in range(listing.count())]
    assert any("quick fix: write 'sigma'" in t for t in labels)
    assert any("quick fix: close the parenthesis" in t for t in labels)
    for _ in range(2):
        before = session.text
        item = next(listing.item(i) for i in range(listing.count()) if "quick fix" in listing.item(i).text())
        where = listing.visualItemRect(item).center()
        qtbot.mouseClick(listing.viewport(), Qt.MouseButton.LeftButton, pos=where)  # a real double-click:
        qtbot.mouseDClick(listing.viewport(), Qt.MouseButton.LeftButton, pos=where)  # press, release, press
        qtbot.waitUntil(lambda: session.text != before and editor.toPlainText() == session.text
                        and session.parsed.text == session.text, timeout=3000)
    assert session.text == LORENZ.replace("x*y - beta*z", "x*(y - beta*z)  # heat")
    qtbot.waitUntil(lambda: not errors(editor), timeout=3000)
    assert session.parsed.ok
    session.undo_stack.undo()  # the fixes are edits of the text that undo takes back
    assert session.text == broken
