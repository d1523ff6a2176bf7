"""``orbitdesk run PATH ...``: one run of a flow or a map, as JSON or CSV."""

from orbitdesk.engine.runs import simulate
from orbitdesk.engine.methods import NAMES
from orbitdesk.engine.settings import SCHEMES, RunSettings, SettingsError
from orbitdesk.engine.status import STOPPED
from orbitdesk.system.compiled_system import MAP

from orbitdesk.cli.common import (CommandError, add_span_options, add_value_options, check_span, open_model,
                                  parse_number, parse_positive, print_json, stderr_progress, write_csv)


def register(sub):
    parser = sub.add_parser("run", help="integrate a flow or iterate a map")
    parser.add_argument("path")
    add_span_options(parser)
    parser.add_argument("--samples", type=int, metavar="K", help="output points of a flow")
    add_value_options(parser)
    parser.add_argument("--method", choices=NAMES, help="integration method")
    parser.add_argument("--rtol", type=str, metavar="R")
    parser.add_argument("--atol", type=str, metavar="A")
    parser.add_argument("--event-rate", type=str, metavar="R",
                        help="events of the model per unit time beyond which a run ends as chattering "
                             "(default 10000)")
    noise = parser.add_argument_group("models with noise")
    noise.add_argument("--seed", type=int, metavar="S", help="seed of the random increments (same seed, same run)")
    noise.add_argument("--realisations", type=int, metavar="R", help="how many realisations to run")
    noise.add_argument("--scheme", choices=tuple(SCHEMES), help="fixed-step scheme (default milstein)")
    noise.add_argument("--dt", type=str, metavar="H", help="the fixed step (also of rk4)")
    parser.add_argument("--csv", metavar="FILE", help="write the run as CSV")
    parser.add_argument("--json", action="store_true", help="print the run as JSON")
    parser.set_defaults(handler=run)


def settings_for(source, args) -> RunSettings:
    """Run settings: defaults, then the project's solver settings (the live document's), then the
    command's options."""
    changes = {}
    if getattr(args, "t_end", None) is not None:
        changes["t_end"] = parse_number(args.t_end, "--t-end")
    if getattr(args, "steps", None) is not None:
        changes["steps"] = args.steps
    if getattr(args, "samples", None) is not None:
        changes["samples"] = args.samples
    if getattr(args, "method", None):
        changes["method"] = args.method
    for name in ("seed", "realisations", "scheme"):
        if getattr(args, name, None) is not None:
            changes[name] = getattr(args, name)
    if getattr(args, "dt", None) is not None:
        changes["dt"] = parse_positive(args.dt, "--dt")
    for name in ("rtol", "atol", "event_rate"):
        if getattr(args, name, None) is not None:
            changes[name] = parse_positive(getattr(args, name), "--" + name.replace("_", "-"))
    try:
        return source.doc.run_settings(**changes)
    except SettingsError as problem:
        option = "--" + problem.name.replace("_", "-")
        raise CommandError(f"{option if problem.name in changes else problem.name}: {problem.message}") from None


def run(args) -> int:
    source, system, p, u0 = open_model(args, noise=True)
    check_span(args, system)
    settings = settings_for(source, args)
    try:
        traj = simulate(system, settings, u0, p, progress=stderr_progress("run"), noise=True)
    except ValueError as err:  # a delay model run backwards, a delay set to zero, too many realisations: said plainly
        raise CommandError(str(err)) from None
    if traj.realisations is not None:
        return _noise_output(args, system, traj)
    time_key = "n" if system.kind == MAP else "t"
    if args.csv:
        header = [time_key, *system.states, *traj.derived]
        write_csv(args.csv, header, [traj.time, *traj.states, *traj.derived.values()])
    if args.json or not args.csv:
        print_json({
            "status": traj.status,
            "message": traj.message,
            time_key: traj.time,
            "states": {name: traj.states[i] for i, name in enumerate(system.states)},
            "derived": traj.derived,
            "events": [event.to_dict() for event in traj.model_events],
        })
    return 0 if traj.ok or traj.status == STOPPED else 1


def _noise_output(args, system, traj) -> int:
    """A model with noise: the mean and standard deviation over the realisations, and the first one."""
    R = traj.realisations
    if args.csv:
        header = ["t", *system.states, *(f"{s}_mean" for s in system.states), *(f"{s}_std" for s in system.states)]
        write_csv(args.csv, header, [R.time, *R.states[0], *R.mean, *R.std])
    if args.json or not args.csv:
        print_json({"status": traj.status, "message": traj.message, **R.to_dict()})
    return 0 if traj.ok else 1
