"""``orbitdesk grid PATH --x NAME=LO:HI:N --y NAME=LO:HI:N (--lyapunov | --period)``: a two-parameter map of
the largest Lyapunov exponent or of the period of the attractor, as JSON or CSV (one row per grid point)."""


from orbitdesk.analyses.parameter_maps import period_grid
from orbitdesk.analyses.sweep import MAXIMA, STROBE, GridSettings, SweepSettings, lyapunov_grid
from orbitdesk.system.compiled_system import MAP

from orbitdesk.cli.common import (analysis_errors, add_grid_axes, add_outputs, CommandError, grid_axes, open_model,
                                  parse_number, parse_positive, stderr_progress, write_grid)


def register(sub):
    parser = sub.add_parser("grid", help="two-parameter map of the largest Lyapunov exponent or of the period")
    parser.add_argument("path")
    add_grid_axes(parser, "parameter", "values")
    what = parser.add_mutually_exclusive_group(required=True)
    what.add_argument("--lyapunov", action="store_true", help="the largest Lyapunov exponent at each point")
    what.add_argument("--period", action="store_true",
                      help="the period of the attractor (maps: iterations; forced flows: forcing periods, "
                           "with --strobe T; autonomous flows: maxima per cycle and the period in time)")
    parser.add_argument("--strobe", metavar="T", help="forcing period of a flow (--period)")
    parser.add_argument("--max-period", type=int, default=32, metavar="K", help="longest period looked for (32)")
    parser.add_argument("--transient", metavar="T", help="time (flows) or iterations (maps) dropped first")
    parser.add_argument("--duration", metavar="T", help="averaging time or iterations of the exponent")
    parser.add_argument("--dt", metavar="H", help="integration step of flows")
    add_outputs(parser, run, "print the grid as JSON (the default)",
                csv_help="write one row per grid point: x, y, value")


def run(args) -> int:
    source, system, p, u0 = open_model(args)
    x_name, xs, y_name, ys = grid_axes(args, system.parameters, "parameter")
    transient = parse_number(args.transient, "--transient") if args.transient is not None else None
    if transient is not None and transient < 0:
        raise CommandError("--transient must be zero or positive")
    progress = stderr_progress("grid")
    with analysis_errors():
        if args.lyapunov:
            if args.strobe is not None or args.max_period != 32:
                raise CommandError("--strobe and --max-period go with --period")
            settings = GridSettings()
            if transient is not None:
                settings.transient = transient
            if args.duration is not None:
                settings.duration = parse_positive(args.duration, "--duration")
            if args.dt is not None:
                settings.dt = parse_positive(args.dt, "--dt")
            grid = lyapunov_grid(system, x_name, xs, y_name, ys, settings, u0=u0, p=p, progress=progress)
            data = grid.to_dict()
        else:
            if args.duration is not None:
                raise CommandError("--duration goes with --lyapunov")
            settings = SweepSettings(transient=1000.0 if system.kind == MAP else 200.0)
            if system.kind != MAP:
                if args.strobe is not None:
                    settings.mode, settings.period = STROBE, parse_positive(args.strobe, "--strobe")
                elif not system.autonomous_at(p):
                    raise CommandError("the period of a forced flow's attractor is counted in forcing periods: "
                                       "give --strobe T")
                else:
                    settings.mode = MAXIMA
            elif args.strobe is not None:
                raise CommandError("--strobe applies to flows; a map's period is counted in iterations")
            if transient is not None:
                settings.transient = transient
            if args.dt is not None:
                settings.dt = parse_positive(args.dt, "--dt")
            grid = period_grid(system, x_name, xs, y_name, ys, settings, max_period=args.max_period, u0=u0, p=p,
                               progress=progress)
            data = grid.to_dict()
    write_grid(args, grid, data)
    return 0
