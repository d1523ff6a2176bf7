"""Dock tab bars a person sees: only those of real tab groups of open views. Found by looking at every
walkthrough step on screen: after leaving one sample's walkthrough and opening another sample, restoring the
saved layout (Qt 6.11) left the tab bar "Phase plane | Time series" of a group it had taken apart drawn over
the equilibria table of the next sample (scripts/make_screenshots.py --steps, clock reaction step 3)."""

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QTabBar

from orbitdesk.app.dock_layout import hide_stray_tab_bars


def window_tab_bars(window):
    """The window's dock tab bars on screen, by the titles on their tabs."""
    return {tuple(b.tabText(i) for i in range(b.count())): b
            for b in window.findChildren(QTabBar) if b.parent() is window and b.isVisible()}


def test_a_tab_bar_left_from_a_taken_apart_group_is_hidden_and_real_groups_keep_theirs(qtbot, window):
    docks = window.view_docks
    names = [n for n in ("timeseries", "phase_plane", "equilibria", "sweep") if n in docks]
    a, b, c, d = (docks[n] for n in names)
    for dock in (a, b, c, d):
        dock.show()
    window.tabifyDockWidget(a, b)
    window.tabifyDockWidget(c, d)
    qtbot.waitUntil(lambda: len(window_tab_bars(window)) >= 2)
    group_ab = next(bar for titles, bar in window_tab_bars(window).items() if a.windowTitle() in titles)
    # the first group taken apart: its bar is what Qt left on screen after restoring a layout
    for dock in (a, b):
        window.removeDockWidget(dock)
    window.addDockWidget(Qt.DockWidgetArea.LeftDockWidgetArea, a)
    window.addDockWidget(Qt.DockWidgetArea.BottomDockWidgetArea, b)
    for dock in (a, b):
        dock.show()
    qtbot.waitUntil(lambda: a.isVisible() and b.isVisible())
    while group_ab.count() < 2:
        group_ab.addTab("")
    group_ab.setTabText(0, a.windowTitle())
    group_ab.setTabText(1, b.windowTitle())
    group_ab.show()
    assert group_ab.isVisible()
    assert hide_stray_tab_bars(window) >= 1
    shown = window_tab_bars(window)
    assert not group_ab.isVisible()
    # the group still together keeps its bar, with both views' tabs
    assert any(set(titles) == {c.windowTitle(), d.windowTitle()} for titles in shown), shown
