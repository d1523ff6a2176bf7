"""What the views share: a base class that follows the session, small control factories and rows,
quiet setting of controls for settings round-trips, and the run, cursor and equilibrium helpers of the
views that draw trajectories."""

from __future__ import annotations

import logging
import math
from contextlib import contextmanager

import numpy as np
from PySide6.QtCore import QEvent, Qt, QTimer
from PySide6.QtWidgets import (QAbstractButton, QCheckBox, QComboBox, QFrame, QHBoxLayout, QLabel, QPushButton,
                               QSizePolicy, QVBoxLayout, QWidget)

from orbitdesk.document.results import stale_words
from orbitdesk.document.view_settings import clean_settings

from orbitdesk.app.layouts import row as lined_row
from orbitdesk.app.plots.plot_style import hint_label, orbit_middle
from orbitdesk.app.views import gestures

log = logging.getLogger("orbitdesk.app.views")
DIRECTION_LABELS = ("upward", "downward", "both ways")
SETTINGS_DELAY_MS = 150   # a view's settings go into the document again this long after its last change
# views whose analyses assume determinism: with a model that has noise they say they use its noise-free part
NOISE_FREE_VIEWS = frozenset({"equilibria", "cycles", "sections", "sweep", "lyapunov", "bifurcation",
                              "parameter_map", "basins"})


class StaleBar(QFrame):
    """A strip over a view's result: "Computed for other values (r = 28, now 30)" and a Recompute button."""

    def __init__(self, recompute, parent=None):
        super().__init__(parent)
        self.setObjectName("stale_bar")
        self.setFrameShape(QFrame.Shape.StyledPanel)
        self.setStyleSheet("#stale_bar { background: palette(alternate-base); border-radius: 3px; }")
        self.label = QLabel()
        self.label.setWordWrap(True)
        self.label.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.button = push_button("Recompute", "Compute this result again for the values now set", recompute)
        row = QHBoxLayout(self)
        row.setContentsMargins(6, 2, 2, 2)
        row.setSpacing(6)
        row.addWidget(self.label, 1)
        row.addWidget(self.button)
        self.hide()


