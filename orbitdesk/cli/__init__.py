"""The command line: ``orbitdesk [open PATH] | check | run | equilibria | ...``.

Each command lives in its own module in this package and exposes ``register(subparsers)``;
the module list below is the whole table. Commands are thin layers over the headless packages (``orbitdesk.document``, ``orbitdesk.analyses``, ...).
"""

from __future__ import annotations

import argparse
import importlib
import sys

from orbitdesk.cli.common import CommandError, EXIT_ERRORS, EXIT_UNREADABLE, parse_positive
from orbitdesk.engine import limits

COMMAND_MODULES = ["open", "check", "run", "equilibria", "cycle", "section", "lyapunov", "sweep", "grid", "basins",
                   "export", "fit", "continuation", "response"]


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # usage errors: a message and exit 2, never a traceback
        self.print_usage(sys.stderr)
        raise CommandError(f"{self.prog}: {message}", EXIT_UNREADABLE)


def build_parser(only: str | None = None) -> argparse.ArgumentParser:
    """The parser of every command, or of the command ``only`` (so only its module is imported)."""
    parser = _Parser(prog="orbitdesk", description="OrbitDesk: build, run and analyse small dynamical models.")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name in COMMAND_MODULES if only not in COMMAND_MODULES else [only]:
        try:
            module = importlib.import_module(f"{__name__}.{name}")
        except ModuleNotFoundError as exc:
            if exc.name and exc.name.startswith(__name__):
                continue  # command not installed in this build
            raise
        module.register(sub)
    for name, command in sub.choices.items():
        if name != "open":
            add_limit_options(command)
    return parser


def add_limit_options(parser) -> None:
    group = parser.add_argument_group("limits (a request beyond them is refused before it starts)")
    group.add_argument("--max-steps", metavar="N",
                       help=f"steps one request may take: integration steps, iterations, periods, Newton "
                            f"steps (default {limits.DEFAULTS.steps:.0e})")
    group.add_argument("--max-memory", metavar="MB",
                       help=f"megabytes of results one request may hold (default {limits.DEFAULTS.memory / 1e6:,.0f})")


def _limits_for(args):
    steps = getattr(args, "max_steps", None)
    memory = getattr(args, "max_memory", None)
    return limits.using_limits(
        steps=None if steps is None else parse_positive(steps, "--max-steps"),
        memory=None if memory is None else parse_positive(memory, "--max-memory") * 1e6)


def main(argv=None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    try:
        if len(argv) == 2 and argv[0] == "open" and not argv[1].startswith("-"):  # no other command's imports
            return int(importlib.import_module(f"{__name__}.open").run(argparse.Namespace(path=argv[1])) or 0)
        parser = build_parser(argv[0] if argv else None)  # a named command imports only its own module
        args = parser.parse_args(argv)
        if args.command is None:
            from orbitdesk.app.launch import main as app_main

            return app_main([], path=None)
        with _limits_for(args):
            return int(args.handler(args) or 0)
    except CommandError as err:
        print(err.message, file=sys.stderr)
        return err.code
    except limits.LimitExceeded as err:
        print(f"orbitdesk: {err}", file=sys.stderr)
        return EXIT_ERRORS
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except (RecursionError, MemoryError) as exc:
        print(f"orbitdesk: the request is too large to work out ({type(exc).__name__}); "
              "simplify the model or ask for less", file=sys.stderr)
        return EXIT_ERRORS
    except Exception as exc:  # noqa: BLE001 - the last guard: one line, never a traceback
        detail = str(exc).strip().splitlines()[0][:300] if str(exc).strip() else ""
        print(f"orbitdesk: could not finish ({type(exc).__name__}{': ' + detail if detail else ''}); "
              "this is a fault in OrbitDesk, please report it with the model", file=sys.stderr)
        return EXIT_ERRORS
