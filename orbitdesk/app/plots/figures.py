"""Pictures of plots at a size the user picks, drawn off screen from what each plot holds.

A view's plot is copied into a fresh pyqtgraph PlotWidget that is never shown on screen (the curves'
full data, scatter points, guide lines, axis labels, log scales and the exact view range), laid out
at the asked size, and painted into a QImage (PNG) or a QSvgGenerator (SVG) at one pixel per unit.
Whether the view is in sight, behind a tab or collapsed does not matter, and nothing on screen moves.
The same copies make the figures of the HTML report (``exports.view_figures``) and of
``orbitdesk export --report`` on the command line (``report_figures``).
"""

from __future__ import annotations

import html
import re
from dataclasses import dataclass

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QBuffer, QByteArray, QIODevice, QRect, QRectF, QSize, Qt, QTimer
from PySide6.QtGui import QFontInfo, QImage, QPainter
from PySide6.QtWidgets import QApplication

from orbitdesk.app.plots.plot_style import ScreenCurve
from orbitdesk.app.plots.legends import place_legend

REPORT_SIZE = (960, 560)       # every report figure, whatever the size of its view on screen
_CURVE_OPTIONS = ("pen", "shadowPen", "symbol", "symbolSize", "symbolPen", "symbolBrush", "connect",
                  "fillLevel", "fillBrush", "stepMode", "antialias", "name")


@dataclass
class PlotChoice:
    """One plot of one view: the view, its plot item and a caption saying which it is."""

    module: str
    view: object
    plot: object   # pg.PlotItem
    caption: str


def view_plots(view, module: str = "") -> list[PlotChoice]:
    """The plots of a view that its current mode shows (hidden only by the view's own mode: a view behind
    a tab still counts), each with a caption naming the view and what its axes show."""
    widgets = [w for w in view.findChildren(pg.PlotWidget) if w.isVisibleTo(view) or not view.isVisible()
               and not w.isHidden()]
    title = getattr(view, "title", "Plot")
    out = []
    for w in widgets:
        item = w.getPlotItem()
        x, y = axis_text(item, "bottom"), axis_text(item, "left") or ", ".join(curve_names(item))
        what = f"{y} against {x}" if x and y else x or y
        caption = f"{title}: {what}" if what else title
        out.append(PlotChoice(module or getattr(view, "view_id", ""), view, item, caption))
    return out


def axis_text(plot_item, name: str) -> str:
    axis = plot_item.getAxis(name)
    if not axis.isVisible() or not axis.labelText:
        return ""
    return f"{axis.labelText} ({axis.labelUnits})" if axis.labelUnits else str(axis.labelText)


# ---------------------------------------------------------------- copying a plot
def _copy_curve(item):
    x, y = item.getOriginalDataset()
    if x is None or y is None:
        return None
    if isinstance(item, ScreenCurve):
        copy = ScreenCurve(ordered_x=item._ordered_x)
    else:
        copy = pg.PlotDataItem()
    copy.setData(np.asarray(x), np.asarray(y), **{k: item.opts[k] for k in _CURVE_OPTIONS if k in item.opts})
    return copy


def _copy_scatter(item):
    d = item.data
    if d.size == 0:
        return None
    default_pen, default_brush = item.opts["pen"], item.opts["brush"]
    pens = [p if p is not None else default_pen for p in d["pen"]]
    brushes = [b if b is not None else default_brush for b in d["brush"]]
    sizes = np.where(d["size"] < 0, item.opts["size"], d["size"])
    symbols = [s if s is not None else item.opts["symbol"] for s in d["symbol"]]
    return pg.ScatterPlotItem(x=d["x"].copy(), y=d["y"].copy(), size=sizes, symbol=symbols, pen=pens,
                              brush=brushes, pxMode=item.opts["pxMode"], name=item.name())


def _copy_text(item):
    """A label placed in the data (the name of a special point): same text, colour, font, anchor, place."""
    copy = pg.TextItem(item.toPlainText(), color=item.color, anchor=(item.anchor[0], item.anchor[1]))
    copy.setFont(item.textItem.font())
    copy.setPos(item.pos())
    return copy


