"""From model text to kernel source: ``parse_model``, ``compile_model`` and the kernels' source with the
sparse Jacobian (``codegen.kernel_source``), for every sample model, before and after a change.

Side by side: the package at an older commit (``--before COMMIT``, extracted by ``git archive``) against
the working tree, in alternating child processes (``--rounds`` of each). Each child builds every sample
three times from an empty sympy cache and keeps the fastest; the figure is the median over the rounds of
the child's processor time (user + system), so other work on the machine changes it little.

    .venv/bin/python -m benchmarks.bench_model_build [--before COMMIT] [--rounds N]
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

from benchmarks.bench_compile import ROOT, _extract

BEFORE = "a56f450"  # main before sinh/cosh/tanh of real arguments and the Jacobian's own min/max slopes

CHILD = r"""
import glob, json, os, resource, sys
sys.path.insert(0, sys.argv[1])
import sympy
from orbitdesk.language.model import parse_model
from orbitdesk.system.codegen import kernel_source
from orbitdesk.system.compiled_system import compile_model

def cpu():
    r = resource.getrusage(resource.RUSAGE_SELF)
    return r.ru_utime + r.ru_stime

out = {}
for path in sorted(glob.glob(os.path.join(sys.argv[2], "*.orbitdesk"))):
    with open(path, encoding="utf-8") as handle:
        text = json.load(handle)["model"]
    best = float("inf")
    for _ in range(3):
        sympy.core.cache.clear_cache()
        start = cpu()
        kernel_source(compile_model(parse_model(text)), guard=False)
        best = min(best, cpu() - start)
    out[os.path.basename(path)] = best
print(json.dumps(out))
"""


def _times(tree: Path) -> dict:
    samples = ROOT / "orbitdesk" / "samples"  # the same models for both trees
    done = subprocess.run([sys.executable, "-c", CHILD, str(tree), str(samples)], capture_output=True, text=True,
                          check=True, cwd=tempfile.gettempdir())
    return json.loads(done.stdout)


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--before", default=BEFORE)
    parser.add_argument("--rounds", type=int, default=3)
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        old_tree = _extract(args.before, Path(tmp))
        runs = {"before": [], "after": []}
        for _ in range(args.rounds):
            runs["before"].append(_times(old_tree))
            runs["after"].append(_times(ROOT))
    print(f"| sample | before ({args.before}) | after (working tree) | ratio |\n|---|---|---|---|")
    totals = [0.0, 0.0]
    for name in runs["before"][0]:
        old, new = (statistics.median(run[name] for run in runs[side]) for side in ("before", "after"))
        totals[0] += old
        totals[1] += new
        print(f"| {name.removesuffix('.orbitdesk')} | {old * 1e3:.1f} ms | {new * 1e3:.1f} ms | {new / old:.2f}x |")
    print(f"| all samples | {totals[0] * 1e3:.1f} ms | {totals[1] * 1e3:.1f} ms | {totals[1] / totals[0]:.2f}x |")


if __name__ == "__main__":
    main()
