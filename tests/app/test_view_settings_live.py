"""View settings reach the project as they change (no save hook): a view writes them into the live
document through ``set_view_settings`` shortly after a control changes, the window writes its dock layout,
and what a save writes is what the views show."""

from orbitdesk.document.project import load as load_project
from orbitdesk.samples.models import LOGISTIC

from .conftest import load_model, open_view, wait_for_trajectory


def test_a_changed_control_is_in_the_project_at_once(qtbot, session, tmp_path):
    view = open_view(qtbot, session, "sweep")
    load_model(qtbot, session, LOGISTIC, dict(t_end=100.0))
    seen = []
    session.viewSettingsChanged.connect(seen.append)
    view.count.setValue(123)
    view.lyapunov.setChecked(True)
    qtbot.waitUntil(lambda: session.project.views.get("sweep", {}).get("count") == 123
                    and session.project.views["sweep"].get("lyapunov") is True, timeout=5000)
    assert "sweep" in seen and not session.dirty   # how a view is set up is no edit of the model
    saved = load_project(session.save(tmp_path / "v.orbitdesk"))
    assert saved.views["sweep"]["count"] == 123 and saved.views["sweep"] == view.view_settings()


def test_settings_of_a_project_being_opened_are_not_overwritten(qtbot, session, tmp_path):
    view = open_view(qtbot, session, "sweep")
    load_model(qtbot, session, LOGISTIC, dict(t_end=100.0))
    view.count.setValue(77)
    qtbot.waitUntil(lambda: session.project.views.get("sweep", {}).get("count") == 77, timeout=5000)
    path = session.save(tmp_path / "a.orbitdesk")
    view.count.setValue(88)   # changed just before another project opens: not written into that one
    wait_for_trajectory(qtbot, session, lambda: session.open(path))
    qtbot.waitUntil(lambda: view.count.value() == 77, timeout=5000)
    assert session.project.views["sweep"]["count"] == 77


def test_the_window_writes_its_dock_layout_when_it_changes(qtbot, window, tmp_path):
    path = tmp_path / "m.txt"
    path.write_text(LOGISTIC, encoding="utf-8")
    wait_for_trajectory(qtbot, window.session, lambda: window.open_path(path))
    qtbot.waitUntil(lambda: "state" in window.session.project.views.get("_window", {}), timeout=5000)
    before = window.session.project.views["_window"]["state"]
    dock = window.view_docks["phase_plane"]
    dock.setVisible(not dock.isVisible())
    qtbot.waitUntil(lambda: window.session.project.views["_window"]["state"] != before, timeout=5000)