def _copy_image(item):
    """A coloured grid (basins, two-parameter maps): the same values, colours, levels and place."""
    if item.image is None:
        return None
    copy = pg.ImageItem(axisOrder=item.axisOrder)
    copy.setImage(np.array(item.image), autoLevels=False, levels=item.getLevels())
    cmap = item.getColorMap()
    if cmap is not None:
        copy.setColorMap(cmap)
    elif item.lut is not None:
        copy.setLookupTable(item.lut)
    copy.setTransform(item.transform())
    copy.setPos(item.pos())
    return copy


def _colour_bar(plot_item):
    """The colour bar a view put beside its plot (``ColorBarItem.setImageItem(..., insert_in=plot)``), or None."""
    layout = plot_item.layout
    for i in range(layout.count()):
        item = layout.itemAt(i)
        if isinstance(item, pg.ColorBarItem) and item.isVisible():
            return item
    return None


def _copy_colour_bar(source_bar, plot, image) -> None:
    """The colour bar beside the copied plot: same colours, levels, tick texts, name and axis width."""
    bar = pg.ColorBarItem(values=tuple(source_bar.levels()), width=source_bar.layout.columnMaximumWidth(1),
                          colorMap=source_bar.colorMap(), interactive=False, colorMapMenu=False)
    src_axis, axis = source_bar.getAxis("right"), bar.getAxis("right")
    axis.enableAutoSIPrefix(False)
    ticks = src_axis._tickLevels
    if ticks is not None:
        axis.setTicks(ticks)
    axis.setWidth(int(src_axis.width()))
    if src_axis.labelText:
        axis.setLabel(src_axis.labelText, units=src_axis.labelUnits or None)
    for name in ("left", "bottom", "right", "top"):
        bar.getAxis(name).setPen(source_bar.getAxis(name).pen())
        bar.getAxis(name).setTextPen(source_bar.getAxis(name).textPen())
    bar.setImageItem(image, insert_in=plot)
    bar.setLevels(tuple(source_bar.levels()))
    return bar


def _copy_item(item):
    if not item.isVisible() or getattr(item, "_plot_tool", False):  # readout marks stay on screen
        return None
    if isinstance(item, pg.ImageItem):
        return _copy_image(item)
    if isinstance(item, pg.PlotDataItem):
        return _copy_curve(item)
    if isinstance(item, pg.ScatterPlotItem):
        return _copy_scatter(item)
    if isinstance(item, pg.InfiniteLine):
        return pg.InfiniteLine(pos=item.value(), angle=item.angle, pen=item.pen)
    if isinstance(item, pg.TextItem):
        return _copy_text(item)
    return None


def copy_plot(source, width: int, height: int, legend: bool = False, host=None, fit: bool = False) -> pg.PlotWidget:
    """A PlotWidget, never shown on screen, holding a copy of the PlotItem ``source`` laid out at
    ``width`` x ``height`` pixels with the same view range, or (``fit``) a range fitted to the data the
    source fits to (and a legend of the named curves)."""
    from orbitdesk.app.plots.plot_style import style_plot

    widget = pg.PlotWidget()
    widget.setAttribute(Qt.WidgetAttribute.WA_DontShowOnScreen, True)
    widget.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose, True)
    host = host or source.getViewWidget()
    if host is not None:
        widget.setPalette(host.palette())
        widget.setFont(host.font())
    style_plot(widget, host)
    plot = widget.getPlotItem()
    for name in ("left", "bottom", "top", "right"):
        axis = source.getAxis(name)
        plot.showAxis(name, axis.isVisible())
        if axis.isVisible() and axis.labelText:
            plot.setLabel(name, axis.labelText, units=axis.labelUnits or None)
    plot.setLogMode(x=bool(source.getAxis("bottom").logMode), y=bool(source.getAxis("left").logMode))
    if legend:
        plot.addLegend(offset=(-12, 12), labelTextColor=widget.palette().color(widget.foregroundRole()))
    bounded = source.getViewBox().addedItems
    source_bar, bar = _colour_bar(source), None
    for item in source.items:
        copy = _copy_item(item)
        if copy is None:
            continue
        copy.setZValue(item.zValue())
        plot.addItem(copy, ignoreBounds=item not in bounded)
        if source_bar is not None and isinstance(copy, pg.ImageItem) and item in [r() for r in source_bar.img_list]:
            bar = _copy_colour_bar(source_bar, plot, copy)
    key = getattr(host, "figure_legend", None)
    if key is not None and source is getattr(host, "plot", None):
        _key_below(plot, key(), widget)
    vb = plot.getViewBox()
    (x0, x1), (y0, y1) = source.getViewBox().viewRange()
    # the range is set before the first layout too: axes widen for the widest tick text they ever drew
    if fit:
        vb.autoRange()
    else:
        vb.disableAutoRange()
        vb.setRange(xRange=(x0, x1), yRange=(y0, y1), padding=0)
    _lay_out(widget, width, height)
    if bar is not None and hasattr(host, "bar_names"):  # the bar's name as long as this picture's bar allows
        from orbitdesk.app.plots.plot_style import name_bar

        name_bar(bar, host.bar_names())
        _lay_out(widget, width, height)
    if fit:
        vb.autoRange()
    else:
        vb.setRange(xRange=(x0, x1), yRange=(y0, y1), padding=0)
    if legend:
        place_legend(plot, make_room=True)  # where it covers the least of the curves
    return widget


