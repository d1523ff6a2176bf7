"""Cold `orbitdesk run` on a 3-state model (Lorenz, t in [0, 10], 4,000 samples) in a fresh interpreter,
against `python -c "import numpy, scipy.integrate"` timed alternately (goal: within 2x). The check column
says which heavy modules the run loaded (none of scipy, numba or Qt is expected)."""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
from pathlib import Path

from benchmarks.harness import Row, child_command, interleaved
from orbitdesk.samples.models import LORENZ_REF, model

LORENZ = model(LORENZ_REF, initial={'y(0)': None, 'z(0)': None})
HEAVY = ("scipy", "numba", "PySide6", "sympy")


def run(log=print) -> list[Row]:
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "lorenz.txt"
        path.write_text(LORENZ)
        env = dict(os.environ)
        env.pop("ORBITDESK_NO_JIT", None)
        command = [sys.executable, "-m", "orbitdesk", "run", str(path), "--t-end", "10", "--json"]
        ours = child_command(command, env)
        baseline = child_command([sys.executable, "-c", "import numpy, scipy.integrate"], env)
        a, b = interleaved(ours, baseline, repeats=7)
        probe = subprocess.run([sys.executable, "-c", "import sys; from orbitdesk.cli import main; "
                                "main(sys.argv[1:]); print(' '.join(sys.modules), file=sys.stderr)", *command[3:]],
                               capture_output=True, text=True, env=env, check=True)
        loaded = set(probe.stderr.split())
    heavy = ", ".join(h for h in HEAVY if h in loaded) or "none"
    log(f"cold run {a:.2f} s, import numpy + scipy.integrate {b:.2f} s; heavy modules loaded: {heavy}")
    return [Row("cold `orbitdesk run` of Lorenz, 3 states, t in [0, 10] (median of 7, child processes)", a, b,
                f"heavy modules the run loaded: {heavy}", "python -c \"import numpy, scipy.integrate\"",
                "within 2x (ratio ≥ 0.5)")]


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run())