class SessionView(QWidget):
    """A view of the session's document: ``follow_session`` wires the handlers and catches up, a palette
    change calls ``_restyle``. Subclasses define ``_on_project_loaded`` and ``_on_system``.

    Results computed on request are marked stale the same way everywhere: call ``begin_computing()``
    when a computation starts. A view with ``result_kind`` keeps its result in the live document
    (``keep_result``; document/results.py) and draws it in ``show_result`` when the document announces
    it (also after a project is opened: the project keeps it); other views call ``shown_computed()`` /
    ``shown_nothing()``. Whenever the values, the solver settings or the model differ from those the
    shown result was computed for, a bar over the view says so and offers ``recompute()``.

    The analysis contract, read by the walkthrough and the exports without guessing: ``compute()``
    computes the view's result for the values now set (in the background, through a JobStrip or
    ``session.run_job``), ``result`` holds the latest result (None: none), ``auto`` is the view's
    Automatic box (None: the view has none), ``on_request`` says the view computes only when asked, and
    ``follows_values()`` whether it keeps up with the values by itself."""

    view_id = ""                   # the id in the registry of views (document/views.py)
    title = ""
    stale_follows_solver = False   # results depend on the solver settings too (runs, sections)
    result_kind = None             # the kind of result it shows from the live document (document/results.py)
    on_request = False             # computes its result only when asked (or when its Automatic box is on)
    auto = None                    # the Automatic check box of views that have one

    def __init_subclass__(cls, **kwargs):
        super().__init_subclass__(**kwargs)
        for name in ("apply_view_settings", "_on_system", "_on_project_loaded"):
            if name in cls.__dict__:   # what these set on the controls is no gesture of the user
                setattr(cls, name, gestures.not_a_gesture(cls.__dict__[name]))
        if "__init__" in cls.__dict__:   # nor what a view sets while it is being built
            setattr(cls, "__init__", gestures.while_building(cls.__dict__["__init__"]))

    def __init__(self, session, parent=None):
        super().__init__(parent)
        self.session = session
        self._applying = 0            # > 0 while the view sets its own controls (settings, a new system)
        self._gesture_pending = False  # the settings to store when the view settles come from the user
        self.system = None
        self._own_result = None
        self._computing_for = None
        self._computed_for = None
        self._fit_pending = False
        self._settings_timer = None
        self._caught_up_with = None   # the project whose system (and saved settings) the view has taken in
        self.stale_bar = StaleBar(self.recompute)

    def follow_session(self, values=None, settings=None, trajectory=None, cursor=None) -> None:
        """Connect the session's signals to this view's handlers, then catch up with what the session
        holds now: the saved view settings, the system and (with ``trajectory``) the current run."""
        s = self.session
        s.systemChanged.connect(self._on_system)
        s.systemChanged.connect(lambda _system: setattr(self, "_caught_up_with", s.doc.project))
        if trajectory is not None:
            trajectory = self._fitting_after(trajectory)
        for signal, handler in ((s.valuesChanged, values), (s.settingsChanged, settings),
                                (s.trajectoryChanged, trajectory), (s.timeCursorChanged, cursor)):
            if handler is not None:
                signal.connect(handler)
        s.projectLoaded.connect(self._on_project_loaded)
        s.viewSettingsRestored.connect(self._on_settings_restored)
        self._watch_settings()
        if self.result_kind is not None:
            s.resultChanged.connect(self._on_result_changed)
        for signal in (s.valuesChanged, s.settingsChanged, s.systemChanged):
            signal.connect(self.update_stale)
        self._on_project_loaded()
        if s.system is not None:
            self._on_system(s.system)
            self._caught_up_with = s.doc.project
        if trajectory is not None and s.trajectory is not None:
            trajectory(s.trajectory)

    # ------------------------------------------------------------ settings written into the document
    def _watch_settings(self) -> None:
        """Write this view's settings into the document whenever any of its controls changes or a plot's
        range moves (views with state no control holds call ``settings_changed()`` themselves)."""
        self._settings_timer = QTimer(self, singleShot=True, interval=SETTINGS_DELAY_MS)
        self._settings_timer.timeout.connect(self._store_settled)
        self.session.projectLoaded.connect(self._settings_timer.stop)  # nothing of the project before
        for widget in self.findChildren(QWidget):
            signal = gestures.change_signal(widget)
            if signal is not None:
                signal.connect(self.settings_changed)
        import pyqtgraph as pg

        for plot in self.findChildren(pg.PlotWidget):  # (many per second while panning: written when it stops)
            plot.getViewBox().sigRangeChanged.connect(self._settings_timer.start)

    def settings_changed(self, *_args) -> None:
        """Something this view saves changed: its settings go into the document now, and once more when
        the view has settled (a change that sets several controls in turn ends with all of them). A change
        the user made (not while the view sets its own controls) goes in as an edit of the project: an
        undo step when it changes what the view computes (``LiveDocument.change_view_settings``)."""
        if self._settings_timer is not None:
            self._gesture_pending = self._gesture_pending or self._is_gesture()
            if self._caught_up():
                self.store_settings()
            self._settings_timer.start()

    @contextmanager
    def not_a_gesture(self):
        """Set controls of this view from the program (a walkthrough step, restored settings): what they
        change goes into the project without an undo step."""
        self._applying += 1
        try:
            yield
        finally:
            self._applying -= 1

    def _on_settings_restored(self, view_id: str) -> None:
        """Undo or redo put this view's settings back: show them."""
        if view_id == self.view_id and self._caught_up():
            self._settings_timer.stop()
            self._gesture_pending = False
            self.apply_view_settings(self.saved_view_settings())

    def _caught_up(self) -> bool:
        """The view shows the open project (while another one is being opened, what it shows still
        belongs to the one before, whose settings must not go into the new one)."""
        return self._caught_up_with is not None and self._caught_up_with is self.session.doc.project

    def store_settings(self) -> None:
        """This view's settings (and the axis names given on its plots) into the live document now; not
        before the view has caught up with an opened project (its saved settings are still to apply)."""
        if not self._caught_up():
            return
        from orbitdesk.app.plots import plot_tools

        try:
            settings = {**self.view_settings(), **plot_tools.settings(self)}
        except Exception:  # noqa: BLE001 - the project keeps what it had
            log.exception("view %s could not report its settings", self.view_id)
            return
        if self._gesture_pending and self._is_gesture():
            self.session.change_view_settings(self.view_id, settings)
        else:
            self.session.set_view_settings(self.view_id, settings)

    def _is_gesture(self) -> bool:
        """Controls changing now change by the user's hand: not while the view sets them itself (its saved
        settings, a new system, a walkthrough step) nor while it answers the document or a job."""
        return not self._applying and not self.session.answering and not gestures.building()

    def _store_settled(self) -> None:
        self.store_settings()
        self._gesture_pending = False

    def _fitting_after(self, handler):
        def on_trajectory(trajectory):
            handler(trajectory)
            if self._fit_pending and not self.session.run_pending():
                self._fit_pending = False
                self.fit_view()
        return on_trajectory

    def fit_after_next_run(self) -> None:
        """Fit the plots to what they show once the run for the values now set has arrived (now, if it
        has): a walkthrough step shows its plots whole."""
        self._fit_pending = True
        if not self.session.run_pending():
            self._fit_pending = False
            self.fit_view()

    def fit_view(self) -> None:
        """Zoom the plots to their data (views with plots override this)."""

    def main_layout(self) -> QVBoxLayout:
        """The view's own layout: controls above the plots, with the margins every view uses; in a view
        whose analysis assumes determinism, a note when the model has noise."""
        layout = QVBoxLayout(self)
        layout.setContentsMargins(6, 6, 6, 6)
        layout.setSpacing(4)
        layout.addWidget(self.stale_bar)
        if self.view_id in NOISE_FREE_VIEWS:
            self.noise_note = status_label()
            self.noise_note.setText("This model has noise: computed for its noise-free part (the equations "
                                    "without the noise terms)")
            self.noise_note.setVisible(self.session.system is not None and self.session.system.stochastic)
            self.session.systemChanged.connect(self._show_noise_note)
            layout.addWidget(self.noise_note)
        return layout

    def _show_noise_note(self, system) -> None:
        self.noise_note.setVisible(system is not None and system.stochastic)

    def saved_view_settings(self) -> dict:
        """This view's settings as the open project keeps them, checked and clamped (view_settings.py)."""
        return clean_settings(self.view_id, self.session.project.views.get(self.view_id, {}))[0]

    # ------------------------------------------------------------ the document's equilibria (one copy)
    @property
    def equilibria(self) -> list:
        """The live document's equilibria when they were found for the values now set (every view reads
        this one list; the Equilibria view finds them and puts them in with ``session.set_equilibria``)."""
        return self.session.doc.current_equilibria()

    @property
    def selected_equilibrium(self):
        """The one of them selected (in the Equilibria view's table), or None."""
        i, items = self.session.selected_equilibrium, self.equilibria
        return items[i] if i is not None and 0 <= i < len(items) else None

    # ------------------------------------------------------------ results and their staleness
    @property
    def result(self):
        """The latest result shown: for a view with ``result_kind``, the live document's (one copy)."""
        if self.result_kind is not None:
            return self.session.doc.result(self.result_kind)
        return self._own_result

    @result.setter
    def result(self, value) -> None:
        if self.result_kind is not None:
            raise AttributeError("this view's result lives in the document: keep_result / drop_result")
        self._own_result = value

    def values_now(self, skip=None):
        """What a result computed now is computed for (``skip``: a parameter, or a list of parameters, the
        result runs over): the document's ``basis``."""
        return self.session.doc.basis(skip, solver=self.stale_follows_solver)

    def begin_computing(self, skip=None) -> None:
        self._computing_for = self.values_now(skip)

    def keep_result(self, result) -> None:
        """Put a result computed since ``begin_computing`` into the document (views with ``result_kind``);
        the document's ``result`` event then shows it here (``show_result``) and wherever else it is read."""
        self.session.set_result(self.result_kind, result, self._computing_for)

    def drop_result(self) -> None:
        """Clear this view's result in the document (it no longer fits the model)."""
        self.session.clear_result(self.result_kind)

    def shown_computed(self) -> None:
        """A result of a view without ``result_kind`` is shown, computed since ``begin_computing``."""
        self._computed_for = self._computing_for
        self.update_stale()

    def shown_nothing(self) -> None:
        self._computed_for = None
        self.update_stale()

    def _on_result_changed(self, kind: str) -> None:
        if kind == self.result_kind and self.system is not None:
            self.show_document_result()

    def show_document_result(self) -> bool:
        """Show the document's result of this view's kind, or nothing (call at the end of ``_on_system``):
        one that does not fit the model (``show_result`` raised) is dropped from the document. Returns
        whether a result is shown."""
        if self.result_kind is None or self.system is None:
            return False
        result, shown = self.result, False
        if result is not None:
            try:
                self.show_result(result)
                shown = True
            except (AttributeError, KeyError, IndexError, TypeError, ValueError):
                self.show_no_result()
                self.drop_result()
        else:
            self.show_no_result()
        self.update_stale()
        return shown

    def show_result(self, result) -> None:
        """Draw a result of this view's kind (raise ValueError when it does not fit the model)."""

    def show_no_result(self) -> None:
        """Clear the drawing of the result."""

    def stale_text(self) -> str:
        if self.result_kind is not None:
            return self.session.result_stale(self.result_kind) if self.system is not None else ""
        then = self._computed_for
        return "" if then is None else stale_words(then, self.values_now(then.skip))

    def is_stale(self) -> bool:
        return bool(self.stale_text())

    def update_stale(self, *_args) -> None:
        text = self.stale_text()
        self.stale_bar.label.setText(text)
        self.stale_bar.label.setToolTip(text)
        self.stale_bar.setVisible(bool(text))

    def compute(self) -> None:
        """Compute this view's result for the values now set (views that only follow the session: nothing)."""

    def recompute(self) -> None:
        """Compute the shown result again for the present values."""
        self.compute()

    def follows_values(self) -> bool:
        """The view keeps up with the model and its values by itself (nothing to compute on request, or
        its Automatic box is on)."""
        return not self.on_request or (self.auto is not None and self.auto.isChecked())

    def changeEvent(self, event) -> None:
        super().changeEvent(event)
        if event.type() == QEvent.Type.PaletteChange:
            self._restyle()

    def _restyle(self) -> None:
        """Colours from the (new) palette; views with plots redraw."""

    def _on_project_loaded(self) -> None:
        """A project was opened: no model yet, nothing drawn, the project's saved settings in the controls
        (views that keep more state reset it first, then call this)."""
        self.system = None
        self.show_no_result()
        self.apply_view_settings(self.saved_view_settings())

    def apply_view_settings(self, d: dict) -> None:
        """Put saved settings (checked by ``saved_view_settings``) into the controls."""

    def _on_system(self, system) -> None:
        raise NotImplementedError