def _key_below(plot, entries, widget) -> None:
    """A key of coloured squares under the plot (a basin map's attractors): ``entries`` of (QColor, words),
    in up to two columns, in the figure's text colour."""
    if not entries:
        return
    colour = widget.palette().color(widget.foregroundRole())
    key = pg.LegendItem(colCount=2 if len(entries) > 3 else 1, labelTextColor=colour, labelTextSize="9pt",
                        brush=None, pen=None)
    for c, text in entries:
        key.addItem(pg.ScatterPlotItem(symbol="s", size=10, brush=pg.mkBrush(c), pen=pg.mkPen(c.darker(140))), text)
    plot.layout.addItem(key, 5, 1)
    plot.layout.setRowFixedHeight(5, key.boundingRect().height() + 6)


def _lay_out(widget, width: int, height: int) -> None:
    widget.resize(int(width), int(height))
    widget.show()  # WA_DontShowOnScreen: laid out and resized, never mapped
    QApplication.sendPostedEvents()
    widget.getPlotItem().getViewBox().updateViewRange()
    QApplication.sendPostedEvents()


def _finish(widget) -> None:
    widget.hide()
    widget.close()


# ---------------------------------------------------------------- pictures
def plot_image(source, width: int, height: int, legend: bool = False, host=None, fit: bool = False) -> QImage:
    """The plot ``source`` (a PlotItem) as a ``width`` x ``height`` image, one pixel per unit (``fit``:
    the range fitted to the data rather than as on screen)."""
    widget = copy_plot(source, width, height, legend, host, fit)
    try:
        image = QImage(QSize(int(width), int(height)), QImage.Format.Format_ARGB32_Premultiplied)
        image.setDevicePixelRatio(1.0)
        image.fill(widget.backgroundBrush().color())
        painter = QPainter(image)
        painter.setRenderHint(QPainter.RenderHint.Antialiasing)
        widget.render(painter, QRectF(0, 0, width, height), QRect(0, 0, int(width), int(height)))
        painter.end()
    finally:
        _finish(widget)
    return image


def plot_svg(source, width: int, height: int, legend: bool = False, host=None, title: str = "") -> bytes:
    """The plot ``source`` as an SVG drawing of ``width`` x ``height`` (user units = pixels)."""
    from PySide6.QtSvg import QSvgGenerator

    widget = copy_plot(source, width, height, legend, host)
    data = QByteArray()
    buffer = QBuffer(data)
    buffer.open(QIODevice.OpenModeFlag.WriteOnly)
    try:
        gen = QSvgGenerator()
        gen.setOutputDevice(buffer)
        gen.setSize(QSize(int(width), int(height)))
        gen.setViewBox(QRect(0, 0, int(width), int(height)))
        # the generator's resolution must be the widget's, or text and pens are scaled against the data
        gen.setResolution(int(round(widget.logicalDpiX())))
        if title:
            gen.setTitle(title)
        painter = QPainter(gen)
        widget.render(painter, QRectF(0, 0, width, height), QRect(0, 0, int(width), int(height)))
        painter.end()
        family = QFontInfo(widget.font()).family()
    finally:
        buffer.close()
        _finish(widget)
    return with_css_families(bytes(data), family)


