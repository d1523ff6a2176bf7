"""Data in the app: import with a column mapping, the overlay on the time series and phase plane, the Fit
panel (a background job; results equal core.fitting's, which tests/core/test_fitting.py checks against
scipy), applying fitted values (undoable), keeping them as a set, residuals on request."""

import os

import numpy as np
import pytest
from PySide6.QtWidgets import QDialog, QInputDialog

from orbitdesk.document.datasets import DataColumn, DataSet
from orbitdesk.analyses.fitting import FitSettings, fit

from .conftest import load_model

MODEL = """c = 0.5 in [0, 2]
k = 2 in [0.1, 10]
x'' = -c*x' - k*x
x(0) = 1
x'(0) = 0
"""


def record():
    """Damped oscillation with c = 0.3, k = 3 (closed form), with a little noise."""
    t = np.linspace(0, 10, 80)
    w = np.sqrt(3 - 0.3 ** 2 / 4)
    x = np.exp(-0.15 * t) * (np.cos(w * t) + 0.15 / w * np.sin(w * t))
    v = np.gradient(x, t)
    rng = np.random.default_rng(0)
    return DataSet("shaker", t, [DataColumn("x", x + 0.01 * rng.standard_normal(t.size), "mm"),
                                 DataColumn("x'", v + 0.01 * rng.standard_normal(t.size), "mm/s")])


def overlay_points(view):
    from orbitdesk.app.plots.data_overlay import DataOverlay  # noqa: F401

    return [item for item in view.data_overlay.items if item.opts.get("symbol") is not None]


@pytest.fixture
def loaded(qtbot, session):
    load_model(qtbot, session, MODEL, dict(t_end=10.0, samples=1001))
    from orbitdesk.app.datastore import data_store

    store = data_store(session)
    store.add(record())
    return store


def test_overlay_on_time_series_and_phase_plane(qtbot, session, loaded):
    from orbitdesk.app.views.phase_plane import PhasePlaneView
    from orbitdesk.app.views.timeseries import TimeSeriesView

    ts = TimeSeriesView(session)
    qtbot.addWidget(ts)
    ts.set_series(["x"])
    points = overlay_points(ts)
    assert len(points) == 1
    x, y = points[0].getData()
    np.testing.assert_array_equal(x, loaded.datasets[0].time)
    np.testing.assert_array_equal(y, loaded.datasets[0].columns[0].values)
    ts.set_series(["x", "x'"])
    assert len(overlay_points(ts)) == 2
    pp = PhasePlaneView(session)
    qtbot.addWidget(pp)
    pp.set_axes("x", "x'")
    (item,) = overlay_points(pp)
    x, y = item.getData()
    np.testing.assert_array_equal(y, loaded.datasets[0].columns[1].values)
    loaded.remove("shaker")
    assert overlay_points(ts) == [] and overlay_points(pp) == []
    session.undo_stack.undo()
    assert len(overlay_points(ts)) == 2


def test_fit_panel_runs_applies_keeps_and_shows_residuals(qtbot, session, loaded, monkeypatch, artifacts, tmp_path):
    from orbitdesk.app.views.fit import FitView
    from orbitdesk.app.views.timeseries import TimeSeriesView

    view = FitView(session)
    qtbot.addWidget(view)
    view.resize(520, 900)
    view.show()
    view.apply_view_settings({"parameters": ["c", "k"], "initial": ["x"]})
    settings = view.fit_settings()
    assert (settings.parameters, settings.initial) == (["c", "k"], ["x"])
    assert "k" not in settings.bounds  # the slider range [0.1, 10] applies
    view.unknowns.item(1, 4).setText("8")
    assert view.fit_settings().bounds["k"] == (0.1, 8.0)
    view.unknowns.item(1, 4).setText("10")
    view.run_fit()
    qtbot.waitUntil(lambda: loaded.result is not None, timeout=60000)
    ref = fit(session.system, loaded.datasets, FitSettings(parameters=["c", "k"], initial=["x"]))
    got = [e.value for e in loaded.result.estimates]
    np.testing.assert_allclose(got, [e.value for e in ref.estimates], rtol=1e-6)
    assert view.results.rowCount() == 3 and view.results.item(0, 0).text() == "c"
    assert view.results.item(1, 2).text() != "–"
    assert "…" in view.results.item(1, 3).text()
    assert view.correlation.rowCount() == 3
    if os.environ.get("ORBITDESK_SCREENSHOTS"):
        view.grab().save(os.path.join(artifacts, "fit_panel.png"))

    old = dict(session.params)
    view.apply_result()
    assert session.params["k"] == pytest.approx(got[1]) and session.initial["x"] == pytest.approx(got[2])
    session.undo_stack.undo()
    assert session.params == old

    monkeypatch.setattr(QInputDialog, "getText", staticmethod(lambda *a, **k: ("bracket fit", True)))
    view.keep_result()
    assert session.project.parameter_sets["bracket fit"]["k"] == pytest.approx(got[1])
    assert session.params == old
    assert view.sets.currentText() == "bracket fit"

    ts = TimeSeriesView(session)
    qtbot.addWidget(ts)
    ts.set_series(["x"])
    view.residuals_box.setChecked(True)
    qtbot.waitUntil(lambda: loaded.show_residuals, timeout=20000)
    sticks = [i for i in ts.data_overlay.items if i.opts.get("symbol") is None]
    assert len(sticks) == 1
    xs, ys = sticks[0].getData()
    assert xs.size == 2 * loaded.datasets[0].n_samples
    np.testing.assert_array_equal(ys[0::2], loaded.datasets[0].columns[0].values)

    # the fit is kept in the project: reopened, the panel shows it, current for these values and this data
    view.residuals_box.setChecked(False)
    session.open(session.doc.save(tmp_path / "fitted.orbitdesk"))
    qtbot.waitUntil(lambda: loaded.result is not None and view.results.rowCount() == 3, timeout=20000)
    assert [e.value for e in loaded.result.estimates] == pytest.approx(got, rel=1e-12)
    assert view.results.item(0, 0).text() == "c" and view.stale_bar.isHidden()
    edited = record()
    edited.columns[0].values[3] += 0.5
    loaded.replace("shaker", edited, "Edit data shaker")
    assert not view.stale_bar.isHidden()
    assert view.stale_bar.label.text() == "Computed for an earlier version of the data shaker"
    session.undo_stack.undo()
    assert view.stale_bar.isHidden()


