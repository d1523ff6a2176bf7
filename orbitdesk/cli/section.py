"""``orbitdesk section PATH (--plane NAME=VALUE | --strobe T [--phase S])``: Poincaré section points of a
flow."""

import math
import sys

from orbitdesk.analyses.sections import DIRECTIONS, plane_section, strobe_section
from orbitdesk.system.compiled_system import MAP

from orbitdesk.cli.common import (add_method_option, add_outputs, CommandError, method_for, load_system, parse_assignments,
                                  parse_number, print_json, read_source, stderr_progress, values_for, write_csv)
from orbitdesk.cli.run import settings_for


def register(sub):
    parser = sub.add_parser("section", help="Poincaré section of a flow: plane crossings or stroboscopic samples")
    parser.add_argument("path")
    kind = parser.add_mutually_exclusive_group(required=True)
    kind.add_argument("--plane", metavar="NAME=VALUE", help="crossings of a state or derived quantity with a value")
    kind.add_argument("--strobe", metavar="T", help="the state every period T (forced flows)")
    parser.add_argument("--phase", metavar="S", help="strobe: sample at t0 + S + k T (0 <= S < T; default 0)")
    parser.add_argument("--direction", choices=DIRECTIONS, default="up", help="crossing direction (default up)")
    parser.add_argument("--count", type=int, default=100, metavar="N", help="number of points (default 100)")
    parser.add_argument("--transient", metavar="T", help="time discarded first (strobe: rounded up to whole periods)")
    parser.add_argument("--duration", metavar="T",
                        help="plane: the longest search after the transient (default: 100 spans, a span being the "
                             "longer of the run length and three slow time scales of the system)")
    add_method_option(parser)
    add_outputs(parser, run, "print the points as JSON", csv_help="write the points as CSV")


def run(args) -> int:
    source = read_source(args.path)
    system = load_system(source)
    if system.kind == MAP:
        raise CommandError("section: the model is a map, whose orbit is already a sequence of points; "
                           "use 'orbitdesk run' to list it")
    if args.count < 1:
        raise CommandError("--count must be at least 1")
    p, u0 = values_for(system, source, args.set, args.init)
    settings = settings_for(source, args)
    transient = settings.transient
    if args.transient is not None:
        transient = parse_number(args.transient, "--transient")
        if transient < 0:
            raise CommandError("--transient must not be negative")
    duration = None
    if args.duration is not None:
        if args.plane is None:
            raise CommandError("--duration applies to --plane sections (a strobe takes --count periods)")
        duration = parse_number(args.duration, "--duration")
        if not duration > 0:
            raise CommandError("--duration must be positive")
    start = system.initial if u0 is None else u0
    window = max(abs(settings.t_end - settings.t_start), transient + (duration or 0.0))
    method, method_note = method_for(system, p, start, settings, args, window)
    settings = settings.replace(method=method)
    progress = stderr_progress("section")
    try:
        if args.plane is not None:
            if args.phase is not None:
                raise CommandError("--phase applies to --strobe sections")
            ((name, value),) = _plane(args.plane, system).items()
            t_max = None if duration is None else settings.t_start + transient + duration
            result = plane_section(system, p, u0, name, value, args.direction, args.count, transient, settings,
                                   progress=progress, t_max=t_max)
        else:
            if args.direction != "up":
                raise CommandError("--direction applies to --plane sections")
            phase = parse_number(args.phase, "--phase") if args.phase is not None else 0.0
            period = parse_number(args.strobe, "--strobe")
            if period <= 0:
                raise CommandError("--strobe: the period must be positive")
            result = strobe_section(system, p, u0, period, args.count, transient=transient, phase=phase,
                                    settings=settings, progress=progress)
    except ValueError as err:
        raise CommandError(str(err)) from None
    if progress is not None:
        progress(1.0)
    if method_note:
        result.warnings.insert(0, method_note)
    if args.csv:
        header = [*system.states, "t"]
        write_csv(args.csv, header, [*result.points, result.times])
    if args.json:
        print_json({"points": result.as_rows(), "status": result.status, "message": result.message,
                    "requested": result.requested, "found": int(result.times.size), "touches": result.touches,
                    "warnings": result.warnings})
    elif not args.csv:
        print("  ".join(f"{h:>14}" for h in [*system.states, "t"]))
        for row in result.as_rows():
            print("  ".join(f"{v:14.8g}" for v in row.values()))
    for note in ([result.message] if result.message else []) + result.warnings:
        print(f"note: {note}", file=sys.stderr)
    return 0 if result.status == "ok" and result.times.size else 1


def _plane(text, system):
    plane = parse_assignments([text], "plane")
    (name,) = plane
    if name not in system.states and name not in system.derived_names:
        known = ", ".join(system.states + system.derived_names)
        raise CommandError(f"--plane: unknown state or derived quantity '{name}' (known: {known})")
    if not math.isfinite(plane[name]):
        raise CommandError("--plane: the value must be finite")
    return plane
