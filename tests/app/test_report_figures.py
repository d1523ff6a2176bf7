"""The HTML report as a reader sees it: every figure drawn at one readable size from the results,
whether its view is in sight or not, the numbers of every computed result, and the command line's
report with the same figures as the app's."""

import base64
import html as html_lib
import os
import re
import subprocess
import sys

import numpy as np
import pytest
from PySide6.QtGui import QImage

from orbitdesk.engine import RunSettings
from orbitdesk.document.project import Project
from orbitdesk.app import exports
from orbitdesk.app.plots.figures import REPORT_SIZE
from orbitdesk.app.views import series_colour

from .test_help_and_exports import SPRING, open_spring, save_dialog
from .test_plot_export import near, pixels


def report_images(html: str) -> dict:
    """Caption -> QImage of every figure of a report."""
    out = {}
    for data, alt in re.findall(r'<img src="data:image/png;base64,([^"]+)" alt="([^"]*)"', html):
        image = QImage()
        assert image.loadFromData(base64.b64decode(data), "PNG")
        out[html_lib.unescape(alt)] = image
    return out


def write_report(qtbot, window, monkeypatch, path):
    save_dialog(monkeypatch, path)
    assert exports.export_report_dialog(window)
    qtbot.waitUntil(path.exists, timeout=60000)
    return path.read_text(encoding="utf-8")


def test_report_draws_hidden_views_at_a_readable_size_with_the_lyapunov_numbers(qtbot, window, tmp_path,
                                                                               monkeypatch):
    open_spring(qtbot, window, tmp_path, w=3.0)
    lyapunov = window.ensure_view("lyapunov")
    lyapunov.length.setValue(200.0)
    lyapunov.transient.setValue(0.0)
    with qtbot.waitSignal(lyapunov.resultChanged, timeout=60000):
        lyapunov.compute()
    # the phase plane sits collapsed behind nothing: its dock is closed; the Lyapunov view was never shown
    window.view_docks["phase_plane"].hide()
    html = write_report(qtbot, window, monkeypatch, tmp_path / "spring.html")
    images = report_images(html)
    assert "Phase plane: x' against x" in images and any(c.startswith("Lyapunov") for c in images)
    for caption, image in images.items():
        assert (image.width(), image.height()) == REPORT_SIZE, caption
    # the orbit of x'' = -9 x from x = 1 is the ellipse x^2 + (x'/3)^2 = 1 (closed form): it fills the
    # phase plane figure from side to side and top to bottom, not a 305 x 75 strip
    rows, cols = np.nonzero(near(pixels(images["Phase plane: x' against x"]), series_colour(0, window)))
    assert cols.max() - cols.min() > 0.7 * REPORT_SIZE[0] and rows.max() - rows.min() > 0.7 * REPORT_SIZE[1]
    # the exponents of a linear centre are both 0 (closed form); the report gives the view's numbers
    section = html[html.index("<h3>Lyapunov exponents</h3>"):]
    shown = re.findall(r"<td>λ(\d)</td><td class=\"num\">([^<]+)</td>", section)
    assert [k for k, _ in shown] == ["1", "2"]
    def number(text):
        return float(text.replace("\u2212", "-").replace(" \u00d7 10", "e").translate(
            str.maketrans("\u207b\u2070\u00b9\u00b2\u00b3\u2074\u2075\u2076\u2077\u2078\u2079", "-0123456789")))

    # each exponent with its standard error, the value to the error's decimal place (0.0000 ± 0.0041)
    pairs = [[number(part) for part in v.split(" \u00b1 ")] for _, v in shown]
    exact = list(lyapunov.result.exponents)
    errors = list(lyapunov.result.uncertainty)
    for (value, error), e, sigma in zip(pairs, exact, errors):
        assert error == pytest.approx(sigma, rel=0.05) and abs(value - e) <= 0.05 * error
    assert max(abs(value) for value, _ in pairs) < 0.05


