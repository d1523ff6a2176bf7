"""Every sample project opened from Help > Sample Projects in the main window, its walkthrough replayed
through the walkthrough panel (Next until the end): each step puts the values written in the sample file
on screen, runs cleanly (or ends with the status its note explains) and reports no problems; leaving gives the sample's own values back."""

import json
import re
from pathlib import Path

import numpy as np
import pytest
from PySide6.QtCore import QPoint, Qt

from orbitdesk.document.view_settings import names_in, unknown_keys
from orbitdesk.app import help as help_ui

SAMPLES = sorted(help_ui.SAMPLES_DIR.glob("*.orbitdesk"))


def wait_idle_run(qtbot, session, timeout=30000):
    """Until the main run for the values now on screen has finished (and it went well)."""
    qtbot.waitUntil(lambda: session.system is not None and session.trajectory is not None
                    and not session.jobs.running("run") and not session._run_timer.isActive(), timeout=timeout)


def setting(d, path):
    for key in path.split("."):
        d = d[key]
    return d


def check_views_show_the_step(qtbot, window, raw, step):
    """Each open view shows the names the sample's settings and the step give it, and the parameter a
    sweep runs over is the one the step's note speaks of."""
    title, snap = step["title"], step["snapshot"]
    for view_id in snap.get("open_views", []):
        view = window.views.get(view_id)
        if view is None:
            continue
        wanted = {**raw["views"].get(view_id, {}), **snap.get("views", {}).get(view_id, {})}
        assert unknown_keys(view_id, wanted) == [], (title, view_id)
        shown = view.view_settings()
        for path, _kind, name in names_in(view_id, wanted):
            value = setting(shown, path)
            assert (name in value) if isinstance(value, list) else value == name, (title, view_id, path, value)
        if view_id == "sweep":
            assert re.search(rf"`{re.escape(shown['parameter'])}\b", step["note"]), (title, shown["parameter"])
            assert (shown["from"], shown["to"]) == (wanted["from"], wanted["to"]), title
        if view_id == "cycles":  # the cycle is found by itself, with the period the note gives
            qtbot.waitUntil(lambda: view.cycle is not None, timeout=60000)
            assert f"about {view.cycle.period:.4g}" in step["note"], (title, view.cycle.period)
            assert window.session.cycle is view.cycle
        if view_id == "sections" and "section" in snap:
            if "strobe" in snap["section"]:
                assert (shown["kind"], shown["period"]) == ("strobe", snap["section"]["strobe"]), title
            else:
                name, _, value = snap["section"]["plane"].partition("=")
                assert (shown["kind"], shown["coordinate"], shown["value"]) == ("plane", name, float(value)), title


def inside(values, lo, hi):
    values = np.asarray(values, dtype=float)
    values = values[np.isfinite(values)]
    slack = 1e-6 * max(1.0, hi - lo)
    return values.size == 0 or (values.min() >= lo - slack and values.max() <= hi + slack)


def check_plots_show_the_whole_run(qtbot, window, step):
    """The time series and the phase plane of a step show the whole run (nothing leaves the axes); the
    3D camera is the step's."""
    title, snap, traj = step["title"], step["snapshot"], window.session.trajectory
    open_views = snap.get("open_views", [])
    if "timeseries" in open_views and not window.views["timeseries"].spectrum.isChecked():  # (spectra: frequency)
        view = window.views["timeseries"]
        (t0, t1), (y0, y1) = view.plot.getViewBox().viewRange()
        assert inside(traj.time, t0, t1), title
        for name in view.checked():
            assert inside(traj.series(name), y0, y1), (title, name, y0, y1)
    if "phase_plane" in open_views:
        view = window.views["phase_plane"]
        (x0, x1), (y0, y1) = view.plot.getViewBox().viewRange()
        x, y = view._xy(traj)  # as drawn: an angle wrapped
        assert inside(x, x0, x1) and inside(y, y0, y1), title
    if "phase_plane" in open_views:
        check_phase_plane_shows_what_the_note_names(qtbot, window, title, "equilibria" in open_views)
    if "camera" in snap and "phase_space_3d" in open_views:
        cam = window.views["phase_space_3d"].camera()
        assert (cam["azimuth"], cam["elevation"]) == (snap["camera"]["azimuth"], snap["camera"]["elevation"])


def check_phase_plane_shows_what_the_note_names(qtbot, window, title, with_equilibria):
    """The phase plane's range holds the extra paths the step starts (a second start the note compares)
    and, with the equilibria view beside it, every equilibrium it lists (the rest states the note names)."""
    view, s = window.views["phase_plane"], window.session
    qtbot.waitUntil(lambda: len(view.seed_runs) == len(view.seeds) and all(r[0] is not None for r in view.seed_runs)
                    and not s.busy, timeout=60000)  # run after a pause
    (x0, x1), (y0, y1) = view.plot.getViewBox().viewRange()
    for runs in view.seed_runs:
        for run in runs:
            if run is not None:
                x, y = view._xy(run)
                assert inside(x, x0, x1) and inside(y, y0, y1), (title, "a second path leaves the plot")
    if with_equilibria:
        states = list(s.system.states)
        qtbot.waitUntil(lambda: bool(s.doc.current_equilibria()) and not s.busy, timeout=60000)  # searched after a pause
        found = s.doc.current_equilibria()
        for eq in found:
            x, y = (eq.vector[states.index(n)] if n in states else None for n in (view.x_name, view.y_name))
            if x is not None and y is not None:
                assert x0 <= x <= x1 and y0 <= y <= y1, (title, "an equilibrium outside the phase plane", x, y)


