"""File > Export: the model as LaTeX, the model text with the values now set, a standalone Python script
reproducing the run, an HTML report with pictures of the open views, a view's plot (PNG, SVG) and data (CSV). The texts come from the core (export_latex, export_script, report);
this module gathers what is on screen and writes the files."""

from __future__ import annotations

from pathlib import Path

from PySide6.QtGui import QAction
from PySide6.QtWidgets import QFileDialog, QMenu

from orbitdesk.exports.csv_table import whole_columns, write_csv

from orbitdesk.app.plain_text import plain_message

LATEX_DOCUMENT = "LaTeX document (*.tex)"
LATEX_SNIPPET = "LaTeX equations only, to paste into a document (*.tex)"
NO_FIGURE_VIEWS = ("equilibria",)   # the report lists equilibria as a table of its own


class ExportError(Exception):
    """Something the user must fix before exporting (plain words)."""


def _checked_model(session):
    parsed = session.parsed
    if parsed is None:
        session.validate_now()
        parsed = session.parsed
    if parsed is None or not parsed.ok:
        raise ExportError("the model has errors; fix them first (see the Problems list)")
    return parsed


def _current_system(session):
    _checked_model(session)
    system = session.system
    if system is None or list(system.states) != list(session.parsed.states):
        raise ExportError("the model is still being compiled; try again in a moment")
    return system


# ---------------------------------------------------------------- texts

def latex_text(session, standalone: bool = True) -> str:
    from orbitdesk.exports.latex import model_latex

    parsed = _checked_model(session)
    params = {n: v for n, v in session.params.items() if n in parsed.parameters}
    initial = {n: v for n, v in session.initial.items() if n in parsed.states}
    return model_latex(parsed, params, initial, standalone=standalone, title=session.name)


def model_text(session) -> str:
    """The model text with the values now set (sliders, spin boxes) written into its lines."""
    from orbitdesk.language.written_values import with_values

    parsed = _checked_model(session)
    return with_values(session.text, parsed, session.params, session.initial)


def script_text(session, csv_name: str = "run.csv") -> str:
    from orbitdesk.exports.run_script import run_script

    system = _current_system(session)
    try:
        settings = session.run_settings()
    except (TypeError, ValueError) as e:
        raise ExportError(f"the solver settings are not usable: {e}") from None
    try:
        return run_script(system, settings, session.initial_vector(), session.param_vector(),
                          title=session.name, output=csv_name)
    except ValueError as e:
        raise ExportError(str(e)) from None


def view_figures(window) -> dict[str, bytes]:
    """Caption -> PNG of every plot of every view the open project uses (in sight, behind a tab or closed
    since: ``window.views_in_project``), drawn off screen at one fixed, readable size from what each plot
    holds, fitted to its data (plots without data are left out); the 3D scene rendered at that size too when
    it has drawn once. Views made for a project opened before and closed in this one are left out."""
    from orbitdesk.app.plots import figures

    found: dict[str, bytes] = {}

    def add(caption, data):
        name, k = caption, 2
        while name in found:
            name, k = f"{caption} ({k})", k + 1
        found[name] = data

    in_project = getattr(window, "views_in_project", None)
    for module, view in window.views.items():
        if module in NO_FIGURE_VIEWS or (in_project is not None and module not in in_project):
            continue
        for choice in figures.view_plots(view, module):
            if figures.has_data(choice.plot):
                add(choice.caption, figures.png_data(figures.plot_image(
                    choice.plot, *figures.REPORT_SIZE, legend=figures.has_named_curves(choice.plot), host=view,
                    fit=True)))
        image = figures.scene_image(view, *figures.REPORT_SIZE, framed=True)
        if image is not None:
            add(_caption(view), figures.png_data(image))
    return found


def _caption(view) -> str:
    title = view.title
    try:
        d = view.view_settings()
    except Exception:  # noqa: BLE001
        return title
    if isinstance(d.get("axes"), list) and all(isinstance(a, str) for a in d["axes"]):
        return f"{title}: {', '.join(d['axes'])}"
    return title


def _view_equilibria(window, system):
    """The equilibria the live document holds for this system and the present values (None: none found)."""
    s = window.session
    return s.doc.current_equilibria() if s.system is system and s.doc.current_equilibria() else None


def report_html(window, equilibria=None) -> str:
    from orbitdesk.exports.report import document_results, render_report

    session = window.session
    system = _current_system(session)
    project = session.to_project()
    if equilibria is None:
        equilibria = _view_equilibria(window, system)
    fit = session.doc.result("fit")  # the Fit panel's latest result
    results, stale = document_results(session.doc)
    return render_report(project, system, view_figures(window), equilibria=equilibria, results=results, fit=fit,
                         stale=stale)


# ---------------------------------------------------------------- writing

