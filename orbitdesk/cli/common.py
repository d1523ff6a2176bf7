"""What every command shares: reading a model or project, --set/--init, JSON and CSV output."""

from __future__ import annotations

import json
import math
import re
import sys
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from orbitdesk.engine import limits

EXIT_OK, EXIT_ERRORS, EXIT_UNREADABLE = 0, 1, 2


class CommandError(Exception):
    def __init__(self, message: str, code: int = EXIT_ERRORS):
        super().__init__(message)
        self.message, self.code = message, code


@dataclass
class Source:
    """What a PATH holds: model text, and the project's stored values if it is a project; ``doc`` is the
    live document over it (the app's, headless) that the commands read values and settings from."""

    path: Path
    text: str
    project: object | None = None  # core.project.Project when PATH is a project
    doc: object = field(default=None, repr=False)
    disk_state: object = field(default=None, repr=False)  # what the project file was when read (saving checks it)

    def __post_init__(self):
        if self.doc is None:
            from orbitdesk.document.live import LiveDocument
            from orbitdesk.document.project import UNCHECKED, Project

            if self.project is None:
                self.doc = LiveDocument.from_project(Project(name=self.path.stem, model=self.text))
            else:
                self.doc = LiveDocument.from_project(self.project, self.path, self.disk_state or UNCHECKED)


def read_source(path_text: str) -> Source:
    path = Path(path_text)
    if path.suffix == ".orbitdesk":
        from orbitdesk.document import project as project_module

        try:
            project, state = project_module.load_with_state(path)
        except project_module.ProjectError as err:
            raise CommandError(f"{path}: {err}", EXIT_UNREADABLE) from None
        except OSError as err:
            raise CommandError(f"{path}: cannot read: {err.strerror or err}", EXIT_UNREADABLE) from None
        return Source(path, project.model, project, disk_state=state)
    from orbitdesk.language.model_file import read_model_file

    try:
        return Source(path, read_model_file(path))
    except (OSError, ValueError) as err:
        raise CommandError(f"{path}: {err}", EXIT_UNREADABLE) from None


def load_system(source: Source, noise: bool = False):
    """Compile the source's model; errors become a CommandError listing the diagnostics. A model with
    noise, for a command that assumes determinism (``noise`` False), gets a note on stderr."""
    parsed = source.doc.parsed
    if not parsed.ok:
        lines = [f"{source.path}:{d.format()}" for d in parsed.errors]
        raise CommandError("the model has errors:\n" + "\n".join(lines), EXIT_ERRORS)
    system = source.doc.compile_now()
    if system.stochastic and not noise:
        from orbitdesk.language.noise import NOISE_FREE_NOTE

        print(f"note: {NOISE_FREE_NOTE}", file=sys.stderr)
    return system


def open_model(args, noise: bool = False):
    """What most commands start with: the PATH's live document, its compiled system and the parameter and
    initial vectors (project values, then --set/--init). Returns (source, system, p, u0). ``noise``: the
    command runs a model with noise as such (no note that it uses the noise-free part)."""
    source = read_source(args.path)
    system = load_system(source, noise)
    p, u0 = values_for(system, source, args.set, args.init)
    return source, system, p, u0


_ASSIGN = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*'*)\s*=\s*(.+?)\s*$")


def parse_assignments(items, what: str) -> dict[str, float]:
    values = {}
    for item in items or ():
        m = _ASSIGN.match(item)
        if not m:
            raise CommandError(f"--{what} expects NAME=VALUE, got '{item}'")
        values[m.group(1)] = parse_number(m.group(2), f"--{what} {m.group(1)}")
    return values


def parse_guess(items, system) -> dict[str, float]:
    """``--guess STATE=VALUE`` items as a dict, refusing names that are not states."""
    guess = parse_assignments(items, "guess")
    unknown = [name for name in guess if name not in system.states]
    if unknown:
        raise CommandError(f"--guess: unknown state '{unknown[0]}' (states: {', '.join(system.states)})")
    return guess


