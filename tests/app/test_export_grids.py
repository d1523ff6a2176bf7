"""Exported pictures of the coloured grids (two-parameter maps, basins) as a person sees them: the map's cells
and its colour bar are in the PNG and the SVG, where the plot on screen has them (the first exports held only
the axes and the parameter marker: the image and its colour bar were not copied)."""

import numpy as np
from PySide6.QtCore import QSize
from PySide6.QtGui import QImage

from orbitdesk.app.plots import figures
from orbitdesk.samples.models import HENON_REF, model

from .conftest import load_model, open_view
from .test_plot_export import on_screen, pixels, svg_image
from .test_view_basins import wells

HENON = model(HENON_REF, ranges={'a': (0, 1.4), 'b': (0, 0.4)})


def period_map(qtbot, session):
    view = open_view(qtbot, session, "parameter_map", (900, 600))
    load_model(qtbot, session, HENON, dict(steps=200))
    view.apply_view_settings({"what": "period", "x": {"parameter": "a", "from": 0.0, "to": 1.4, "count": 36},
                              "y": {"parameter": "b", "from": 0.0, "to": 0.4, "count": 11},
                              "transient": 2000, "max_period": 16})
    with qtbot.waitSignal(view.resultChanged, timeout=60000, check_params_cb=lambda r: r is not None):
        view.compute()
        # while it computes, the empty plot already spans the grid asked for, with its parameters' names
        (x0, x1), (y0, y1) = view.plot.getViewBox().viewRange()
        assert x0 < 0.0 < 1.4 < x1 < 1.5 and y0 < 0.0 < 0.4 < y1 < 0.45
        assert view.plot.getAxis("bottom").labelText == "a" and view.plot.getAxis("left").labelText == "b"
    return view


def bar_box(widget, bar):
    """The colour bar's gradient as a rectangle of the widget's pixels: (top, bottom, left, right)."""
    rect = bar.mapRectToScene(bar.getViewBox().boundingRect())
    top, bottom = widget.mapFromScene(rect.topLeft()), widget.mapFromScene(rect.bottomRight())
    return top.y(), bottom.y(), top.x(), bottom.x()


