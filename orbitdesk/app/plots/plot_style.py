"""Shared look and small shared parts of the analysis views: the time colour ramp, the dark 3D scene,
number formatting, and the strip that shows a background job's progress with a Cancel button.

Plot styling that every view uses (palette colours, grids) lives in ``views/__init__.py``; this module
adds what the analysis views need on top of it.
"""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtGui import QColor, QFontDatabase, QKeySequence, QShortcut, QValidator
from PySide6.QtWidgets import (QDoubleSpinBox, QHBoxLayout, QLabel, QProgressBar, QSizePolicy, QToolButton,
                               QWidget)

# Our time ramp: dusk blue -> lagoon -> pale sand -> ember. Every stop is light enough to read on the
# dark 3D scene and the hue order reads as "early -> late" without a legend.
TIME_RAMP = [
    (0.00, (96, 122, 214)),
    (0.35, (64, 188, 178)),
    (0.70, (232, 214, 140)),
    (1.00, (240, 122, 84)),
]
# The 3D scene is always dark (colours glow on it); the rest of the window follows the system palette.
SCENE_BACKGROUND = (20, 24, 31)
SCENE_GRID = (86, 96, 110)
SCENE_TEXT = (188, 196, 206)
SCENE_MARKER = (255, 255, 255)


def ramp(fractions, alpha: float = 1.0, stops=TIME_RAMP) -> np.ndarray:
    """RGBA colours in 0..1, shape (N, 4), for fractions in [0, 1] along ``stops``."""
    f = np.clip(np.nan_to_num(np.asarray(fractions, dtype=float), nan=0.0), 0.0, 1.0)
    xs = np.array([s[0] for s in stops])
    rgb = np.array([s[1] for s in stops], dtype=float) / 255.0
    out = np.empty((f.size, 4), dtype=np.float32)
    for k in range(3):
        out[:, k] = np.interp(f.ravel(), xs, rgb[:, k])
    out[:, 3] = alpha
    return out


def time_colours(time, alpha: float = 1.0, t_range=None) -> np.ndarray:
    """Ramp colours for the samples of a trajectory by time (``t_range`` fixes a common scale)."""
    time = np.asarray(time, dtype=float)
    if time.size == 0:
        return np.empty((0, 4), dtype=np.float32)
    lo, hi = t_range if t_range is not None else (float(np.nanmin(time)), float(np.nanmax(time)))
    span = hi - lo
    return ramp((time - lo) / span if span > 0 else np.zeros_like(time), alpha)


def ramp_qcolour(fraction: float) -> QColor:
    r, g, b, _ = ramp([fraction])[0]
    return QColor.fromRgbF(float(r), float(g), float(b))


def rgba(colour, alpha: float = 1.0) -> tuple:
    """A QColor or an (r, g, b) tuple of 0..255 as an (r, g, b, a) tuple of 0..1 (OpenGL items)."""
    if isinstance(colour, QColor):
        return (colour.redF(), colour.greenF(), colour.blueF(), alpha)
    r, g, b = colour[:3]
    return (r / 255.0, g / 255.0, b / 255.0, alpha)


def mono_font():
    return QFontDatabase.systemFont(QFontDatabase.SystemFont.FixedFont)


# ---------------------------------------------------------------- numbers
def number_text(x, digits: int = 6) -> str:
    """A real number for people: 6 significant digits, a true minus sign, no '-0'."""
    try:
        x = float(x)
    except (TypeError, ValueError):
        return str(x)
    if math.isnan(x):
        return "—"
    if math.isinf(x):
        return "∞" if x > 0 else "−∞"
    if x == 0:
        x = 0.0
    return typeset(f"{x:.{digits}g}")


def typeset(text: str) -> str:
    """A number written by Python (``1.5e-07``, ``-0.25``) as the views show it: ×10^ and a true minus sign."""
    if "e" in text:
        mant, exp = text.split("e")
        text = f"{mant}×10^{int(exp)}"
    return text.replace("-", "−")


def complex_text(z, digits: int = 5, tol: float = 1e-12) -> str:
    """``a``, ``a ± bi`` style text for an eigenvalue (an imaginary part below ``tol`` is dropped)."""
    z = complex(z)
    scale = max(1.0, abs(z))
    re = 0.0 if abs(z.real) < tol * scale else z.real
    im = 0.0 if abs(z.imag) < tol * scale else z.imag
    if im == 0:
        return number_text(re, digits)
    sign = "+" if im > 0 else "−"
    if re == 0:
        return ("" if im > 0 else "−") + number_text(abs(im), digits) + "i"
    return f"{number_text(re, digits)} {sign} {number_text(abs(im), digits)}i"


