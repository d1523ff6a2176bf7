"""A standalone Python script (numpy and scipy only) that reproduces a fit of the model to its data sets.

The model is printed by sympy's code printers from the compiled system's expressions in generated names,
as ``export_script`` prints a run; the data are written as Python literals (numbers by ``repr`` of
floats, names and labels by ``ascii()``), and the title and model text appear only in comments reduced
to printable ASCII (``export_script.comment_text``) below our own first two lines, so nothing from the
project is ever spliced into the code as text. The script is pure ASCII. It solves the same weighted
least-squares problem as ``core.fitting`` with scipy's ``least_squares`` (central finite differences on
tightly integrated runs instead of the sensitivity equations), then prints the estimates, standard
errors, 95 % intervals, correlations and residual RMS as the ``orbitdesk fit --json`` document.
"""

from __future__ import annotations

import math

from sympy.printing.numpy import NumPyPrinter
from sympy.printing.pycode import PythonCodePrinter

from orbitdesk.document.datasets import DataSet
from orbitdesk.exports.run_script import _comment, _function, comment_text
from orbitdesk.analyses.fitting import FitSettings, _display_names, _Problem
from orbitdesk.system.compiled_system import MAP, CompiledSystem


def _floats(values) -> str:
    return "[" + ", ".join(repr(float(v)) for v in values) + "]"


def _bound(v) -> str:
    return "None" if v is None or not math.isfinite(v) else repr(float(v))


def fit_script(system: CompiledSystem, datasets: list[DataSet], settings: FitSettings, p0=None, u0=None,
               ranges: dict | None = None, title: str = "OrbitDesk model") -> str:
    """The text of a script that fits ``system`` to ``datasets`` as ``fitting.fit`` would."""
    import numpy as np

    p0 = system.param_values if p0 is None else np.asarray(p0, dtype=float)
    u0 = system.initial if u0 is None else np.asarray(u0, dtype=float)
    problem = _Problem(system, datasets, settings, p0, u0, dict(system.param_ranges if ranges is None else ranges))
    lo, hi = problem.bounds()
    x0 = problem.start_vector()
    names = _display_names(problem)
    is_map = system.kind == MAP
    sets = []
    for d, ds in enumerate(datasets):
        p, u = problem.values_for(d, x0)
        cols = []
        for c in ds.columns:
            cols.append("{" + f"'quantity': {c.quantity!a}, 'values': {_floats(c.values)}, "
                        f"'weights': {_floats(problem.weights(ds, c.quantity))}" + "}")
        sets.append("    {" + f"'name': {ds.name!a}, 'time': {_floats(ds.time)},\n     'columns': ["
                    + ",\n                 ".join(cols) + f"],\n     'parameters': {_floats(p)}, "
                    f"'initial': {_floats(u)}" + "},")
    unknowns = [f"    ({u.kind!a}, {u.index!r}, {u.dataset!r}),  # {comment_text(names[j])}"
                for j, u in enumerate(problem.unknowns)]
    head = [
        "#!/usr/bin/env python3",
        "# -*- coding: utf-8 -*-",
        "# A fit to measured data, exported from OrbitDesk.",
        f"# Title: {comment_text(title)}",
        "# Standalone: needs numpy and scipy. Prints the estimates as JSON (the shape of `orbitdesk fit --json`).",
        "#",
        "# The model as typed:",
        _comment(system.model.text),
        "",
        "import functools  # noqa: F401  (used by min/max of several arguments, if any)",
        "import json",
        "import math  # noqa: F401",
        "",
        "import numpy",
        "from scipy import optimize, stats",
    ]
    if not is_map:
        head.append("from scipy.integrate import solve_ivp")
    head += [
        "",
        f"STATES = {list(system.states)!a}",
        f"DERIVED = {list(system.derived_names)!a}",
        f"PARAMETERS = {list(system.parameters)!a}",
        f"T_START = {0.0 if is_map else float(settings.t_start)!r}",
        f"RTOL, ATOL = {float(min(settings.rtol, 1e-10))!r}, {float(min(settings.atol, 1e-12))!r}",
        "# one entry per estimated value: (kind, index of the parameter or state, data set or None = shared)",
        "UNKNOWNS = [", *unknowns, "]",
        f"NAMES = {names!a}",
        f"START = {_floats(x0)}",
        f"LOWER = [{', '.join(_bound(v) for v in lo)}]",
        f"UPPER = [{', '.join(_bound(v) for v in hi)}]",
        "# each data set: sample times, measured columns with their weights, its own parameter and initial values",
        "DATASETS = [", *sets, "]",
    ]
    parts = ["\n".join(head)]
    if is_map:
        parts.append(_function("step", ["n", "u", "p"], system, system.f, PythonCodePrinter()))
    else:
        parts.append(_function("rhs", ["t", "u", "p"], system, system.f, NumPyPrinter()))
    if system.derived_exprs:
        parts.append(_function("derived", ["t", "U", "p"], system, system.derived_exprs, NumPyPrinter()))
    else:
        parts.append("def derived(t, U, p):\n    return []")
    parts.append(_MAP_RUN if is_map else _FLOW_RUN)
    parts.append(_FIT)
    return "\n\n\n".join(parts) + "\n"


