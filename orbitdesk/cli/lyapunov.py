"""``orbitdesk lyapunov PATH``: Lyapunov exponents and the Kaplan-Yorke dimension."""

import sys

from orbitdesk.analyses.error_digits import value_with_error
from orbitdesk.analyses.lyapunov import (CONVERGE_ATOL, CONVERGE_RTOL, FLOW_CAP, MAP_CAP,
                                         largest_lyapunov_two_trajectory, lyapunov_spectrum)
from orbitdesk.engine.methods import METHODS, NAMES
from orbitdesk.system.compiled_system import MAP

from orbitdesk.cli.common import (add_outputs, add_span_options, check_span, CommandError, load_system, parse_number,
                                  print_json, read_source, stderr_progress, values_for)
from orbitdesk.cli.run import settings_for


def register(sub):
    parser = sub.add_parser("lyapunov", help="Lyapunov exponents of a flow or a map")
    parser.add_argument("path")
    add_span_options(parser)
    parser.add_argument("--transient", metavar="T",
                        help="time (or iterations) discarded first (default: the system's slow time scale, at "
                             "least 200, or 1000 iterations; with --t-end/--steps a tenth of the run)")
    parser.add_argument("--tolerance", metavar="R",
                        help="without --t-end/--steps the run stops when each exponent's standard error is at "
                             f"most R |exponent| + {CONVERGE_ATOL:g} (default R = {CONVERGE_RTOL:g})")
    parser.add_argument("--cap", metavar="T",
                        help=f"the longest averaging when stopping on convergence (default {FLOW_CAP:g} time "
                             f"units or {MAP_CAP:g} iterations)")
    parser.add_argument("--method", choices=[m for m in NAMES if METHODS[m].adaptive],
                        help="the adaptive method of a flow (default: the project's, or dop853 - the stiff one when "
                             "a probe run shows the system stiff)")
    parser.add_argument("--two-trajectory", action="store_true",
                        help="only the largest exponent, from two nearby trajectories (always for delay models)")
    add_outputs(parser, run)


def run(args) -> int:
    source = read_source(args.path)
    system = load_system(source)
    check_span(args, system)
    p, u0 = values_for(system, source, args.set, args.init)
    settings = settings_for(source, args)
    transient = settings.transient if settings.transient > 0 else None
    if args.transient is not None:
        transient = parse_number(args.transient, "--transient")
        if transient < 0:
            raise CommandError("--transient must not be negative")
    fixed = args.t_end is not None or args.steps is not None
    if fixed and (args.tolerance is not None or args.cap is not None):
        raise CommandError("--tolerance and --cap apply when the run stops on convergence (without --t-end/--steps)")
    if args.two_trajectory and (args.tolerance is not None or args.cap is not None):
        raise CommandError("--tolerance and --cap apply to the spectrum; --two-trajectory runs a fixed length")
    extra = {}
    two = args.two_trajectory or bool(system.delays)
    if args.method is not None:
        if system.kind == MAP or two:
            raise CommandError("--method applies to the spectrum of a flow")
        extra["method"] = args.method  # delay models: two nearby histories (no spectrum)
    if not fixed and not two:
        extra["converge"] = True
        if args.tolerance is not None:
            extra["rtol"] = parse_number(args.tolerance, "--tolerance")
            if not extra["rtol"] > 0:
                raise CommandError("--tolerance must be positive")
        if args.cap is not None:
            cap = parse_number(args.cap, "--cap")
            if not cap > 0:
                raise CommandError("--cap must be positive")
            extra["cap"] = cap
    # a delay model: the largest exponent from two nearby histories (the spectrum does not handle delays)
    compute = largest_lyapunov_two_trajectory if two else lyapunov_spectrum
    progress = stderr_progress("lyapunov")
    try:
        result = compute(system, p, u0, transient=transient, settings=settings, progress=progress, **extra)
    except ValueError as err:
        raise CommandError(str(err)) from None
    if progress is not None:
        progress(1.0)
    if args.json:
        print_json({"exponents": result.exponents, "kaplan_yorke_dimension": result.kaplan_yorke_dimension,
                    "method": result.method, "warnings": result.warnings, "status": result.status,
                    "message": result.message, "averaged_over": result.averaged_over, "dt": result.dt,
                    "uncertainty": result.uncertainty, "blocks": result.blocks, "converged": result.converged,
                    "integrator": result.integrator,
                    "tolerance": None if result.tolerance is None else
                    {"rtol": result.tolerance[0], "atol": result.tolerance[1]}})
    else:
        errors = result.uncertainty if result.uncertainty is not None else [None] * len(result.exponents)
        shown = [value_with_error(v, e) for v, e in zip(result.exponents, errors)]  # the digits the error supports
        print("exponents: " + ", ".join(f"{pair[0]} ± {pair[1]}" if pair else f"{v:.6g}"
                                        for v, pair in zip(result.exponents, shown)))
        if result.uncertainty is not None:
            print(f"± the standard error of {result.blocks} block averages (full digits: --json)")
        if result.converged is not None:
            rtol, atol = result.tolerance
            print(f"settled to {rtol:g} x |exponent| + {atol:g}" if result.converged
                  else "stopped at the cap before settling")
        if result.kaplan_yorke_dimension is not None:
            print(f"Kaplan-Yorke dimension: {result.kaplan_yorke_dimension:.6g}")
        unit = "iterations" if system.kind == MAP else "time units"
        print(f"method: {result.method}{f' ({result.integrator})' if result.integrator else ''}, averaged over "
              f"{result.averaged_over:g} {unit}")
    for note in ([result.message] if result.message else []) + result.warnings:
        print(f"note: {note}", file=sys.stderr)
    return 0 if result.ok else 1
