"""``orbitdesk cycle PATH``: a periodic orbit of a flow (period, amplitude, Floquet multipliers) or a
cycle of a map (``--period K``)."""

from orbitdesk.analyses.cycles import CycleError, find_cycle, find_map_cycle
from orbitdesk.engine.methods import DEFAULT
from orbitdesk.system.compiled_system import MAP

from orbitdesk.cli.common import (add_method_option, add_outputs, analysis_errors, CommandError, open_model,
                                  parse_guess, parse_number, parse_positive, print_json, stderr_progress, write_csv)


def register(sub):
    parser = sub.add_parser("cycle", help="find a periodic orbit (flows) or a period-K cycle (maps)")
    parser.add_argument("path")
    parser.add_argument("--guess", action="append", metavar="STATE=VALUE",
                        help="a point near the orbit (repeatable; default: the end of a transient run)")
    parser.add_argument("--period-guess", metavar="T", help="rough period of a flow's orbit")
    parser.add_argument("--forcing-period", metavar="T", help="period of the forcing of a time-dependent flow")
    parser.add_argument("--forcing-multiple", type=int, metavar="K",
                        help="the orbit's period in forcing periods (default: found from a transient run)")
    parser.add_argument("--period", type=int, metavar="K", help="period of a map cycle (maps only)")
    parser.add_argument("--transient", metavar="T",
                        help="flows: the run before the search and the longest wait for a return (default: three "
                             "slow time scales of the system, at least 200)")
    add_method_option(parser)
    add_outputs(parser, run, "print the result as JSON",
                csv_help="write one period of the orbit (flows) or the points (maps)")


def run(args) -> int:
    source, system, p, u0 = open_model(args)
    guess = parse_guess(args.guess, system)
    progress = stderr_progress("cycle")
    with analysis_errors():
        try:
            if system.kind == MAP:
                return _map_cycle(system, p, u0, guess, args, progress)
            return _flow_cycle(system, source, p, u0, guess, args, progress)
        except CycleError as err:
            raise CommandError(f"no cycle found: {err}") from None


def _map_cycle(system, p, u0, guess, args, progress) -> int:
    for option, value in (("--period-guess", args.period_guess), ("--forcing-period", args.forcing_period),
                          ("--forcing-multiple", args.forcing_multiple)):
        if value is not None:
            raise CommandError(f"{option} applies to flows; a map's cycle has a whole period: use --period K")
    if args.method is not None:
        raise CommandError("--method applies to flows; a map is iterated, not integrated")
    if args.period is None:
        raise CommandError("a map needs the period of the cycle: --period K")
    transient = 1000
    if args.transient is not None:
        transient = parse_number(args.transient, "--transient")
        if transient < 0 or transient != int(transient):
            raise CommandError("--transient of a map is a whole number of iterations, at least 0")
    if args.period < 1:
        raise CommandError("--period must be at least 1")
    cycle = find_map_cycle(system, p, args.period, guess=system.initial_vector(guess) if guess else None,
                           initial=u0, progress=progress, transient=int(transient))
    if args.csv:
        write_csv(args.csv, ["k", *system.states], [list(range(cycle.period)), *cycle.points])
    if args.json or not args.csv:
        if args.json:
            print_json(cycle.to_dict())
        else:
            print(f"cycle of period {cycle.period} ({'stable' if cycle.stable else 'unstable'})")
            for k, point in enumerate(cycle.states):
                print(f"  point {k + 1}: " + ", ".join(f"{s} = {v:.10g}" for s, v in point.items()))
            print("  multipliers: " + ", ".join(_complex(m) for m in cycle.multipliers))
            for w in cycle.warnings:
                print(f"note: {w}")
    return 0


def _flow_cycle(system, source, p, u0, guess, args, progress) -> int:
    if args.period is not None:
        raise CommandError("--period K is for maps; for a flow give --period-guess T")
    period_guess = parse_positive(args.period_guess, "--period-guess") if args.period_guess is not None else None
    forcing = parse_positive(args.forcing_period, "--forcing-period") if args.forcing_period is not None else None
    if args.forcing_multiple is not None and args.forcing_multiple < 1:
        raise CommandError("--forcing-multiple must be at least 1")
    if not system.autonomous_at(p) and period_guess is not None:
        raise CommandError("this flow depends on time: its period is a multiple of the forcing period; "
                           "give --forcing-period (and --forcing-multiple) instead of --period-guess")
    transient = parse_positive(args.transient, "--transient") if args.transient is not None else None
    method = args.method
    if method is None and source.project is not None and source.project.solver.method != DEFAULT:
        method = source.project.solver.method
    cycle = find_cycle(system, p, guess=system.initial_vector(guess) if guess else None, period_guess=period_guess,
                       forcing_period=forcing, forcing_multiple=args.forcing_multiple, initial=u0, progress=progress,
                       transient=transient, method=method)
    if args.csv:
        write_csv(args.csv, [system.time_name, *system.states], [cycle.time, *cycle.orbit])
    if args.json:
        print_json(cycle.to_dict())
    elif not args.csv:
        print(f"periodic orbit: period {cycle.period:.10g} ({cycle.stability})")
        if cycle.forcing_period is not None:
            print(f"  {cycle.forcing_multiple} x forcing period {cycle.forcing_period:.10g}")
        print("  point: " + ", ".join(f"{s} = {v:.10g}" for s, v in cycle.state.items()))
        print("  amplitude (max - min): " + ", ".join(f"{s} {v:.6g}" for s, v in cycle.amplitude.items()))
        parts = [(f"below resolution (|m| < {cycle.resolution:.1g})" if k != cycle.trivial_index
                  and abs(m) < cycle.resolution else _complex(m)) + (" (trivial)" if k == cycle.trivial_index else "")
                 for k, m in enumerate(cycle.multipliers)]
        print("  Floquet multipliers: " + ", ".join(parts))
        for w in cycle.warnings:
            print(f"note: {w}")
    return 0


def _complex(m) -> str:
    if m.imag == 0:
        return f"{m.real:.6g}"
    return f"{m.real:.6g}{'+' if m.imag > 0 else '-'}{abs(m.imag):.6g}i"
