"""The time series and the phase plane mark the events of a run (the ball's impacts)."""

import math
import os

import numpy as np

from .conftest import load_model

BALL = """\
g = 9.81
e = 0.8
x'' = -g             # height of a ball above the floor
x(0) = 1
when x < 0 then x' = -e*x'
"""


def test_time_series_and_phase_plane_mark_each_impact_before_and_after(qtbot, session, artifacts):
    from orbitdesk.app.views.phase_plane import PhasePlaneView
    from orbitdesk.app.views.timeseries import TimeSeriesView

    traj = load_model(qtbot, session, BALL, {"t_end": 3.0, "samples": 600})
    assert len(traj.model_events) == 6
    ts = TimeSeriesView(session)
    qtbot.addWidget(ts)
    ts.resize(720, 360)
    ts.show()
    qtbot.waitExposed(ts)
    ts.set_series(["x", "x'"])
    assert ts.event_marks.count == 6 and "6 events" in ts.note.text()
    before = ts.event_marks.before.data
    after = ts.event_marks.after.data
    assert len(before) == len(after) == 12  # x and x' for each impact
    # the first impact: t1 = sqrt(2h/g), speed sqrt(2gh) reversed with e (closed form)
    t1, v0 = math.sqrt(2 / 9.81), math.sqrt(2 * 9.81)
    speeds = sorted(zip(after["x"], after["y"]))
    assert np.isclose(speeds[0][0], t1) and any(np.isclose(y, 0.8 * v0) for _, y in speeds[:2])
    assert "line 5: when x < 0 then x' = -e*x'" in after["data"][0]
    qtbot.wait(50)
    assert ts.grab().save(os.path.join(artifacts, "events_timeseries.png"))

    pp = PhasePlaneView(session)
    qtbot.addWidget(pp)
    pp.resize(520, 460)
    pp.show()
    qtbot.waitExposed(pp)
    pp.set_axes("x", "x'")
    pp._draw_trajectory()
    jx, jy = pp.event_marks.jumps.getData()
    assert len(jx) == 12 and np.allclose(jx, 0.0, atol=1e-8)  # each jump is vertical, on the floor x = 0
    assert np.isclose(jy[0], -v0) and np.isclose(jy[1], 0.8 * v0)
    # the drawn path reaches the floor and goes on from the rebound: at each impact the curve holds the values
    # before and after it with a break between (no straight line from the last sample above the floor to
    # the first after the bounce, which cut the corner in the rattling flap's phase plane)
    cx, cy = pp.curve.xData, pp.curve.yData
    for ev in traj.model_events:
        k = int(np.flatnonzero((cx == ev.before["x"]) & (cy == ev.before["x'"]))[0])
        assert np.isnan(cx[k + 1]) and (cx[k + 2], cy[k + 2]) == (ev.after["x"], ev.after["x'"])
    qtbot.wait(50)
    assert pp.grab().save(os.path.join(artifacts, "events_phase_plane.png"))
    # a run without events leaves no marks
    load_model(qtbot, session, "x' = -x\nx(0) = 1\n", {"t_end": 3.0})
    ts.set_series(["x"])
    assert ts.event_marks.count == 0 and ts.note.text() == ""


def test_the_time_series_and_its_exported_picture_break_the_line_at_each_jump(qtbot, session, artifacts):
    # the rattling flap's speed jumps at each hit: the time series drew a vertical line from the speed before
    # to the speed after. Now the line ends at the value before and goes on from the one after, on screen and
    # in the exported picture; also when every step is kept (the event's time is then in the run twice)
    from PySide6.QtCore import QPointF

    from orbitdesk.app.plots.figures import plot_image
    from orbitdesk.app.views import series_colour
    from orbitdesk.app.views.timeseries import TimeSeriesView

    from .test_plot_export import near, pixels

    ts = TimeSeriesView(session)
    qtbot.addWidget(ts)
    ts.resize(720, 420)
    ts.show()
    qtbot.waitExposed(ts)
    t1, v0 = math.sqrt(2 / 9.81), math.sqrt(2 * 9.81)  # first impact, speed there (closed form, h = 1)
    for samples in (600, 0):
        traj = load_model(qtbot, session, BALL, {"t_end": 3.0, "samples": samples})
        ts.set_series(["x'"])
        ts.fit_view()
        qtbot.wait(50)
        curve = ts._curves["x'"]
        t, v = curve.getOriginalDataset()
        assert np.isclose(t[np.isnan(v)], [ev.t for ev in traj.model_events]).all()  # one gap per impact
        k = int(np.flatnonzero(np.isnan(v))[0])
        assert np.isclose(v[k - 1], -v0) and np.isclose(v[k + 1], 0.8 * v0)  # before it and after it
        shown = curve._getDisplayDataset()  # what is drawn: no segment joins the two sides of a jump
        joined = np.flatnonzero(shown.connect[:-1])
        assert np.max(np.diff(shown.y)[joined]) < 1e-9  # (x'' = -g: the speed rises only at the jumps)
        # the exported picture, at the size on screen (same range): at the first impact's column no line
        # runs from the speed before (-4.4) up to the one after (+3.5)
        image = plot_image(ts.plot, ts.plot_widget.width(), ts.plot_widget.height())
        image.save(os.path.join(artifacts, f"events_timeseries_export_{samples}.png"))
        rgb = pixels(image)
        vb = ts.plot.getViewBox()

        def at(x, y):
            p = ts.plot_widget.mapFromScene(vb.mapViewToScene(QPointF(x, y)))
            return int(round(p.x())), int(round(p.y()))

        col, top = at(t1, 2.0)
        _col, bottom = at(t1, -3.0)
        column = near(rgb[top:bottom, col - 2:col + 3], series_colour(1, ts)).any(axis=1)
        assert near(rgb, series_colour(1, ts)).sum() > 200  # the curve is in the picture
        # only the marks' dashed jump is there (dashes of a few pixels), not a solid line up the column
        runs = np.diff(np.flatnonzero(np.diff(np.concatenate([[0], column.astype(int), [0]]))))[::2]
        assert column.sum() > 10 and runs.max() < 12