def with_css_families(svg: bytes, family: str) -> bytes:
    """Qt writes its own generic font names ("Sans Serif"), which browsers do not know: they drew the axis
    names and legends of an exported SVG in a serif face. Each family list gets the face the app drew with
    and the CSS generic family after it."""
    generic = {b"Sans Serif": b"sans-serif", b"Serif": b"serif", b"Monospace": b"monospace"}

    def fixed(match):
        name = match.group(1)
        tail = generic.get(name, b"sans-serif")
        face = html.escape(family.replace(",", " "), quote=True).encode("utf-8", "replace")
        return b'font-family="' + b", ".join(dict.fromkeys([name, face, tail])) + b'"'

    return re.sub(rb'font-family="([^",]*)"', fixed, svg)


def png_data(image: QImage) -> bytes:
    data = QByteArray()
    buffer = QBuffer(data)
    buffer.open(QIODevice.OpenModeFlag.WriteOnly)
    image.save(buffer, "PNG")
    buffer.close()
    return bytes(data)


def save_plot(source, path, width: int, height: int, legend: bool = False, host=None, title: str = "") -> bool:
    """Write the plot as PNG or SVG (by the suffix of ``path``); False if the file could not be written."""
    path = str(path)
    if path.lower().endswith(".svg"):
        data = plot_svg(source, width, height, legend, host, title)
    else:
        data = png_data(plot_image(source, width, height, legend, host))
    try:
        with open(path, "wb") as f:
            f.write(data)
    except OSError:
        return False
    return bool(data)


def has_data(plot_item) -> bool:
    """Whether a plot shows any data (a curve or points, not only guide lines)."""
    for item in plot_item.items:
        if not item.isVisible() or getattr(item, "_plot_tool", False):
            continue
        if isinstance(item, pg.PlotDataItem):
            x, _y = item.getOriginalDataset()
            if x is not None and len(x):
                return True
        elif isinstance(item, pg.ScatterPlotItem) and item.data.size:
            return True
        elif isinstance(item, pg.ImageItem) and item.image is not None:
            return True
    return False


def scene_image(view, width: int, height: int, framed: bool = False) -> QImage | None:
    """A 3D view's scene (``view.glview``) with its labels, rendered off screen at ``width`` x ``height``: as
    the camera on screen shows it, or ``framed`` (report figures) with the whole box filling the picture;
    None for other views or a scene that has never been drawn (no OpenGL context yet)."""
    glview = getattr(view, "glview", None)
    if glview is None or not hasattr(glview, "render_image"):
        return None
    try:
        if framed and hasattr(view, "figure_image"):
            return view.figure_image(width, height)
        return glview.render_image(width, height)
    except Exception:  # noqa: BLE001 - no offscreen framebuffer on this driver
        return None


def curve_names(plot_item) -> list[str]:
    return [str(item.name()) for item in plot_item.items
            if isinstance(item, pg.PlotDataItem) and item.name() and item.isVisible()]


def has_named_curves(plot_item) -> bool:
    return len(curve_names(plot_item)) > 1


# ---------------------------------------------------------------- choosing what to export
def all_plots(window) -> list[PlotChoice]:
    """Every plot of every view the window has created, in the order of the View menu; a 3D scene is a
    choice with ``plot`` None."""
    out = []
    for module, view in window.views.items():
        out.extend(view_plots(view, module))
        if getattr(view, "glview", None) is not None:
            axes = view.axes() if hasattr(view, "axes") else []
            title = getattr(view, "title", "3D view")
            out.append(PlotChoice(module, view, None, f"{title}: {', '.join(axes)}" if axes else title))
    return out