def eigenvalues_text(values, digits: int = 4, most: int | None = None) -> str:
    """Eigenvalues in one line, a complex-conjugate pair written once as ``a ± bi``; with ``most``, the first
    ``most`` entries and how many there are in all (a table cell: eight characteristic roots of a delay model
    pushed the type and stability out of sight)."""
    values = [complex(v) for v in values]
    out, used = [], [False] * len(values)
    for i, z in enumerate(values):
        if used[i]:
            continue
        used[i] = True
        scale = max(1.0, abs(z))
        if abs(z.imag) > 1e-12 * scale:
            for j in range(i + 1, len(values)):
                w = values[j]
                if not used[j] and abs(w - z.conjugate()) <= 1e-9 * scale:
                    used[j] = True
                    re = "" if abs(z.real) < 1e-12 * scale else number_text(z.real, digits) + " "
                    out.append(f"{re}± {number_text(abs(z.imag), digits)}i")
                    break
            else:
                out.append(complex_text(z, digits))
        else:
            out.append(complex_text(z, digits))
    if most is not None and len(out) > most:
        return ",  ".join(out[:most]) + f",  … ({len(values)} in all)"
    return ",  ".join(out)


def round_significant(x: float, digits: int = 3) -> float:
    if x == 0 or not math.isfinite(x):
        return 0.0
    return round(x, digits - 1 - int(math.floor(math.log10(abs(x)))))


def orbit_middle(trajectory, name: str) -> float | None:
    """A round value in the middle (the mean) of a series of the current run: a default section plane
    the orbit crosses. None without a run or such a series."""
    if trajectory is None or trajectory.time.size == 0:
        return None
    try:
        values = np.asarray(trajectory.series(name), dtype=float)
    except KeyError:
        return None
    values = values[np.isfinite(values)]
    return round_significant(float(np.mean(values))) if values.size else None


def parse_number(text: str) -> float | None:
    """A plain number typed in a field (``6.2832``, ``1e-3``, ``−2``); None unless it is finite."""
    text = text.strip().replace("−", "-").replace(",", ".")
    try:
        value = float(text)
    except ValueError:
        return None
    return value if math.isfinite(value) else None


class NumberBox(QDoubleSpinBox):
    """A spin box that shows its value with significant digits (0.001, 2.5e-06) rather than fixed
    decimals, and steps by a factor (``ratio``) or a fixed amount."""

    def __init__(self, value: float = 0.0, lo: float = -1e12, hi: float = 1e12, step: float | None = None,
                 ratio: float | None = None, digits: int = 6, parent=None):
        super().__init__(parent)
        self._digits, self._ratio = digits, ratio
        self.setDecimals(12)
        self.setRange(lo, hi)
        self.setKeyboardTracking(False)
        if step is not None:
            self.setSingleStep(step)
        self.setValue(value)
        self.setMinimumWidth(self.fontMetrics().horizontalAdvance("−1.23456e-10") + 4)

    def textFromValue(self, value: float) -> str:
        text = f"{value:.{self._digits}g}"
        return "0" if text in ("-0", "0") else text

    def valueFromText(self, text: str) -> float:
        v = parse_number(text)
        return self.value() if v is None else v

    def validate(self, text: str, pos: int):
        t = text.strip().replace("−", "-")
        if parse_number(t) is not None:
            return QValidator.State.Acceptable, text, pos
        if t in ("", "-", "+", ".", "-.") or t.lower().endswith(("e", "e-", "e+")):
            return QValidator.State.Intermediate, text, pos
        return QValidator.State.Invalid, text, pos

    def stepBy(self, steps: int) -> None:
        if self._ratio:
            self.setValue(self.value() * self._ratio ** steps)
        else:
            super().stepBy(steps)


