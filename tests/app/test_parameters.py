"""The parameter panel: sliders and spin boxes that talk to the session, coalesced while dragging."""

import os

import pytest
from PySide6.QtCore import QEvent, QPoint, QPointF, Qt
from PySide6.QtGui import QMouseEvent
from PySide6.QtWidgets import QApplication, QSplitter, QStyle, QStyleOptionSlider

from orbitdesk.document.project import Project
from orbitdesk.app.panels.editor import DiagnosticsList, EquationEditor
from orbitdesk.app.panels.parameters import ParameterPanel, default_range, slider_range
from orbitdesk.app.panels.readback import ModelReadback

from .test_editor import LORENZ


def loaded_panel(qtbot, session, text=LORENZ):
    panel = ParameterPanel(session)
    qtbot.addWidget(panel)
    panel.resize(380, 420)
    panel.show()
    qtbot.waitExposed(panel)
    with qtbot.waitSignal(session.systemChanged, timeout=10000):
        session.load_project(Project(model=text))
    return panel


def record_calls(monkeypatch, session, method):
    calls = []
    original = getattr(session, method)

    def wrapper(name, value):
        calls.append((name, value))
        original(name, value)

    monkeypatch.setattr(session, method, wrapper)
    return calls


def handle_centre(slider) -> QPoint:
    opt = QStyleOptionSlider()
    slider.initStyleOption(opt)
    rect = slider.style().subControlRect(QStyle.ComplexControl.CC_Slider, opt,
                                         QStyle.SubControl.SC_SliderHandle, slider)
    return rect.center()


def send_mouse(widget, kind, pos, buttons):
    button = Qt.MouseButton.LeftButton if kind != QEvent.Type.MouseMove else Qt.MouseButton.NoButton
    local = QPointF(pos)
    event = QMouseEvent(kind, local, QPointF(widget.mapToGlobal(pos)), button, buttons,
                        Qt.KeyboardModifier.NoModifier)
    QApplication.sendEvent(widget, event)


def test_default_slider_ranges():
    assert default_range(2.5) == (0.0, 5.0)
    assert default_range(0.0) == (-1.0, 1.0)
    assert default_range(-3.0) == (-6.0, 0.0)
    assert slider_range(28, 0, 50) == (0.0, 50.0)
    assert slider_range(28, None, None) == (0.0, 56.0)
    assert slider_range(1, 3, 3) == (0.0, 2.0)  # an empty written range falls back to the default


def test_rows_for_parameters_and_initial_values_with_ranges(qtbot, session):
    panel = loaded_panel(qtbot, session)
    names = [name for (kind, name) in panel.rows()]
    assert names == ["sigma", "rho", "beta", "x", "y", "z"]
    sigma, beta, x = panel.row("sigma"), panel.row("beta"), panel.row("x", "initial")
    assert (sigma.lo, sigma.hi, sigma.written_range) == (0.0, 20.0, True)
    assert (beta.lo, beta.hi) == pytest.approx((0.0, 16 / 3))
    assert (x.lo, x.hi) == (0.0, 2.0)
    assert sigma.value() == 10 and sigma.slider.value() == sigma.slider.maximum() // 2
    assert x.label.text() == "x(0)"
    for row in panel.rows().values():
        assert row.slider.toolTip() and row.spin.toolTip() and row.label.toolTip()
    assert panel.reset_button.toolTip()


