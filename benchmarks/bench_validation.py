"""Validation of a 50-line model (parse + diagnostics), the editor's per-keystroke budget."""

from __future__ import annotations

import statistics
import time

from benchmarks.harness import Row
from orbitdesk.language.model import parse_model


def fifty_line_model() -> str:
    lines = ["# a chain of coupled oscillators"]
    for i in range(12):
        lines.append(f"k{i} = {0.5 + i / 10} in [0, 5]")
    for i in range(12):
        left = f"x{i - 1}" if i else "0"
        right = f"x{i + 1}" if i < 11 else "0"
        lines.append(f"x{i}'' = -k{i}*(2*x{i} - {left} - {right}) - 0.05*x{i}' + 0.1*sin(t)*x{i}^3")
    for i in range(12):
        lines.append(f"x{i}(0) = {0.01 * i}")
    lines.append("energy = " + " + ".join(f"x{i}'^2/2" for i in range(12)))
    lines.append("spread = max(x0, x11) - min(x0, x11)")
    for i in range(11):
        lines.append(f"strain{i} = (x{i + 1} - x{i})/k{i}")
    return "\n".join(lines[:50]) + "\n"


def run() -> list[Row]:
    text = fifty_line_model()
    parse_model(text)
    times = []
    for _ in range(30):
        start = time.perf_counter()
        parsed = parse_model(text)
        times.append(time.perf_counter() - start)
    assert parsed.ok, parsed.errors
    median = statistics.median(times)
    return [Row(f"validate a {text.count(chr(10))}-line model", median, None,
                f"{len(parsed.states)} states, {len(parsed.diagnostics)} diagnostics; "
                f"p90 {sorted(times)[int(len(times) * 0.9)] * 1e3:.1f} ms", goal="well inside a keystroke (~50 ms)")]


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run())
