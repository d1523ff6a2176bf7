"""``orbitdesk open PATH``: the desktop app on a project or a model file."""

from pathlib import Path

from orbitdesk.cli.common import CommandError, EXIT_UNREADABLE


def register(sub):
    parser = sub.add_parser("open", help="open the desktop app on a project (.orbitdesk) or a model file")
    parser.add_argument("path")
    parser.set_defaults(handler=run)


def run(args) -> int:
    path = Path(args.path)
    if not path.exists():
        raise CommandError(f"{path}: no such file", EXIT_UNREADABLE)
    from orbitdesk.app.launch import main as app_main

    return app_main([], path=str(path))
