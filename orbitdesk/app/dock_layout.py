"""Where the view docks go: every wanted view in sight (rows of docks split side by side where their
controls fit, never a view hidden behind another's tab), the model panel and the walkthrough keeping
their widths. Used when a walkthrough step opens its views and when the user opens a view."""

from __future__ import annotations

from PySide6.QtCore import QTimer, Qt
from PySide6.QtWidgets import QStyle


def is_open(dock) -> bool:
    return dock.toggleViewAction().isChecked()


def show_docks(window, wanted: list[str], arrange: bool) -> None:
    """Show exactly the docks of ``wanted`` (module names); docks that would hide one another in a tab
    group are split so that every wanted view is in sight."""
    for module, dock in window.view_docks.items():
        if module not in wanted and is_open(dock):
            dock.hide()
    docks = [window.view_docks[m] for m in wanted]
    width = window.width()
    for dock in docks:
        if not is_open(dock):
            dock.show()
        dock.raise_()
    if not arrange or len(docks) < 2:
        return
    shared = any(d in window.tabifiedDockWidgets(other) for i, d in enumerate(docks) for other in docks[:i])
    too_wide = window.minimumSizeHint().width() > width  # side by side they would grow the window
    if not (shared or too_wide):
        return
    _rebuild_docks(window, [d for d in docks if not d.isFloating()])
    if too_wide:  # the window grew while they stood side by side: back to its width once the rows are laid out
        QTimer.singleShot(0, lambda: window.width() > width and window.resize(width, window.height()))


def keep_side_widths(window, walkthrough_width: int | None = None):
    """A function that gives the model panel and the walkthrough dock back their present widths (or
    ``walkthrough_width``) after the view docks were rearranged; the views take the rest."""
    side = [d for d in (getattr(window, "model_dock", None), getattr(window, "walkthrough_dock", None))
            if d is not None and d.isVisible() and not d.isFloating()]
    widths = [d.width() for d in side]
    if walkthrough_width is not None and getattr(window, "walkthrough_dock", None) is not None:
        dock = window.walkthrough_dock
        if dock in side:
            widths[side.index(dock)] = walkthrough_width
        elif not dock.isFloating():
            side.append(dock)
            widths.append(walkthrough_width)

    def restore(view_dock=None):
        shown = [(d, w) for d, w in zip(side, widths) if d.isVisible() and not d.isFloating()]
        if not shown:
            return
        docks, sizes = [d for d, _ in shown], [w for _, w in shown]
        if view_dock is not None and view_dock.isVisible() and not view_dock.isFloating():
            sep = window.style().pixelMetric(QStyle.PixelMetric.PM_DockWidgetSeparatorExtent, None, window)
            docks.append(view_dock)
            sizes.append(max(view_dock.minimumWidth(), window.width() - sum(sizes) - (len(sizes) + 1) * sep))
        for _ in range(8):  # Qt moves a separator only part of the way when several areas share the change
            window.resizeDocks(docks, sizes, Qt.Orientation.Horizontal)
            if all(abs(d.width() - w) <= 2 for d, w in zip(docks, sizes)):
                break
    return restore


READABLE = 100   # pixels of plot (or table) a view keeps below its controls when views share the height
GAP = 8          # pixels between docks side by side or one above the other
IN_SIGHT = 3     # views always in sight together (a walkthrough step opens up to three), however short
TABLE_SHARE = 0.35  # the share of the spare height a row without a plot takes (a row of plots takes 1)


def _room(window) -> tuple[int, int]:
    """Width and height the view docks have: beside the model panel and the walkthrough, between the run bar
    and the status bar (the model panel spans that height)."""
    side = [d for d in (getattr(window, "model_dock", None), getattr(window, "walkthrough_dock", None))
            if d is not None and d.isVisible() and not d.isFloating()]
    width = window.width() - sum(d.width() for d in side) - 24
    model = getattr(window, "model_dock", None)
    height = model.height() if model is not None and model.isVisible() and not model.isFloating() \
        else window.height() - 100
    return width, height