def test_dragging_a_slider_sets_the_parameter_live_one_call_per_turn(qtbot, session, monkeypatch):
    panel = loaded_panel(qtbot, session)
    calls = record_calls(monkeypatch, session, "set_param")
    slider = panel.row("rho").slider
    start = handle_centre(slider)
    send_mouse(slider, QEvent.Type.MouseButtonPress, start, Qt.MouseButton.LeftButton)
    assert slider.isSliderDown()
    seen = []
    for step in range(1, 6):
        # several moves inside one event-loop turn are coalesced into one call
        for dx in (step * 6 - 4, step * 6 - 2, step * 6):
            send_mouse(slider, QEvent.Type.MouseMove, start + QPoint(dx, 0), Qt.MouseButton.LeftButton)
        before = len(calls)
        qtbot.waitUntil(lambda: len(calls) > before, timeout=2000)
        assert len(calls) == before + 1
        seen.append(session.params["rho"])
    send_mouse(slider, QEvent.Type.MouseButtonRelease, start + QPoint(30, 0), Qt.MouseButton.NoButton)
    assert seen == sorted(seen) and seen[-1] > 28.0  # moved right, continuously
    assert panel.row("rho").spin.value() == pytest.approx(session.params["rho"])
    assert session.params["rho"] == pytest.approx(panel.row("rho")._from_slider(slider.value()))
    assert all(name == "rho" for name, _ in calls)


def test_spin_box_may_go_beyond_the_slider_range_and_initial_values_are_editable(qtbot, session, monkeypatch):
    panel = loaded_panel(qtbot, session)
    sigma = panel.row("sigma")
    sigma.spin.setValue(35.0)
    qtbot.waitUntil(lambda: session.params["sigma"] == 35.0, timeout=2000)
    assert sigma.slider.value() == sigma.slider.maximum()
    calls = record_calls(monkeypatch, session, "set_initial")
    panel.row("z", "initial").spin.setValue(-4.5)
    qtbot.waitUntil(lambda: session.initial["z"] == -4.5, timeout=2000)
    assert calls == [("z", -4.5)]
    assert panel.row("z", "initial").label.font().bold()  # changed from the model's value


def test_reset_restores_the_models_values(qtbot, session):
    panel = loaded_panel(qtbot, session)
    panel.row("rho").slider.setValue(100)
    panel.row("x", "initial").spin.setValue(0.25)
    qtbot.waitUntil(lambda: session.params["rho"] == 5.0 and session.initial["x"] == 0.25, timeout=2000)
    qtbot.mouseClick(panel.reset_button, Qt.MouseButton.LeftButton)
    assert session.params == {"sigma": 10.0, "rho": 28.0, "beta": pytest.approx(8 / 3)}
    assert session.initial == {"x": 1.0, "y": 1.0, "z": 1.0}
    assert panel.row("rho").spin.value() == 28.0 and panel.row("rho").slider.value() == 560
    assert panel.row("x", "initial").spin.value() == 1.0
    assert not panel.row("rho").label.font().bold()


def test_rows_are_kept_on_value_changes_and_rebuilt_when_the_parameter_set_changes(qtbot, session):
    panel = loaded_panel(qtbot, session)
    rows = panel.rows()
    spin = panel.row("sigma").spin
    panel.activateWindow()
    spin.setFocus()
    qtbot.waitUntil(spin.hasFocus, timeout=2000)
    session.set_param("beta", 2.0)
    session.set_initial("y", 1.5)
    assert panel.rows() == rows and spin.hasFocus()
    assert panel.row("beta").spin.value() == 2.0 and panel.row("y", "initial").spin.value() == 1.5
    # a new range written in the model updates the row in place
    with qtbot.waitSignal(session.systemChanged, timeout=10000):
        session.set_text(session.text.replace("sigma = 10 in [0, 20]", "sigma = 10 in [5, 15]"))
    assert panel.rows() == rows and (panel.row("sigma").lo, panel.row("sigma").hi) == (5.0, 15.0)
    # a new parameter rebuilds the rows
    with qtbot.waitSignal(session.systemChanged, timeout=10000):
        session.set_text(session.text.replace("x*y - beta*z", "x*y - beta*z + eps") + "eps = 0.1\n")
    assert ("param", "eps") in panel.rows() and panel.rows()[("param", "sigma")] is not rows[("param", "sigma")]
    assert panel.row("beta").spin.value() == 2.0  # the user's value survives the edit


def test_no_model_shows_a_hint(qtbot, session):
    panel = ParameterPanel(session)
    qtbot.addWidget(panel)
    assert panel.rows() == {} and "No parameters" in panel.empty.text()
    assert not panel.reset_button.isEnabled()