def save_scene(view, path, width: int, height: int, framed: bool = False) -> bool:
    """A 3D view's scene at ``width`` x ``height`` as PNG, or as SVG holding that picture (``framed``: the box
    filling the picture, see ``scene_image``)."""
    import base64

    image = scene_image(view, width, height, framed=framed)
    if image is None:
        return False
    data = png_data(image)
    if str(path).lower().endswith(".svg"):
        uri = base64.b64encode(data).decode("ascii")
        data = (f'<svg xmlns="http://www.w3.org/2000/svg" width="{int(width)}" height="{int(height)}" '
                f'viewBox="0 0 {int(width)} {int(height)}"><image width="{int(width)}" height="{int(height)}" '
                f'href="data:image/png;base64,{uri}"/></svg>\n').encode("ascii")
    try:
        with open(path, "wb") as f:
            f.write(data)
    except OSError:
        return False
    return True


def on_screen_size(plot_item) -> tuple[int, int]:
    shown = plot_item.getViewWidget()
    if shown is not None and shown.isVisible() and shown.width() >= 200 and shown.height() >= 150:
        return shown.width(), shown.height()
    return REPORT_SIZE


class ExportPlotDialog:
    """Which plot, how big, with a legend or not, PNG or SVG: a small form before the file dialog."""

    def __init__(self, window, kind: str = "png", plot=None):
        from PySide6.QtWidgets import (QCheckBox, QComboBox, QDialog, QDialogButtonBox, QFormLayout, QHBoxLayout,
                                       QLabel, QSpinBox)

        self.window = window
        self.choices = all_plots(window)
        self.dialog = QDialog(window)
        self.dialog.setWindowTitle("Export Plot")
        self.plot_combo = QComboBox()
        self.plot_combo.addItems([c.caption for c in self.choices])
        self.plot_combo.setToolTip("The plot to export, named by its view and its axes")
        self.width, self.height = QSpinBox(), QSpinBox()
        for box, tip in ((self.width, "Width in pixels"), (self.height, "Height in pixels")):
            box.setRange(100, 8000)
            box.setSuffix(" px")
            box.setToolTip(tip)
        self.legend = QCheckBox("Legend naming the curves")
        self.format = QComboBox()
        self.format.addItems(["PNG image", "SVG drawing"])
        self.format.setCurrentIndex(1 if kind == "svg" else 0)
        size_row = QHBoxLayout()
        size_row.addWidget(self.width)
        size_row.addWidget(QLabel("×"))
        size_row.addWidget(self.height)
        size_row.addStretch(1)
        form = QFormLayout(self.dialog)
        form.addRow("Plot", self.plot_combo)
        form.addRow("Size", size_row)
        form.addRow("", self.legend)
        form.addRow("Format", self.format)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel)
        buttons.button(QDialogButtonBox.StandardButton.Ok).setText("Export…")
        buttons.accepted.connect(self.dialog.accept)
        buttons.rejected.connect(self.dialog.reject)
        form.addRow(buttons)
        self.plot_combo.currentIndexChanged.connect(self._on_plot)
        start = 0
        if plot is not None:
            start = next((i for i, c in enumerate(self.choices) if c.plot is plot), 0)
        else:
            active = window.active_view()
            start = next((i for i, c in enumerate(self.choices) if c.view is active), 0)
        self.plot_combo.setCurrentIndex(start)
        self._on_plot(start)

    def _on_plot(self, index: int) -> None:
        if 0 <= index < len(self.choices):
            choice = self.choices[index]
            if choice.plot is None:  # a 3D scene: a picture, no legend
                scene = choice.view.glview
                w, h = (scene.width(), scene.height()) if scene.isVisible() else REPORT_SIZE
            else:
                w, h = on_screen_size(choice.plot)
            self.width.setValue(w)
            self.height.setValue(h)
            self.legend.setEnabled(choice.plot is not None)
            self.legend.setChecked(choice.plot is not None and has_named_curves(choice.plot))

    @property
    def choice(self) -> PlotChoice | None:
        i = self.plot_combo.currentIndex()
        return self.choices[i] if 0 <= i < len(self.choices) else None

    @property
    def kind(self) -> str:
        return "svg" if self.format.currentIndex() == 1 else "png"

    def export(self, path) -> bool:
        """Write the chosen plot to ``path`` (the suffix follows the chosen format)."""
        choice = self.choice
        if choice is None:
            return False
        return self.window.export_plot(path, choice.view, size=(self.width.value(), self.height.value()),
                                       legend=self.legend.isChecked(), plot=choice.plot)


