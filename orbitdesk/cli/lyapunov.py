"""``orbitdesk lyapunov PATH``: Lyapunov exponents and the Kaplan-Yorke dimension."""

import sys

from orbitdesk.analyses.lyapunov import largest_lyapunov_two_trajectory, lyapunov_spectrum
from orbitdesk.system.compiled_system import MAP

from orbitdesk.cli.common import add_outputs, CommandError, load_system, parse_number, print_json, read_source, \
    stderr_progress, values_for
from orbitdesk.cli.run import settings_for


def register(sub):
    parser = sub.add_parser("lyapunov", help="Lyapunov exponents of a flow or a map")
    parser.add_argument("path")
    span = parser.add_mutually_exclusive_group()
    span.add_argument("--t-end", type=str, metavar="T", help="end time of a flow")
    span.add_argument("--steps", type=int, metavar="N", help="iterations of a map")
    parser.add_argument("--transient", metavar="T", help="time (or iterations) discarded first (default: a tenth)")
    parser.add_argument("--two-trajectory", action="store_true",
                        help="only the largest exponent, from two nearby trajectories (always for delay models)")
    add_outputs(parser, run)


def run(args) -> int:
    source = read_source(args.path)
    system = load_system(source)
    if system.kind == MAP and args.t_end is not None:
        raise CommandError("--t-end applies to flows; a map runs for --steps N")
    if system.kind != MAP and args.steps is not None:
        raise CommandError("--steps applies to maps; a flow runs to --t-end T")
    p, u0 = values_for(system, source, args.set, args.init)
    settings = settings_for(source, args)
    transient = settings.transient if settings.transient > 0 else None
    if args.transient is not None:
        transient = parse_number(args.transient, "--transient")
        if transient < 0:
            raise CommandError("--transient must not be negative")
    # a delay model: the largest exponent from two nearby histories (the spectrum does not handle delays)
    compute = largest_lyapunov_two_trajectory if args.two_trajectory or system.delays else lyapunov_spectrum
    progress = stderr_progress("lyapunov")
    try:
        result = compute(system, p, u0, transient=transient, settings=settings, progress=progress)
    except ValueError as err:
        raise CommandError(str(err)) from None
    if progress is not None:
        progress(1.0)
    if args.json:
        print_json({"exponents": result.exponents, "kaplan_yorke_dimension": result.kaplan_yorke_dimension,
                    "method": result.method, "warnings": result.warnings, "status": result.status,
                    "message": result.message, "averaged_over": result.averaged_over, "dt": result.dt})
    else:
        print("exponents: " + ", ".join(f"{v:.6g}" for v in result.exponents))
        if result.kaplan_yorke_dimension is not None:
            print(f"Kaplan-Yorke dimension: {result.kaplan_yorke_dimension:.6g}")
        unit = "iterations" if system.kind == MAP else "time units"
        print(f"method: {result.method}, averaged over {result.averaged_over:g} {unit}")
    for note in ([result.message] if result.message else []) + result.warnings:
        print(f"note: {note}", file=sys.stderr)
    return 0 if result.ok else 1
