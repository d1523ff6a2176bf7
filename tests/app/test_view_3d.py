"""Phase space 3D: a Lorenz trajectory drawn on the GL scene, the camera saved and restored, nearby starts."""

import os

import numpy as np

from orbitdesk.samples.models import LORENZ  # sigma = 10, r = 28, beta = 8/3, starting at (1, 1, 1)

from .conftest import load_model, open_view, wait_for_trajectory


def load(qtbot, session, text, **solver):
    return load_model(qtbot, session, text, dict(t_end=40.0, samples=8001), **solver)


def seen_segments(item):
    """(the (k, k + 1) index pairs of a GL line strip's segments that are seen, how many breaks it has): a break
    is a run of joins with a fully transparent end."""
    alpha = np.asarray(item.color)[:, 3] if np.ndim(item.color) == 2 else np.ones(len(item.pos))
    assert item.mode == "line_strip"
    seen = (alpha[:-1] > 0) & (alpha[1:] > 0)
    k = np.flatnonzero(seen)
    breaks = int(np.sum(np.diff(np.concatenate([[1], seen.astype(int)])) == -1))
    return np.column_stack([k, k + 1]), breaks


def make_view(qtbot, session, size=(760, 560)):
    return open_view(qtbot, session, "phase_space_3d", size)


def frame(qtbot, view):
    qtbot.wait(30)
    view.glview.update()
    qtbot.wait(30)
    return view.glview.grabFramebuffer()


def pixels(image) -> np.ndarray:
    from PySide6.QtGui import QImage

    img = image.convertToFormat(QImage.Format.Format_RGB888)
    w, h, stride = img.width(), img.height(), img.bytesPerLine()
    buf = np.frombuffer(img.constBits(), dtype=np.uint8, count=stride * h).reshape(h, stride)
    return buf[:, : 3 * w].reshape(h, w, 3).astype(int)