# ---------------------------------------------------------------- controls
def combo_box(tip: str, items=(), slot=None) -> QComboBox:
    """A combo box as wide as its longest entry, with a tooltip and an optional index-changed slot."""
    combo = QComboBox()
    combo.setToolTip(tip)
    combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToContents)
    combo.addItems(list(items))
    if slot is not None:
        combo.currentIndexChanged.connect(slot)
    return combo


def direction_combo(tip: str, slot=None) -> QComboBox:
    """Crossing direction: upward, downward, both ways (in that order)."""
    return combo_box(tip, DIRECTION_LABELS, slot)


def check_box(text: str, tip: str, checked: bool = False, slot=None) -> QCheckBox:
    box = QCheckBox(text)
    box.setChecked(checked)
    box.setToolTip(tip)
    if slot is not None:
        box.toggled.connect(slot)
    return box


def push_button(text: str, tip: str, slot) -> QPushButton:
    button = QPushButton(text)
    button.setToolTip(tip)
    button.clicked.connect(slot)
    return button


def status_label() -> QLabel:
    """A quiet note that wraps onto a second line rather than widening the view or being cut off."""
    label = hint_label()
    label.setWordWrap(True)
    label.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
    return label


def control_row(*items, spacing: int = 4, stretch: bool = True) -> QHBoxLayout:
    """A row of controls without margins: widgets, text (becomes a label), an int (extra space) or
    None (a stretch); a final stretch unless ``stretch`` is False."""
    row = lined_row(*items, spacing=spacing)
    if stretch:
        row.addStretch(1)
    return row


