"""``python -m benchmarks [NAME ...]``: run the speed suite and print one table."""

from __future__ import annotations

import importlib
import platform
import sys
import time

from benchmarks.harness import print_table

MODULES = ["bench_single_run", "bench_cold_start", "bench_stiff", "bench_stiff_crossings", "bench_validation", "bench_ensemble", "bench_sweep", "bench_sweep_lyapunov", "bench_lyapunov",
           "bench_equilibria",
           "bench_lyapunov_grid", "bench_fit", "bench_growth", "bench_app", "bench_ui_interaction",
           "bench_keystroke",
           "bench_continuation", "bench_noise", "bench_cycles"]


def main(argv=None) -> int:
    names = (argv if argv is not None else sys.argv[1:]) or MODULES
    rows = []
    for name in names:
        try:
            module = importlib.import_module(f"benchmarks.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"benchmarks.{name}":
                print(f"(skipping {name}: not present)", file=sys.stderr)
                continue
            raise
        if not hasattr(module, "run"):
            print(f"(skipping {name}: no run())", file=sys.stderr)
            continue
        print(f"running {name} ...", file=sys.stderr)
        rows.extend(module.run())
    print(f"\nmachine: {platform.machine()}, {platform.processor() or 'cpu'}, Python {platform.python_version()}, "
          f"{time.strftime('%Y-%m-%d')}\n")
    print_table(rows)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