def parse_number(text: str, what: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise CommandError(f"{what}: '{text}' is not a number") from None
    if not math.isfinite(value):
        raise CommandError(f"{what}: '{text}' is not a finite number")
    return value


def parse_positive(text: str, what: str) -> float:
    value = parse_number(text, what)
    if value <= 0:
        raise CommandError(f"{what} must be positive")
    return value


def values_for(system, source: Source, sets, inits):
    """Parameter and initial vectors: the model's, then the project's stored ones (the live document's
    values), then --set/--init (put into the document, so an exported project carries them)."""
    doc = source.doc
    params = {k: v for k, v in doc.params.items() if k in system.parameters}
    initial = {k: v for k, v in doc.initial.items() if k in system.states}
    params.update(parse_assignments(sets, "set"))
    initial.update(parse_assignments(inits, "init"))
    try:
        p, u0 = system.param_vector(params), system.initial_vector(initial)
    except KeyError as err:
        known_p = ", ".join(system.parameters) or "none"
        known_s = ", ".join(system.states)
        raise CommandError(f"{err.args[0]} (parameters: {known_p}; states: {known_s})") from None
    if doc.system is system:
        doc.show_state(params, initial)
    return p, u0


def add_span_options(parser) -> None:
    """How long a run goes: --t-end T (flows) or --steps N (maps), checked by ``check_span``."""
    span = parser.add_mutually_exclusive_group()
    span.add_argument("--t-end", type=str, metavar="T", help="end time of a flow")
    span.add_argument("--steps", type=int, metavar="N", help="iterations of a map")


def check_span(args, system) -> None:
    """Refuse --t-end for a map and --steps for a flow (each would be ignored)."""
    if system.kind == "map" and args.t_end is not None:
        raise CommandError("--t-end applies to flows; a map runs for --steps N")
    if system.kind != "map" and args.steps is not None:
        raise CommandError("--steps applies to maps; a flow runs to --t-end T")


def add_interval_options(parser, what: str, guess_help: str):
    """The options of a command that follows a curve as a parameter moves: --param NAME --from A --to B,
    --guess STATE=VALUE (repeatable) and --max-points N, read back by ``open_interval``."""
    parser.add_argument("--param", required=True, metavar="NAME", help=what)
    parser.add_argument("--from", dest="lo", required=True, metavar="A", help="one end of the parameter interval")
    parser.add_argument("--to", dest="hi", required=True, metavar="B", help="the other end")
    parser.add_argument("--guess", action="append", metavar="STATE=VALUE", help=guess_help + " (repeatable)")
    parser.add_argument("--max-points", type=int, default=400, metavar="N",
                        help="most points per direction of the curve followed (default 400)")


def open_interval(args):
    """(source, system, p, u0, guess, lo, hi) of a command with ``add_interval_options``: the model opened
    by ``open_model``, the --guess states checked against it, the parameter and its interval."""
    source, system, p, u0 = open_model(args)
    guess = parse_guess(args.guess, system)
    lo, hi = parse_interval(args, system)
    if args.max_points < 2:
        raise CommandError("--max-points must be at least 2")
    return source, system, p, u0, guess, lo, hi


def add_keep_option(parser, what: str, where: str) -> None:
    """--keep: the command's result goes into the project PATH as the app keeps it (``keep_in_project``)."""
    parser.add_argument("--keep", action="store_true",
                        help=f"keep {what} in the project PATH (a .orbitdesk file), where the app's {where} shows "
                             "it; the values it was computed for (with --set/--init) are kept too")


def check_keep(args, source: Source) -> None:
    """Refuse --keep before any work when PATH is no project file."""
    if args.keep and source.project is None:
        raise CommandError("--keep writes into a project file (.orbitdesk); PATH is model text")


def keep_in_project(source: Source, kind: str, result, skip, view_id: str, settings: dict) -> None:
    """Put ``result`` into the project's live document as its result of ``kind`` (document/results.py), computed
    for the document's values with the parameters ``skip`` running (the initial values only pick a start, as in
    the app's bifurcation view), write ``settings`` into the view ``view_id`` that shows it, and save the
    project in place (its backup kept). A project changed on disk since it was read is not overwritten."""
    from orbitdesk.document.project import ProjectConflict, ProjectError

    doc = source.doc
    doc.set_result(kind, result, doc.basis(skip, initial=False))
    doc.set_view_settings(view_id, {**(doc.project.views.get(view_id) or {}), **settings})
    try:
        doc.save(source.path)
    except ProjectConflict:
        raise CommandError(f"{source.path}: changed on disk while this ran; nothing written (run again)") from None
    except ProjectError as err:
        raise CommandError(f"{source.path}: not saved: {err}") from None
    print(f"kept in {source.path}", file=sys.stderr)


@contextmanager
def analysis_errors(*refusals, prefix: str = ""):
    """An analysis's refusals (ValueError and ``refusals``; a KeyError's words are its name) and a cancel
    as the command's error."""
    from orbitdesk.engine.progress import Cancelled

    try:
        yield
    except Cancelled:
        raise CommandError("cancelled") from None
    except (ValueError, *refusals) as err:
        raise CommandError(prefix + str(err.args[0] if isinstance(err, KeyError) else err)) from None


def parse_interval(args, system) -> tuple[float, float]:
    if args.param not in system.parameters:
        raise CommandError(f"--param: unknown parameter '{args.param}' "
                           f"(parameters: {', '.join(system.parameters) or 'none'})")
    return parse_number(args.lo, "--from"), parse_number(args.hi, "--to")


def parse_axis(text: str, option: str, names, what: str):
    """``NAME=LO:HI:N`` -> (NAME, N evenly spaced values); NAME must be one of ``names`` (a ``what``)."""
    name, sep, rest = (text or "").partition("=")
    parts = rest.split(":")
    if not sep or len(parts) != 3:
        raise CommandError(f"{option} reads NAME=LO:HI:N, e.g. {option} {list(names)[0] if names else 'r'}=0:1:100")
    name = name.strip()
    if name not in names:
        raise CommandError(f"{option}: unknown {what} '{name}' ({what}s: {', '.join(names) or 'none'})")
    lo, hi = parse_number(parts[0], option), parse_number(parts[1], option)
    try:
        count = int(parts[2])
    except ValueError:
        raise CommandError(f"{option}: the number of values must be a whole number, not {parts[2]!r}") from None
    if count < 1 or (lo == hi and count > 1):
        raise CommandError(f"{option}: give at least one value and two different ends")
    limits.check_memory(8.0 * count, f"{option} with {count:,} values")  # before the values are made
    return name, np.linspace(lo, hi, count)


MAX_GRID_POINTS = 1_000_000   # points of a grid command (basins, grid)


def add_grid_axes(parser, noun: str, unit: str) -> None:
    """``--x NAME=LO:HI:N`` and ``--y NAME=LO:HI:N``: the two axes of a grid command (``noun``: state or
    parameter; ``unit``: what the N counts)."""
    for option, where in (("--x", "across"), ("--y", "up")):
        parser.add_argument(option, required=True, metavar=f"{noun.upper()}=LO:HI:N",
                            help=f"the {noun} {where}, N {unit}")


def grid_axes(args, names, noun: str):
    """(x name, x values, y name, y values) of ``--x`` and ``--y``: two different ``names``, at most
    MAX_GRID_POINTS points."""
    x_name, xs = parse_axis(args.x, "--x", names, noun)
    y_name, ys = parse_axis(args.y, "--y", names, noun)
    if x_name == y_name:
        raise CommandError(f"--x and --y need two different {noun}s")
    if xs.size * ys.size > MAX_GRID_POINTS:
        raise CommandError(f"the grid has {xs.size * ys.size:,} points; the limit is {MAX_GRID_POINTS:,}")
    return x_name, xs, y_name, ys


def write_grid(args, result, data: dict) -> None:
    """A grid command's output: the CSV table of ``--csv`` (one row per grid point,
    exports/csv_table.grid_table, as the window's data export) and/or ``data`` as JSON."""
    if args.csv:
        from orbitdesk.exports.csv_table import grid_table

        write_csv(args.csv, *grid_table(result))
    if args.json or not args.csv:
        print_json(data)


def add_accuracy_options(parser, methods, what: str) -> None:
    """``--dt`` (a fixed RK4 step), ``--method`` (one of ``methods``), ``--rtol``, ``--atol``: how the flows of a
    command that runs many orbits (sweep, basins) are integrated; read by ``apply_accuracy``."""
    parser.add_argument("--dt", metavar="H", help="a fixed RK4 step (a strobe period is divided exactly); "
                        "default: adaptive steps with the run's tolerances")
    parser.add_argument("--method", choices=list(methods), help=what)
    parser.add_argument("--rtol", metavar="R", help="relative tolerance of the adaptive steps (default: the run's)")
    parser.add_argument("--atol", metavar="A", help="absolute tolerance of the adaptive steps (default: the run's)")


def apply_accuracy(settings, args, is_map: bool) -> None:
    """``add_accuracy_options``' options onto ``settings`` (fields dt, method, rtol, atol): --dt fixes the step,
    --method, --rtol and --atol make it adaptive; a map takes none of them."""
    for option in ("dt", "rtol", "atol", "method"):
        if getattr(args, option) is not None and is_map:
            raise CommandError(f"--{option} applies to flows")
    if args.dt is not None:
        if args.rtol is not None or args.atol is not None or args.method is not None:
            raise CommandError("--dt fixes the step; --method, --rtol and --atol go with adaptive steps")
        settings.dt = parse_positive(args.dt, "--dt")
    for option in ("rtol", "atol"):
        if getattr(args, option) is not None:
            setattr(settings, option, parse_positive(getattr(args, option), f"--{option}"))
            settings.dt = None
    if args.method is not None:
        settings.method, settings.dt = args.method, None


def add_method_option(parser):
    """``--method``: the integration method of an analysis (default: the default method, or the stiff one
    when a probe run shows the system stiff)."""
    from orbitdesk.engine.methods import NAMES

    parser.add_argument("--method", choices=NAMES,
                        help="integration method (default: the project's, else the default one or, when a short "
                             "probe run shows the system stiff, the stiff one)")


def method_for(system, p, u0, settings, args, window):
    """The method an analysis integrates with: --method, a method the project sets, else the default one
    or the stiff one when time_scales.choose_method finds the system stiff; with the note saying why."""
    from orbitdesk.analyses.time_scales import choose_method
    from orbitdesk.engine.methods import DEFAULT

    if getattr(args, "method", None) or settings.method != DEFAULT:
        return settings.method, ""
    choice = choose_method(system, p, u0, window)
    return choice.method, choice.note


def add_value_options(parser, initial=True):
    parser.add_argument("--set", action="append", metavar="NAME=VALUE", help="set a parameter (repeatable)")
    if initial:
        parser.add_argument("--init", action="append", metavar="STATE=VALUE", help="set an initial value (repeatable)")


def add_outputs(parser, handler, json_help: str = "print the result as JSON", csv_help: str | None = None) -> None:
    """The tail every analysis command shares: --set/--init, --csv FILE (when ``csv_help``), --json, and
    the function that runs the command."""
    add_value_options(parser)
    if csv_help is not None:
        parser.add_argument("--csv", metavar="FILE", help=csv_help)
    parser.add_argument("--json", action="store_true", help=json_help)
    parser.set_defaults(handler=handler)


def to_jsonable(value):
    if isinstance(value, dict):
        return {str(k): to_jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [to_jsonable(v) for v in value]
    if isinstance(value, np.ndarray):
        if value.dtype.kind in "fiub" and np.isfinite(value).all():
            return value.tolist()  # plain floats and ints already (the common case, thousands of samples)
        return to_jsonable(value.tolist())
    if isinstance(value, (np.floating, float)):
        v = float(value)
        return v if math.isfinite(v) else None
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, complex):
        return {"re": value.real, "im": value.imag}
    return value


def print_json(data) -> None:
    sys.stdout.write(json.dumps(to_jsonable(data), allow_nan=False))  # dumps: the C encoder, in one piece
    sys.stdout.write("\n")


def write_csv(path: str, header: list[str], columns) -> None:
    from orbitdesk.exports.csv_table import whole_columns, write_csv as write_table

    try:
        write_table(path, header, whole_columns(np.column_stack(columns)) if len(columns) else [])
    except OSError as err:
        raise CommandError(f"cannot write {path}: {err.strerror or err}") from None


def stderr_progress(label: str):
    """A progress callback that draws on stderr when it is a terminal, else None."""
    if not sys.stderr.isatty():
        return None

    def report(fraction: float) -> None:
        sys.stderr.write(f"\r{label} {fraction * 100:5.1f}%")
        sys.stderr.flush()
        if fraction >= 1.0:
            sys.stderr.write("\n")

    return report