def test_command_line_report_has_the_same_figures_as_the_app(qtbot, window, tmp_path, monkeypatch):
    open_spring(qtbot, window, tmp_path, w=3.0)
    project_path = tmp_path / "spring.orbitdesk"
    assert window._save_to(project_path)
    app_html = write_report(qtbot, window, monkeypatch, tmp_path / "app.html")
    cli_html_path = tmp_path / "cli.html"
    done = subprocess.run([sys.executable, "-m", "orbitdesk", "export", str(project_path), "--report", "-o",
                           str(cli_html_path)], capture_output=True, text=True, timeout=300,
                          env={k: v for k, v in os.environ.items() if k not in ("QT_QPA_PLATFORM", "DISPLAY")})
    assert done.returncode == 0, done.stderr
    app_images, cli_images = report_images(app_html), report_images(cli_html_path.read_text(encoding="utf-8"))
    assert set(cli_images) == set(app_images) >= {"Time series: x, x' against t", "Phase plane: x' against x"}
    colour = series_colour(0, window)
    for caption in app_images:
        a, c = app_images[caption], cli_images[caption]
        assert (a.width(), a.height()) == (c.width(), c.height()) == REPORT_SIZE
        ra, ca = np.nonzero(near(pixels(a), colour))
        rc, cc = np.nonzero(near(pixels(c), colour))
        # the same curve at the same place (different font engines may move the axes by a pixel or two)
        for p, q in ((ra.min(), rc.min()), (ra.max(), rc.max()), (ca.min(), cc.min()), (ca.max(), cc.max())):
            assert abs(int(p) - int(q)) <= 4, caption


def test_the_3d_scene_is_drawn_at_the_report_size_even_when_hidden(qtbot, window, artifacts):
    from orbitdesk.app.plots.figures import scene_image

    from .conftest import load_model

    load_model(qtbot, window.session, "x' = -y\ny' = x\nz' = -z\nx(0) = 1\nz(0) = 1\n",
               {"t_end": 20.0, "samples": 2000})
    window.view_docks["phase_space_3d"].show()  # opened for this project (a view of a project before is not in its report)
    view = window.ensure_view("phase_space_3d")
    qtbot.wait(200)
    window.view_docks["phase_space_3d"].hide()
    image = scene_image(view, *REPORT_SIZE)
    assert image is not None and (image.width(), image.height()) == REPORT_SIZE
    image.save(f"{artifacts}/report_3d_scene.png")
    rgb = pixels(image)
    lit = np.nonzero((rgb.max(axis=2) - rgb.min(axis=2)) > 60)  # the run's coloured line on the dark scene
    assert lit[0].size > 200
    # the helix x = cos t, y = sin t, z = e^-t sits in the middle of the picture, wider than a corner
    assert np.ptp(lit[1]) > 0.15 * REPORT_SIZE[0] and abs(np.mean(lit[1]) - REPORT_SIZE[0] / 2) < 0.25 * REPORT_SIZE[0]
    # the axis numbers and names are in the picture, where the camera puts their points at this size
    from orbitdesk.app.plots.plot_style import SCENE_TEXT

    text = np.nonzero(np.abs(rgb - np.array(SCENE_TEXT[:3])).sum(axis=2) < 60)
    labels = view.scene_labels()
    assert {t for _p, t, _c, _f in labels} >= {"x", "y", "z", "0"}
    where = view.scene_points([p for p, *_r in labels], *REPORT_SIZE)
    for (x, y) in where[::3]:
        near_text = (np.abs(text[1] - x) < 40) & (np.abs(text[0] - y) < 25)
        assert near_text.sum() > 3, (x, y)


