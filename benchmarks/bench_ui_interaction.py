"""Interaction in the real main window: slider to redrawn phase plane, and 3D frames while orbiting.

Each case runs in a child process on X (the current DISPLAY or a private Xvfb, see
``bench_app.display``), so the GL context, the window and the memory are its own.

* Slider to redraw: a Van der Pol oscillator, 20,000 samples over t in [0, 100] (the solver's
  other defaults). The ``mu`` slider of the parameter panel is held down (``setSliderDown``, as a
  hand dragging it) and moved 30 times; each time is
  measured from ``slider.setValue`` to the end of the first paint of the phase plane after the
  session announced the new trajectory (an event filter on the plot's viewport; the event loop
  runs normally, it is not spun). Also recorded: when the engine run started and ended on the
  worker thread (``engine.simulate`` wrapped for the measurement) and when ``trajectoryChanged``
  arrived. Baseline, after each move once everything is idle: the bare engine run for the same
  system, settings and values on this thread. Goal ≤ 50 ms.
* Orbit: a 1,000,000-sample Lorenz run shown in the 3D view (which thins the line it draws), twice:
  the other views closed, so the scene has the size a person orbiting it would give it, and the dock
  opened beside the others (smaller); the camera's azimuth is stepped and each frame forced:
  ``repaint()``, ``glFinish()`` and ``processEvents()``; median time per frame over 30 frames (wall
  and CPU time of the process, llvmpipe's threads included: under load the CPU time says more), with
  the left mouse button held on the scene (orbiting by hand: the view draws a coarser line without
  multisampling until it is let go), and again without (the full line, 4x multisampled). Baselines,
  frames alternating with ours, bare pyqtgraph GLViewWidgets of the same size: empty without
  multisampling (the floor of a moving frame: clearing and putting the frame on the screen), empty
  with 4x multisampling (the floor at rest: four samples cleared and resolved), and one drawing all
  1,000,000 points as one line with 4x (what drawing without thinning costs). With Mesa's software
  renderer (llvmpipe) every vertex and fragment is computed by the CPU.
"""

from __future__ import annotations

import json
import statistics
import subprocess
import sys

from benchmarks.bench_app import ROOT, WINDOW_CHILD, display
from benchmarks.harness import Row

MOVES = 30
FRAMES = 30

SLIDER = WINDOW_CHILD + r"""
import orbitdesk.engine.runs as engine

VDP = "mu = 1.5 in [0.5, 3]\nx' = y\ny' = mu*(1 - x^2)*y - x\nx(0) = 2\ny(0) = 0\n"
session.load_project(Project(name="slider", model=VDP, solver=RunSettings(t_end=100.0, samples=20000)))
wait(lambda: session.trajectory is not None and not session.busy, 120)
wait(lambda: False, 0.5)
view = window.views["phase_plane"]
row = window.panel_parts["ParameterPanel"].row("mu")

marks = {}
original = engine.simulate
def simulate(*args, **kwargs):  # the session's job looks simulate up when it runs
    marks["start"] = time.perf_counter()
    result = original(*args, **kwargs)
    marks["end"] = time.perf_counter()
    return result
engine.simulate = simulate
adopt = session.doc.set_trajectory  # the run's result on the GUI thread, before any view has seen it
def arrived(trajectory):
    marks["arrived"] = time.perf_counter()
    marks["trajectory"] = trajectory
    adopt(trajectory)
session.doc.set_trajectory = arrived

class PaintEnd(QObject):
    '''The end of the phase plane's first paint after the new trajectory arrived: taken when control
    comes back to the event loop after the paint event.'''
    def __init__(self):
        super().__init__()
        self.end = None
    def eventFilter(self, obj, event):
        if event.type() == QEvent.Type.Paint and "arrived" in marks and self.end is None:
            QTimer.singleShot(0, self.done)
        return False
    def done(self):
        self.end = time.perf_counter()

total, to_start, in_worker, delivery, to_paint, bare, shown_new = [], [], [], [], [], [], []
system = session.system
row.slider.setSliderDown(True)  # held by the hand while it moves
for k in range(MOVES):
    position = 150 + (k * 373) % 700
    marks.clear()
    end = PaintEnd()
    view.plot_widget.viewport().installEventFilter(end)
    t0 = time.perf_counter()
    row.slider.setValue(position)
    wait(lambda: end.end is not None, 60)
    view.plot_widget.viewport().removeEventFilter(end)
    total.append(end.end - t0)
    to_start.append(marks["start"] - t0)
    in_worker.append(marks["end"] - marks["start"])
    delivery.append(marks["arrived"] - marks["end"])
    to_paint.append(end.end - marks["arrived"])
    shown_new.append(view.trajectory is marks["trajectory"] and abs(
        session.params["mu"] - row._from_slider(position)) < 1e-12)
    wait(lambda: not session.busy, 30)
    wait(lambda: False, 0.05)
    start = time.perf_counter()
    original(system, session.run_settings(), session.initial_vector(), session.param_vector())
    bare.append(time.perf_counter() - start)
    wait(lambda: False, 0.05)
row.slider.setSliderDown(False)
median = statistics.median
print(json.dumps({"total": median(total), "to_start": median(to_start), "in_worker": median(in_worker),
                  "delivery": median(delivery), "to_paint": median(to_paint), "bare": median(bare),
                  "spread": [min(total), max(total)], "samples": int(session.trajectory.time.size),
                  "all_new": all(shown_new), "moves": MOVES}))
""".replace("MOVES", str(MOVES))