def _three_panels(qtbot, session):
    editor = EquationEditor(session)
    listing = DiagnosticsList(session, editor=editor)
    left = QSplitter(Qt.Orientation.Vertical)
    left.addWidget(editor)
    left.addWidget(listing)
    left.setSizes([380, 120])
    readback, panel = ModelReadback(session), ParameterPanel(session)
    splitter = QSplitter(Qt.Orientation.Horizontal)
    for w in (left, readback, panel):
        splitter.addWidget(w)
    splitter.setSizes([420, 420, 360])
    qtbot.addWidget(splitter)
    splitter.resize(1200, 520)
    splitter.show()
    qtbot.waitExposed(splitter)
    return splitter, editor, listing, readback, panel


def test_screenshots_of_the_panel_and_of_all_three_together(qtbot, session, artifacts):
    splitter, editor, listing, readback, panel = _three_panels(qtbot, session)
    with qtbot.waitSignal(session.systemChanged, timeout=10000):
        session.load_project(Project(model=LORENZ))
    session.set_param("rho", 24.5)
    qtbot.wait(150)
    assert panel.grab().save(os.path.join(artifacts, "parameters.png"))
    assert splitter.grab().save(os.path.join(artifacts, "panels_lorenz.png"))
    editor.setFocus()
    cursor = editor.textCursor()
    cursor.setPosition(editor.position_of(4, 17))
    editor.setTextCursor(cursor)
    qtbot.keyClicks(editor, "z")  # beta*z -> beta*zz
    qtbot.waitUntil(lambda: "error" in readback.note_text(), timeout=3000)
    qtbot.wait(150)
    assert splitter.grab().save(os.path.join(artifacts, "panels_error.png"))
    assert listing.count() >= 1 and "zz" in listing.item(0).text()
    assert panel.row("rho").spin.value() == 24.5  # the last valid system's controls stay


def dark_palette():
    from PySide6.QtGui import QColor, QPalette

    pal = QPalette()
    roles = {QPalette.ColorRole.Window: "#2b2d31", QPalette.ColorRole.Base: "#1e1f22",
             QPalette.ColorRole.AlternateBase: "#26282c", QPalette.ColorRole.Text: "#dfe1e5",
             QPalette.ColorRole.WindowText: "#dfe1e5", QPalette.ColorRole.Button: "#34363b",
             QPalette.ColorRole.ButtonText: "#dfe1e5", QPalette.ColorRole.Highlight: "#3d6fb4",
             QPalette.ColorRole.HighlightedText: "#ffffff", QPalette.ColorRole.PlaceholderText: "#8a8d93",
             QPalette.ColorRole.ToolTipBase: "#34363b", QPalette.ColorRole.ToolTipText: "#dfe1e5"}
    for role, value in roles.items():
        pal.setColor(role, QColor(value))
    return pal


def test_screenshot_on_a_dark_palette(qtbot, session, artifacts):
    from orbitdesk.app.panels.highlighter import FLOW_EQ, colour

    splitter, editor, listing, readback, panel = _three_panels(qtbot, session)
    splitter.setPalette(dark_palette())
    with qtbot.waitSignal(session.systemChanged, timeout=10000):
        session.load_project(Project(model=LORENZ.replace("beta = 8/3", "beta = 8/3\nwarmth = abs(z)")))
    editor.setFocus()
    cursor = editor.textCursor()
    cursor.setPosition(editor.position_of(4, 17))
    editor.setTextCursor(cursor)
    qtbot.keyClicks(editor, "z")  # beta*z -> beta*zz
    qtbot.waitUntil(lambda: "error" in readback.note_text(), timeout=3000)
    qtbot.wait(150)
    block = editor.document().findBlockByNumber(1)
    first = next(fr for fr in block.layout().formats() if fr.start == 0)
    assert first.format.foreground().color().name() == colour(FLOW_EQ, True).name()
    assert colour(FLOW_EQ, True).name() in readback.html()  # the read-back follows the palette too
    assert colour(FLOW_EQ, False).name() not in readback.html()
    assert splitter.grab().save(os.path.join(artifacts, "panels_dark.png"))
