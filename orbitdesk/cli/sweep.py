"""``orbitdesk sweep PATH --param NAME --from A --to B --count M ...``: an orbit diagram as JSON or CSV."""

import argparse

import sys

import numpy as np

from orbitdesk.engine.executors import SchedulerError, executor_for
from orbitdesk.analyses.sweep import (BOTH, DOWN, ITERATE, MAXIMA, PLANE, STROBE, UP, SweepSettings, accuracy_like,
                                      check_sweep_size, sweep)
from orbitdesk.engine.limits import LimitExceeded
from orbitdesk.engine.methods import METHODS, NAMES
from orbitdesk.system.compiled_system import MAP

from orbitdesk.cli.common import (CommandError, add_accuracy_options, add_value_options, apply_accuracy, load_system, parse_assignments, parse_number, parse_positive,
                     print_json,
                     read_source, stderr_progress, values_for, write_csv)
from orbitdesk.cli.run import settings_for

_DIRECTIONS = {"up": UP, "down": DOWN, "both": BOTH}


def register(sub):
    parser = sub.add_parser("sweep", help="orbit diagram: samples of a quantity over a range of one parameter")
    parser.add_argument("path")
    parser.add_argument("--param", required=True, metavar="NAME", help="the parameter to sweep")
    parser.add_argument("--from", dest="start", required=True, metavar="A", help="first value")
    parser.add_argument("--to", dest="stop", required=True, metavar="B", help="last value")
    parser.add_argument("--count", type=int, required=True, metavar="M", help="number of values")
    parser.add_argument("--observe", metavar="NAME", help="the quantity sampled (default: the first state)")
    how = parser.add_mutually_exclusive_group()
    how.add_argument("--plane", metavar="STATE=VALUE", help="sample crossings of a section (flows)")
    how.add_argument("--strobe", metavar="T", help="sample once every period T (flows)")
    how.add_argument("--maxima", action="store_true", help="sample local maxima of the observed state (flows)")
    parser.add_argument("--direction", choices=sorted(_DIRECTIONS), help="crossing direction for --plane (default up)")
    parser.add_argument("--transient", metavar="T", help="time (flows) or iterations (maps) dropped first")
    parser.add_argument("--samples", type=int, metavar="K", help="samples per value (default 100)")
    parser.add_argument("--duration", metavar="T", help="longest sampling time for --plane/--maxima")
    add_accuracy_options(parser, [m for m in NAMES if METHODS[m].adaptive],
                         "the adaptive method (default: the project's, or dop853 - the stiff one when a probe run "
                         "shows the system stiff)")
    parser.add_argument("--lyapunov", action="store_true", help="also the largest Lyapunov exponent per value")
    where = parser.add_argument_group("where the sweep runs (default: one ensemble in this process)")
    where.add_argument("--workers", type=int, metavar="N",
                       help="split the values into chunks run by N local worker processes")
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help="send the chunks to the Dask cluster whose scheduler is at ADDRESS (tcp://host:8786)")
    add_value_options(parser)
    out = parser.add_mutually_exclusive_group()
    out.add_argument("--json", action="store_true", help="print the sweep as JSON (the default)")
    out.add_argument("--csv", metavar="FILE", help="write one row per sample as CSV")
    parser.set_defaults(handler=run)


def sweep_settings(system, source, args) -> SweepSettings:
    stored = settings_for(source, argparse.Namespace())  # the project's solver settings, if any
    settings = SweepSettings(bound=stored.bound, **accuracy_like(stored))
    is_map = system.kind == MAP
    chosen = "--plane" if args.plane else "--strobe" if args.strobe else "--maxima" if args.maxima else None
    if is_map:
        if chosen:
            raise CommandError(f"{chosen} applies to flows; a map is sampled by its iterates")
        settings.mode = ITERATE
    elif chosen is None:
        raise CommandError("a flow needs a way to sample it: --plane STATE=VALUE, --strobe T or --maxima")
    if args.direction and not args.plane:
        raise CommandError("--direction goes with --plane")
    if args.plane:
        (name, value), = parse_assignments([args.plane], "plane").items()
        settings.mode, settings.plane = PLANE, (name, value)
        settings.direction = _DIRECTIONS[args.direction or "up"]
    elif args.strobe:
        settings.mode, settings.period = STROBE, parse_positive(args.strobe, "--strobe")
    elif args.maxima:
        settings.mode = MAXIMA
    if args.duration is not None:
        if is_map:
            raise CommandError("--duration applies to flows; a map runs --samples iterations")
        settings.duration = parse_positive(args.duration, "--duration")
    apply_accuracy(settings, args, is_map)
    if args.transient is not None:
        settings.transient = parse_number(args.transient, "--transient")
        if settings.transient < 0:
            raise CommandError("--transient must be zero or positive")
    if args.samples is not None:
        if args.samples < 1:
            raise CommandError("--samples must be at least 1")
        settings.samples = args.samples
    settings.observe = args.observe
    settings.lyapunov = bool(args.lyapunov)
    try:
        return settings.checked(system)
    except ValueError as err:
        raise CommandError(str(err)) from None


def run(args) -> int:
    source = read_source(args.path)
    system = load_system(source)
    if args.param not in system.parameters:
        known = ", ".join(system.parameters) or "none"
        raise CommandError(f"unknown parameter '{args.param}' (parameters: {known})")
    start, stop = parse_number(args.start, "--from"), parse_number(args.stop, "--to")
    if args.count < 1:
        raise CommandError("--count must be at least 1")
    if start == stop and args.count > 1:
        raise CommandError("--from and --to must differ for more than one value (--count 1 takes one value)")
    if start != stop and args.count == 1:
        raise CommandError("--count 1 takes one value: give it as both --from and --to")
    p, u0 = values_for(system, source, args.set, args.init)
    settings = sweep_settings(system, source, args)
    try:
        check_sweep_size(system, args.count, settings.checked(system))  # before the values are allocated
    except LimitExceeded:
        raise  # the command line's limit message
    except ValueError as err:
        raise CommandError(str(err)) from None
    values = np.linspace(start, stop, args.count)
    if args.workers is not None and args.workers < 1:
        raise CommandError("--workers must be at least 1")
    try:
        if args.scheduler or args.workers:
            with executor_for(args.scheduler, args.workers) as executor:
                result = sweep(system, args.param, values, settings, u0=u0, p=p, progress=stderr_progress("sweep"),
                               executor=executor)
        else:
            result = sweep(system, args.param, values, settings, u0=u0, p=p, progress=stderr_progress("sweep"))
    except SchedulerError as err:
        raise CommandError(str(err)) from None
    except ValueError as err:
        raise CommandError(str(err)) from None
    if args.csv:
        rows_value, rows_index, rows_sample, rows_lyap = [], [], [], []
        for i, value in enumerate(result.values):
            points = result.points(i)
            if points.size == 0:
                points = np.array([np.nan])
            rows_value.extend([value] * points.size)
            rows_index.extend(range(points.size))
            rows_sample.extend(points)
            if result.lyapunov is not None:
                rows_lyap.extend([result.lyapunov[i]] * points.size)
        header = [args.param, "sample", result.observed] + (["lyapunov"] if result.lyapunov is not None else [])
        columns = [np.array(rows_value), np.array(rows_index), np.array(rows_sample)]
        if result.lyapunov is not None:
            columns.append(np.array(rows_lyap))
        write_csv(args.csv, header, columns)
    else:
        print_json(result.to_dict())
    note = result.shortfall(settings.duration if system.kind != MAP else None)
    for text in result.notes + ([note] if note else []):
        print(f"note: {text}", file=sys.stderr)
    return 0