# ---------------------------------------------------------------- background job strip
class JobStrip(QWidget):
    """Progress of one keyed background job of a view, with a Cancel button and a short message.

    ``run(key, fn, on_done)`` hands the job to ``session.run_job``; the strip shows while it runs and
    hides when the result arrives, the job fails, the user cancels, or the result is dropped because
    the model or values changed meanwhile (then ``message`` says so).
    """

    finished = Signal(str)  # "done" | "failed" | "cancelled" | "dropped"

    def __init__(self, session, what: str = "Computing", parent=None):
        super().__init__(parent)
        self.session = session
        self.what = what
        self.key: str | None = None
        self.state = "idle"
        self.bar = QProgressBar()
        self.bar.setRange(0, 1000)
        self.bar.setTextVisible(False)
        self.bar.setMaximumHeight(10)
        self.bar.setMinimumWidth(80)
        self.bar.setMaximumWidth(180)
        self.bar.setToolTip("Progress of the computation")
        self.cancel_button = QToolButton(text="Cancel")
        self.cancel_button.setToolTip("Stop this computation (Esc)")
        self.cancel_button.clicked.connect(self.cancel)
        self.label = QLabel()
        self.label.setStyleSheet("color: palette(placeholder-text);")
        self.label.setWordWrap(True)  # a long message takes a second line rather than being cut off
        self.label.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.label.setMinimumWidth(40)
        layout = QHBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.setSpacing(6)
        layout.addWidget(self.label, 1)
        layout.addWidget(self.bar)
        layout.addWidget(self.cancel_button)
        self._shortcut = None
        self._watch = QTimer(self, interval=150)
        self._watch.timeout.connect(self._check_alive)
        self._set_running(False)

    @property
    def running(self) -> bool:
        return self.state == "running"

    def run(self, key: str, fn, on_done, on_error=None, on_progress=None):
        """Start ``fn(cancel, report)`` as the session job ``key``; returns the CancelToken.
        ``on_progress(fraction)`` runs on the GUI thread as the job reports (to show partial results)."""
        self.key = key
        self._on_progress = on_progress

        def done(result):
            self._end("done", "")
            on_done(result)

        def failed(message):
            self._end("failed", message[:1].upper() + message[1:])
            if on_error is not None:
                on_error(message)

        if self._shortcut is None and self.parentWidget() is not None:
            # Esc in the view that holds this strip cancels its job
            self._shortcut = QShortcut(QKeySequence(QKeySequence.StandardKey.Cancel), self.parentWidget())
            self._shortcut.setContext(Qt.ShortcutContext.WidgetWithChildrenShortcut)
            self._shortcut.activated.connect(self.cancel)
        self.bar.setValue(0)
        self.state = "running"
        self.label.setText(f"{self.what}…")
        self.label.setToolTip("")
        self._set_running(True)
        token = self.session.run_job(key, fn, done, on_progress=self._progress, on_error=failed, label=self.what)
        self._watch.start()
        return token

    def cancel(self) -> None:
        if self.key is not None and self.running:
            self.session.cancel_job(self.key)
            self._end("cancelled", "Cancelled")

    def show_message(self, text: str) -> None:
        self.label.setText(text)
        self.label.setToolTip(text)

    def _progress(self, fraction: float) -> None:
        if self.running:
            self.bar.setValue(int(max(0.0, min(1.0, fraction)) * 1000))
            if getattr(self, "_on_progress", None) is not None:
                self._on_progress(fraction)

    def _check_alive(self) -> None:
        if self.running and not self.session.job_running(self.key):
            self._end("dropped", "Stopped: the model or its values changed")

    def _end(self, state: str, message: str) -> None:
        if not self.running:
            return
        self.state = state
        self._watch.stop()
        self._set_running(False)
        self.show_message(message)
        self.finished.emit(state)

    def _set_running(self, on: bool) -> None:
        self.bar.setVisible(on)
        self.cancel_button.setVisible(on)
        self.cancel_button.setEnabled(on)


# ---------------------------------------------------------------- axes and curves
def tick_texts(values, spacing: float) -> list[str]:
    """Tick labels in the data's own numbers: as many decimals as the spacing needs (0.0008, 2.5, 150),
    or a short scientific form (8e-4, 1.25e6) for tiny spacings and large values; a true minus."""
    values = [float(v) for v in values]
    spacing = abs(float(spacing))
    big = max((abs(v) for v in values if math.isfinite(v)), default=0.0)
    if not (spacing > 0 and math.isfinite(spacing)):
        return [number_text(v, 4) for v in values]
    out = []
    if spacing < 1e-4 or big >= 1e6:
        digits = max(0, int(math.floor(math.log10(big))) - int(math.floor(math.log10(spacing)))) if big else 0
        digits = min(digits + (0 if _is_whole_power(spacing) else 1), 12)
        for v in values:
            if abs(v) < spacing * 1e-6:
                out.append("0")
                continue
            mantissa, exponent = f"{v:.{digits}e}".split("e")
            if "." in mantissa:
                mantissa = mantissa.rstrip("0").rstrip(".")
            out.append(f"{mantissa}e{int(exponent)}".replace("-", "\u2212"))
        return out
    decimals = 0
    while decimals < 12 and abs(round(spacing, decimals) - spacing) > 1e-9 * spacing:
        decimals += 1
    for v in values:
        text = "0" if abs(v) < spacing * 1e-6 else f"{v:.{decimals}f}"
        out.append(text.replace("-", "\u2212"))
    return out