def test_lorenz_trajectory_is_drawn_coloured_by_time(qtbot, session, artifacts):
    view = make_view(qtbot, session)
    load(qtbot, session, LORENZ)
    assert view.axes() == ["x", "y", "z"]
    px = pixels(frame(qtbot, view))
    from orbitdesk.app.plots.plot_style import SCENE_BACKGROUND, TIME_RAMP

    background = np.array(SCENE_BACKGROUND)
    lit = np.abs(px - background).sum(axis=2) > 60
    assert lit.mean() > 0.02  # the attractor covers a visible part of the scene
    colours = {tuple(c) for c in px[lit][::7] // 16}
    assert len(colours) > 20  # not one flat colour: a ramp along time
    # both ends of the time ramp are on screen (early dusk blue, late ember), within blending tolerance
    for _f, stop in (TIME_RAMP[0], TIME_RAMP[-1]):
        assert np.min(np.abs(px[lit] - np.array(stop)).sum(axis=1)) < 60
    view.glview.grabFramebuffer().save(os.path.join(artifacts, "view_3d_lorenz_scene.png"))
    view.grab_image().save(os.path.join(artifacts, "view_3d_lorenz.png"))


def test_camera_round_trips_through_view_settings(qtbot, session):
    view = make_view(qtbot, session, (400, 300))
    view.glview.setFixedSize(360, 240)
    load(qtbot, session, LORENZ)
    cam = {"distance": 31.5, "elevation": 12.0, "azimuth": 140.0, "center": [0.5, -1.0, 2.0], "fov": 45.0}
    view.set_camera(cam)
    before = pixels(frame(qtbot, view))
    d = view.view_settings()
    assert d["camera"] == cam
    import json

    d = json.loads(json.dumps(d))  # what a project file keeps
    other = make_view(qtbot, session, (400, 300))
    other.glview.setFixedSize(360, 240)
    other.apply_view_settings(d)
    assert other.camera() == cam
    # the same camera draws the same picture
    after = pixels(frame(qtbot, other))
    assert np.mean(np.abs(before - after).sum(axis=2) > 30) < 0.01
    other.reset_camera()
    assert other.camera() != cam


def test_axes_and_settings_survive_a_project_round_trip(qtbot, session):
    view = make_view(qtbot, session, (400, 300))
    load(qtbot, session, LORENZ)
    view.set_axes("z", "x", "t")
    view.colour_combo.setCurrentIndex(1)
    d = view.view_settings()
    assert d["axes"] == ["z", "x", "t"] and d["colour"] == "trajectory"
    proj = session.to_project()
    proj.views["phase_space_3d"] = d
    wait_for_trajectory(qtbot, session, lambda: session.load_project(proj))
    assert view.axes() == ["z", "x", "t"] and view.colour_combo.currentIndex() == 1
    header, rows = view.export_data()
    assert header == ["t", "z", "x", "t"] and rows.shape[0] == 8001


def test_a_million_points_are_thinned_for_drawing_only(qtbot, session):
    from orbitdesk.engine.runs import Trajectory
    from orbitdesk.app.views.phase_space_3d import MAX_DRAWN_POINTS

    view = make_view(qtbot, session, (400, 300))
    base = load(qtbot, session, LORENZ, t_end=100.0, samples=20001)
    # a million samples of the same orbit (the engine's own long runs are measured by the benchmarks)
    time = np.linspace(0.0, 100.0, 1_000_001)
    states = np.vstack([np.interp(time, base.time, base.states[k]) for k in range(3)])
    big = Trajectory("flow", time, states, list(base.state_names), dict(base.params))
    session.trajectory = big
    session.trajectoryChanged.emit(big)
    frame(qtbot, view)
    assert 0 < view.main_item.pos.shape[0] <= MAX_DRAWN_POINTS
    header, rows = view.export_data()
    assert rows.shape == (1_000_001, 4)  # the full data stays for export
    np.testing.assert_array_equal(rows[:, 1], big.series("x"))
    # the camera still turns: a drag on the scene changes the azimuth
    from PySide6.QtCore import QPoint, Qt

    from orbitdesk.app.views.phase_space_3d import MOVING_POINTS

    before = view.camera()["azimuth"]
    full = view.main_item.pos.copy()
    centre = view.glview.rect().center()
    qtbot.mousePress(view.glview, Qt.MouseButton.LeftButton, pos=centre)
    for dx in range(5, 60, 5):
        qtbot.mouseMove(view.glview, centre + QPoint(dx, 0))
    # while the camera moves a coarser line of the same orbit is drawn (a subset of the full one)
    moving = view.main_item.pos.copy()
    assert 0 < moving.shape[0] <= MOVING_POINTS < full.shape[0]
    assert np.isin(moving[:, 0], full[:, 0]).all() and np.array_equal(moving[0], full[0])
    qtbot.mouseRelease(view.glview, Qt.MouseButton.LeftButton, pos=centre + QPoint(60, 0))
    frame(qtbot, view)
    assert view.camera()["azimuth"] != before
    assert np.array_equal(view.main_item.pos, full)  # the full line again on release


def test_nearby_starts_separate_on_the_attractor(qtbot, session, artifacts):
    view = make_view(qtbot, session)
    load(qtbot, session, LORENZ)
    view.spread_count.setValue(8)
    view.spread_radius.setValue(1e-4)
    with qtbot.waitSignal(view.spreadChanged, timeout=30000):
        view.spread_box.setChecked(True)
    runs = view.spread_runs
    assert len(runs) == 8
    starts = np.array([r.states[:, 0] for r in runs])
    u0 = session.initial_vector()
    assert np.all(np.linalg.norm(starts - u0, axis=1) <= 1e-4 * (1 + 1e-12))
    # sensitive dependence on initial conditions (Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., sec. 9.3):
    # starts 1e-4 apart are far apart on the attractor after t = 40 (largest exponent about 0.9, value from memory)
    ends = np.array([r.final_state for r in runs])
    assert np.max(np.linalg.norm(ends - ends.mean(axis=0), axis=1)) > 1.0
    assert sum(line.visible() for line, _dots in view.extra_items) == 8
    frame(qtbot, view)
    view.grab_image().save(os.path.join(artifacts, "view_3d_lorenz_nearby_starts.png"))
    with qtbot.waitSignal(view.spreadChanged, timeout=5000):
        view.spread_box.setChecked(False)
    assert not any(line.visible() for line, _dots in view.extra_items)


def test_added_starts_and_time_cursor(qtbot, session):
    view = make_view(qtbot, session, (400, 300))
    traj = load(qtbot, session, LORENZ)
    with qtbot.waitSignal(view.addedChanged, timeout=20000):
        view.add_starts([{"u0": [0.01, 0.0, 0.0]}, {"u0": [0.0, 0.0, 1.0], "backward": True}])
    fwd, back = view.added_runs
    assert fwd.time[-1] > fwd.time[0] and back.time[-1] < back.time[0]
    assert view.view_settings()["starts"][1] == {"u0": [0.0, 0.0, 1.0], "backward": True}
    # the cursor marker sits on the trajectory at the cursor time
    k = 2000
    session.set_time_cursor(float(traj.time[k]))
    expected = view._to_box(np.array([[traj.series(n)[k] for n in "xyz"]]))
    np.testing.assert_allclose(view.cursor_item.pos, expected, atol=1e-5)
    # "Keep start" keeps the current initial state as an added trajectory
    with qtbot.waitSignal(view.addedChanged, timeout=20000):
        view.keep_button.click()
    assert view.added[-1]["u0"] == [1.0, 1.0, 1.0] and len(view.added_runs) == 3
    view.clear_extra()
    assert view.added == [] and view.view_settings()["starts"] == []


# a damped pendulum that turns over a few times before it settles into swinging; z only decays, so the 3D
# view has a third axis. theta is declared an angle: drawn wrapped to (-pi, pi], broken where it goes round.
SPINNING = """theta'' = -sin(theta) - 0.05*theta'
angle theta
z' = -0.1*z
theta(0) = 0
theta'(0) = 3.2
z(0) = 1
"""


def test_an_angle_axis_is_wrapped_and_the_line_broken_where_it_goes_round(qtbot, session, artifacts):
    from scipy.integrate import solve_ivp

    view = make_view(qtbot, session, (600, 450))
    traj = load(qtbot, session, SPINNING, t_end=60.0, samples=6001)
    view.set_axes("theta", "theta'", "z")
    frame(qtbot, view)
    lo, hi = view._box[0]
    theta = (view.main_item.pos[:, 0] + 5.0) / 10.0 * (hi - lo) + lo  # box coordinates back to data
    assert theta.min() > -np.pi - 1e-6 and theta.max() <= np.pi + 1e-6
    seg, hidden = seen_segments(view.main_item)  # one strip, its joins across the wrap fully transparent
    assert np.max(np.abs(np.diff(theta[seg], axis=1))) < np.pi  # no segment seen across the plane
    # the reference: scipy's solve_ivp on the same equations; the turns made = the times theta passed pi + 2 pi k
    ref = solve_ivp(lambda t, u: [u[1], -np.sin(u[0]) - 0.05 * u[1]], (0, 60), [0.0, 3.2], rtol=1e-10, atol=1e-12,
                    dense_output=True)
    turns = int(np.floor((ref.sol(60.0)[0] - np.pi) / (2 * np.pi))) + 1
    assert turns >= 2
    assert seg.shape[0] == traj.time.size - 1 - turns and hidden == turns  # one segment left out per turn
    # the time cursor sits at the wrapped angle (read between samples unwrapped, then wrapped)
    t = 7.77
    session.set_time_cursor(t)
    expected_theta = np.pi - np.mod(np.pi - ref.sol(t)[0], 2 * np.pi)
    cursor = (view.cursor_item.pos[0, 0] + 5.0) / 10.0 * (hi - lo) + lo
    assert abs(cursor - expected_theta) < 1e-3
    view.grab_image().save(os.path.join(artifacts, "view_3d_spinning_pendulum.png"))


def test_a_walkthrough_camera_in_a_wide_short_dock_is_moved_back_until_the_whole_box_shows(qtbot, session):
    # the convection loop's third step looks across y from distance 23; its dock is about 850 x 380 px on a
    # 1600 x 1000 screen, where that camera cut off the floor with the x axis's numbers and name
    view = make_view(qtbot, session, (850, 440))
    load(qtbot, session, LORENZ)
    qtbot.waitUntil(lambda: view.glview.height() > 300)
    view.set_camera({"azimuth": -90.0, "elevation": 8.0, "distance": 23.0, "center": [0.0, 0.0, 0.0]})
    assert not view.box_in_view()  # what the step showed before
    view.fit_view()
    assert view.box_in_view()
    cam = view.camera()
    assert (cam["azimuth"], cam["elevation"]) == (-90.0, 8.0) and cam["distance"] > 23.0  # only moved back
    before = cam["distance"]
    view.fit_view()
    assert view.camera()["distance"] == before  # in view already: left alone


def _text_near_labels(view, px) -> float:
    """The share of the scene's labels with text-coloured pixels next to their anchor point."""
    from orbitdesk.app.plots.plot_style import SCENE_TEXT

    h, w = px.shape[:2]
    text = np.nonzero(np.abs(px - np.array(SCENE_TEXT[:3])).sum(axis=2) < 60)
    labels = view.scene_labels()
    where = view.scene_points([p for p, *_r in labels], w, h)
    found = [((np.abs(text[1] - x - 8) < 14) & (np.abs(text[0] - y + 5) < 8)).sum() > 3 for x, y in where]
    return float(np.mean(found)) if found else 0.0


def test_the_scene_is_smoothed_at_rest_and_drawn_plain_while_the_camera_moves(qtbot, session, artifacts):
    from PySide6.QtCore import Qt

    from orbitdesk.app.plots.plot_style import SCENE_BACKGROUND

    view = make_view(qtbot, session, (700, 640))
    load(qtbot, session, LORENZ)  # 8,001 samples: the line while moving holds every point too
    scene = view.glview
    at_rest = pixels(frame(qtbot, view))
    assert not scene.moving and scene.smooth()
    centre = scene.rect().center()
    qtbot.mousePress(scene, Qt.MouseButton.LeftButton, pos=centre)  # grabbed, not yet turned: the same camera
    assert scene.moving
    image = frame(qtbot, view)
    image.save(os.path.join(artifacts, "view_3d_moving.png"))
    moving = pixels(image)
    qtbot.mouseRelease(scene, Qt.MouseButton.LeftButton, pos=centre)
    assert not scene.moving
    image = frame(qtbot, view)
    image.save(os.path.join(artifacts, "view_3d_at_rest.png"))
    again = pixels(image)

    def lit(px):
        return int((np.abs(px - np.array(SCENE_BACKGROUND)).sum(axis=2) > 12).sum())

    # at rest four samples per pixel soften every edge (pixels a line only partly covers are tinted) and the
    # run's line is 1.6 px wide; while moving each line is one hard pixel wide: fewer pixels differ from the
    # background, and the attractor is still there
    assert lit(at_rest) > 1.15 * lit(moving) > 0.02 * moving.shape[0] * moving.shape[1] * 1.15
    assert np.abs(again - at_rest).max() <= 2  # the smooth picture comes back on release
    # the tick numbers and axis names are painted in both
    assert _text_near_labels(view, at_rest) > 0.8 and _text_near_labels(view, moving) > 0.8


def test_a_grab_of_the_view_shows_the_tick_numbers_and_names(qtbot, session, artifacts):
    # screenshots grab the window (scripts/make_screenshots.py): a QPainter opened on the GL widget is
    # redirected during a grab, which put the labels under the scene; they are painted into its framebuffer
    from PySide6.QtCore import QPoint

    view = make_view(qtbot, session, (640, 560))
    load(qtbot, session, LORENZ)
    frame(qtbot, view)
    image = view.grab().toImage()
    image.save(os.path.join(artifacts, "view_3d_grab.png"))
    corner = view.glview.mapTo(view, QPoint(0, 0))
    scene = image.copy(corner.x(), corner.y(), view.glview.width(), view.glview.height())
    assert _text_near_labels(view, pixels(scene)) > 0.8


def test_equilibrium_markers_sit_inside_the_box_in_the_runs_scale(qtbot, session, artifacts):
    # the convection loop's second step (Lorenz at r = 10): the run settles on one steady circulation, and the
    # origin and the other circulation lay outside the run's box: their markers floated beyond the axes
    from orbitdesk.analyses.equilibria import find_equilibria
    from orbitdesk.app.plots.plot_style import SCENE_MARKER
    from orbitdesk.app.views.phase_space_3d import HALF

    view = make_view(qtbot, session, (700, 600))
    load(qtbot, session, LORENZ.replace("r = 28", "r = 10"))
    found = find_equilibria(session.system, session.param_vector())
    # closed form (Lorenz 1963): the origin and x = y = +-sqrt(beta (r - 1)), z = r - 1
    c = np.sqrt(8 / 3 * 9)
    expected = np.array(sorted([(0.0, 0.0, 0.0), (c, c, 9.0), (-c, -c, 9.0)]))
    assert np.allclose(sorted(tuple(e.vector) for e in found), expected, atol=1e-8)
    assert max(session.trajectory.series("x")) < c + 4  # the run alone stays near one of them
    session.set_equilibria(list(found))
    px = pixels(frame(qtbot, view))
    pos = np.asarray(view.eq_item.pos, dtype=float)
    assert pos.shape == (3, 3)
    assert np.all(np.abs(pos) <= HALF + 1e-6)  # inside the box the axes draw
    # in the scale of the run and the ticks: box coordinates back to data give the equilibria
    back = np.array([(pos[:, k] + HALF) / (2 * HALF) * (hi - lo) + lo for k, (lo, hi) in enumerate(view._box)]).T
    assert np.allclose(sorted(map(tuple, back)), expected, atol=1e-5)
    # and a marker is painted where each one projects
    h, w = px.shape[:2]
    marker = np.array(SCENE_MARKER[:3])
    for x, y in view.scene_points(pos, w, h):
        patch = px[int(y) - 3:int(y) + 4, int(x) - 3:int(x) + 4]
        assert patch.size and np.min(np.abs(patch - marker).sum(axis=2)) < 90  # (drawn at 0.9 opacity)
    view.grab_image().save(os.path.join(artifacts, "view_3d_equilibria_in_box.png"))
    # an equilibrium far beyond the run (more than FAR of its spans) is left out instead of squeezing the run
    from dataclasses import replace

    from orbitdesk.app.views.phase_space_3d import FAR

    far = replace(found[0], vector=np.full(3, 1e6), state={n: 1e6 for n in session.system.states})
    session.set_equilibria(list(found) + [far])
    frame(qtbot, view)
    assert np.asarray(view.eq_item.pos).shape == (3, 3)
    assert all(hi - lo < 2 * (FAR + 1) * 20 for lo, hi in view._box)


BOUNCING = """g = 9.81
e = 0.8
x'' = -g             # height of a ball above the floor
y' = 1               # it moves along at unit speed
x(0) = 1
y(0) = 0
when x < 0 then x' = -e*x'
"""


def test_the_line_is_broken_at_each_event_not_drawn_up_the_jump(qtbot, session, artifacts):
    # the rattling flap's speed jumps at each hit: the line must end at the value before and go on from the one
    # after, never joining them (a straight line across the scene)
    view = make_view(qtbot, session, (600, 500))
    for samples in (3001, 0):  # on a grid of samples, and every step kept (the event's time twice in the run)
        traj = load(qtbot, session, BOUNCING, t_end=3.0, samples=samples)
        assert len(traj.model_events) == 6
        view.set_axes("y", "x", "x'")
        frame(qtbot, view)
        pos = np.asarray(view.main_item.pos, dtype=float)
        data = np.array([(pos[:, k] + 5.0) / 10.0 * (hi - lo) + lo for k, (lo, hi) in enumerate(view._box)]).T
        index, hidden = seen_segments(view.main_item)
        assert hidden == 6  # one break per impact
        seg = data[index]
        jumps = np.abs(seg[:, 1, 2] - seg[:, 0, 2])
        # between samples the speed changes by g dt at most (closed form x'' = -g); each bounce jumps by ~8
        step = np.max(np.diff(traj.time)) if samples else 0.5
        assert np.max(jumps) < 9.81 * step + 1e-6
        # each segment ending at an impact ends at the speed before it (-sqrt(2 g h) at the first, h = 1)
        first = traj.model_events[0]
        ends = seg[np.isclose(seg[:, 1, 0], first.t), 1, 2]
        assert np.any(np.isclose(ends, -np.sqrt(2 * 9.81), rtol=1e-6))
    view.grab_image().save(os.path.join(artifacts, "view_3d_events_broken.png"))


def test_a_flat_axis_gets_a_span_around_its_value_with_plain_distinct_ticks(qtbot, session):
    # y moves by 2e-10 around 1.5 (closed form y = 1.5 + 1e-10 sin t): its axis once spanned 2e-10 with every
    # tick number reading 1.5; like the 2D plots' flat ranges it now spans 10% of the value either side
    view = make_view(qtbot, session, (600, 500))
    load(qtbot, session, "x' = -x\ny' = 1e-10*cos(t)\nz' = -0.5*z\nx(0) = 1\ny(0) = 1.5\nz(0) = 1\n")
    frame(qtbot, view)
    lo, hi = view._box[1]
    assert lo < 1.5 < hi and 0.25 < hi - lo < 0.4
    names = ["x", "y", "z"]
    texts = [text for pos, text, *_r in view.scene_labels() if text not in names and abs(pos[1]) < 5.0 and pos[0] > 5.0]
    assert "1.5" in texts and len(set(texts)) == len(texts) >= 3