def _write(path, text: str, executable: bool = False) -> Path:
    from orbitdesk.document.safe_files import atomic_write

    path = Path(path)
    try:  # complete or not at all
        atomic_write(str(path), text.encode("utf-8"), 0o755 if executable else None)
    except OSError as e:
        raise ExportError(f"cannot write {path.name}: {e.strerror or e}") from None
    return path


def export_latex(window, path, standalone: bool = True) -> Path:
    return _write(path, latex_text(window.session, standalone))


def export_model_text(window, path) -> Path:
    return _write(path, model_text(window.session))


def export_script(window, path) -> Path:
    path = Path(path)
    return _write(path, script_text(window.session, path.with_suffix(".csv").name), executable=True)


def export_report(window, path, on_done=None, search_equilibria: bool = True) -> None:
    """Write the report. Equilibria come from the Equilibria view when it has them; otherwise they are
    searched for first on a worker thread (autonomous models), and the file is written when that ends.
    ``on_done(path or None, message)`` is called on the GUI thread in every case."""
    session = window.session
    path = Path(path)

    def finish(equilibria):
        try:
            written = _write(path, report_html(window, equilibria))
        except ExportError as e:
            _done(None, str(e))
            return
        _done(written, "")

    def _done(written, message):
        if on_done is not None:
            on_done(written, message)

    try:
        system = _current_system(session)
    except ExportError as e:
        _done(None, str(e))
        return
    equilibria = _view_equilibria(window, system)
    if equilibria is not None or not search_equilibria or not system.autonomous_at(session.param_vector()):
        finish(equilibria)
        return
    p, u0 = session.param_vector(), session.initial_vector()

    def job(cancel, report):
        from orbitdesk.analyses.equilibria import find_equilibria

        return find_equilibria(system, p, u0=u0, exact_timeout=2.0, cancel=cancel, progress=report)

    window.statusBar().showMessage("Looking for equilibria for the report…")
    session.run_job("export_report", job, finish, on_error=lambda _msg: finish(None))


# ---------------------------------------------------------------- dialogs and menu

def _start(window, suffix: str) -> str:
    s = window.session
    folder = s.path.parent if s.path is not None else Path.home()
    stem = s.path.stem if s.path is not None else (s.name or "model")
    return str(folder / f"{stem}{suffix}")


def _ask_path(window, title: str, suffix: str, filters: str):
    path, chosen = QFileDialog.getSaveFileName(window, title, _start(window, suffix), filters)
    if not path:
        return None, chosen
    if not path.lower().endswith(suffix):
        path += suffix
    return Path(path), chosen


def _report(window, ok: bool, what: str, path=None, message: str = "") -> bool:
    if ok:
        window.statusBar().showMessage(f"Exported {what} to {Path(path).name}", 8000)
    else:
        plain_message(window, "warning", "Export", f"Could not export {what}: {message}")
    return ok


def _export_dialog(window, title: str, suffix: str, filters: str, export, failed: str, done: str) -> bool:
    """Ask where, write with ``export(path, chosen_filter)``, say what happened (status bar or a warning)."""
    path, chosen = _ask_path(window, title, suffix, filters)
    if path is None:
        return False
    try:
        export(path, chosen)
    except (ExportError, ValueError) as e:
        return _report(window, False, failed, message=str(e))
    return _report(window, True, done, path)


def export_latex_dialog(window) -> bool:
    return _export_dialog(window, "Export Model as LaTeX", ".tex", f"{LATEX_DOCUMENT};;{LATEX_SNIPPET}",
                          lambda path, chosen: export_latex(window, path, standalone=chosen != LATEX_SNIPPET),
                          "the model as LaTeX", "the model as LaTeX")


def export_model_text_dialog(window) -> bool:
    return _export_dialog(window, "Export Model with These Values", ".txt", "Model text (*.txt)",
                          lambda path, _chosen: export_model_text(window, path),
                          "the model with these values", "the model with these values")


def export_script_dialog(window) -> bool:
    return _export_dialog(window, "Export Standalone Python Script", ".py", "Python script (*.py)",
                          lambda path, _chosen: export_script(window, path),
                          "the script", "a script that reproduces the run")


def export_report_dialog(window) -> bool:
    path, _ = _ask_path(window, "Export HTML Report", ".html", "HTML report (*.html)")
    if path is None:
        return False
    export_report(window, path, on_done=lambda written, message: _report(
        window, written is not None, "the report", written, message))
    return True


# ---------------------------------------------------------------- plots and a view's data

