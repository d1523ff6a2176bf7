"""Equilibria searches: the multi-start Newton loop against a per-start scipy loop, side by side.

Ours: ``find_equilibria(exact=False)`` with its defaults (the initial values and 200 quasi-random
starts, every start in the compiled loop of engine/newton_starts.py; kernels compiled first). The
baseline (written here): the search as it was, start by start with the model's f and Jacobian called
from Python, scipy's ``root(method="hybr")`` up to 24 states and damped Newton on the sparse Jacobian
beyond, each end refined by Newton steps (equilibria._refine), the same acceptance and the same
deduplication. Cases: the damped
chain of masses (benchmarks/bench_growth) at 6 and 100 states (one equilibrium, the origin) and
Lorenz-96 at 16 states (F = 8: many equilibria; the count each search finds is printed). A third
row per model gives the time to the first answer with the exact solve asked for: ours hands the
Newton table over before sympy answers (``on_numeric``), the baseline waited for sympy. Wall
times are medians of runs timed alternately; processor times are printed beside them (the machine
is shared).
"""

from __future__ import annotations

import time

import numpy as np

from benchmarks.bench_growth import chain, lorenz96
from benchmarks.harness import Row, alternate
from orbitdesk.analyses import equilibria as E
from orbitdesk.engine import compiled
from orbitdesk.language.model import parse_model
from orbitdesk.system.compiled_system import compile_model


OLD_SPARSE_STATES = 24  # the search as it was: hybr up to this many states, damped Newton on the sparse Jacobian beyond


def _hybr_search(system, starts: int = 200):
    """The per-start baseline: hybr from each start (beyond OLD_SPARSE_STATES states damped Newton on the
    sparse Jacobian, scipy's sparse LU), a Newton polish, the same acceptance and merging."""
    from scipy.optimize import root
    from scipy.stats import qmc

    p = system.param_values.astype(float)
    kept, E.SPARSE_STATES = E.SPARSE_STATES, OLD_SPARSE_STATES
    try:
        G, DG, DG_sparse = E._residual_functions(system, p)
    finally:
        E.SPARSE_STATES = kept
    box = E.default_box(system, p)
    lows = np.array([box[s][0] for s in system.states])
    highs = np.array([box[s][1] for s in system.states])
    points = qmc.scale(qmc.LatinHypercube(d=system.n_states, seed=12345).random(starts), lows, highs)
    candidates = [system.initial.astype(float)] + list(points)
    f_values = [np.abs(G(c)) for c in candidates[:20]]
    f_scale = max([1.0] + [float(np.max(v)) for v in f_values if np.all(np.isfinite(v))])
    found = []
    for x0 in candidates:
        try:
            with np.errstate(all="ignore"):
                if DG_sparse is None:
                    refined = E._refine(G, DG, root(G, x0, jac=DG, method="hybr").x)
                else:
                    refined = E._refine(G, DG_sparse, E._start(G, DG_sparse, x0, f_scale))
        except (E._Undefined, np.linalg.LinAlgError, ValueError):
            continue
        if E._accept(refined, f_scale) and E._inside(refined[0], lows, highs):
            E._add(found, refined[0], refined[1], E.NEWTON)
    return found


def _first_answer(system, exact_first: bool) -> float:
    """Seconds until the first table: ours at on_numeric, the baseline (exact first) at the end."""
    start = time.perf_counter()
    seen = []
    if exact_first:
        E.find_equilibria(system, exact_timeout=3.0)
        return time.perf_counter() - start
    E.find_equilibria(system, exact_timeout=3.0, on_numeric=lambda eqs: seen.append(time.perf_counter()))
    return seen[0] - start


def run(log=print) -> list[Row]:
    rows = []
    for name, text in (("chain, 6 states", chain(3)), ("chain, 100 states", chain(50)),
                       ("Lorenz-96, 16 states", lorenz96(16))):
        system = compile_model(parse_model(text))
        compiled.engine_for(system, wait=True)
        cpu = {}

        def ours():
            t = time.process_time()
            value = E.find_equilibria(system, exact=False)
            cpu["ours"] = time.process_time() - t
            return value

        def baseline():
            t = time.process_time()
            value = _hybr_search(system)
            cpu["baseline"] = time.process_time() - t
            return value

        found, reference = ours(), baseline()
        a, b = alternate(ours, baseline, repeats=3)
        ours_time, base_time = float(np.median(a)), float(np.median(b))
        shared = sum(1 for x, _, _ in reference if any(np.linalg.norm(eq.vector - x) <= 1e-8 * max(1.0, np.linalg.norm(x))
                                                      for eq in found))
        check = (f"ours {len(found)} equilibria (starts: {', '.join(f'{k} {v}' for k, v in found.starts.items())}), "
                 f"the baseline {len(reference)}, {shared} of them among ours; processor time "
                 f"{cpu['ours']:.3f} s vs {cpu['baseline']:.3f} s")
        log(f"{name}: ours {ours_time:.3f} s, hybr {base_time:.3f} s; {check}")
        rows.append(Row(f"equilibria, {name}, 200 starts (kernels compiled)", ours_time, base_time, check,
                        "the search as it was: per start, scipy hybr (sparse damped Newton beyond 24 states)"))
        if system.n_states <= E.EXACT_MAX_STATES:
            pairs = [(_first_answer(system, False), _first_answer(system, True)) for _ in range(3)]
            numeric, waited = (float(np.median(v)) for v in zip(*pairs))
            rows.append(Row(f"equilibria, {name}: first table with the exact solve asked for", numeric, waited,
                            "the same search; the baseline's table waits for sympy (3 s limit)",
                            "find_equilibria returning after the exact solve"))
    return rows


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run())