ORBIT = WINDOW_CHILD + r"""
import numpy as np
import pyqtgraph.opengl as gl
from OpenGL import GL
from PySide6.QtWidgets import QApplication
from PySide6.QtGui import QColor, QSurfaceFormat
from orbitdesk.app.plots.plot_style import SCENE_BACKGROUND, time_colours
from orbitdesk.app.views.phase_space_3d import _gl_item_classes

LORENZ = "sigma = 10\nr = 28\nbeta = 8/3\nx' = sigma*(y - x)\ny' = x*(r - z) - y\nz' = x*y - beta*z\nx(0) = 1\n"
session.load_project(Project(name="orbit", model=LORENZ, solver=RunSettings(t_end=1000.0, samples=1_000_000)))
wait(lambda: session.trajectory is not None and not session.busy, 600)
# opened where it is seen, as the View menu does (after the load: a project brings its own layout)
view = window.show_view("phase_space_3d")
if sys.argv[1] == "alone":  # the 3D view alone beside the model panel: the size a person orbiting it gives it
    for name, dock in window.view_docks.items():
        if name != "phase_space_3d":
            dock.hide()
wait(lambda: False, 1.0)
scene = view.glview
size = (scene.width(), scene.height())
scene.makeCurrent()
renderer = GL.glGetString(GL.GL_RENDERER).decode()
scene.doneCurrent()

# the baselines: the same widget class and size; pyqtgraph's line item with one shader program per
# context (the view's own subclass), all points in the view's box coordinates
Line, _points = _gl_item_classes(gl)
run = session.trajectory
xyz = np.column_stack([run.series(name) for name in "xyz"])
box = view._to_box(xyz)
def bare_widget(with_line, samples):
    widget = gl.GLViewWidget()
    surface = QSurfaceFormat.defaultFormat()
    surface.setSamples(samples)
    widget.setFormat(surface)
    widget.setBackgroundColor(QColor(*SCENE_BACKGROUND))
    widget.resize(*size)
    if with_line:
        widget.addItem(Line(pos=box, color=time_colours(run.time, 0.95), width=1.6, mode="line_strip",
                            antialias=False, glOptions="translucent"))
    widget.setCameraPosition(distance=scene.opts["distance"], elevation=scene.opts["elevation"],
                             azimuth=scene.opts["azimuth"])
    widget.show()
    return widget
full, empty4, empty0 = bare_widget(True, 4), bare_widget(False, 4), bare_widget(False, 0)
wait(lambda: False, 1.0)
samples = {}
for name, widget in (("full", full), ("empty4", empty4), ("empty0", empty0)):
    widget.makeCurrent()
    samples[name] = int(GL.glGetIntegerv(GL.GL_SAMPLES))  # of the widget's framebuffer
    widget.doneCurrent()

def frame(widget, azimuth):
    '''Wall and CPU seconds (the CPU time of every thread of the process: llvmpipe's too) of one frame.'''
    start, cpu = time.perf_counter(), time.process_time()
    widget.setCameraPosition(azimuth=azimuth)
    widget.repaint()
    widget.makeCurrent()
    GL.glFinish()
    widget.doneCurrent()
    QApplication.processEvents()
    return time.perf_counter() - start, time.process_time() - cpu

from PySide6.QtCore import QPointF, Qt
from PySide6.QtGui import QMouseEvent
def mouse(kind):
    centre = QPointF(scene.width() / 2, scene.height() / 2)
    QApplication.sendEvent(scene, QMouseEvent(kind, centre, scene.mapToGlobal(centre), Qt.MouseButton.LeftButton,
                                              Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier))

times = {name: [] for name in ("ours", "full", "empty4", "empty0", "still", "still_empty4")}
mouse(QEvent.Type.MouseButtonPress)  # orbiting by hand
moving_drawn, moving_smooth = int(len(view.main_item.pos)), not scene.moving
for k in range(FRAMES + 3):
    azimuth = -58.0 + 4.0 * k
    for name, widget in (("ours", scene), ("empty0", empty0), ("empty4", empty4), ("full", full)):
        t = frame(widget, azimuth)
        if k >= 3:
            times[name].append(t)
mouse(QEvent.Type.MouseButtonRelease)
still_smooth = not scene.moving and scene.smooth()
for k in range(FRAMES + 3):
    for name, widget in (("still", scene), ("still_empty4", empty4)):
        t = frame(widget, -58.0 - 4.0 * k)
        if k >= 3:
            times[name].append(t)
median = statistics.median
out = {name: median(t[0] for t in ts) for name, ts in times.items()}
out.update({f"{name}_cpu": median(t[1] for t in ts) for name, ts in times.items()})
print(json.dumps(dict(out, moving_drawn=moving_drawn, renderer=renderer, size=list(size), samples=int(run.time.size),
                      drawn=int(len(view.main_item.pos)), bare_samples=samples, moving_smooth=moving_smooth,
                      still_smooth=still_smooth, frames=FRAMES)))
""".replace("FRAMES", str(FRAMES))


