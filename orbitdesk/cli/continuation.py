"""``orbitdesk continue PATH``: branches of equilibria, fixed points or cycles in one parameter with
their special points (fold, Hopf, branch point, cycle fold, period doubling, torus), or with
``--locus fold|hopf`` the curve of a fold or Hopf point in two parameters."""

from orbitdesk.system.compiled_system import MAP

from orbitdesk.cli.common import (add_keep_option, add_outputs, analysis_errors, check_keep, CommandError,
                                  add_interval_options, keep_in_project, open_interval, parse_number, print_json,
                                  stderr_progress)

STARTS = ("equilibrium", "cycle", "fixed point")


def register(sub):
    parser = sub.add_parser("continue", help="follow equilibria, fixed points or cycles as a parameter moves "
                                             "and locate their bifurcations")
    parser.add_argument("path")
    add_interval_options(parser, "the parameter that moves", "continue only the solution nearest this point")
    parser.add_argument("--start", choices=STARTS, metavar="WHAT",
                        help="what to continue: equilibrium (flows), fixed point (maps) or cycle (the cycle "
                             "found from --guess; default: equilibrium for flows, fixed point for maps)")
    parser.add_argument("--cycles", action="store_true",
                        help="also continue the cycles born at every Hopf point found")
    parser.add_argument("--period", type=int, metavar="K", help="maps: continue fixed points of the K-th iterate")
    parser.add_argument("--no-switch", action="store_true",
                        help="do not follow the other branches through branch points and period doublings")
    parser.add_argument("--locus", choices=("fold", "hopf"),
                        help="follow the fold or Hopf point of the branch in two parameters")
    parser.add_argument("--param2", metavar="NAME", help="the second parameter of a locus")
    parser.add_argument("--range2", metavar="LO:HI",
                        help="bounds of the second parameter (default: its slider range, else 10 units around it)")
    add_keep_option(parser, "the branches (or the locus)", "bifurcation diagram")
    add_outputs(parser, run)


def run(args) -> int:
    source, system, p, u0, guess, lo, hi = open_interval(args)
    check_keep(args, source)
    start = args.start or ("fixed point" if system.kind == MAP else "equilibrium")
    if system.kind == MAP and start == "equilibrium":
        start = "fixed point"
    if system.kind != MAP and start == "fixed point":
        raise CommandError("--start fixed point is for maps; a flow has equilibria (or cycles)")
    if args.cycles and (system.kind == MAP or start == "cycle"):
        raise CommandError("--cycles continues the cycles born at the Hopf points of a flow's equilibria")
    if args.period is not None and (system.kind != MAP or args.period < 1):
        raise CommandError("--period K (K at least 1) is for maps")
    progress = stderr_progress("continue")
    from orbitdesk.analyses.continuation import ContinuationError, StepSettings, steady_branches
    from orbitdesk.analyses.continuation.branches import default_settings

    settings: StepSettings = default_settings(lo, hi, args.max_points)
    with analysis_errors(ContinuationError, KeyError):
        if args.locus:
            return _locus(source, system, p, u0, guess, lo, hi, args, progress)
        if args.param2 or args.range2:
            raise CommandError("--param2 and --range2 go with --locus fold|hopf")
        if start == "cycle":
            from orbitdesk.analyses.continuation.cycles import cycle_branches

            result = cycle_branches(system, args.param, lo, hi, p, guess=guess or None, initial=u0,
                                    settings=settings, switch=not args.no_switch, progress=progress)
        else:
            result = steady_branches(system, args.param, lo, hi, p, guess=guess or None,
                                     map_period=args.period or 1, settings=settings, switch=not args.no_switch,
                                     initial=u0, progress=progress)
            if args.cycles:
                from orbitdesk.analyses.continuation.cycles import cycles_from_hopf_points

                result = cycles_from_hopf_points(system, result, lo, hi, p, settings)
    if args.keep:
        from orbitdesk.analyses.continuation.results import ContinuationResult

        follow = "cycle" if start == "cycle" else "cycles" if args.cycles else "steady"
        kept = ContinuationResult(follow, args.param, min(lo, hi), max(lo, hi), list(result.branches),
                                  list(result.notes))
        keep_in_project(source, "bifurcation", kept, args.param, "bifurcation",
                        {"follow": follow, "parameter": args.param, "from": kept.lo, "to": kept.hi, "tab": 0})
    if args.json:
        print_json(result.to_dict())
    else:
        print_branches(result)
    return 0


def print_branches(result) -> None:
    if not result.branches:
        print("no branch")
    for number, branch in enumerate(result.branches, start=1):
        what = branch.kind if branch.map_period == 1 else f"{branch.kind} of the {branch.map_period}th iterate"
        lo, hi = float(branch.values.min()), float(branch.values.max())
        print(f"branch {number}: {what}, {branch.size} points, {result.parameter} from {lo:.6g} to {hi:.6g}")
        for s in branch.special:
            extra = []
            if s.frequency is not None:
                extra.append(f"frequency {s.frequency:.8g}")
            if s.first_lyapunov_coefficient is not None:
                extra.append(f"first Lyapunov coefficient {s.first_lyapunov_coefficient:.6g}")
            if s.period is not None:
                extra.append(f"period {s.period:.8g}")
            state = ", ".join(f"{k} = {v:.8g}" for k, v in s.state.items())
            print(f"  {s.describe()} at {result.parameter} = {s.value:.12g} ({state})"
                  + (f"; {', '.join(extra)}" if extra else ""))
        for reason in branch.reasons:
            print(f"  ended: {reason}")
    for note in result.notes:
        print(f"note: {note}")


def _locus(source, system, p, u0, guess, lo, hi, args, progress) -> int:
    from orbitdesk.analyses.continuation.loci import locus
    from orbitdesk.analyses.continuation.results import LABELS

    if not args.param2:
        raise CommandError("--locus needs the second parameter: --param2 NAME")
    if args.param2 not in system.parameters or args.param2 == args.param:
        raise CommandError(f"--param2: give a parameter other than {args.param} "
                           f"(parameters: {', '.join(system.parameters) or 'none'})")
    range2 = None
    if args.range2:
        lo2, sep, hi2 = args.range2.partition(":")
        if not sep:
            raise CommandError(f"--range2 expects LO:HI, got '{args.range2}'")
        range2 = (parse_number(lo2, "--range2"), parse_number(hi2, "--range2"))
    result = locus(system, args.locus, args.param, args.param2, lo, hi, p, guess=guess or None, initial=u0,
                   range2=range2, progress=progress)
    if args.keep:
        settings = {"parameter": args.param, "from": min(lo, hi), "to": max(lo, hi), "param2": args.param2, "tab": 1,
                    "locus_kind": {"fold": "fold", "hopf": "Hopf"}[args.locus]}
        if range2 is not None:
            settings.update({"from2": min(range2), "to2": max(range2)})
        keep_in_project(source, "bifurcation_locus", result, (args.param, args.param2), "bifurcation", settings)
    if args.json:
        print_json(result.to_dict())
        return 0
    p1, p2 = result.parameters
    print(f"{args.locus} locus in ({p1}, {p2}): {result.values.shape[1]} points")
    for s in result.special:
        values = ", ".join(f"{k} = {v:.10g}" for k, v in s["values"].items())
        print(f"  {LABELS.get(s['type'], s['type'])} at {values}")
    for reason in result.reasons:
        print(f"  ended: {reason}")
    return 0
