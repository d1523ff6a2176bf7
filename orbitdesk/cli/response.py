"""``orbitdesk response PATH``: the periodic response of a periodically forced flow against a parameter
(the frequency-response curve, with its unstable part and jump points), or a stepped sweep up or down
that starts each value from the previous value's final state."""

from orbitdesk.cli.common import (add_outputs, analysis_errors, CommandError, add_interval_options, open_interval,
                                  print_json, stderr_progress)


def register(sub):
    parser = sub.add_parser("response", help="frequency-response curve of a periodically forced flow")
    parser.add_argument("path")
    add_interval_options(parser, "the parameter that moves (e.g. the forcing frequency)",
                         "a state near the response to start the continuation from")
    parser.add_argument("--observe", metavar="STATE", help="the state whose amplitude is reported (default: the first)")
    parser.add_argument("--stepped", choices=("up", "down"),
                        help="step the parameter up or down from the model's initial state instead of continuing")
    parser.add_argument("--count", type=int, default=60, metavar="N", help="values of a stepped sweep (default 60)")
    add_outputs(parser, run)


def run(args) -> int:
    _source, system, p, u0, guess, lo, hi = open_interval(args)
    if args.count < 2:
        raise CommandError("--count must be at least 2")
    from orbitdesk.analyses.continuation import ContinuationError
    from orbitdesk.analyses.continuation.response import response_curve, response_settings, stepped_sweep

    progress = stderr_progress("response")
    with analysis_errors(ContinuationError, KeyError):
        if args.stepped:
            curve = stepped_sweep(system, args.param, lo, hi, args.stepped, args.count, p, args.observe,
                                  initial=u0, progress=progress)
        else:
            curve = response_curve(system, args.param, lo, hi, p, args.observe, guess=guess or None, initial=u0,
                                   settings=response_settings(lo, hi, args.max_points), progress=progress)
    if args.json:
        print_json(curve.to_dict())
        return 0
    what = f"stepped {curve.stepped}" if curve.stepped else "continued"
    print(f"response of {curve.observe} against {curve.parameter} ({what}): {len(curve.values)} points, "
          f"largest amplitude {curve.amplitudes.max():.6g}")
    for s in curve.special:
        print(f"  {s.describe()} at {curve.parameter} = {s.value:.10g}, amplitude {s.amplitude:.6g}")
    for reason in curve.reasons:
        print(f"  ended: {reason}")
    return 0