def equip_plots(window, view) -> None:
    """Every plot of a new view gets the readout, measurement and axis names of ``plot_tools`` (names
    from the project's view settings, again on each project load) and a right-click menu: export this
    very plot as PNG or SVG, name the axes, clear the measurement."""
    from orbitdesk.app.plots import plot_tools

    plot_tools.install(view)
    session = window.session

    def apply_names(view=view):
        plot_tools.set_axis_names(view, session.project.views.get(view.view_id, {}).get(plot_tools.SETTINGS_KEY))

    apply_names()
    session.projectLoaded.connect(apply_names)
    for choice in view_plots(view):
        widget = choice.plot.getViewWidget()
        if widget is None or getattr(widget, "_export_menu", False):
            continue
        widget._export_menu = True
        widget.setContextMenuPolicy(Qt.ContextMenuPolicy.CustomContextMenu)

        def show_menu(pos, widget=widget, plot=choice.plot):
            from PySide6.QtWidgets import QMenu

            menu = QMenu(widget)
            menu.addAction("Export This Plot as PNG…", lambda: window.export_plot_dialog("png", plot=plot))
            menu.addAction("Export This Plot as SVG…", lambda: window.export_plot_dialog("svg", plot=plot))
            menu.addSeparator()
            menu.addAction("Axis Names and Units…", lambda: plot_tools.edit_axis_names(view, window))
            measured = [r for r in plot_tools.readouts(view) if r.plot is plot and r.points]
            if measured:
                menu.addAction("Clear the Measurement", measured[0].clear)
            menu.exec(widget.mapToGlobal(pos))

        widget.customContextMenuRequested.connect(show_menu)


# ---------------------------------------------------------------- the report's figures without a window
HEADLESS_VIEWS = ("timeseries", "phase_plane", "sections")  # views that draw from the run by themselves


def _wait(done, seconds: float) -> bool:
    import time

    from PySide6.QtCore import QEventLoop

    end = time.monotonic() + seconds
    while not done() and time.monotonic() < end:
        QApplication.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 50)
        time.sleep(0.005)
    return done()


def headless_report_parts(project, equilibria=None, timeout: float = 600.0):
    """(figures, (results, stale)) of the HTML report for ``project`` with no window, as the app's report makes
    them: a Session loads the project on Qt's offscreen platform (when no application runs yet and
    QT_QPA_PLATFORM names none), the views that draw from the run by themselves are made with the project's view settings
    (time series, phase plane, and the section when the project keeps settings for it), the
    equilibria go to them as the Equilibria view would send them, and ``exports.view_figures`` draws
    every plot off screen at the report's size."""
    import os
    from types import SimpleNamespace

    from orbitdesk.app.exports import view_figures
    from orbitdesk.exports.report import document_results
    from orbitdesk.app.session import Session
    from orbitdesk.app.views import DEFAULT_VISIBLE, load_view_class

    if QApplication.instance() is None:  # Qt's offscreen platform unless one is chosen (no display needed)
        QApplication(["orbitdesk-export", "-platform", os.environ.get("QT_QPA_PLATFORM") or "offscreen"])
    session = Session()
    views = {}
    try:
        session.load_project(project)
        _wait(lambda: session.trajectory is not None and not session.busy, timeout)
        if session.trajectory is None:
            raise RuntimeError("the run for the report's figures did not finish")
        if equilibria:
            session.set_equilibria(list(equilibria))
        for module in HEADLESS_VIEWS:
            if module in DEFAULT_VISIBLE or module in project.views:
                views[module] = load_view_class(module)(session)
        for view in views.values():
            view.resize(*REPORT_SIZE)
        timers = [t for view in views.values() for t in view.findChildren(QTimer) if t.isSingleShot()]
        # views start their own work after a short delay (the section): let it start, then finish
        _wait(lambda: not any(t.isActive() for t in timers) and not session.busy, timeout)
        QApplication.processEvents()
        holder = SimpleNamespace(views=views)
        return view_figures(holder), document_results(session.doc)
    finally:
        session.shutdown()
        for view in views.values():
            view.deleteLater()
        session.deleteLater()
        QApplication.processEvents()
