"""Views: one module per view, each exposing ``VIEW = TheClass``; imported when its dock is first shown.

A view is a QWidget with class attributes ``view_id`` and ``title``, constructed as ``View(session, parent)``,
with ``view_settings() -> dict`` (JSON-able) and ``apply_view_settings(d)``, and optionally
``export_data() -> (header, rows)`` for CSV export and ``plot_widget`` (a pyqtgraph PlotWidget) for
image export. Shared plot styling lives here so every view looks alike.
"""

from __future__ import annotations

import importlib

VIEW_MODULES = ["timeseries", "phase_plane", "phase_space_3d", "equilibria", "cycles", "sections", "sweep",
                "lyapunov", "parameter_map", "basins", "bifurcation",
                "fit", "noise_statistics"]
DEFAULT_VISIBLE = ("timeseries", "phase_plane")

# Our own series colours: muted, distinguishable on light and dark backgrounds (light, dark variants).
SERIES_COLOURS = [
    ("#1f7a80", "#5cc3c9"),  # teal
    ("#b0651c", "#e8a660"),  # amber
    ("#6f4c9b", "#b79be0"),  # violet
    ("#3d7a2e", "#8fcf7a"),  # moss
    ("#a8435a", "#e88aa0"),  # rose
    ("#39598f", "#8aa9e0"),  # slate blue
    ("#7a6a1f", "#d6c46a"),  # olive
    ("#5a5a5a", "#bdbdbd"),  # grey
]


def module_title(module_name: str) -> str:
    """A title for a view that has not been imported yet ("phase_plane" -> "Phase plane")."""
    words = module_name.replace("_", " ").strip()
    return words[:1].upper() + words[1:]


def load_view_class(module_name: str):
    return importlib.import_module(f"{__name__}.{module_name}").VIEW


def is_dark(widget=None) -> bool:
    from PySide6.QtGui import QPalette
    from PySide6.QtWidgets import QApplication

    pal = widget.palette() if widget is not None else QApplication.palette()
    return pal.color(QPalette.ColorRole.Base).lightness() < 128


def series_colour(index: int, widget=None):
    from PySide6.QtGui import QColor

    light, dark = SERIES_COLOURS[index % len(SERIES_COLOURS)]
    return QColor(dark if is_dark(widget) else light)


def muted_colour(widget=None, alpha: int = 255):
    """Text colour blended half way into the background: for grids, guides and arrows."""
    from PySide6.QtGui import QColor, QPalette

    pal = widget.palette()
    fg, bg = pal.color(QPalette.ColorRole.Text), pal.color(QPalette.ColorRole.Base)
    c = QColor((fg.red() + bg.red()) // 2, (fg.green() + bg.green()) // 2, (fg.blue() + bg.blue()) // 2)
    c.setAlpha(alpha)
    return c


def style_plot(plot_widget, host=None) -> None:
    """Colours from the system palette, a light grid, plain tick numbers (``plot_style.plain_axes``), no
    pyqtgraph context menu or corner button."""
    import pyqtgraph as pg
    from PySide6.QtGui import QPalette

    host = host or plot_widget
    pal = host.palette()
    bg = pal.color(QPalette.ColorRole.Base)
    fg = pal.color(QPalette.ColorRole.Text)
    plot_widget.setBackground(bg)
    item = plot_widget.getPlotItem()
    item.hideButtons()
    item.setMenuEnabled(False)
    axis_pen = pg.mkPen(muted_colour(host), width=1)
    for name in ("left", "bottom", "right", "top"):
        axis = item.getAxis(name)
        axis.setPen(axis_pen)
        axis.setTextPen(pg.mkPen(fg))
    item.showGrid(x=True, y=True, alpha=0.12)
    from orbitdesk.app.plots.plot_style import plain_axes

    plain_axes(item)


def empty_hint(plot_item, text: str):
    """A quiet centred note shown in an empty plot (returns the item; hide it when data arrives)."""
    import pyqtgraph as pg
    from PySide6.QtWidgets import QGraphicsSimpleTextItem

    label = QGraphicsSimpleTextItem(text)
    host = plot_item.getViewWidget()
    label.setBrush(pg.mkBrush(muted_colour(host) if host is not None else "#888888"))
    label.setParentItem(plot_item.getViewBox())

    def centre(*_args):
        box = plot_item.getViewBox().boundingRect()
        r = label.boundingRect()
        label.setPos(box.center().x() - r.width() / 2, box.center().y() - r.height() / 2)

    plot_item.getViewBox().sigResized.connect(centre)
    centre()
    return label
