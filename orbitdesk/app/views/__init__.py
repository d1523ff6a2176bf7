"""Views: one module per view, each exposing ``VIEW = TheClass``; imported when its dock is first shown.
Which views there are, their ids and titles: the registry ``orbitdesk.document.views.VIEWS``.

A view is a QWidget with class attributes ``view_id`` and ``title``, constructed as ``View(session, parent)``,
with ``view_settings() -> dict`` (JSON-able) and ``apply_view_settings(d)``, and optionally
``export_data() -> (header, rows)`` for CSV export and ``plot_widget`` (a pyqtgraph PlotWidget) for
image export. The plot styling every view shares (colours, ``style_plot``, ``empty_hint``) is defined in
``plots/plot_style.py`` and can be imported from here too.
"""

from __future__ import annotations

import importlib

from orbitdesk.document.views import VIEWS, title_of

# read from the one registry of views (document/views.py); add a view there
VIEW_MODULES = [v.module for v in VIEWS]
DEFAULT_VISIBLE = tuple(v.module for v in VIEWS if v.shown_at_start)


def module_title(module_name: str) -> str:
    """The registry's title of a view (before its module is imported)."""
    return title_of(module_name)


def load_view_class(module_name: str):
    return importlib.import_module(f"{__name__}.{module_name}").VIEW


# The plot styling the views share lives in plots/plot_style.py; these names are read from there.
_STYLE_NAMES = ("SERIES_COLOURS", "is_dark", "series_colour", "muted_colour", "style_plot", "empty_hint")


def __getattr__(name):
    if name in _STYLE_NAMES:
        from orbitdesk.app.plots import plot_style  # pyqtgraph: loaded with the first view, not with the menu

        return getattr(plot_style, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