def fill_default_range(session, name: str, lo_box, hi_box) -> None:
    """Put the slider range of parameter ``name`` (around its value) into two number boxes."""
    from orbitdesk.app.panels.parameters import slider_range

    lo, hi = slider_range(session.params.get(name, 0.0), *session.param_range(name))
    lo_box.setValue(lo)
    hi_box.setValue(hi)


def range_for_parameter(view, combo, lo_box, hi_box) -> str:
    """The parameter chosen in ``combo`` ("" when none, or the view has no system yet); the first time it is
    chosen its slider range goes into the two number boxes (``view._range_for`` remembers for which)."""
    name = combo.currentText()
    if not name or view.system is None:
        return ""
    if view._range_for != name:
        fill_default_range(view.session, name, lo_box, hi_box)
        view._range_for = name
    return name


def status_row(info, strip) -> QHBoxLayout:
    """The bottom row of an analysis view: its status words and its job strip, half the width each."""
    row = control_row(stretch=False)
    row.addWidget(info, 1)
    row.addWidget(strip, 1)
    return row


def row_widget(*items, spacing: int = 4) -> QWidget:
    """``control_row`` in a widget of its own (a page of a QStackedWidget)."""
    widget = QWidget()
    widget.setLayout(control_row(*items, spacing=spacing))
    return widget


