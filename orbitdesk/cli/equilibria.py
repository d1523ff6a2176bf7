"""``orbitdesk equilibria PATH``: equilibria of a flow or fixed points of a map, classified.

The table of the Newton search comes first; the exact solve (sympy, up to --timeout seconds) follows:
a line naming the rows it confirms, or the table again when it adds or moves points (--json: one
document at the end)."""

import sys

from orbitdesk.analyses.equilibria import find_equilibria
from orbitdesk.analyses.manifolds import is_planar_saddle, saddle_manifolds
from orbitdesk.system.compiled_system import MAP

from orbitdesk.cli.common import (analysis_errors, CommandError, add_value_options, open_model, parse_number,
                                  print_json, stderr_progress)

MANIFOLD_POINTS = 400  # points per branch in the JSON output


def register(sub):
    parser = sub.add_parser("equilibria", help="equilibria (flows) or fixed points (maps) with their stability")
    parser.add_argument("path")
    add_value_options(parser)
    parser.add_argument("--box", action="append", metavar="STATE=LO:HI",
                        help="search range of a state (repeatable; default: around the initial values)")
    parser.add_argument("--starts", type=int, default=200, metavar="N", help="Newton starts (default 200)")
    parser.add_argument("--no-exact", action="store_true", help="skip the exact (symbolic) solve")
    parser.add_argument("--timeout", metavar="S", default="3", help="time limit of the exact solve in seconds")
    parser.add_argument("--json", action="store_true", help="print the result as JSON")
    parser.set_defaults(handler=run)


def parse_box(items, states) -> dict:
    box = {}
    for item in items or ():
        name, sep, span = item.partition("=")
        lo_text, sep2, hi_text = span.partition(":")
        name = name.strip()
        if not sep or not sep2 or not name:
            raise CommandError(f"--box expects STATE=LO:HI, got '{item}'")
        if name not in states:
            raise CommandError(f"--box: unknown state '{name}' (states: {', '.join(states)})")
        lo, hi = parse_number(lo_text.strip(), f"--box {name}"), parse_number(hi_text.strip(), f"--box {name}")
        if not hi > lo:
            raise CommandError(f"--box {name}: the low end must be below the high end")
        box[name] = (lo, hi)
    return box


def run(args) -> int:
    source, system, p, u0 = open_model(args)
    box = parse_box(args.box, system.states)
    if args.starts < 1:
        raise CommandError("--starts must be at least 1")
    timeout = parse_number(args.timeout, "--timeout")
    if timeout < 0:
        raise CommandError("--timeout must be zero or positive")
    progress = stderr_progress("equilibria")
    numeric = []  # the table printed as soon as the Newton search ends: the exact solve never holds it back

    def numeric_first(found) -> None:
        if not args.json:
            numeric.append(found)
            print_table(system, found)
            sys.stdout.flush()

    with analysis_errors():
        eqs = find_equilibria(system, p, box=box, starts=args.starts, exact=not args.no_exact and timeout > 0,
                              exact_timeout=timeout, progress=progress, u0=u0, on_numeric=numeric_first)
        entries = []
        for eq in eqs:
            entry = eq.to_dict()
            if is_planar_saddle(system, eq):
                entry["manifolds"] = saddle_manifolds(system, eq, p, box=eqs.box).to_dict(MANIFOLD_POINTS)
            entries.append(entry)
    if args.json:
        print_json({"equilibria": entries, "notes": eqs.notes})
    elif numeric:
        print_refinement(system, numeric[0], eqs)
    else:
        print_table(system, eqs)
    return 0


def print_refinement(system, numeric, eqs) -> None:
    """What the exact solve changed in the table printed before it: nothing but the method (the rows it
    confirms), or the whole table again after it."""
    same = len(numeric) == len(eqs) and all(
        a.kind == b.kind and all(abs(a.state[s] - b.state[s]) <= 1e-9 * max(1.0, abs(a.state[s]))
                                 for s in system.states) for a, b in zip(numeric, eqs))
    confirmed = [k for k, eq in enumerate(eqs, start=1) if eq.method != "newton"]
    if same and eqs:
        if confirmed:
            print(f"the exact solve confirms row{'s' if len(confirmed) > 1 else ''} "
                  f"{', '.join(map(str, confirmed))}")
    elif same:
        pass
    else:
        print("after the exact solve:")
        print_table(system, eqs)
        return
    for note in eqs.notes:
        if note not in numeric.notes:
            print(f"note: {note}")


def _number(v: float) -> str:
    return f"{v:.6g}" if v != 0 else "0"


def _eigenvalues(values) -> str:
    parts, skip = [], False
    for k, v in enumerate(values):
        if skip:
            skip = False
            continue
        if v.imag != 0 and k + 1 < len(values) and values[k + 1] == v.conjugate():
            parts.append(f"{_number(v.real)} ± {_number(abs(v.imag))}i")
            skip = True
        elif v.imag != 0:
            parts.append(f"{_number(v.real)}{'+' if v.imag > 0 else '-'}{_number(abs(v.imag))}i")
        else:
            parts.append(_number(v.real))
    return ", ".join(parts)


def print_table(system, eqs) -> None:
    what = "fixed points" if system.kind == MAP else "equilibria"
    values = "multipliers" if system.kind == MAP else "eigenvalues"
    if not eqs:
        print(f"no {what} found")
    else:
        header = [*system.states, "kind", "stable", values, "found by"]
        rows = []
        for eq in eqs:
            stable = {"stable": "yes", "unstable": "no"}.get(eq.stability, eq.stability)
            rows.append([*(_number(eq.state[s]) for s in system.states), eq.kind, stable,
                         _eigenvalues(eq.eigenvalues), eq.method])
        widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(header)]
        print("  ".join(h.ljust(w) for h, w in zip(header, widths)).rstrip())
        for r in rows:
            print("  ".join(c.ljust(w) for c, w in zip(r, widths)).rstrip())
        for k, eq in enumerate(eqs, start=1):
            for warning in eq.warnings:
                print(f"note on row {k}: {warning}")
    for note in eqs.notes:
        print(f"note: {note}")