def check_model_panel_readable(window, title):
    """Every value box of the model panel is whole in sight beside its slider (the convection loop's section
    and Lyapunov steps squeezed the panel to 180 px and cut the boxes off)."""
    from orbitdesk.app.panels.parameters import SLIDER_LEAST

    panel = window.panel_parts["ParameterPanel"]
    if not window.model_dock.isVisible() or window.model_tabs.currentWidget() is not panel:
        return
    viewport = panel.scroll.viewport()
    for (kind, name), row in panel.rows().items():
        left = row.spin.mapTo(viewport, QPoint(0, 0)).x()
        assert left >= 0 and left + row.spin.width() <= viewport.width(), (title, name, left, viewport.width())
        assert row.slider.width() >= SLIDER_LEAST and row.label.width() >= row.label.minimumSizeHint().width(), \
            (title, name)


def check_equilibria_columns_in_sight(window, title):
    """The equilibria table, when open, shows every column whole (the convection loop's fourth step put it
    beside the 3D view, squeezed to its coordinates with the type and stability out of sight)."""
    view, dock = window.views.get("equilibria"), window.view_docks.get("equilibria")
    if view is None or not dock.isVisible() or view.table.columnCount() == 0:
        return
    table, header = view.table, view.table.horizontalHeader()
    for c in range(table.columnCount()):
        name = table.horizontalHeaderItem(c).text()
        assert header.sectionViewportPosition(c) + header.sectionSize(c) <= table.viewport().width(), (title, name)
        assert header.sectionSize(c) >= header.fontMetrics().horizontalAdvance(name), (title, name)


def test_every_sample_is_listed():
    assert len(SAMPLES) >= 7
    names = {p.name for p in SAMPLES}
    assert {"convection_loop.orbitdesk", "shaken_beam.orbitdesk", "pendulum.orbitdesk",
            "insect_generations.orbitdesk"} <= names


@pytest.mark.slow
@pytest.mark.parametrize("path", SAMPLES, ids=[p.stem for p in SAMPLES])
def test_sample_walkthrough_replays_in_the_app(qtbot, window, path):
    raw = json.loads(Path(path).read_text(encoding="utf-8"))  # the file itself is the reference
    menu = window.samples_menu
    menu.aboutToShow.emit()
    action = next(a for a in menu.actions() if a.data() == str(path))
    action.trigger()
    s, panel = window.session, window.walkthrough_panel
    assert s.project.name == raw["name"] and s.path is None  # an unsaved copy: Save asks where
    assert window.walkthrough_dock.isVisible()
    wait_idle_run(qtbot, s)
    own = dict(s.params)
    width = window.width()
    steps = raw["walkthrough"]
    assert len(panel.steps) == len(steps) > 0
    seen = []
    while True:
        before = panel.current
        qtbot.mouseClick(panel.next_button, Qt.MouseButton.LeftButton)
        if panel.current == before:
            break
        i = panel.current
        seen.append(i)
        snap = steps[i]["snapshot"]
        assert panel.problems == [], (steps[i]["title"], panel.problems)
        assert not panel.problems_label.isVisibleTo(panel)
        assert panel.title_label.text() == steps[i]["title"]
        for name, value in snap.get("parameters", {}).items():
            assert s.params[name] == pytest.approx(value, rel=0, abs=0)
        for name, value in snap.get("initial", {}).items():
            assert s.initial[name] == pytest.approx(value, rel=0, abs=0)
        for view_id in snap.get("open_views", []):
            if view_id in window.view_docks:
                assert window.view_docks[view_id].isVisible(), (steps[i]["title"], view_id)
                assert window.views.get(view_id) is not None
        check_views_show_the_step(qtbot, window, raw, steps[i])
        wait_idle_run(qtbot, s)
        qtbot.waitUntil(lambda: not s.busy, timeout=120000)  # the views' own jobs too (equilibria, second paths)
        assert window.width() <= width, (steps[i]["title"], "the views pushed the window wider", window.width())
        shown = [d.geometry() for d in window.view_docks.values() if d.isVisible() and not d.isFloating()]
        assert not any(a.intersects(b) for k, a in enumerate(shown) for b in shown[k + 1:]), \
            (steps[i]["title"], "two views drawn over each other")
        # a run ends well, unless the step is there to show how it ends otherwise and its note names the status
        status = s.trajectory.status
        assert status == "ok" or f"*{status}*" in steps[i]["note"], (steps[i]["title"], s.trajectory.message)
        check_plots_show_the_whole_run(qtbot, window, steps[i])
        check_model_panel_readable(window, steps[i]["title"])
        check_equilibria_columns_in_sight(window, steps[i]["title"])
        if panel.missing_views:
            print(f"{path.stem} step {i + 1}: views not in this build: {panel.missing_views}")
    assert seen == list(range(len(steps)))
    assert not panel.next_button.isEnabled()
    assert not s.dirty  # looking at a walkthrough is not an edit
    panel.leave()
    assert s.params == own and not panel.in_walkthrough and not s.dirty


