"""``orbitdesk check PATH [--json]``: the model's diagnostics."""

from orbitdesk.language.model import parse_model

from orbitdesk.cli.common import EXIT_ERRORS, EXIT_OK, print_json, read_source


def register(sub):
    parser = sub.add_parser("check", help="validate a model and list its diagnostics")
    parser.add_argument("path")
    parser.add_argument("--json", action="store_true", help="print the result as JSON")
    parser.set_defaults(handler=run)


def run(args) -> int:
    source = read_source(args.path)
    parsed = parse_model(source.text)
    if args.json:
        print_json({
            "ok": parsed.ok,
            "kind": parsed.kind,
            "states": parsed.states,
            "parameters": {name: p.value for name, p in parsed.parameters.items()},
            "functions": {name: {"arguments": list(args), "line": parsed.functions[name].line}
                          for name, args in parsed.function_arguments.items() if name in parsed.functions},
            "derived": list(parsed.derived),
            "delays": [{"state": d.state, "delay": str(d.amount), "value": d.value, "written": d.label,
                        "line": d.line} for d in parsed.delays],
            "history": {name: {"expression": str(expr), "line": parsed.history_lines.get(name)}
                        for name, expr in parsed.history.items()},
            "events": [event.to_dict() for event in parsed.events],
            "structural_parameters": sorted(parsed.structural),
            "diagnostics": [
                {"line": d.line, "column": d.column, "end_column": d.end_column,
                 "severity": d.severity, "message": d.message} for d in parsed.diagnostics],
        })
    else:
        for d in parsed.diagnostics:
            print(d.format())
        if parsed.ok:
            events = f", {len(parsed.events)} event{'s' if len(parsed.events) != 1 else ''}" if parsed.events else ""
            print(f"ok: {parsed.kind} with {len(parsed.states)} states ({', '.join(parsed.states)}), "
                  f"{len(parsed.parameters)} parameters{events}"
                  + (f", delayed values {', '.join(d.label for d in parsed.delays)}" if parsed.delays else ""))
    return EXIT_OK if parsed.ok else EXIT_ERRORS