def screen_with_its_bar(qtbot, view):
    """The plot as the screen shows it, once the colour bar beside it is painted and its place has settled (the
    bar's tick texts are laid out after the first paint and move it some 10 px; a loaded machine grabbed the
    widget before that, and the exported picture, made after, was compared with a place it no longer had)."""
    widget, shot = view.plot_widget, {"boxes": []}

    def painted():
        box = bar_box(widget, view.colour_bar)
        top, bottom, left, right = box
        rgb = pixels(widget.grab().toImage().scaled(QSize(widget.width(), widget.height())))
        strip = rgb[top + 5: bottom - 5, left + 3: right - 3]
        coloured = bool(strip.size) and len({tuple(c) for c in strip[:, strip.shape[1] // 2]}) > 5
        shot["boxes"] = (shot["boxes"] + [box])[-5:] if coloured else []
        shot["rgb"] = rgb
        return len(shot["boxes"]) == 5 and len(set(shot["boxes"])) == 1  # the same place in five grabs

    qtbot.waitUntil(painted, timeout=20000)
    return shot["rgb"]


def doubling_column(rgb, widget, b):
    """Along the row of ``b``, the first column whose colour leaves the period-1 band's colour (read at a = 0.2)."""
    col0, row = (int(round(v)) for v in on_screen(widget, 0.2, b))
    one = rgb[row, col0]
    right, _ = on_screen(widget, 1.4, b)
    for col in range(col0, int(right)):
        if np.abs(rgb[row, col] - one).sum() > 60:
            return col
    return None


def test_an_exported_period_map_shows_its_cells_and_colour_bar_where_the_screen_does(qtbot, session, tmp_path,
                                                                                      artifacts):
    view = period_map(qtbot, session)
    widget = view.plot_widget
    w, h = widget.width(), widget.height()
    screen = screen_with_its_bar(qtbot, view)
    widget.grab().save(f"{artifacts}/screen_period_map.png")
    png, svg = tmp_path / "map.png", tmp_path / "map.svg"
    assert figures.save_plot(view.plot, png, w, h, host=view)
    assert figures.save_plot(view.plot, svg, w, h, host=view)
    QImage(str(png)).save(f"{artifacts}/export_period_map.png")
    for image in (QImage(str(png)), svg_image(svg, QSize(w, h))):
        assert (image.width(), image.height()) == (w, h)
        rgb = pixels(image)
        # the cells: the Henon map's fixed point doubles at a = 3 (1 - b)^2 / 4 (closed form); the colour
        # changes there in the exported picture, at the column the screen has for that value (one cell wide)
        cell = on_screen(widget, 1.4 / 35, 0)[0] - on_screen(widget, 0.0, 0)[0]
        for b in (0.08, 0.2, 0.32):
            col = doubling_column(rgb, widget, b)
            assert col is not None, b
            expected, _ = on_screen(widget, 3 * (1 - b) ** 2 / 4, b)
            assert abs(col - expected) <= 1.5 * cell, (b, col, expected)
        # the picture matches the screen over the map (the cells' colours, not only the axes)
        (x0, y0), (x1, y1) = on_screen(widget, 0.05, 0.38), on_screen(widget, 1.35, 0.02)
        inside = (slice(int(y0), int(y1)), slice(int(x0), int(x1)))
        assert np.mean(np.abs(rgb[inside] - screen[inside]).sum(axis=2) < 40) > 0.95
        # the colour bar beside the map: a strip of the bar's colours right of the plot, its tick texts and name
        top, bottom, left, right = bar_box(widget, view.colour_bar)
        strip = rgb[top + 5: bottom - 5, left + 3: right - 3]
        assert strip.size and np.abs(strip - screen[top + 5: bottom - 5, left + 3: right - 3]).sum(axis=2).mean() < 30
        assert len({tuple(c) for c in strip[:, strip.shape[1] // 2]}) > 5  # a range of colours, not a blank
        right = rgb[top:bottom, right + 4:]
        assert (right.sum(axis=2) < 300).sum() > 100  # the tick texts and the bar's name are drawn


def test_an_exported_basin_map_has_its_cells_and_a_key_naming_each_attractor(qtbot, session, tmp_path, artifacts):
    view = wells(qtbot, session, 30, 24, False)  # x'' = -0.3 x' + x - x^3: stable foci at x = +-1 (closed form)
    qtbot.wait(100)
    r = view.result
    w, h = 900, 640
    png, svg = tmp_path / "basins.png", tmp_path / "basins.svg"
    assert figures.save_plot(view.plot, png, w, h, host=view)
    assert figures.save_plot(view.plot, svg, w, h, host=view)
    QImage(str(png)).save(f"{artifacts}/export_basins.png")
    key = view.figure_legend()
    assert [text.split(" near ")[0] for _c, text in key] == ["equilibrium", "equilibrium"]
    for image in (QImage(str(png)), svg_image(svg, QSize(w, h))):
        rgb = pixels(image)
        # each well's colour covers about its share of the map (the cells are in the picture), and the rest of
        # the picture is the key under the axes: a square of each colour below the map's lowest coloured row
        for a in r.attractors:
            c = view.colour_of(a["label"])
            rows, cols = np.nonzero(np.abs(rgb - np.array([c.red(), c.green(), c.blue()])).sum(axis=2) < 30)
            body = rows < 0.8 * h
            assert body.sum() > 0.5 * a["share"] * (0.7 * w) * (0.6 * h), a["centre"]
            square = rows > rows[body].max() + 20
            assert 20 <= square.sum() <= 400, a["centre"]  # one small square in the key
        # the key's words are drawn under the map in the text colour
        assert (rgb[int(0.88 * h):].sum(axis=2) < 200).sum() > 200


def test_a_basin_maps_csv_reads_back_with_whole_attractor_numbers(qtbot, session, tmp_path):
    import csv

    from orbitdesk.app.exports import export_data

    view = wells(qtbot, session, 12, 10, False)  # x'' = -0.3 x' + x - x^3: two wells (closed form)
    path = tmp_path / "basins.csv"
    assert export_data(None, path, view)
    with open(path, newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))
    assert rows[0] == ["x", "x'", "attractor (-1: escape)"] and len(rows) == 1 + 12 * 10
    labels = [r[2] for r in rows[1:]]
    assert set(labels) == {"0", "1"}  # the attractor's number as written in the legend, not 0.0 and 1.0
    assert [int(v) for v in labels] == view.result.labels.ravel().tolist()
    assert float(rows[1][0]) == -2.0 and float(rows[-1][1]) == 2.0


def test_the_colour_bar_is_named_as_long_as_its_height_allows(qtbot, session):
    view = period_map(qtbot, session)
    axis = view.colour_bar.getAxis("right")
    assert axis.labelText == "period (iterations)"  # a tall map: the whole name
    view.resize(900, 250)
    qtbot.waitUntil(lambda: axis.labelText == "period", timeout=5000)  # a short one: the name fits beside it
    assert axis.label.boundingRect().width() <= view.colour_bar.getViewBox().height()
    widget = figures.copy_plot(view.plot, 900, 640, host=view)  # a tall figure of it: the whole name again
    try:
        bar = figures._colour_bar(widget.getPlotItem())
        assert bar.getAxis("right").labelText == "period (iterations)"
    finally:
        figures._finish(widget)
