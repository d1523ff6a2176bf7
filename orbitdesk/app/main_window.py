"""The main window: a model panel, dockable views, the run bar (run_bar.py) with a shared time cursor, menus;
its export actions are app/exports.py's."""

from __future__ import annotations

import importlib
import logging
from pathlib import Path

import numpy as np
from PySide6.QtCore import QByteArray, QEvent, QSettings, QSize, Qt, QTimer, Signal
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import (QApplication, QDockWidget, QFileDialog, QLabel, QMainWindow, QMessageBox,
                               QProgressBar, QPushButton, QSplitter, QTabWidget, QVBoxLayout, QWidget)

from orbitdesk.document.project import ProjectError
from orbitdesk.document.views import WINDOW_KEY

from orbitdesk.app import views as views_pkg
from orbitdesk.app.errors import Notices
from orbitdesk.app.file_guard import DocumentGuard
from orbitdesk.app.plain_text import menu_text, plain_message, rich_tip
from orbitdesk.app.run_bar import RunBar
from orbitdesk.app.session import Session

log = logging.getLogger("orbitdesk.app.main_window")

APP_NAME = "OrbitDesk"
MAX_RECENT = 8
LAYOUT_DELAY_MS = 300   # the dock layout goes into the project this long after it last changed
PROJECT_FILTER = "OrbitDesk projects (*.orbitdesk)"
OPEN_FILTER = "OrbitDesk projects and models (*.orbitdesk *.txt *.model);;Model text (*.txt *.model);;All files (*)"

# Model panel parts written elsewhere: (module, class, title, placeholder text)
PANEL_PARTS = [
    ("editor", "EquationEditor", "Model", "The model editor is not available in this build."),
    ("editor", "DiagnosticsList", "Problems", ""),
    ("parameters", "ParameterPanel", "Values", "The parameter panel is not available in this build."),
    ("readback", "ModelReadback", "Read-back", "The model read-back is not available in this build."),
]
TABBED_PARTS = ("ParameterPanel", "ModelReadback")  # tabs in the lower part of the model panel, in this order


def settings() -> QSettings:
    return QSettings(APP_NAME, APP_NAME)


class _Placeholder(QLabel):
    def __init__(self, text: str, parent=None):
        super().__init__(text, parent)
        self.setAlignment(Qt.AlignmentFlag.AlignCenter)
        self.setWordWrap(True)
        self.setStyleSheet("color: palette(placeholder-text); padding: 12px;")


