"""Keystroke to updated diagnostics in the model editor, for a 20-line model.

Three numbers per keystroke, medians over ~50 keystrokes that alternately make and fix a typo:
- the key event itself (the editor's own work plus ``session.set_text``), against the same key
  typed into a bare QPlainTextEdit;
- the refresh after the typing pause: the session's parse plus the editor's and the list's
  handling of ``modelParsed``, against ``parse_model`` alone on the same text;
- the whole way from key press to refreshed underlines, with the session's debounce subtracted.
"""

from __future__ import annotations

import os
import statistics
import time

from benchmarks.harness import Row

KEYSTROKES = 50


def twenty_line_model() -> str:
    return "\n".join([
        "# two coupled, driven oscillators with a slow recovery variable",
        "x'' = -w1^2*x - c*x' + k*(y - x) + a*cos(om*t) - g*s",
        "y'' = -w2^2*y - c*y' + k*(x - y)",
        "s' = eps*(x^2 - s)",
        "w1 = 1 in [0.5, 2]",
        "w2 = 1.3 in [0.5, 2]",
        "c = 0.1 in [0, 1]",
        "k = 0.2 in [0, 1]",
        "a = 0.4 in [0, 2]",
        "om = 1.1 in [0.2, 3]",
        "g = 0.5 in [0, 2]",
        "eps = 0.05 in [0, 0.5]",
        "x(0) = 0.1",
        "x'(0) = 0",
        "y(0) = 0",
        "y'(0) = 0.2",
        "s(0) = 0",
        "energy = x'^2/2 + y'^2/2 + w1^2*x^2/2 + w2^2*y^2/2",
        "gap = x - y",
        "drive = a*cos(om*t)",
    ]) + "\n"


def _app():
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen" if not os.environ.get("DISPLAY") else "xcb")
    from PySide6.QtWidgets import QApplication

    return QApplication.instance() or QApplication([])


def run() -> list[Row]:
    app = _app()
    from PySide6.QtCore import Qt
    from PySide6.QtTest import QTest
    from PySide6.QtWidgets import QPlainTextEdit

    from orbitdesk.language.model import parse_model
    from orbitdesk.document.project import Project
    from orbitdesk.app import session as session_mod
    from orbitdesk.app.panels.editor import DiagnosticsList, EquationEditor

    text = twenty_line_model()
    session = session_mod.Session()
    session.auto_run = False  # keystrokes only; no integration in the background
    editor = EquationEditor(session)
    listing = DiagnosticsList(session, editor=editor)
    editor.resize(700, 480)
    listing.resize(700, 160)
    editor.show()
    listing.show()
    bare = QPlainTextEdit()
    bare.setPlainText(text)
    bare.show()
    session.load_project(Project(model=text))
    for _ in range(20):
        app.processEvents()

    # Put the cursor just after "eps" in "s' = eps*(x^2 - s)": typing a letter makes an unknown
    # name (an error at its columns), Backspace fixes it again.
    where = editor.position_of(4, 9)
    for widget in (editor, bare):
        cursor = widget.textCursor()
        cursor.setPosition(where)
        widget.setTextCursor(cursor)

    def press(widget, key, char):
        if char:
            QTest.keyClicks(widget, char)
        else:
            QTest.keyClick(widget, key)

    refreshed = []
    editor.diagnosticsUpdated.connect(lambda _d: refreshed.append(time.perf_counter()))
    key_times, bare_times, latencies, refresh_times, parse_times, handler_times = [], [], [], [], [], []
    debounce = session_mod.VALIDATE_DELAY_MS / 1000
    for i in range(KEYSTROKES):
        key = Qt.Key.Key_Backspace if i % 2 else Qt.Key.Key_Q
        char = "" if i % 2 else "q"
        # 1. the key event, then the natural debounced refresh
        refreshed.clear()
        start = time.perf_counter()
        press(editor, key, char)
        key_times.append(time.perf_counter() - start)
        while not refreshed:
            app.processEvents()
            time.sleep(0.0005)
        latencies.append(refreshed[-1] - start - debounce)
        expect_error = not (i % 2)
        assert any(d.severity == "error" for d in editor.diagnostics()) == expect_error
        # 2. the refresh alone (parse + handlers), timed synchronously on the same text
        start = time.perf_counter()
        session.validate_now()
        refresh_times.append(time.perf_counter() - start)
        start = time.perf_counter()
        parsed = parse_model(session.text)
        parse_times.append(time.perf_counter() - start)
        start = time.perf_counter()
        editor.on_model_parsed(parsed)
        listing.on_model_parsed(parsed)
        handler_times.append(time.perf_counter() - start)
        # 3. the same key into a bare text editor
        start = time.perf_counter()
        press(bare, key, char)
        bare_times.append(time.perf_counter() - start)
        for _ in range(3):
            app.processEvents()
    assert editor.toPlainText() == text
    session.shutdown()
    med = statistics.median
    p90 = lambda xs: sorted(xs)[int(len(xs) * 0.9)]  # noqa: E731
    n = text.count("\n")
    return [
        Row(f"editor: key event, {n}-line model", med(key_times), med(bare_times),
            f"{KEYSTROKES} keys; p90 {p90(key_times) * 1e3:.2f} ms", baseline_name="bare QPlainTextEdit",
            goal="a few ms at most"),
        Row("editor: parse + underline/list refresh", med(refresh_times), med(parse_times),
            f"errors appear/clear as typed; p90 {p90(refresh_times) * 1e3:.1f} ms", baseline_name="parse_model alone",
            goal="well inside the pause"),
        Row("editor: underline + list refresh alone", med(handler_times), med(parse_times),
            f"p90 {p90(handler_times) * 1e3:.2f} ms", baseline_name="parse_model alone", goal="small next to the parse"),
        Row(f"editor: key to refreshed diagnostics minus {session_mod.VALIDATE_DELAY_MS} ms pause",
            med(latencies), None, f"p90 {p90(latencies) * 1e3:.1f} ms; the pause timer is coarse (a few ms early or late)",
            goal="< 50 ms"),
    ]


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run())