@pytest.mark.slow
def test_a_step_back_from_a_framed_phase_plane_fits_its_own_run(qtbot, window):
    # the stirred tank's third step frames the whole plane (every rest state in sight) and keeps that frame
    # when its run arrives; the first step, shown after it, shows its own run fitted, not that frame
    path = help_ui.SAMPLES_DIR / "stirred_tank.orbitdesk"
    help_ui.open_sample(window, path)
    s, panel = window.session, window.walkthrough_panel
    wait_idle_run(qtbot, s)
    panel.show_step(2)
    wait_idle_run(qtbot, s)
    view = window.views["phase_plane"]
    assert view.plot.getViewBox().viewRange()[1] == pytest.approx([-0.3, 6.3])
    panel.show_step(0)  # the cool tank: T rises to about 0.2
    wait_idle_run(qtbot, s)
    qtbot.waitUntil(lambda: view.plot.getViewBox().viewRange()[1][1] < 1.0, timeout=20000)
    (x0, x1), (y0, y1) = view.plot.getViewBox().viewRange()
    x, y = view._xy(s.trajectory)
    assert inside(x, x0, x1) and inside(y, y0, y1)
    assert (y.max() - y.min()) > 0.8 * (y1 - y0)  # fitted to the run, not the frame of the step before
    panel.leave()


def test_views_too_wide_side_by_side_are_stacked_at_the_screen_size(qtbot, window):
    # the convection loop's section step opens the 3D view and the section (two plots and a row of controls)
    # after the 3D view stood beside the equilibria: side by side they need about 1,720 px, more than a
    # 1600 x 1000 screen, so they go one above the other and the window keeps its width
    window.resize(1600, 1000)
    qtbot.waitUntil(lambda: window.width() == 1600)
    path = next(p for p in SAMPLES if p.stem == "convection_loop")
    menu = window.samples_menu
    menu.aboutToShow.emit()
    next(a for a in menu.actions() if a.data() == str(path)).trigger()
    s, panel = window.session, window.walkthrough_panel
    wait_idle_run(qtbot, s)
    while True:
        before = panel.current
        qtbot.mouseClick(panel.next_button, Qt.MouseButton.LeftButton)
        if panel.current == before:
            break
        qtbot.waitUntil(lambda: not s.busy, timeout=120000)
        qtbot.waitUntil(lambda: window.width() <= 1600, timeout=5000)
        shown = [d.geometry() for d in window.view_docks.values() if d.isVisible() and not d.isFloating()]
        assert not any(a.intersects(b) for k, a in enumerate(shown) for b in shown[k + 1:])
        check_model_panel_readable(window, panel.title_label.text())
        check_equilibria_columns_in_sight(window, panel.title_label.text())


def check_walkthrough_beside_the_views(window, title):
    """The walkthrough stands to the right of every view in sight, as tall as the window's middle."""
    dock = window.walkthrough_dock
    views = [d.geometry() for d in window.view_docks.values() if d.isVisible() and not d.isFloating()]
    assert dock.isVisible() and views, title
    assert dock.geometry().left() >= max(g.right() for g in views), (title, "the walkthrough is not beside the views")
    assert dock.geometry().height() >= max(g.bottom() for g in views) - min(g.top() for g in views), title


def test_a_sample_with_kept_results_opens_its_walkthrough_beside_the_views(qtbot, window):
    # the stirred tank keeps its bifurcation diagram: its view is laid out at load, before the walkthrough is
    # shown, and the walkthrough came up above the views, squeezing them into the lower third
    window.resize(1600, 1000)
    path = next(p for p in SAMPLES if p.stem == "stirred_tank")
    help_ui.open_sample(window, path)
    s, panel = window.session, window.walkthrough_panel
    wait_idle_run(qtbot, s)
    qtbot.wait(50)
    check_walkthrough_beside_the_views(window, "opened")
    # and the model panel at its starting width (430 px), not the one it had before the layout was reset (the
    # kept results' views were laid out after the starting sizes and gave it back: 645 px, the views squeezed)
    assert window.model_dock.width() <= 440, window.model_dock.width()
    panel.show_step(2)  # three views: the time series, the phase plane and the equilibria
    wait_idle_run(qtbot, s)
    qtbot.waitUntil(lambda: not s.busy, timeout=60000)
    qtbot.wait(50)
    check_walkthrough_beside_the_views(window, panel.title_label.text())
    panel.leave()