class MainWindow(QMainWindow):
    """The document window. ``session`` is its live document; ``help_menu`` takes extra Help entries."""

    documentOpened = Signal()

    def __init__(self, session: Session | None = None, parent=None):
        super().__init__(parent)
        self.session = session or Session(self)
        self.view_docks: dict[str, QDockWidget] = {}
        self.views_in_project: set[str] = set()
        self.views: dict[str, QWidget] = {}
        self.panel_parts: dict[str, QWidget] = {}
        self._active_view: str | None = None
        self.setObjectName("orbitdesk_main_window")
        self.setDockOptions(QMainWindow.DockOption.AnimatedDocks | QMainWindow.DockOption.AllowNestedDocks
                            | QMainWindow.DockOption.AllowTabbedDocks)
        self.setDockNestingEnabled(True)
        central = QWidget()
        central.setMaximumSize(0, 0)
        self.setCentralWidget(central)
        central.hide()

        self._make_actions()
        self.run_bar = RunBar(self)
        self.addToolBar(Qt.ToolBarArea.TopToolBarArea, self.run_bar)
        self._make_model_panel()
        self._make_view_docks()
        self._make_status_bar()
        self._make_menus()
        s = self.session
        s.projectLoaded.connect(self._on_project_loaded)  # before the walkthrough shows its dock on a load
        self._install_teaching_tools()
        self._default_state = self.saveState()

        s.dirtyChanged.connect(self._update_title)
        s.statusMessage.connect(self.show_status)
        s.busyChanged.connect(self._on_busy)
        s.runProgress.connect(self._on_progress)
        s.trajectoryChanged.connect(self._on_trajectory)
        s.runFailed.connect(lambda m: self.run_status.setText("Run failed"))
        self._layout_timer = QTimer(self, singleShot=True, interval=LAYOUT_DELAY_MS)
        self._layout_timer.timeout.connect(self.store_layout)
        for dock in self.findChildren(QDockWidget):
            for signal in (dock.dockLocationChanged, dock.visibilityChanged, dock.topLevelChanged):
                signal.connect(self._layout_changed)
            dock.installEventFilter(self)  # resized: written when the resizing stops
        self.guard = DocumentGuard(self)
        self.notices = Notices(self)
        QApplication.instance().focusChanged.connect(self._on_focus_changed)
        self.resize(self._initial_size())
        self._sized = False
        self._update_title()

    def _initial_size(self) -> QSize:
        screen = self.screen() or QApplication.primaryScreen()
        if screen is None:
            return QSize(1440, 900)
        avail = screen.availableGeometry()
        return QSize(min(1440, int(avail.width() * 0.94)), min(900, int(avail.height() * 0.92)))

    def showEvent(self, event) -> None:
        super().showEvent(event)
        if not self._sized:
            self._sized = True
            if not self.session.project.views.get(WINDOW_KEY):
                QTimer.singleShot(0, self.apply_default_sizes)

    # ------------------------------------------------------------ construction
    def _make_actions(self) -> None:
        def action(text, slot, shortcut=None, tip=None):
            a = QAction(text, self)
            if shortcut is not None:
                a.setShortcut(shortcut)
            a.setToolTip(tip or text)
            a.setStatusTip(tip or text)
            a.triggered.connect(slot)
            self.addAction(a)
            return a

        SK = QKeySequence.StandardKey
        self.new_action = action("&New", self.new_document, SK.New, "Start a new, empty project")
        self.open_action = action("&Open…", self.open_dialog, SK.Open, "Open a project or a model text file")
        self.save_action = action("&Save", self.save, SK.Save, "Save the project")
        self.save_as_action = action("Save &As…", self.save_as, SK.SaveAs, "Save the project under a new name")
        self.revert_action = action("&Revert", self.revert, None, "Go back to the saved version of the project")
        self.export_png_action = action("Export Plot as &PNG…", lambda: self.export_plot_dialog("png"), None,
                                        "Save a plot (the active view's or another) as a PNG image, at a size you pick")
        self.export_svg_action = action("Export Plot as S&VG…", lambda: self.export_plot_dialog("svg"), None,
                                        "Save a plot (the active view's or another) as an SVG drawing, at a size you "
                                        "pick")
        self.export_csv_action = action("Export &Data as CSV…", self.export_data_dialog, None,
                                        "Save the data of the active view as comma-separated values")
        self.quit_action = action("&Quit", self.close, SK.Quit, "Close OrbitDesk")
        self.undo_action = self.session.undo_stack.createUndoAction(self, "&Undo")
        self.undo_action.setShortcut(SK.Undo)
        self.redo_action = self.session.undo_stack.createRedoAction(self, "&Redo")
        self.redo_action.setShortcut(SK.Redo)
        for a in (self.undo_action, self.redo_action):
            a.setShortcutContext(Qt.ShortcutContext.WindowShortcut)
            self.addAction(a)
        self.run_action = action("Run", self.session.run, QKeySequence("F5"), "Run the model again (F5)")
        self.run_action.setShortcuts([QKeySequence("F5"), QKeySequence("Ctrl+R")])
        self.cancel_action = action("Cancel", self.session.cancel_all, QKeySequence("Shift+F5"),
                                    "Stop the computations in progress (Shift+F5)")
        self.cancel_action.setEnabled(False)
        self.about_action = action("&About OrbitDesk", self.about, None, "About this program")

    def _make_model_panel(self) -> None:
        panel = QWidget()
        panel.setObjectName("model_panel_widget")
        layout = QVBoxLayout(panel)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.setSpacing(0)
        self.model_splitter = QSplitter(Qt.Orientation.Vertical)
        self.model_splitter.setChildrenCollapsible(False)
        self.model_splitter.setHandleWidth(6)
        editor = None
        # the values and the read-back share the lower part as tabs, so the read-back has the room of the
        # whole lower part (the Jacobian in sight) rather than a strip between editor and sliders
        self.model_tabs = QTabWidget()
        self.model_tabs.setDocumentMode(True)
        for module, cls_name, title, placeholder in PANEL_PARTS:
            widget = self._make_part(module, cls_name, placeholder, editor=editor)
            if widget is None:
                continue
            if cls_name == "EquationEditor" and not isinstance(widget, _Placeholder):
                editor = widget
            self.panel_parts[cls_name] = widget
            if cls_name in TABBED_PARTS:
                self.model_tabs.addTab(widget, title)
            else:
                self.model_splitter.addWidget(widget)
        if "ParameterPanel" in self.panel_parts:
            self.model_tabs.setCurrentWidget(self.panel_parts["ParameterPanel"])
        self.model_splitter.addWidget(self.model_tabs)
        layout.addWidget(self.model_splitter)
        parts = [k for k in self.panel_parts if k not in TABBED_PARTS] + ["tabs"]
        sizes = {"EquationEditor": 320, "DiagnosticsList": 60, "tabs": 420}
        self.model_splitter.setSizes([sizes.get(k, 100) for k in parts])
        for i, key in enumerate(parts):
            self.model_splitter.setStretchFactor(i, {"EquationEditor": 3, "tabs": 3}.get(key, 1))
        dock = QDockWidget("Model", self)
        dock.setObjectName("model_panel")
        dock.setWidget(panel)
        dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable
                         | QDockWidget.DockWidgetFeature.DockWidgetFloatable
                         | QDockWidget.DockWidgetFeature.DockWidgetClosable)
        dock.toggleViewAction().setText("Model Panel")
        dock.toggleViewAction().setToolTip("Show or hide the model editor, read-back and values")
        self.addDockWidget(Qt.DockWidgetArea.LeftDockWidgetArea, dock)
        self.model_dock = dock

    def _make_part(self, module, cls_name, placeholder, editor=None):
        try:
            mod = importlib.import_module(f"orbitdesk.app.panels.{module}")
            cls = getattr(mod, cls_name)
        except (ImportError, AttributeError):
            return _Placeholder(placeholder) if placeholder else None
        try:
            if cls_name == "DiagnosticsList":
                return cls(self.session, editor=editor)
            return cls(self.session)
        except Exception:  # noqa: BLE001 - a broken panel must not keep the window from opening
            log.exception("could not create %s", cls_name)
            return _Placeholder(placeholder or f"{cls_name} could not be created.")

    def _make_view_docks(self) -> None:
        previous = None
        for name in views_pkg.VIEW_MODULES:
            dock = QDockWidget(views_pkg.module_title(name), self)
            dock.setObjectName(f"view_{name}")
            dock.setWidget(_Placeholder(""))
            dock.toggleViewAction().setToolTip(f"Show or hide the {views_pkg.module_title(name).lower()} view")
            dock.visibilityChanged.connect(lambda visible, n=name: visible and self._seen(n))
            dock.toggleViewAction().triggered.connect(lambda checked, n=name: checked and self.show_view(n))
            self.view_docks[name] = dock
            if name not in views_pkg.DEFAULT_VISIBLE:
                self.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, dock)
                anchor = self.view_docks.get(views_pkg.DEFAULT_VISIBLE[-1])
                if anchor is not None:
                    self.tabifyDockWidget(anchor, dock)
                dock.hide()
                continue
            if previous is None:
                self.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, dock)
            else:
                self.splitDockWidget(previous, dock, Qt.Orientation.Vertical)
            previous = dock
        visible = [self.view_docks[n] for n in views_pkg.DEFAULT_VISIBLE if n in self.view_docks]
        for name in views_pkg.DEFAULT_VISIBLE:
            if name in self.view_docks:
                self.ensure_view(name)
        if visible:
            self.view_docks[views_pkg.DEFAULT_VISIBLE[-1]].raise_()

    def apply_default_sizes(self) -> None:
        """Model panel about 430 px wide, side panels (e.g. a walkthrough) about 290 px, the views the rest;
        the time series above a taller phase plane."""
        visible = [self.view_docks[n] for n in views_pkg.DEFAULT_VISIBLE
                   if n in self.view_docks and self.view_docks[n].isVisible()]
        if not visible:
            return
        side = [d for d in self.findChildren(QDockWidget)
                if d.isVisible() and not d.isFloating() and d is not self.model_dock
                and d not in self.view_docks.values() and d.parentWidget() is self
                and self.dockWidgetArea(d) == Qt.DockWidgetArea.RightDockWidgetArea]
        width = max(self.width(), 800)
        model_w = min(430, width // 3)
        side_w = [min(290, width // 5) for _ in side]
        rest = max(width - model_w - sum(side_w), 300)
        self.resizeDocks([self.model_dock, visible[0], *side], [model_w, rest, *side_w], Qt.Orientation.Horizontal)
        if len(visible) > 1:
            height = max(self.height() - 120, 400)
            self.resizeDocks(visible[:2], [int(height * 0.42), int(height * 0.58)], Qt.Orientation.Vertical)

    def _make_status_bar(self) -> None:
        bar = self.statusBar()
        self.run_status = QLabel("")
        self.run_status.setToolTip("State of the last run")
        self.progress = QProgressBar()
        self.progress.setRange(0, 1000)
        self.progress.setMaximumWidth(160)
        self.progress.setTextVisible(False)
        self.progress.setToolTip("Progress of the computation")
        self.progress.hide()
        self.cancel_button = QPushButton("Cancel")
        self.cancel_button.setToolTip("Stop the computations in progress (Shift+F5)")
        self.cancel_button.setEnabled(False)
        self.cancel_button.clicked.connect(self.session.cancel_all)
        self.jobs_label = QLabel("")
        self.jobs_label.setToolTip("The computations under way")
        self._jobs_timer = QTimer(self, singleShot=True, interval=120)
        self._jobs_timer.timeout.connect(self._show_jobs)
        self.session.jobs.jobsChanged.connect(self._jobs_timer.start)
        self.session.jobs.jobProgress.connect(lambda *_a: self._jobs_timer.isActive() or self._jobs_timer.start())
        bar.addPermanentWidget(self.jobs_label)
        bar.addPermanentWidget(self.run_status)
        bar.addPermanentWidget(self.progress)
        bar.addPermanentWidget(self.cancel_button)
        bar.messageChanged.connect(lambda m: m or bar.setToolTip(""))  # the tip goes with the message

    def _make_menus(self) -> None:
        mb = self.menuBar()
        file_menu = mb.addMenu("&File")
        file_menu.addActions([self.new_action, self.open_action])
        self.recent_menu = file_menu.addMenu("Open &Recent")
        self.recent_menu.setToolTipsVisible(True)
        self.recent_menu.aboutToShow.connect(self._fill_recent)
        file_menu.addSeparator()
        file_menu.addActions([self.save_action, self.save_as_action, self.revert_action])
        file_menu.addSeparator()
        file_menu.addActions([self.export_png_action, self.export_svg_action, self.export_csv_action])
        file_menu.addSeparator()
        file_menu.addAction(self.quit_action)
        self.file_menu = file_menu

        edit_menu = mb.addMenu("&Edit")
        edit_menu.addActions([self.undo_action, self.redo_action])
        self.edit_menu = edit_menu

        view_menu = mb.addMenu("&View")
        view_menu.addAction(self.model_dock.toggleViewAction())
        view_menu.addAction(self.run_bar.toggleViewAction())
        view_menu.addSeparator()
        for dock in self.view_docks.values():
            view_menu.addAction(dock.toggleViewAction())
        view_menu.addSeparator()
        reset = view_menu.addAction("Reset Layout")
        reset.setToolTip("Put the panels back where they start")
        reset.triggered.connect(self.reset_layout)
        self.view_menu = view_menu

        run_menu = mb.addMenu("&Run")
        run_menu.addActions([self.run_action, self.cancel_action])
        self.run_menu = run_menu

        self.help_menu = mb.addMenu("&Help")
        self.help_menu.addAction(self.about_action)
        for menu in (file_menu, edit_menu, view_menu, run_menu, self.help_menu):
            menu.setToolTipsVisible(True)

    # ------------------------------------------------------------ teaching tools
    def _install_teaching_tools(self) -> None:
        """The Walkthrough dock, Help > Language Reference and Sample Projects, File > Export (LaTeX,
        script, report); each module adds its own parts."""
        from orbitdesk.app.panels import data_import
        from orbitdesk.app import exports
        from orbitdesk.app import help as help_ui
        from orbitdesk.app.panels import walkthrough as walkthrough_panel

        walkthrough_panel.install(self)
        exports.install(self)
        data_import.install(self)
        help_ui.install(self)

    # ------------------------------------------------------------ views
    def _seen(self, name: str):
        self.views_in_project.add(name)
        return self.ensure_view(name)

    def ensure_view(self, name: str):
        """The view widget of module ``name``, imported and created on first use."""
        if name in self.views:
            return self.views[name]
        dock = self.view_docks[name]
        with self.session.program():   # a view opened sets its own controls: no edit of the project
            try:
                cls = views_pkg.load_view_class(name)
                view = cls(self.session, dock)
            except Exception as exc:  # noqa: BLE001 - one broken view must not take the window down
                log.exception("could not create the view %s", name)
                dock.setWidget(_Placeholder(f"This view could not be opened: {exc}"))
                return None
            dock.setWindowTitle(cls.title)
            dock.toggleViewAction().setText(dock.windowTitle())
            dock.setWidget(view)
            self.views[name] = view
            self.views_in_project.add(name)
            from orbitdesk.app.plots.figures import equip_plots

            equip_plots(self, view)
        if self._active_view is None:
            self._active_view = name
        return view

    def show_view(self, name: str):
        """Open the view ``name`` where it is seen: beside the views already open (split, never a tab
        behind another view). Returns the view."""
        from orbitdesk.app.dock_layout import is_open, show_docks

        wanted = [n for n in views_pkg.VIEW_MODULES if n != name and is_open(self.view_docks[n])
                  and not self.view_docks[n].isFloating()] + [name]
        show_docks(self, wanted, arrange=True)
        return self.ensure_view(name)

    def active_view(self):
        """The view the user last worked in (else the first visible one)."""
        if self._active_view in self.views and self.view_docks[self._active_view].isVisible():
            return self.views[self._active_view]
        for name, view in self.views.items():
            if self.view_docks[name].isVisible():
                return view
        return None

    def _on_focus_changed(self, _old, new) -> None:
        w = new
        while w is not None:
            for name, dock in self.view_docks.items():
                if w is dock:
                    self._active_view = name
                    return
            w = w.parentWidget()

    def _layout_changed(self, *_args) -> None:
        self.store_layout()
        self._layout_timer.start()  # and once more when the docks have settled

    def store_layout(self, *_args) -> None:
        """Write the dock layout into the project (shortly after a dock moved, showed, hid or was resized;
        each view writes its own settings as they change)."""
        if self._sized:
            self.session.set_view_settings(WINDOW_KEY, {"state": bytes(self.saveState().toBase64()).decode("ascii")})

    def eventFilter(self, watched, event) -> bool:
        if event.type() == QEvent.Type.Resize and isinstance(watched, QDockWidget):
            self._layout_timer.start()
        return super().eventFilter(watched, event)

    def resizeEvent(self, event) -> None:
        super().resizeEvent(event)
        if hasattr(self, "_layout_timer"):
            self._layout_timer.start()

    def restore_layout(self, window_settings: dict) -> bool:
        state = window_settings.get("state") if isinstance(window_settings, dict) else None
        if not isinstance(state, str):
            return False
        try:
            data = QByteArray.fromBase64(state.encode("ascii"))
        except UnicodeEncodeError:
            return False
        return bool(self.restoreState(data))

    def reset_layout(self) -> None:
        self.restoreState(self._default_state)
        for name in views_pkg.DEFAULT_VISIBLE:
            if name in self.view_docks:
                self.view_docks[name].show()

    # ------------------------------------------------------------ session events
    def _on_project_loaded(self) -> None:
        """The project's own layout, or the starting one: never the layout of the project before; the
        time cursor where it was (the first run puts it inside its span)."""
        window = self.session.project.views.get(WINDOW_KEY, {})
        cursor = window.get("time_cursor") if isinstance(window, dict) else None
        if isinstance(cursor, (int, float)) and not isinstance(cursor, bool) and np.isfinite(cursor):
            self.session.time_cursor = float(cursor)
        if not self.restore_layout(window):
            self.reset_layout()
            self._show_kept_results()
            if self.isVisible():  # after other panels have reacted to the load and the kept results' views are
                # laid out (their layout gives the side panels back the widths they had before the reset)
                QTimer.singleShot(0, self.apply_default_sizes)
        # the views this project uses: open in its layout, or opened or made while it is open (the report
        # leaves out views made for a project before and closed in this one)
        self.views_in_project = {n for n, d in self.view_docks.items() if d.toggleViewAction().isChecked()}
        self.run_status.setText("")
        self._update_title()

    def _show_kept_results(self) -> None:
        """A project without a saved layout (written by the command line, say `orbitdesk continue --keep`)
        opens with the views that show its kept results beside the starting ones."""
        from orbitdesk.app.dock_layout import show_docks
        from orbitdesk.document.views import views_showing

        kept = [v.module for v in views_showing(self.session.doc.results.kinds()) if v.module in self.view_docks]
        if kept:
            show_docks(self, [n for n in views_pkg.DEFAULT_VISIBLE if n in self.view_docks] + kept, arrange=True)

    def _update_title(self, *_args) -> None:
        dirty = self.session.dirty
        self.setWindowTitle(f"{'• ' if dirty else ''}{self.session.name} — {APP_NAME}")
        self.revert_action.setEnabled(self.session.path is not None)

    def show_status(self, text: str, msec: int = 10_000) -> None:
        """A message in the status bar, cut with "…" where it would run under the run state and the buttons
        at the right (a run's long message was cut off mid-word); the whole text is the bar's tip meanwhile."""
        bar = self.statusBar()
        right = sum(w.width() for w in (self.jobs_label, self.run_status, self.progress, self.cancel_button)
                    if w.isVisible())
        room = max(80, bar.width() - right - 30)
        shown = bar.fontMetrics().elidedText(text, Qt.TextElideMode.ElideRight, room)
        bar.setToolTip(rich_tip(text) if shown != text else "")
        bar.showMessage(shown, msec)

    def _on_busy(self, busy: bool) -> None:
        self.cancel_button.setEnabled(busy)
        self.cancel_action.setEnabled(busy)
        if busy:
            self.progress.setValue(0)
            self.progress.show()
            if self.session.job_running("run"):
                self.run_status.setText("Running…")
        else:
            self.progress.hide()
            if self.run_status.text() == "Running…":
                self.run_status.setText("Stopped")

    def _show_jobs(self) -> None:
        """Each job under way with what it does and how far it is ("Sweeping gamma 40% · Nullclines"),
        the overall bar at the least advanced one; the full list in the tooltip."""
        jobs = [(label, fraction) for key, label, fraction in self.session.jobs.active_jobs() if key != "compile"]
        parts = [f"{label} {int(fraction * 100)}%" if fraction > 0 else label for label, fraction in jobs]
        text = " · ".join(parts[:3]) + (f" · {len(parts) - 3} more" if len(parts) > 3 else "")
        self.jobs_label.setText(text)
        self.jobs_label.setToolTip("\n".join(parts) if parts else "The computations under way")
        if jobs:
            self.progress.setValue(int(min(f for _l, f in jobs) * 1000))

    def _on_progress(self, fraction: float) -> None:
        self.progress.setValue(int(fraction * 1000))

    def _on_trajectory(self, traj) -> None:
        n = traj.time.size
        if traj.status == "ok":
            if traj.kind == "map":
                text = f"{n:,} points, n = 0 … {int(traj.time[-1]) if n else 0}"
            else:
                text = f"{n:,} points, t = {traj.time[0]:.6g} … {traj.time[-1]:.6g}" if n \
                    else "no points"
        else:
            labels = {"diverged": "Blew up", "undefined": "Undefined value", "cancelled": "Stopped",
                      "step_failed": "Step size collapsed"}
            text = f"{labels.get(traj.status, traj.status)} after {n:,} points"
            self.run_status.setToolTip(rich_tip(traj.message) if traj.message else "State of the last run")
        self.run_status.setText(text)

    # ------------------------------------------------------------ documents
    def maybe_save(self) -> bool:
        """Ask before unsaved work is closed or replaced. True means: go ahead."""
        if not self.session.dirty:
            return True
        answer = plain_message(
            self, "question", "Unsaved changes", f"“{self.session.name}” has changes that are not saved. Save them first?",
            QMessageBox.StandardButton.Save | QMessageBox.StandardButton.Discard
            | QMessageBox.StandardButton.Cancel, QMessageBox.StandardButton.Save)
        if answer == QMessageBox.StandardButton.Save:
            return self.save()
        return answer == QMessageBox.StandardButton.Discard

    def new_document(self) -> bool:
        if not self.maybe_save():
            return False
        self.session.new()
        self.documentOpened.emit()
        return True

    def open_dialog(self) -> bool:
        if not self.maybe_save():
            return False
        start = str(self.session.path.parent) if self.session.path else ""
        path, _ = QFileDialog.getOpenFileName(self, "Open", start, OPEN_FILTER)
        return bool(path) and self.open_path(path, ask=False)

    def open_path(self, path, ask: bool = True) -> bool:
        """Open a project or model file; a file that cannot be read is reported and nothing changes."""
        if ask and not self.maybe_save():
            return False
        if not self.guard.confirm_open(path):
            return False
        try:
            self.session.open(path)
        except ProjectError as e:
            where = f"\n\n(at {e.path} in the file)" if e.path not in ("", "$") else ""
            plain_message(self, "critical", "Could not open the file", f"{Path(path).name}: {e.message}{where}")
            return False
        self.add_recent(Path(path))
        self.documentOpened.emit()
        return True

    def save(self) -> bool:
        if self.session.path is None:
            return self.save_as()
        return self._save_to(self.session.path)

    def save_as(self) -> bool:
        suggested = self.session.path or Path.home() / f"{self.session.name}.orbitdesk"
        path, _ = QFileDialog.getSaveFileName(self, "Save As", str(suggested), PROJECT_FILTER)
        if not path:
            return False
        path = Path(path)
        if path.suffix.lower() != ".orbitdesk":
            path = path.with_name(path.name + ".orbitdesk")
        return self._save_to(path)

    def _save_to(self, path: Path) -> bool:
        if not self.guard.save(path):  # asks before overwriting changes on disk or a read-only file
            return False
        self.add_recent(path)
        self._update_title()
        self.statusBar().showMessage(f"Saved {path.name}", 5000)
        return True

    def revert(self) -> bool:
        if self.session.path is None:
            return False
        if self.session.dirty:
            answer = plain_message(
                self, "question", "Revert", f"Discard the changes to “{self.session.name}” and reload the saved version?",
                QMessageBox.StandardButton.Discard | QMessageBox.StandardButton.Cancel,
                QMessageBox.StandardButton.Cancel)
            if answer != QMessageBox.StandardButton.Discard:
                return False
        return self.open_path(self.session.path, ask=False)

    # ------------------------------------------------------------ recent files
    def recent_files(self) -> list[str]:
        value = settings().value("recent_files", [])
        if isinstance(value, str):
            value = [value]
        return [v for v in (value or []) if isinstance(v, str)]

    def add_recent(self, path: Path) -> None:
        p = str(Path(path).resolve())
        files = [p] + [f for f in self.recent_files() if f != p]
        settings().setValue("recent_files", files[:MAX_RECENT])

    def _fill_recent(self) -> None:
        self.recent_menu.clear()
        files = self.recent_files()
        for f in files:
            a = self.recent_menu.addAction(menu_text(Path(f).name))
            a.setToolTip(rich_tip(f))
            a.triggered.connect(lambda _=False, f=f: self.open_path(f))
        if not files:
            a = self.recent_menu.addAction("No recent files")
            a.setEnabled(False)
        else:
            self.recent_menu.addSeparator()
            clear = self.recent_menu.addAction("Clear List")
            clear.triggered.connect(lambda: settings().setValue("recent_files", []))

    # ------------------------------------------------------------ export (app/exports.py, imported when used)
    def export_plot(self, path, view=None, size=None, legend=None, plot=None) -> bool:
        """A plot of the active (or given) view as PNG or SVG (``exports.export_plot``)."""
        from orbitdesk.app import exports

        return exports.export_plot(self, path, view, size, legend, plot)

    def export_data(self, path, view=None) -> bool:
        """The active (or given) view's data as CSV (``exports.export_data``)."""
        from orbitdesk.app import exports

        return exports.export_data(self, path, view)

    def export_plot_dialog(self, kind: str, plot=None) -> bool:
        from orbitdesk.app import exports

        return exports.export_plot_dialog(self, kind, plot)

    def export_data_dialog(self) -> bool:
        from orbitdesk.app import exports

        return exports.export_data_dialog(self)

    # ------------------------------------------------------------ misc
    def about(self) -> None:
        import orbitdesk

        version = getattr(orbitdesk, "__version__", "")
        QMessageBox.about(self, "About OrbitDesk",
                          f"<b>OrbitDesk</b> {version}<p>A workbench for hand-built dynamical models: flows and maps, "
                          "trajectories, phase planes, equilibria and more.</p>")

    def closeEvent(self, event) -> None:
        if not self.maybe_save():
            event.ignore()
            return
        self.run_bar.play.setChecked(False)
        self.session.shutdown()
        self.guard.release()
        self.notices.close()
        event.accept()
