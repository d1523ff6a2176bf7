"""``orbitdesk basins PATH --x STATE=LO:HI:N --y STATE=LO:HI:N``: basins of attraction over a grid of starts,
each labelled by the attractor it reaches (-1: escape), as JSON or CSV; ``--strobe T`` for the
stroboscopic basins of a forced flow. A flow's starts are integrated like the project's run (its adaptive
method and tolerances; a fixed-step run: RK4 at its step), or as ``--method``/``--rtol``/``--atol`` or
``--dt`` (RK4 at that step) say."""

import argparse

from orbitdesk.analyses.basins import BasinSettings, basins
from orbitdesk.analyses.sweep import accuracy_like
from orbitdesk.engine.methods import METHODS, NAMES
from orbitdesk.system.compiled_system import MAP

from orbitdesk.cli.common import (analysis_errors, add_accuracy_options, add_grid_axes, add_outputs, apply_accuracy,
                                  CommandError, grid_axes, open_model, parse_number, parse_positive, stderr_progress,
                                  write_grid)


def register(sub):
    parser = sub.add_parser("basins", help="basins of attraction: which attractor each start in a grid reaches")
    parser.add_argument("path")
    add_grid_axes(parser, "state", "starts")
    parser.add_argument("--transient", metavar="T", help="time (flows) or iterations (maps) before looking")
    parser.add_argument("--samples", type=int, metavar="K", help="states looked at per start (default 48)")
    parser.add_argument("--every", metavar="T", help="time or iterations between them (flows without --strobe)")
    parser.add_argument("--strobe", metavar="T", help="forcing period: look once per period (stroboscopic basins)")
    add_accuracy_options(parser, [m for m in NAMES if METHODS[m].adaptive and not METHODS[m].stiff],
                         "the adaptive method of flows (default: the project's, or dop853; the stiff methods run "
                         "one orbit at a time and are not offered here)")
    parser.add_argument("--escape", metavar="R", help="|state| beyond this counts as escape (default 1000)")
    add_outputs(parser, run, "print the basins as JSON (the default)",
                csv_help="write one row per start: x, y, attractor (-1: escape)")


def run(args) -> int:
    source, system, p, u0 = open_model(args)
    x_name, xs, y_name, ys = grid_axes(args, system.states, "state")
    settings = basin_accuracy(system, source, args)
    if args.transient is not None:
        settings.transient = parse_number(args.transient, "--transient")
    if args.samples is not None:
        settings.samples = args.samples
    if args.every is not None:
        settings.every = parse_positive(args.every, "--every")
    if args.strobe is not None:
        if system.kind == MAP:
            raise CommandError("--strobe applies to forced flows; a map is looked at every iteration")
        settings.period = parse_positive(args.strobe, "--strobe")
    if args.escape is not None:
        settings.escape = parse_positive(args.escape, "--escape")
    with analysis_errors():
        result = basins(system, x_name, xs, y_name, ys, settings, u0=u0, p=p, progress=stderr_progress("basins"))
    write_grid(args, result, result.to_dict())
    return 0


def basin_accuracy(system, source, args) -> BasinSettings:
    """BasinSettings with a flow's integration: the project's run (its adaptive method and tolerances, or RK4 at
    its fixed step; a stiff method gives way to the default one, the starts run together), then --dt or
    --method, --rtol, --atol."""
    from orbitdesk.cli.run import settings_for

    accuracy = accuracy_like(settings_for(source, argparse.Namespace()))
    if accuracy["method"] is not None and METHODS[accuracy["method"]].stiff:
        accuracy["method"] = None
    settings = BasinSettings(**accuracy)
    apply_accuracy(settings, args, system.kind == MAP)
    return settings