def test_import_with_mapping_dialog(qtbot, window, tmp_path, monkeypatch, message_boxes):
    from orbitdesk.app.panels import data_import
    from orbitdesk.app.datastore import data_store

    load_model(qtbot, window.session, MODEL, dict(t_end=10.0, samples=201))
    bad = tmp_path / "bad.csv"
    bad.write_text("t,x\n0,1\n1,?\n")
    assert data_import.import_file(window, bad) is None
    assert "line 3 column 2" in message_boxes.texts("warning")[-1]
    path = tmp_path / "run1.csv"
    path.write_text("t [s],disp [mm],speed\n0,1,0\n1,0.5,-0.4\n")

    def accept(dialog):
        dialog.choices["disp"].setCurrentText("x")
        dialog.choices["speed"].setCurrentText(data_import.LEAVE_OUT)
        return QDialog.DialogCode.Accepted

    monkeypatch.setattr(data_import.MappingDialog, "exec", accept)
    added = data_import.import_file(window, path)
    assert added is not None and added.quantities() == ["x"] and added.columns[0].label == "disp [mm]"
    assert data_store(window.session).datasets[0].source == "run1.csv"
    assert window.session.dirty
    assert window.import_data_action in window.file_menu.actions()


def test_run_as_a_data_set_and_take_the_model_values(qtbot, session, loaded):
    from orbitdesk.app.views.fit import FitView

    view = FitView(session)
    qtbot.addWidget(view)
    d = loaded.datasets[0]
    d.initial = {"x": 0.7}
    view.data_list.setCurrentRow(0)
    view._run_as_set()
    assert session.initial["x"] == 0.7
    session.undo_stack.undo()
    assert session.initial["x"] == 1.0
    view._take_values()
    assert loaded.datasets[0].initial == {"x": 1.0, "x'": 0.0}
    session.undo_stack.undo()
    assert loaded.datasets[0].initial == {"x": 0.7}


def test_bracket_walkthrough_shows_the_fit_its_notes_read_off(qtbot, window):
    """The bracket sample's last steps speak of the fitted values, their intervals and the correlation of k
    and k3: those steps show the Fit panel's Result page with the fit for the step's values (the step runs
    it), and the numbers there are the ones the notes quote (written by scripts/make_samples.py from the
    core's fit of the invented records; the records were made with c = 0.9, k = 158, k3 = 22). The first
    steps, before the note says "press Fit", run no fit."""
    import re

    from orbitdesk.app import help as help_ui
    from orbitdesk.app.datastore import data_store
    from tests.app.test_samples_in_app import wait_idle_run

    s, panel = window.session, window.walkthrough_panel
    help_ui.open_sample(window, help_ui.SAMPLES_DIR / "bracket_pluck.orbitdesk")
    wait_idle_run(qtbot, s)
    store = data_store(s)
    for i in range(3):
        panel.show_step(i)
        wait_idle_run(qtbot, s)
        view = window.views["fit"]
        assert view.tabs.tabText(view.tabs.currentIndex()) == "Set up" and not s.busy and store.result is None
    for i in (3, 4):
        panel.show_step(i)
        view = window.views["fit"]
        qtbot.waitUntil(lambda: store.result is not None and not s.jobs.running("fit"), timeout=120000)
        assert view.tabs.tabText(view.tabs.currentIndex()) == "Result"
        rows = {view.results.item(r, 0).text(): r for r in range(view.results.rowCount())}
        note = panel.steps[i].note
        if i == 3:  # "c = 0.8989 ± 0.0015": the value and standard error on the page
            for name, value, err in re.findall(r"`(\w+) = ([\d.]+) ± ([\d.]+)`", note):
                r = rows[name]
                assert float(view.results.item(r, 1).text()) == pytest.approx(float(value), abs=10 ** -len(
                    value.split(".")[1]))
                assert float(view.results.item(r, 2).text()) == pytest.approx(float(err), rel=0.05)
        else:  # "runs from 21.9 to 22.1", "correlation -0.76"
            lo, hi = map(float, re.search(r"`k3` runs from ([\d.]+) to ([\d.]+)", note).groups())
            shown = view.results.item(rows["k3"], 3).text().split(" … ")
            assert float(shown[0]) == pytest.approx(lo, abs=0.05) and float(shown[1]) == pytest.approx(hi, abs=0.05)
            corr = re.search(r"correlation ([-+][\d.]+)", note).group(1)
            names = [view.correlation.horizontalHeaderItem(c).text() for c in range(view.correlation.columnCount())]
            assert view.correlation.item(names.index("k"), names.index("k3")).text() == f"{float(corr):+.2f}"
            assert view.correlation.isVisibleTo(view)
    fits = store.result
    panel.show_step(4)  # the same values again: the fit shown is kept, nothing runs
    assert store.result is fits and not s.jobs.running("fit")
