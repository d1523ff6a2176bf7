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