def _is_whole_power(spacing: float) -> bool:
    mantissa = spacing / 10 ** math.floor(math.log10(spacing))
    return abs(mantissa - round(mantissa)) < 1e-9


def _plain_tick_strings(axis, values, scale, spacing):
    if axis.logMode:
        return type(axis).tickStrings(axis, values, scale, spacing)
    return tick_texts([v * scale for v in values], spacing * scale)


FLAT = 1e-6  # data whose span is at most this share of its size is flat: shown over FLAT_SPAN around it
FLAT_SPAN = 0.1  # a flat range's half-width as a share of its value (1 around zero)


def readable_span(lo, hi):
    """(lo, hi) of data to fit a plot to, a flat range (a constant branch, round-off of about 1e-9 on 1.5)
    widened to FLAT_SPAN of its value either side, 1 around zero: never an axis from 1.4999999 to
    1.5000001 whose tick numbers all read 1.5, nor pyqtgraph's keeping the previous range's scale."""
    if lo is None or hi is None or not (math.isfinite(lo) and math.isfinite(hi)):
        return lo, hi
    size = max(abs(lo), abs(hi))
    if hi - lo > FLAT * size:
        return lo, hi
    mid = 0.5 * (lo + hi)
    half = FLAT_SPAN * abs(mid) if mid != 0 else 1.0
    return mid - half, mid + half


# the items whose bounds are their data (a text's are its anchor, a guide line's (0, 0), an image's none)
_DATA_ITEMS = (pg.PlotDataItem, pg.PlotCurveItem, pg.ScatterPlotItem)


def _readable_bounds(vb) -> None:
    """The view box fits itself (auto-range, ``autoRange``) to ``readable_span`` of its items' bounds."""
    if getattr(vb, "_readable_bounds", False):
        return
    vb._readable_bounds = True
    bounds = vb.childrenBounds

    def children_bounds(frac=None, orthoRange=(None, None), items=None):
        full = bounds(frac, orthoRange, items)
        # flatness is judged on the items' data as they hold it: a text's or a marker's extent is in pixels,
        # so in data units it follows the range shown, and the view's mapping adds round-off of its own
        listed = vb.addedItems if items is None else items
        data = [i for i in listed if isinstance(i, _DATA_ITEMS) and i.isVisible() and i.scene() is vb.scene()]
        out = []
        for ax, r in enumerate(full):
            spans = [i.dataBounds(ax, frac=(frac or (1.0, 1.0))[ax], orthoRange=orthoRange[ax]) for i in data]
            spans = [b for b in spans if b is not None and None not in b[:2] and np.all(np.isfinite(b[:2]))]
            if r is None or not spans:
                out.append(r)
                continue
            core = (min(float(b[0]) for b in spans), max(float(b[1]) for b in spans))
            wide = readable_span(*core)
            # widened only where everything shown is narrower than that span (an image's extent, a text's: kept)
            narrow = wide != core and r[1] - r[0] < wide[1] - wide[0]
            out.append([min(r[0], wide[0]), max(r[1], wide[1])] if narrow else r)
        return out

    vb.childrenBounds = children_bounds


def plain_axes(plot_item) -> None:
    """Tick labels in the data's own numbers on every axis of a plot: no automatic SI-prefix scale
    factors ("x (x0.001)" with ticks of 800 misleads), ticks formatted by ``tick_texts``, and a flat range
    of data fitted to a readable span around its value (``readable_span``). Every plot of the app goes
    through this (``views.style_plot`` calls it; so does a copy for export)."""
    _readable_bounds(plot_item.getViewBox())
    for name in ("left", "bottom", "right", "top"):
        axis = plot_item.getAxis(name)
        axis.enableAutoSIPrefix(False)
        if getattr(axis, "_plain_ticks", False):
            continue
        axis._plain_ticks = True
        # the axis (its text and the grid it draws) is painted once into a pixmap and reused until its
        # ticks change: replaying its QPicture cost as much as drawing a 20,000-point curve each frame
        axis.setCacheMode(axis.CacheMode.DeviceCoordinateCache)
        axis.tickStrings = lambda values, scale, spacing, axis=axis: _plain_tick_strings(axis, values, scale,
                                                                                           spacing)
        axis.picture = None  # drawn again with the new labels