def _rows(window, docks: list) -> tuple[list[list], list]:
    """Rows of docks, top to bottom, and the docks that do not fit. Two or more side by side only where their
    controls fit the width the views have; as many rows as leave each view its controls and ``READABLE``
    pixels of plot. When all do not fit, the first ones and the last (the view just opened) stay in sight and
    the others wait as tabs behind the last: a plot squeezed to a strip, or a window grown past the screen,
    helps nobody. ``IN_SIGHT`` views stay in sight whatever the height."""
    if len(docks) <= 1:
        return [[d] for d in docks], []
    width, height = _room(window)

    def pack(candidate):
        if len(candidate) <= 2:
            return [[d] for d in candidate]
        rows = [[candidate[0]]]  # the first (the time series) across the top
        for d in candidate[1:]:
            row = rows[-1]
            if len(rows) > 1 and sum(e.minimumSizeHint().width() for e in row + [d]) + GAP * len(row) <= width:
                row.append(d)
            else:
                rows.append([d])
        return rows

    def need(d):  # a view with a plot keeps READABLE pixels of it; a table alone (equilibria) its own minimum
        return d.minimumSizeHint().height() + (READABLE if _has_plot(d) else 0)

    def tall(rows):
        return sum(max(need(d) for d in row) for row in rows) + GAP * (len(rows) - 1)

    for k in range(len(docks), IN_SIGHT, -1):
        shown = docks[:k - 1] + [docks[-1]]
        rows = pack(shown)
        if tall(rows) <= height:
            return rows, [d for d in docks if d not in shown]
    shown = docks if len(docks) <= IN_SIGHT else docks[:IN_SIGHT - 1] + [docks[-1]]  # (each dock once)
    return pack(shown), [d for d in docks if d not in shown]


def _has_plot(dock) -> bool:
    import pyqtgraph as pg

    widget = dock.widget()
    return widget is not None and (bool(widget.findChildren(pg.PlotWidget)) or hasattr(widget, "glview"))


def _rebuild_docks(window, docks: list) -> None:
    """Lay the view docks out afresh: ``docks`` in rows in the view area (see ``_rows``), the other view
    docks hidden behind them. Splitting alone cannot do this: Qt adds a dock split off a tabbed one as
    one more tab."""
    if not docks:
        return
    V, H = Qt.Orientation.Vertical, Qt.Orientation.Horizontal
    widths, (rows, waiting) = keep_side_widths(window), _rows(window, docks)
    others = [d for d in window.view_docks.values() if d not in docks and not d.isFloating()]
    for dock in list(window.view_docks.values()):
        if not dock.isFloating():
            window.removeDockWidget(dock)
    first = rows[0][0]
    window.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, first)
    first.show()
    walkthrough = getattr(window, "walkthrough_dock", None)
    # the walkthrough to the right of the views, also while hidden: a project whose kept results open their
    # views at load lays them out before its walkthrough is shown, which then came up above the views
    beside = (walkthrough is not None and not walkthrough.isFloating()
              and window.dockWidgetArea(walkthrough) == Qt.DockWidgetArea.RightDockWidgetArea)
    if beside:
        window.splitDockWidget(first, walkthrough, H)
    for upper, lower in zip(rows, rows[1:]):
        window.splitDockWidget(upper[0], lower[0], V)
    for row in rows:
        for left, right in zip(row, row[1:]):
            window.splitDockWidget(left, right, H)
    for row in rows:
        for dock in row:
            dock.show()
    for dock in waiting:  # open, a tab behind the view just opened
        window.tabifyDockWidget(docks[-1], dock)
        dock.show()
    for dock in others:
        window.tabifyDockWidget(docks[-1], dock)
        dock.hide()
    docks[-1].raise_()
    def settle():  # once the new layout has settled: side panels as they were, the room left to the plots
        widths(first)
        if len(rows) > 1:
            controls = [max(d.minimumSizeHint().height() for d in row) for row in rows]
            # a row of plots takes a full share of the height left over, a row of tables alone (the equilibria)
            # a smaller one: it already holds its rows, and an equal share squeezed the phase plane above it
            shares = [1.0 if any(_has_plot(d) for d in row) else TABLE_SHARE for row in rows]
            spare = max(0, sum(row[0].height() for row in rows) - sum(controls))
            window.resizeDocks([row[0] for row in rows],
                               [c + int(spare * k / sum(shares)) for c, k in zip(controls, shares)], V)
    QTimer.singleShot(0, settle)