def auto_timer(parent, delay_ms: int, action, enabled) -> QTimer:
    """A single-shot timer (start it on every change) that runs ``action`` if ``enabled()`` still holds."""
    timer = QTimer(parent, singleShot=True, interval=delay_ms)
    timer.timeout.connect(lambda: action() if enabled() else None)
    return timer


# ---------------------------------------------------------------- settings round-trips
def is_number(value) -> bool:
    """A finite int or float (not a bool): what a number in a view's settings must be."""
    return isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)


@contextmanager
def quiet(*widgets):
    """Change these widgets without their signals firing."""
    before = [w.blockSignals(True) for w in widgets]
    try:
        yield
    finally:
        for w, was in zip(widgets, before):
            w.blockSignals(was)


def set_quietly(widget, value) -> None:
    """Set a spin box's value, a button's check state or a combo box's index without signals."""
    with quiet(widget):
        if isinstance(widget, QComboBox):
            widget.setCurrentIndex(int(value))
        elif isinstance(widget, QAbstractButton):
            widget.setChecked(bool(value))
        else:
            widget.setValue(value)


def apply_numbers(d: dict, fields) -> None:
    """Set spin boxes quietly from a settings dict: ``fields`` holds (widget, key, int or float);
    a key that is missing or not a finite number leaves its widget as it is."""
    for widget, key, kind in fields:
        if is_number(d.get(key)):
            set_quietly(widget, kind(d[key]))


def select_text(combo: QComboBox, text) -> bool:
    """Make ``text`` the current entry if the combo box has it."""
    i = combo.findText(text) if isinstance(text, str) else -1
    if i >= 0:
        combo.setCurrentIndex(i)
    return i >= 0


def fill_combo(combo: QComboBox, names) -> None:
    """Replace the entries without signals (the caller chooses the current one)."""
    with quiet(combo):
        combo.clear()
        combo.addItems(list(names))


def coordinate_names(system, time_last: bool = True) -> list[str]:
    """The quantities a view can put on an axis: states, derived quantities and time."""
    names = list(system.states) + list(system.derived_names)
    return names + [system.time_name] if time_last else [system.time_name] + names


# ---------------------------------------------------------------- forcing and section planes
def detected_period(system, p):
    """The forcing period the core reads off the model (cos/sin of omega*t), or None."""
    try:
        from orbitdesk.analyses.cycles import detect_forcing_period
    except ImportError:
        return None
    try:
        return detect_forcing_period(system, p)
    except (TypeError, ValueError, ArithmeticError):
        return None


def follow_forcing_period(box, system, p, user_set: bool):
    """Put the model's forcing period in ``box`` unless the user typed one; returns the period or None."""
    period = None if system is None or system.kind == "map" else detected_period(system, p)
    if period is not None and not user_set:
        set_quietly(box, period)
    return period


def put_through_orbit(box, trajectory, name: str, user_set: bool) -> None:
    """Unless the user typed a value, put a section plane ``name = value`` through the middle of the
    current orbit (its mean), so that the orbit crosses it."""
    middle = orbit_middle(trajectory, name)
    if not user_set and middle is not None:
        set_quietly(box, middle)


# ---------------------------------------------------------------- runs, the time cursor, equilibria
def run_time_name(trajectory) -> str:
    return "n" if trajectory.kind == "map" else "t"


def start_run_settings(session, max_samples: int) -> dict:
    """Engine settings for trajectories started from other states: {False: forward, True: backward over
    the same span}, with at most ``max_samples`` output points each."""
    fwd = session.run_settings(samples=min(session.solver.samples or max_samples, max_samples))
    span = fwd.t_end - fwd.t_start
    back = session.run_settings(samples=fwd.samples, t_end=fwd.t_start - span, transient=0.0)
    return {False: fwd, True: back}