_FLOW_RUN = '''def run(p, u0, times):
    """The states at the sample times (one row per state)."""
    solution = solve_ivp(rhs, (T_START, times[-1]), u0, method="DOP853", t_eval=times, args=(list(p),),
                         rtol=RTOL, atol=ATOL)
    if solution.status != 0 or solution.y.shape[1] != len(times):
        raise RuntimeError("the model could not be integrated: " + solution.message)
    return solution.y'''

_MAP_RUN = '''def run(p, u0, times):
    """The states at the sample steps (one row per state)."""
    steps = [int(round(n)) for n in times]
    u, out, n = [float(v) for v in u0], [], 0
    for target in steps:
        while n < target:
            u = [float(v) for v in step(n, u, list(p))]
            n += 1
        out.append(list(u))
    return numpy.array(out, dtype=float).T'''

_FIT = '''def values_for(d, x):
    p, u = list(DATASETS[d]["parameters"]), list(DATASETS[d]["initial"])
    for (kind, index, dataset), value in zip(UNKNOWNS, x):
        if dataset is None or dataset == d:
            (p if kind == "parameter" else u)[index] = value
    return p, u


def model_values(d, x):
    data = DATASETS[d]
    times = numpy.array(data["time"])
    p, u = values_for(d, x)
    states = run(p, u, times)
    extra = derived(times, states, p)
    out = {}
    for column in data["columns"]:
        q = column["quantity"]
        if q in STATES:
            out[q] = states[STATES.index(q)]
        else:
            out[q] = numpy.broadcast_to(numpy.asarray(extra[DERIVED.index(q)], dtype=float), times.shape)
    return out


def residuals(x):
    out = []
    for d, data in enumerate(DATASETS):
        model = model_values(d, x)
        for column in data["columns"]:
            out.append(numpy.array(column["weights"]) * (model[column["quantity"]] - numpy.array(column["values"])))
    return numpy.concatenate(out)


def main():
    lower = [-numpy.inf if v is None else v for v in LOWER]
    upper = [numpy.inf if v is None else v for v in UPPER]
    result = optimize.least_squares(residuals, START, bounds=(lower, upper), jac="3-point", x_scale="jac",
                                    ftol=1e-12, xtol=1e-12, gtol=1e-12)
    r, J, x = result.fun, result.jac, result.x
    dof = r.size - x.size
    cov = numpy.linalg.pinv(J.T @ J) * (r @ r) / dof if dof > 0 else numpy.full((x.size, x.size), numpy.nan)
    stderr = numpy.sqrt(numpy.clip(numpy.diag(cov), 0, None))
    correlation = cov / numpy.outer(stderr, stderr)
    q = stats.t.ppf(0.975, dof) if dof > 0 else numpy.nan
    document = {"parameters": {}, "initial": {}, "residual_rms": {}, "correlation": correlation.tolist(),
                "evaluations": int(result.nfev), "warnings": []}
    for (kind, index, dataset), name, value, se in zip(UNKNOWNS, NAMES, x, stderr):
        entry = {"value": float(value), "stderr": float(se), "interval": [float(value - q * se), float(value + q * se)]}
        document["parameters" if kind == "parameter" else "initial"][name] = entry
    pooled = {}
    for d, data in enumerate(DATASETS):
        model = model_values(d, x)
        for column in data["columns"]:
            pooled.setdefault(column["quantity"], []).append(model[column["quantity"]] - numpy.array(column["values"]))
    document["residual_rms"] = {k: float(numpy.sqrt(numpy.mean(numpy.concatenate(v) ** 2))) for k, v in pooled.items()}
    print(json.dumps(document, indent=1))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())'''


__all__ = ["fit_script"]
