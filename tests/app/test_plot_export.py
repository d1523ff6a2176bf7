"""Exported plots as a person sees them: the PNG and SVG are opened as images and the curve's extremes
and the axis tick labels must land where the plot on screen has them; other sizes keep the view range;
the plot export names the view and can pick any view's plot."""

import numpy as np
import pytest
from PySide6.QtCore import QPointF, QSize
from PySide6.QtGui import QColor, QImage, QPainter

from orbitdesk.app.views import series_colour

from .test_main_window import OSCILLATOR, open_model


def pixels(image: QImage) -> np.ndarray:
    """(height, width, 3) RGB array of an image."""
    image = image.convertToFormat(QImage.Format.Format_RGB32)
    w, h = image.width(), image.height()
    data = np.frombuffer(image.constBits(), dtype=np.uint8, count=image.bytesPerLine() * h)
    return data.reshape(h, image.bytesPerLine() // 4, 4)[:, :w, 2::-1].astype(int)


def near(rgb: np.ndarray, colour: QColor, tol: int = 70) -> np.ndarray:
    target = np.array([colour.red(), colour.green(), colour.blue()])
    return np.abs(rgb - target).sum(axis=2) < tol


def svg_image(path, size: QSize) -> QImage:
    from PySide6.QtSvg import QSvgRenderer

    renderer = QSvgRenderer(str(path))
    assert renderer.isValid()
    image = QImage(size, QImage.Format.Format_RGB32)
    image.fill(QColor("white"))
    painter = QPainter(image)
    renderer.render(painter)
    painter.end()
    return image


def on_screen(plot_widget, x, y):
    """Widget pixel of the data point (x, y) in the plot as it is on screen."""
    vb = plot_widget.getPlotItem().getViewBox()
    p = plot_widget.mapFromScene(vb.mapViewToScene(QPointF(x, y)))
    return p.x(), p.y()


def check_against_screen(image: QImage, view, curve_name: str, colour: QColor):
    """The curve's extremes and the bottom axis's tick labels in ``image`` sit where the plot on screen
    has them, within 3 pixels (labels: centred on their tick within 8)."""
    widget = view.plot_widget
    assert (image.width(), image.height()) == (widget.width(), widget.height())
    rgb = pixels(image)
    traj = view.trajectory
    t, x = traj.time, traj.series(curve_name)
    mask = near(rgb, colour)
    rows, cols = np.nonzero(mask)
    assert rows.size > 100, "the curve is not in the picture"
    # x = cos(2 t): its largest value 1 is at the top of the curve, its smallest -1 at the bottom,
    # and the run spans t_start..t_end from left to right (closed form of the oscillator)
    _, top = on_screen(widget, 0.0, 1.0)
    _, bottom = on_screen(widget, 0.0, -1.0)
    left, _ = on_screen(widget, t[0], 0.0)
    right, _ = on_screen(widget, t[-1], 0.0)
    assert rows.min() == pytest.approx(top, abs=3)
    assert rows.max() == pytest.approx(bottom, abs=3)
    assert cols.min() == pytest.approx(left, abs=3)
    assert cols.max() == pytest.approx(right, abs=3)
    assert float(np.max(x)) == pytest.approx(1.0, abs=1e-3)
    # the tick labels of the bottom axis: dark text centred under each tick, at the screen's columns
    plot = widget.getPlotItem()
    axis = plot.getAxis("bottom")
    axis_top = widget.mapFromScene(plot.mapRectToScene(axis.geometry()).topLeft()).y()  # (not its grid)
    strip = rgb[axis_top + 4: axis_top + 24]
    text = strip.sum(axis=2) < 250
    (x0, x1), _ = plot.getViewBox().viewRange()
    ticks = [v for _spacing, values in axis.tickValues(x0, x1, widget.width())[:1] for v in values]
    assert len(ticks) >= 3
    for value in ticks:
        col, _ = on_screen(widget, value, 0.0)
        if not 10 < col < widget.width() - 10:
            continue
        dark = np.nonzero(text[:, max(0, col - 8): col + 9].any(axis=0))[0]
        assert dark.size, f"no tick label under {value}"
        centre = max(0, col - 8) + (dark.min() + dark.max()) / 2
        assert centre == pytest.approx(col, abs=4)


@pytest.fixture
def oscillator(qtbot, window, tmp_path):
    open_model(qtbot, window, tmp_path, OSCILLATOR, t_end=10.0, samples=4000)
    view = window.views["timeseries"]
    view.set_series(["x"])
    qtbot.wait(50)
    return view


def test_png_export_matches_the_plot_on_screen(qtbot, window, tmp_path, oscillator):
    path = tmp_path / "plot.png"
    assert window.export_plot(path, oscillator)
    check_against_screen(QImage(str(path)), oscillator, "x", series_colour(0, oscillator))


def test_svg_export_matches_the_plot_on_screen(qtbot, window, tmp_path, oscillator):
    path = tmp_path / "plot.svg"
    assert window.export_plot(path, oscillator)
    widget = oscillator.plot_widget
    image = svg_image(path, QSize(widget.width(), widget.height()))
    check_against_screen(image, oscillator, "x", series_colour(0, oscillator))


def test_export_at_another_size_keeps_the_view_range(qtbot, window, tmp_path, oscillator):
    path = tmp_path / "big.png"
    assert window.export_plot(path, oscillator, size=(1500, 900))
    image = QImage(str(path))
    assert (image.width(), image.height()) == (1500, 900)
    rows, cols = np.nonzero(near(pixels(image), series_colour(0, oscillator)))
    # the same view range over a wider plot area: the curve spans the same fraction of it, and the
    # whole picture, not a corner (the curve reaches the right half and the lower half)
    assert cols.max() > 1500 * 0.8 and rows.max() > 900 * 0.6
    assert cols.max() - cols.min() > 1500 * 0.8


def test_a_view_behind_a_tab_exports_at_a_readable_size(qtbot, window, tmp_path, oscillator):
    dock = window.view_docks["timeseries"]
    dock.hide()
    path = tmp_path / "hidden.png"
    assert window.export_plot(path, oscillator)
    image = QImage(str(path))
    assert image.width() >= 800 and image.height() >= 450
    assert near(pixels(image), series_colour(0, oscillator)).sum() > 200


def test_the_export_form_names_each_plot_and_exports_the_one_picked(qtbot, window, tmp_path, oscillator):
    from orbitdesk.app.plots.figures import ExportPlotDialog

    window.ensure_view("sections")
    form = ExportPlotDialog(window, "svg")
    captions = [c.caption for c in form.choices]
    assert "Time series: x against t" in captions
    assert any(c.startswith("Phase plane: x' against x") for c in captions)
    assert any(c.startswith("Poincaré section") for c in captions)
    assert form.choice.view is window.active_view()  # starts on the view the user worked in
    form.plot_combo.setCurrentIndex(next(i for i, c in enumerate(captions) if c.startswith("Phase plane")))
    form.width.setValue(640)
    form.height.setValue(480)
    path = tmp_path / "pp.svg"
    assert form.kind == "svg" and form.export(path)
    image = svg_image(path, QSize(640, 480))
    # the phase plane's orbit x^2 + (x'/2)^2 = 1 (closed form) is drawn: its colour covers both halves
    rows, cols = np.nonzero(near(pixels(image), series_colour(0, oscillator)))
    assert cols.min() < 320 < cols.max() and rows.min() < 240 < rows.max()


def test_every_plot_has_an_export_menu(qtbot, window, oscillator):
    from PySide6.QtCore import Qt

    for view in window.views.values():
        for widget in view.findChildren(type(oscillator.plot_widget)):
            assert widget.contextMenuPolicy() == Qt.ContextMenuPolicy.CustomContextMenu


def test_the_3d_scene_exports_as_a_picture_of_the_size_picked(qtbot, window, tmp_path, oscillator):
    from orbitdesk.app.plots.figures import ExportPlotDialog

    window.show_view("phase_space_3d")
    qtbot.wait(200)
    form = ExportPlotDialog(window, "png")
    scene = [i for i, c in enumerate(form.choices) if c.plot is None]
    assert scene and form.choices[scene[0]].caption.startswith("Phase space 3D")
    form.plot_combo.setCurrentIndex(scene[0])
    assert not form.legend.isEnabled()
    form.width.setValue(700)
    form.height.setValue(500)
    path = tmp_path / "scene.png"
    assert form.export(path)
    image = QImage(str(path))
    assert (image.width(), image.height()) == (700, 500)
    rgb = pixels(image)
    assert ((rgb.max(axis=2) - rgb.min(axis=2)) > 60).sum() > 100  # the coloured orbit on the dark scene
    # at a size other than the screen's, the box with its labels fills the picture (it was a small box in a void)
    from orbitdesk.app.plots.plot_style import SCENE_BACKGROUND

    rows, cols = np.nonzero(np.abs(rgb - np.array(SCENE_BACKGROUND[:3])).sum(axis=2) > 40)
    assert np.ptp(rows) > 0.75 * 500 or np.ptp(cols) > 0.75 * 700


def test_an_exported_single_series_names_what_it_plots(qtbot, window, tmp_path, oscillator):
    """A time series of one series exported on its own (File > Export, or the report) says which series it
    is: the name on its vertical axis, as on screen (several series get a legend instead). Seen on the flap
    sample's exported time series: a curve with numbers and no name."""
    import xml.etree.ElementTree as ET

    path = tmp_path / "plot.svg"
    assert window.export_plot(path, oscillator)
    texts = ["".join(e.itertext()).strip() for e in ET.parse(path).iter() if e.tag.endswith("text")]
    assert "x" in texts and "t" in texts  # both axes named in the file a person opens
    png = tmp_path / "plot.png"
    assert window.export_plot(png, oscillator)
    check_against_screen(QImage(str(png)), oscillator, "x", series_colour(0, oscillator))  # still where the screen has it
    oscillator.set_series(["x", "x'"])
    qtbot.waitUntil(lambda: oscillator.plot.getAxis("left").labelText == "")


def test_labels_in_the_plot_and_named_markers_come_along(qtbot, tmp_path):
    """The bifurcation diagram names its special points with text in the plot ("fold") and its stepped sweeps
    with named markers: an exported picture keeps both (they were missing from the shaken beam's exported
    frequency response: two unnamed diamonds and a legend without the triangles)."""
    import xml.etree.ElementTree as ET

    import pyqtgraph as pg

    from orbitdesk.app.plots import figures

    widget = pg.PlotWidget()
    qtbot.addWidget(widget)
    widget.resize(600, 400)
    plot = widget.getPlotItem()
    plot.addItem(pg.PlotDataItem([0, 1, 2], [0, 1, 0], name="response, stable"))
    plot.addItem(pg.PlotDataItem([0, 1, 2], [1, 0, 1], name="response, unstable"))
    plot.addItem(pg.ScatterPlotItem(x=[0.5, 1.5], y=[0.5, 0.5], symbol="t1", name="stepped up"))
    label = pg.TextItem("fold", anchor=(0, 1))
    label.setPos(1.0, 1.0)
    plot.addItem(label)
    path = tmp_path / "diagram.svg"
    assert figures.save_plot(plot, path, 600, 400, legend=figures.has_named_curves(plot))
    texts = {"".join(e.itertext()).strip() for e in ET.parse(path).iter() if e.tag.endswith("text")}
    assert {"fold", "stepped up", "response, stable"} <= texts
    copy = figures.copy_plot(plot, 600, 400)
    placed = [i for i in copy.getPlotItem().items if isinstance(i, pg.TextItem)]
    assert [(i.toPlainText(), i.pos().x(), i.pos().y()) for i in placed] == [("fold", 1.0, 1.0)]


def test_an_exported_svg_names_fonts_every_viewer_knows(qtbot, window, tmp_path, oscillator):
    """Qt names its default face "Sans Serif", which browsers do not know: Chromium drew the axis names and the
    legend of an exported SVG in a serif face. Every text of the file lists a CSS generic family last, after
    the face the app drew with."""
    import xml.etree.ElementTree as ET

    from PySide6.QtGui import QFontInfo

    path = tmp_path / "plot.svg"
    assert window.export_plot(path, oscillator)
    texts = [e for e in ET.parse(path).iter() if e.tag.endswith("text")]
    assert texts
    face = QFontInfo(oscillator.plot_widget.font()).family()
    for e in texts:
        families = [f.strip() for f in e.get("font-family").split(",")]
        assert families[-1] in ("sans-serif", "serif", "monospace") and face in families
    widget = oscillator.plot_widget  # and the picture is the same as before
    check_against_screen(svg_image(path, QSize(widget.width(), widget.height())), oscillator, "x",
                         series_colour(0, oscillator))