def test_the_report_frames_the_3d_box_to_fill_its_figure_whatever_the_zoom_on_screen(qtbot, window, tmp_path,
                                                                                     monkeypatch, artifacts):
    from orbitdesk.app.plots.plot_style import SCENE_BACKGROUND

    from .conftest import load_model

    load_model(qtbot, window.session, "x' = -y\ny' = x\nz' = -z\nx(0) = 1\nz(0) = 1\n",
               {"t_end": 20.0, "samples": 2000})
    window.view_docks["phase_space_3d"].show()  # opened for this project (a view of a project before is not in its report)
    view = window.ensure_view("phase_space_3d")
    qtbot.wait(200)
    far = {"distance": 90.0, "elevation": 25.0, "azimuth": -50.0, "center": [1.0, -2.0, 0.5], "fov": 60.0}
    view.set_camera(far)  # zoomed far out and moved aside on screen: the box is a small thing off centre
    html = write_report(qtbot, window, monkeypatch, tmp_path / "far.html")
    assert view.camera() == far  # the camera on screen stays where the user put it
    image = next(im for caption, im in report_images(html).items() if caption.startswith("Phase space 3D"))
    image.save(f"{artifacts}/report_3d_framed.png")
    with open(f"{artifacts}/report_3d_framed.html", "w", encoding="utf-8") as out:
        out.write(html)
    assert (image.width(), image.height()) == REPORT_SIZE
    rgb = pixels(image)
    rows, cols = np.nonzero(np.abs(rgb - np.array(SCENE_BACKGROUND[:3])).sum(axis=2) > 40)  # box, grid, line, text
    w, h = REPORT_SIZE
    # the box with its numbers and names fills the figure's height (the tighter side here) and sits in its middle
    assert np.ptp(rows) > 0.8 * h and np.ptp(cols) > 0.45 * w
    assert rows.min() > 0.01 * h and rows.max() < 0.99 * h  # nothing cut off at the edges
    assert abs((cols.min() + cols.max()) / 2 - w / 2) < 0.1 * w and abs((rows.min() + rows.max()) / 2 - h / 2) < 0.1 * h
    # the same camera as on screen, unframed, shows the box small: what the report showed before
    from orbitdesk.app.plots.figures import scene_image

    small = pixels(scene_image(view, w, h))
    rows, cols = np.nonzero(np.abs(small - np.array(SCENE_BACKGROUND[:3])).sum(axis=2) > 40)
    assert np.ptp(rows) < 0.5 * h


def test_report_gives_the_orbit_diagram_and_its_numbers(qtbot, window, tmp_path, monkeypatch):
    from .conftest import load_model

    load_model(qtbot, window.session, "x[n+1] = r*x*(1 - x)\nr = 3.2 in [2.5, 4]\nx[0] = 0.3\n", {"steps": 300})
    window.view_docks["sweep"].show()
    sweep = window.ensure_view("sweep")
    sweep.set_range("r", 2.8, 3.4, 61)
    sweep.lyapunov.setChecked(True)
    with qtbot.waitSignal(sweep.sweepChanged, timeout=60000):
        sweep.run()
    window.view_docks["sweep"].hide()  # closed before the report: its results still go in
    html = write_report(qtbot, window, monkeypatch, tmp_path / "logistic.html")
    section = html[html.index("<h3>Parameter sweep</h3>"):]
    assert "61 values from 2.8 to 3.4" in section
    # the logistic map's first period doubling is at r = 3 (May 1976, Nature 261: 459): the largest
    # exponent is negative on both sides and the orbit is periodic, so no value is chaotic
    assert "positive (chaotic) at 0 of 61 values" in section
    images = report_images(html)
    diagram = [c for c in images if c.startswith("Parameter sweep") or c.startswith("Sweep")]
    assert diagram, list(images)
    assert all((images[c].width(), images[c].height()) == REPORT_SIZE for c in diagram)


def test_views_of_a_project_before_are_left_out_of_the_next_ones_report(qtbot, window, tmp_path):
    """The bracket sample's report showed a 3D figure of x, x', t and a section nobody made for it: views
    made for the convection loop before, closed in the bracket's layout, still drawn from the new run. A
    report holds the views the open project uses: open in its layout, or opened while it is open."""
    from .test_main_window import open_model

    open_spring(qtbot, window, tmp_path)
    window.show_view("phase_space_3d")
    qtbot.waitUntil(lambda: any(c.startswith("Phase space 3D") for c in exports.view_figures(window)),
                    timeout=60000)
    open_model(qtbot, window, tmp_path, "k = 1\nu' = -k*u\nu(0) = 1\n", "decay.txt")
    assert not window.view_docks["phase_space_3d"].toggleViewAction().isChecked()  # its layout: the default
    captions = list(exports.view_figures(window))
    assert captions and not any(c.startswith("Phase space 3D") for c in captions), captions
    window.show_view("phase_space_3d")  # opened for this project: in its report again
    qtbot.waitUntil(lambda: any(c.startswith("Phase space 3D") for c in exports.view_figures(window)),
                    timeout=60000)
