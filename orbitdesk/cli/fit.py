"""``orbitdesk fit PATH --data FILE --param NAME ...``: estimate parameters and initial values from data."""

from orbitdesk.document.datasets import DataError, read_data_file
from orbitdesk.analyses.fitting import FitError, FitSettings, fit
from orbitdesk.analyses.sensitivity import SensitivityFailure
from orbitdesk.system.compiled_system import MAP

from orbitdesk.cli.common import (EXIT_UNREADABLE, CommandError, analysis_errors, load_system, parse_assignments,
                                  parse_number, print_json, read_source, stderr_progress, values_for)


def register(sub):
    parser = sub.add_parser("fit", help="estimate parameters and initial values from measured data",
                            description="Weighted least-squares fit of a model to measured data sets (CSV or "
                                        "whitespace-separated text with a header: time first, then columns named "
                                        "after states or derived quantities; sd(NAME) columns give standard "
                                        "deviations). Without --data, a project's stored data sets are used.")
    parser.add_argument("path", help="a model file or a .orbitdesk project")
    parser.add_argument("--data", action="append", metavar="FILE", help="a data file (repeatable: a joint fit)")
    parser.add_argument("--param", action="append", metavar="NAME", help="a parameter to estimate, shared by all "
                        "data sets (repeatable)")
    parser.add_argument("--local", action="append", metavar="NAME", help="a parameter estimated separately for "
                        "each data set (repeatable)")
    parser.add_argument("--init", action="append", metavar="STATE[=GUESS]", help="an initial value to estimate for "
                        "each data set, optionally with its starting guess (repeatable)")
    parser.add_argument("--set", action="append", metavar="NAME=VALUE", help="a parameter value (the starting "
                        "guess of an estimated one; repeatable)")
    parser.add_argument("--weights", action="append", metavar="NAME=W[,NAME=W...]",
                        help="weight of a column without an sd(NAME) column (default 1)")
    parser.add_argument("--column", action="append", metavar="COLUMN=QUANTITY",
                        help="compare the data column COLUMN with the model's QUANTITY (repeatable)")
    parser.add_argument("--bounds", action="append", metavar="NAME=LO:HI",
                        help="bounds of an estimate (default: the parameter's slider range; 'inf' allowed)")
    parser.add_argument("--multiple-shooting", type=int, default=1, metavar="K",
                        help="cut each record into K segments joined by continuity (default 1: single shooting)")
    parser.add_argument("--max-evaluations", type=int, default=400, metavar="N", help="model evaluations allowed")
    parser.add_argument("--json", action="store_true", help="print the result as JSON")
    parser.set_defaults(handler=run)


def _pairs(items, what):
    out = {}
    for item in items or ():
        for part in item.split(","):
            out.update(parse_assignments([part], what))
    return out


def _bounds(items) -> dict:
    out = {}
    for item in items or ():
        name, sep, span = item.partition("=")
        lo, sep2, hi = span.partition(":")
        if not (sep and sep2 and name.strip()):
            raise CommandError(f"--bounds expects NAME=LO:HI, got '{item}'")
        values = []
        for text in (lo.strip(), hi.strip()):
            if text.lstrip("+-").lower() in ("inf", "infinity", ""):
                values.append(None)
            else:
                values.append(parse_number(text, f"--bounds {name.strip()}"))
        if values[0] is not None and values[1] is not None and not values[1] > values[0]:
            raise CommandError(f"--bounds {name.strip()}: the low end must be below the high end")
        out[name.strip()] = tuple(values)
    return out


def run(args) -> int:
    source = read_source(args.path)
    system = load_system(source)
    estimate, guesses = [], []
    for item in args.init or ():
        name, sep, value = item.partition("=")
        estimate.append(name.strip())
        if sep:
            guesses.append(f"{name.strip()}={value}")
    p, u0 = values_for(system, source, args.set, guesses)
    mapping = {}
    for item in args.column or ():
        col, sep, quantity = item.partition("=")
        if not (sep and col.strip() and quantity.strip()):
            raise CommandError(f"--column expects COLUMN=QUANTITY, got '{item}'")
        mapping[col.strip()] = quantity.strip()
    kind = "map" if system.kind == MAP else "flow"
    if args.data:
        try:
            datasets = [read_data_file(path, kind=kind) for path in args.data]
        except DataError as err:
            raise CommandError(str(err), EXIT_UNREADABLE) from None
        names = set()
        for d in datasets:
            while d.name in names:
                d.name += "'"
            names.add(d.name)
    elif source.project is not None and source.project.datasets:
        datasets = list(source.project.datasets)
    else:
        raise CommandError("no data: give --data FILE (or a project that holds data sets)")
    try:
        datasets = [d.with_mapping(mapping) for d in datasets]
    except DataError as err:
        raise CommandError(str(err)) from None
    ranges = dict(system.param_ranges)
    if source.project is not None:
        ranges.update({k: (v.lo, v.hi) for k, v in source.project.parameters.items() if k in ranges})
    if args.multiple_shooting < 1:
        raise CommandError("--multiple-shooting must be at least 1")
    if args.max_evaluations < 2:
        raise CommandError("--max-evaluations must be at least 2")
    solver = source.project.solver if source.project is not None else None
    settings = FitSettings(parameters=list(args.param or ()), initial=estimate, local=list(args.local or ()),
                           bounds=_bounds(args.bounds), weights=_pairs(args.weights, "weights"),
                           multiple_shooting=args.multiple_shooting, max_evaluations=args.max_evaluations,
                           t_start=solver.t_start if solver else 0.0,
                           method=solver.method if solver else "dop853")
    with analysis_errors(FitError, SensitivityFailure, prefix="cannot fit: "):
        result = fit(system, datasets, settings, p, u0, ranges, progress=stderr_progress("fit"))
    if args.json:
        print_json(result.to_dict())
    else:
        print(format_result(result))
    return 0 if result.status == "ok" else 1


def format_result(result) -> str:
    lines = [f"{'estimate':<24} {'value':>13} {'std. error':>11}   95 % interval"]
    for e in result.estimates:
        se = f"{e.stderr:11.4g}" if e.stderr is not None else f"{'-':>11}"
        iv = f"[{e.interval[0]:.6g}, {e.interval[1]:.6g}]" if e.interval else "-"
        lines.append(f"{e.name:<24} {e.value:13.7g} {se}   {iv}")
    lines.append("")
    lines.append("residual RMS: " + ", ".join(f"{q} {v:.4g}" for q, v in result.residual_rms.items()))
    lines.append(f"model evaluations: {result.evaluations} ({result.message}); degrees of freedom: {result.dof}")
    for w in result.warnings:
        lines.append(f"warning: {w}")
    return "\n".join(lines)
