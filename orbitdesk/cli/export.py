"""``orbitdesk export PATH (--latex [--standalone] | --script | --report | --fit-script | --model) [-o FILE]``:
the model as LaTeX, a standalone Python script reproducing the run, an HTML report, a standalone script
reproducing the project's fit to its data, or the model text with the values in use written into it.
Prints to stdout without -o."""

from __future__ import annotations

import os
import sys

import numpy as np

from orbitdesk.document.project import Project

from orbitdesk.cli.common import CommandError, add_value_options, open_model, values_for
from orbitdesk.cli.run import settings_for


def register(sub):
    parser = sub.add_parser("export", help="the model as LaTeX, a standalone Python script or an HTML report")
    parser.add_argument("path")
    what = parser.add_mutually_exclusive_group(required=True)
    what.add_argument("--latex", action="store_true", help="the model's equations and values as LaTeX")
    what.add_argument("--script", action="store_true", help="a Python script (numpy, scipy) reproducing the run")
    what.add_argument("--report", action="store_true", help="a self-contained HTML report")
    what.add_argument("--fit-script", action="store_true", help="a Python script (numpy, scipy) reproducing the "
                      "fit set up in the project's Fit panel, on its stored data sets")
    what.add_argument("--model", action="store_true", help="the model text with the project's values (and "
                      "--set/--init) written into its lines: a model file any command reads")
    parser.add_argument("--standalone", action="store_true", help="with --latex: a complete document")
    parser.add_argument("-o", "--output", metavar="FILE", help="write to FILE instead of printing")
    add_value_options(parser)
    parser.set_defaults(handler=run)


def _project_for(source, system, p, u0) -> Project:
    """The project to export (a bare model file becomes one) with the effective values filled in: the
    live document's project (``values_for`` put --set/--init into it)."""
    if source.doc.system is not system:
        source.doc.adopt_system(system, None)
    source.doc.show_state(dict(zip(system.parameters, map(float, p))), dict(zip(system.states, map(float, u0))))
    return source.doc.to_project()


def _equilibria(system, p):
    if not system.autonomous_at(p):
        return None
    try:
        from orbitdesk.analyses.equilibria import find_equilibria
    except ModuleNotFoundError:
        return None
    try:
        return find_equilibria(system, p=p, exact_timeout=2.0)
    except ValueError:
        return None


def _figures_and_results(project, equilibria):
    """The report's figures and computed results, drawn by the app's own plots on Qt's offscreen
    platform (``orbitdesk.app.plots.figures``, imported only here, so that the other commands never load Qt);
    none when Qt cannot start."""
    try:
        from orbitdesk.app.plots.figures import headless_report_parts
    except ImportError as err:
        print(f"orbitdesk export: no figures ({err})", file=sys.stderr)
        return {}, ({}, {})
    return headless_report_parts(project, equilibria)


def _kept_fit(source, system, p, u0):
    """The fit the project keeps (the live document's), when it was computed for these values and data;
    None otherwise (the report then runs the fit set up in the project)."""
    doc = source.doc
    fit = doc.result("fit")
    same = np.array_equal(p, doc.param_vector()) and np.array_equal(u0, doc.initial_vector())
    return fit if fit is not None and same and system is doc.system and not doc.result_stale("fit") else None


def _write(text: str, output: str | None) -> None:
    if output is None:
        sys.stdout.write(text)
        return
    from orbitdesk.document.safe_files import atomic_write

    try:  # complete or not at all
        atomic_write(output, text.encode("utf-8"), 0o755 if output.endswith(".py") else None)
    except OSError as err:
        raise CommandError(f"cannot write {output}: {err.strerror or err}") from None


def _fit_script(source, system, p, u0, title) -> str:
    from orbitdesk.exports.fit_script import fit_script
    from orbitdesk.analyses.fitting import FitError
    from orbitdesk.exports.report_fit import fit_settings_from_project, project_vectors

    project = source.project
    if project is None or not project.datasets:
        raise CommandError("--fit-script needs a project that holds data sets")
    settings = fit_settings_from_project(project)
    if settings is None:
        raise CommandError("the project has no fit set up (tick values to estimate in the Fit panel)")
    try:
        return fit_script(system, project.datasets, settings, p, u0, project_vectors(project, system)[2], title=title)
    except FitError as err:
        raise CommandError(f"cannot export the fit: {err}") from None


def run(args) -> int:
    if args.standalone and not args.latex:
        raise CommandError("--standalone goes with --latex")
    source, system, p, u0 = open_model(args, noise=True)
    title = source.project.name if source.project is not None else source.path.stem
    if args.latex:
        from orbitdesk.exports.latex import model_latex

        text = model_latex(system, system.param_dict(p), dict(zip(system.states, map(float, u0))),
                           standalone=args.standalone, title=title)
    elif args.script:
        from orbitdesk.exports.run_script import run_script

        settings = settings_for(source, args)
        if system.kind != "map" and settings.t_end == settings.t_start:
            raise CommandError("the stored end time equals the start time")
        output = os.path.splitext(os.path.basename(args.output))[0] + ".csv" if args.output else "run.csv"
        try:
            text = run_script(system, settings, u0, p, title=title, output=output)
        except ValueError as err:  # a model the script cannot reproduce (delays), said plainly
            raise CommandError(str(err)) from None
    elif args.fit_script:
        text = _fit_script(source, system, p, u0, title)
    elif args.model:
        from orbitdesk.language.written_values import with_values

        text = with_values(source.text, source.doc.parsed, system.param_dict(p), dict(zip(system.states, map(float, u0))))
    else:
        from orbitdesk.exports.report import render_report

        project = _project_for(source, system, p, u0)
        equilibria = _equilibria(system, p)
        figures, (results, stale) = _figures_and_results(project, equilibria)
        text = render_report(project, system, figures, equilibria=equilibria, results=results, stale=stale,
                             fit=_kept_fit(source, system, p, u0))
    _write(text, args.output)
    return 0