class ScreenCurve(pg.PlotDataItem):
    """A line drawn at screen resolution: ``core.decimate.screen_path`` over the part in view, redone
    when the view's range or size changes. The full data stays in the item (``getOriginalDataset``)
    for exports, auto-range and the cursor readout. ``ordered_x``: x never decreases (time series:
    min/max per pixel column, in their own order, drawn antialiased, so the line is smooth and of even
    thickness)."""

    def __init__(self, *args, ordered_x: bool = False, **kwargs):
        self._ordered_x = ordered_x
        self._screen = (None, None)
        self._bounds: dict = {}
        super().__init__(*args, **kwargs)
        if ordered_x and "antialias" not in kwargs:
            # at most two points per pixel column: smoothing costs little and evens the thickness
            self.opts["antialias"] = True

    def setData(self, *args, **kwargs):
        self._screen = (None, None)
        self._bounds = {}
        super().setData(*args, **kwargs)

    def viewRangeChanged(self, vb=None, ranges=None, changed=None):
        super().viewRangeChanged(vb, ranges, changed)
        if self._dataset is not None and self.opts["pen"] is not None and self.opts["symbol"] is None:
            self.updateItems(styleUpdate=False)

    def _getDisplayDataset(self):
        full = super()._getDisplayDataset()
        vb = self.getViewBox()
        if (full is None or not isinstance(vb, pg.ViewBox) or self.opts["pen"] is None
                or self.opts["symbol"] is not None):
            return full
        from pyqtgraph.graphicsItems.PlotDataItem import PlotDataset

        from orbitdesk.analyses.decimate import screen_path

        rect = vb.viewRect()
        key = (id(full.x), id(full.y), rect.left(), rect.right(), rect.top(), rect.bottom(),
               round(vb.width()), round(vb.height()))
        if self._screen[0] == key:
            return self._screen[1]
        view = ((rect.left(), rect.right()), (rect.top(), rect.bottom()))
        if any(vb.autoRangeEnabled()):  # the range is about to follow the data: reduce over all of it
            (a, b), (c, d) = self.dataBounds(0), self.dataBounds(1)
            if None not in (a, b, c, d):
                view = ((a, b if b > a else a + 1.0), (c, d if d > c else c + 1.0))
        x, y, connect = screen_path(full.x, full.y, view, (vb.width(), vb.height()), self._ordered_x)
        shown = PlotDataset(x, y, None, None, connect)
        self._screen = (key, shown)
        return shown

    def dataBounds(self, ax, frac=1.0, orthoRange=None):
        """The bounds of all the data (not of what is drawn), so that auto-range sees every point."""
        if frac != 1.0 or orthoRange is not None or self._dataset is None:
            return super().dataBounds(ax, frac, orthoRange)
        if ax not in self._bounds:
            full = super()._getDisplayDataset()
            values = np.asarray(full.x if ax == 0 else full.y, dtype=float)
            values = values[np.isfinite(values)]
            self._bounds[ax] = (float(values.min()), float(values.max())) if values.size else (None, None)
        return self._bounds[ax]


def hint_label(text: str = "") -> QLabel:
    label = QLabel(text)
    label.setTextFormat(Qt.TextFormat.PlainText)  # notes and messages may quote names from files
    label.setStyleSheet("color: palette(placeholder-text);")
    label.setWordWrap(True)
    label.setAlignment(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter)
    return label


# ---------------------------------------------------------------- colours and plot styling shared by the views

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
    plain_axes(item)


def style_colour_bar(bar, host) -> None:
    """A plot's colour bar in the plot's own colours: frame in the axis colour, tick texts and name in the text
    colour (pyqtgraph's grey text was hard to read on screen and in exported figures)."""
    import pyqtgraph as pg
    from PySide6.QtGui import QPalette

    axis_pen = pg.mkPen(muted_colour(host), width=1)
    text_pen = pg.mkPen(host.palette().color(QPalette.ColorRole.Text))
    for name in ("left", "bottom", "right", "top"):
        bar.getAxis(name).setPen(axis_pen)
        bar.getAxis(name).setTextPen(text_pen)


def name_bar(bar, names) -> None:
    """Name a colour bar with the longest of ``names`` that fits its height (the last one however short)."""
    from PySide6.QtGui import QFontMetrics

    axis = bar.getAxis("right")
    room = bar.getViewBox().height() - 4
    metrics = QFontMetrics(axis.label.font())
    name = next((n for n in names if metrics.horizontalAdvance(n) <= room), names[-1])
    if axis.labelText != name:
        axis.setLabel(name)


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