def _child(script: str, env, *args: str) -> dict:
    out = subprocess.run([sys.executable, "-c", script, *args], capture_output=True, text=True, cwd=ROOT, env=env,
                         timeout=1800)
    lines = [line for line in out.stdout.splitlines() if line.startswith("{")]
    if out.returncode != 0 or not lines:
        raise RuntimeError(f"benchmark child failed ({out.returncode}):\n{out.stderr[-3000:]}")
    return json.loads(lines[-1])


def run(log=print) -> list[Row]:
    rows = []
    with display() as env:
        s = _child(SLIDER, env)
        ms = {k: 1e3 * s[k] for k in ("total", "to_start", "in_worker", "delivery", "to_paint", "bare")}
        log(f"slider to redraw {ms['total']:.0f} ms (range {1e3 * s['spread'][0]:.0f}–{1e3 * s['spread'][1]:.0f}): "
            f"to the run's start {ms['to_start']:.1f}, run on the worker {ms['in_worker']:.0f}, "
            f"to trajectoryChanged {ms['delivery']:.1f}, to the end of the paint {ms['to_paint']:.1f}; "
            f"bare run {ms['bare']:.0f} ms")
        rows.append(Row(
            f"slider to redrawn phase plane: Van der Pol, {s['samples']:,} samples, main window "
            f"(median of {s['moves']} moves)", s["total"], s["bare"],
            f"medians: to the run's start {ms['to_start']:.0f} ms, run on the worker {ms['in_worker']:.0f}, "
            f"to trajectoryChanged {ms['delivery']:.0f}, to the end of the paint {ms['to_paint']:.0f}; "
            f"new run shown every time: {s['all_new']}",
            "the bare engine run, same settings", "≤ 50 ms"))

        for layout, where in (("alone", "the other views closed"), ("beside", "the dock opened beside the others")):
            rows += _orbit_rows(_child(ORBIT, env, layout), where, log)
    return rows


def _orbit_rows(o: dict, where: str, log) -> list[Row]:
    ms = {k: 1e3 * v for k, v in o.items() if isinstance(v, float)}
    w, h = o["size"]
    log(f"3D orbit, {where}, {w}x{h} px: {ms['ours']:.1f} ms per frame ({1e3 / ms['ours']:.1f} fps; CPU "
        f"{ms['ours_cpu']:.1f} ms) with the mouse held ({o['moving_drawn']:,} points, multisampled: "
        f"{o['moving_smooth']}), empty widget without multisampling {ms['empty0']:.1f} ms (CPU "
        f"{ms['empty0_cpu']:.1f}), with 4x {ms['empty4']:.1f} ms; at rest {ms['still']:.1f} ms (CPU "
        f"{ms['still_cpu']:.1f}; multisampled: {o['still_smooth']}), empty widget with 4x {ms['still_empty4']:.1f} ms; "
        f"all points {ms['full']:.0f} ms; {o['renderer']}; baselines' samples {o['bare_samples']}")
    case = f"3D view orbiting a {o['samples']:,}-point Lorenz run, {where}, {w}x{h} px (median of {o['frames']} frames)"
    return [
        Row(f"{case}, camera moving: {1e3 / ms['ours']:.1f} frames per second", o["ours"], o["empty0"],
            f"{o['moving_drawn']:,} points 1 px wide, no multisampling; CPU per frame {ms['ours_cpu']:.1f} ms "
            f"(empty {ms['empty0_cpu']:.1f}); empty with 4x {ms['empty4']:.1f} ms; bare widget drawing all points "
            f"with 4x {ms['full']:.0f} ms; {o['renderer']}",
            "empty GLViewWidget, same size, no multisampling, frames alternating", "≥ 20 fps"),
        Row(f"{case}, at rest: {1e3 / ms['still']:.1f} frames per second", o["still"], o["still_empty4"],
            f"{o['drawn']:,} points 1.6 px wide, 4x multisampling ({o['still_smooth']}); CPU per frame "
            f"{ms['still_cpu']:.1f} ms (empty {ms['still_empty4_cpu']:.1f})",
            "empty GLViewWidget, same size, 4x multisampling, frames alternating"),
    ]


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run(log=lambda text: print(text, file=sys.stderr)))