def export_plot(window, path, view=None, size=None, legend=None, plot=None) -> bool:
    """Save a plot of the active (or given) view as PNG or SVG, chosen by the file suffix, drawn off
    screen at ``size`` (width, height; default: as big as on screen) with the same view range;
    ``plot`` picks one of the view's plots (``figures.view_plots``), ``legend`` names the curves."""
    from orbitdesk.app.plots import figures

    view = view or window.active_view()
    if view is None:
        return False
    if plot is None:
        plots = figures.view_plots(view)
        if not plots and getattr(view, "glview", None) is not None:  # the 3D scene, as a picture
            scene = view.glview
            shown = (scene.width(), scene.height()) if scene.isVisible() else None
            size = tuple(size or shown or figures.REPORT_SIZE)
            # as on screen at the screen's size; at another size the camera aims at the box so that it fills the
            # picture (the same direction: a 1000 x 700 export of a short dock's scene was a small box in a void)
            return figures.save_scene(view, path, *size, framed=size != shown)
        if not plots:
            return False
        plot = plots[0].plot
    if size is None:
        shown = plot.getViewWidget()
        size = (shown.width(), shown.height()) if shown is not None and shown.isVisible() else \
            figures.REPORT_SIZE
    if legend is None:
        legend = figures.has_named_curves(plot)
    title = f"{window.session.name} — {getattr(view, 'title', 'plot')}"
    return figures.save_plot(plot, path, *size, legend=legend, host=view, title=title)

def export_data(window, path, view=None) -> bool:
    """Write the active (or given) view's data (full resolution) as CSV."""
    view = view or window.active_view()
    getter = getattr(view, "export_data", None)
    data = getter() if getter is not None else None
    if not data:
        return False
    header, rows = data
    write_csv(path, header, whole_columns(rows))  # atomic: a failure leaves no partial file
    return True

def export_plot_dialog(window, kind: str, plot=None) -> bool:
    """Ask which plot (default: ``plot``, else the active view's), its size, a legend and the format;
    then the file name; the status bar says which plot went where."""
    from orbitdesk.app.plots.figures import ExportPlotDialog

    form = ExportPlotDialog(window, kind, plot)
    if form.choice is None:
        window.statusBar().showMessage("No plot to export", 5000)
        return False
    if form.dialog.exec() != form.dialog.DialogCode.Accepted:
        return False
    kind = form.kind
    name = f"{window.session.name} {getattr(form.choice.view, 'title', 'plot')}.{kind}"
    start = (window.session.path.parent if window.session.path else Path.home()) / name
    flt = "PNG image (*.png)" if kind == "png" else "SVG drawing (*.svg)"
    path, _ = QFileDialog.getSaveFileName(window, "Export Plot", str(start), flt)
    if not path:
        return False
    if not path.lower().endswith("." + kind):
        path += "." + kind
    ok = form.export(path)
    size = f"{form.width.value()}×{form.height.value()}"
    window.statusBar().showMessage(f"Exported {form.choice.caption} to {Path(path).name} ({size})" if ok
                                 else f"Could not write {Path(path).name}", 8000)
    return ok

def export_data_dialog(window) -> bool:
    view = window.active_view()
    if view is None or not hasattr(view, "export_data"):
        window.statusBar().showMessage("The active view has no data to export", 5000)
        return False
    name = f"{window.session.name} {getattr(view, 'title', 'data')}.csv"
    start = (window.session.path.parent if window.session.path else Path.home()) / name
    path, _ = QFileDialog.getSaveFileName(window, "Export Data", str(start), "CSV (*.csv)")
    if not path:
        return False
    if not path.lower().endswith(".csv"):
        path += ".csv"
    try:
        ok = export_data(window, path, view)
    except OSError as e:
        plain_message(window, "warning", "Export Data", f"Could not write {Path(path).name}: {e.strerror or e}")
        return False
    window.statusBar().showMessage(f"Exported {Path(path).name}" if ok else "Nothing to export yet", 5000)
    return ok


def install(window) -> None:
    """File > Export > Model as LaTeX…, Standalone Python Script…, HTML Report… (above Quit)."""
    menu = QMenu("E&xport", window.file_menu)
    menu.setToolTipsVisible(True)
    entries = (
        ("Model as &LaTeX…", export_latex_dialog,
         "The equations, parameters and initial values as LaTeX (a document, or the equations alone)"),
        ("Model with These &Values…", export_model_text_dialog,
         "The model text with the values now set written into its lines: a model file to share or to run "
         "on the command line"),
        ("Standalone &Python Script…", export_script_dialog,
         "A Python script (numpy and scipy only) that reproduces the current run and writes it as CSV"),
        ("HTML &Report…", export_report_dialog,
         "One self-contained web page: the model, values, equilibria, pictures of the open views, the "
         "walkthrough"),
    )
    actions = []
    for text, fn, tip in entries:
        action = QAction(text, window)
        action.setToolTip(tip)
        action.setStatusTip(tip)
        action.triggered.connect(lambda _=False, fn=fn: fn(window))
        menu.addAction(action)
        actions.append(action)
    window.file_menu.insertMenu(window.quit_action, menu)
    window.file_menu.insertSeparator(window.quit_action)
    window.export_menu = menu
    (window.export_latex_action, window.export_model_text_action, window.export_script_action,
     window.export_report_action) = actions