def runs_job(session, system, starts, max_samples: int):
    """A job for ``session.run_job`` running one engine run per start, a (u0, backward) pair; it returns
    the Trajectories in order (None for a backward start of a map, which cannot run backward)."""
    p = session.param_vector()
    settings = start_run_settings(session, max_samples)

    def job(cancel, report):
        from orbitdesk.engine.runs import simulate

        runs = []
        for k, (u0, backward) in enumerate(starts):
            part = report.part(k / len(starts), 1 / len(starts))
            if backward and system.kind == "map":
                runs.append(None)
                continue
            runs.append(simulate(system, settings[bool(backward)], np.asarray(u0, dtype=float), p,
                                 cancel=cancel, progress=part, noise=not backward))  # (noise runs forward only)
        return runs

    return job


def cycle_columns(system, cycle, p) -> dict:
    """Every coordinate of a limit cycle (core Cycle: one period, closed) or a map cycle (its points, in
    orbit order, the first repeated to close it): the time or step, the states and derived quantities."""
    if system is None or cycle is None:
        return {}
    if hasattr(cycle, "orbit"):
        time, states = np.asarray(cycle.time, dtype=float), np.asarray(cycle.orbit, dtype=float)
    else:
        points = np.asarray(cycle.points, dtype=float)
        states = np.concatenate([points, points[:, :1]], axis=1)
        time = np.arange(states.shape[1], dtype=float)
    if states.shape[0] != system.n_states:
        return {}
    cols = {system.time_name: time, **{name: states[i] for i, name in enumerate(system.states)}}
    if system.derived_names and time.size:
        derived = system.derived_values(time, states, p)
        cols.update({k: np.asarray(v, dtype=float) for k, v in derived.items()})
    return cols


def cut_at_escape(x, y, view_range, status: str, margin: float = 2.0):
    """A run that blew up (or hit an undefined value) cut just after it leaves the plot by more than
    ``margin`` view widths, so that its last, enormous points draw no streak across the plot."""
    if status == "ok" or x.size == 0:
        return x, y
    (x0, x1), (y0, y1) = view_range
    wx, wy = (x1 - x0) * margin, (y1 - y0) * margin
    with np.errstate(invalid="ignore"):
        out = ~((x >= x0 - wx) & (x <= x1 + wx) & (y >= y0 - wy) & (y <= y1 + wy))
    if not out.any():
        return x, y
    k = int(np.argmax(out))
    return x[:k + 1], y[:k + 1]


def values_at_time(time, t: float, discrete: bool, *series) -> tuple:
    """Each series at time ``t`` of a run: linear between the samples of a flow, the sample at or after
    ``t`` for a map; runs may go backward in time. Rows of 2D arrays are interpolated alike."""
    forward = time[-1] >= time[0]
    k = int(np.clip(np.searchsorted(time if forward else -time, t if forward else -t), 0, time.size - 1))
    if 0 < k and time[k] != time[k - 1] and not discrete:
        w = float(np.clip((t - time[k - 1]) / (time[k] - time[k - 1]), 0, 1))
        return tuple(s[k - 1] + w * (s[k] - s[k - 1]) for s in series)
    return tuple(s[k] for s in series)


def equilibrium_fields(item):
    """(state dict, stable, kind) from an Equilibrium (core.equilibria) or a dict with the same keys."""
    get = (lambda k, d=None: item.get(k, d)) if isinstance(item, dict) else (lambda k, d=None: getattr(item, k, d))
    state = get("state") or get("point") or {}
    return dict(state), get("stable"), str(get("kind", "") or "")


def equilibrium_coordinates(system, item, names, p):
    """(u, [value of each name]) of an equilibrium, derived quantities evaluated there (time 0);
    None when its state is incomplete or a name is unknown."""
    state = equilibrium_fields(item)[0]
    try:
        u = np.array([float(state[n]) for n in system.states])
    except (KeyError, TypeError, ValueError):
        return None
    point = {**dict(zip(system.states, u)), system.time_name: 0.0}
    if any(n not in point for n in names):
        derived = system.derived_values(np.zeros(1), u.reshape(-1, 1), p)
        point.update({k: float(v[0]) for k, v in derived.items()})
    if any(n not in point for n in names):
        return None
    return u, [point[n] for n in names]


def clicked_point(plot_item, event):
    """The data point of a plain left click inside the plot's view box, else None (Ctrl+click measures,
    see ``plot_tools``)."""
    if (event.button() != Qt.MouseButton.LeftButton or event.double()
            or event.modifiers() & Qt.KeyboardModifier.ControlModifier):
        return None
    vb = plot_item.getViewBox()
    pos = event.scenePos()
    if not vb.sceneBoundingRect().contains(pos):
        return None
    return vb.mapSceneToView(pos)
