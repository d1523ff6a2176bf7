"""A standalone Python script (numpy and scipy only) that reproduces one run and saves it as CSV.

The right-hand side is printed by sympy's code printers from the compiled system's expressions in
generated names (``_t``, ``_u0``, ``_p0``...), so states such as ``x'`` need no renaming; common
subexpressions are shared exactly as the engine shares them. Flows are printed with numpy functions
and integrated as the engine does: dop853 by scipy's compiled Dormand-Prince stopped at every output
time (models with kinks: scipy's Python DOP853, as the engine does), rk45, stiff and bdf by scipy's
RK45, Radau and BDF, also stopped at every output time (every sample a step end, none read off an
interpolant: a stiff solver's polynomial over a long step misses the tolerance between its ends),
rk4 by a fixed-step loop written into the script;
maps are printed with the ``math`` module, as the engine evaluates them, so the orbit is bit for bit
the same. Delay models carry the engine's method of steps (``delay_script.py``). The script writes the
columns of ``orbitdesk run --csv``: time, states, derived quantities.

Nothing a user or a file supplies can change how the script is read or what it runs: the first two
lines (shebang and our own ``coding: utf-8`` declaration, which Python reads only there) are fixed;
the title, the model text and the output name appear only in comments reduced to printable ASCII
(every other character, line ends of any kind included, is written as its backslash escape, so a
comment cannot end early) and in string literals written by ``ascii()``. The script is pure ASCII.
"""

from __future__ import annotations

import re


from orbitdesk.system.codegen import scalar_function
from orbitdesk.engine.settings import RunSettings
from orbitdesk.system.compiled_system import MAP, CompiledSystem, VectorPrinter
from orbitdesk.system.flat_code import flat_cse



def comment_text(text: str) -> str:
    """``text`` for one Python comment line: printable ASCII kept, any other character (line ends of
    every kind, form feeds, controls, bidi overrides, non-ASCII letters) written as its escape."""
    return "".join(c if " " <= c <= "~" else ascii(c)[1:-1] for c in str(text))


def _comment(text: str) -> str:
    lines = re.split(r"\r\n|\n", text.rstrip())
    return "\n".join(("#   " + comment_text(line)).rstrip() for line in lines)


def _function(name: str, args: list[str], system: CompiledSystem, exprs, printer, unpack: bool = True) -> str:
    """``def name(args): ...`` returning the list of ``exprs`` (in the system's plain symbols)."""
    _, u, p, _ = system._plain
    plain = system.plain(exprs)
    subs, plain = flat_cse(plain)  # shared parts; no line too wide or deep for Python's compiler
    body = [f"def {name}({', '.join(args)}):"]
    body.append(f"    _t = {args[0]}")
    if unpack and u:
        body.append(f"    {', '.join(s.name for s in u)}{',' if len(u) == 1 else ''} = {args[1]}")
    if p:
        body.append(f"    {', '.join(s.name for s in p)}{',' if len(p) == 1 else ''} = {args[2]}")
    for sym, sub in subs:
        body.append(f"    {sym.name} = {printer.doprint(sub)}")
    body.append("    return [" + ", ".join(printer.doprint(e) for e in plain) + "]")
    return "\n".join(body)


def run_script(system: CompiledSystem, settings: RunSettings | None = None, u0=None, p=None,
               title: str = "OrbitDesk model", output: str = "run.csv") -> str:
    """The text of a script that reproduces ``simulate(system, settings, u0, p)`` and writes CSV."""
    settings = settings or RunSettings()
    if getattr(system.model, "events", None):
        raise ValueError("the standalone script does not apply events yet (when ... then ...), so it would not "
                         "reproduce this model's runs; export the run's numbers as CSV instead "
                         "(orbitdesk run --csv FILE)")
    u0 = list(system.initial if u0 is None else u0)
    p = list(system.param_values if p is None else p)
    is_map = system.kind == MAP
    method = settings.method_info
    np_printer = VectorPrinter()  # the compiled system's printer: if() as numpy.where
    time_name = "n" if is_map else "t"

    head = [
        "#!/usr/bin/env python3",
        "# -*- coding: utf-8 -*-",
        "# One run, exported from OrbitDesk.",
        f"# Title: {comment_text(title)}",
        ("# Standalone: needs numpy only; realisations of the model with noise from the seed." if system.stochastic
         else "# Standalone: needs numpy and scipy; draws a plot too when matplotlib is installed."),
        f"# Usage: python this_script.py [OUTPUT.csv]   (default {comment_text(output)})",
        "#",
        "# The model as typed:",
        _comment(system.model.text),
        "",
        "import csv",
        "import functools  # noqa: F401  (used by min/max of several arguments, if any)",
        "import math  # noqa: F401",
        "import sys",
        "",
        "import numpy",
    ]
    if is_map or system.stochastic:  # printed as the engine prints it: math functions by their bare names
        head.append("from math import *  # noqa: F401,F403")
    if system.stochastic:
        head.append("import warnings")
    elif system.delays:  # the engine's method of steps, its right-hand side printed as the engine's
        head += ["from bisect import bisect_right", "from math import *  # noqa: F401,F403", "",
                 "import numpy as np", "from scipy.integrate import RK45"]
    elif not is_map:
        head.append("from scipy.integrate import ode")
    head += [
        "",
        f"STATES = {list(system.states)!a}",
        f"DERIVED = {list(system.derived_names)!a}",
        "PARAMETERS = {" + ", ".join(f"{name!a}: {float(v)!r}" for name, v in zip(system.parameters, p)) + "}",
        f"INITIAL = [{', '.join(repr(float(v)) for v in u0)}]",
    ]
    if system.stochastic:  # realisations from the seed (exports/noise_script.py)
        from orbitdesk.exports.noise_script import noise_script_parts

        parts = ["\n".join(head)] + noise_script_parts(system, settings, u0, p)
        parts[-1] = parts[-1].replace("__OUTPUT__", ascii(str(output)))
        return "\n\n\n".join(parts) + "\n"
    if is_map:
        head.append(f"STEPS = {int(settings.steps)!r}")
    else:
        max_step = float(settings.max_step) if settings.max_step else None
        head += [
            f"METHOD = {settings.method!a}  # {comment_text(method.label)}",
            f"SOLVER = {method.scipy_name!a}  # scipy's solver class (None: the fixed-step loop below)",
            f"STIFF = {method.stiff!r}",
            f"SMOOTH = {bool(system.smooth)!r}  # False: the model uses abs, min, sign, ... (kinks)",
            f"RTOL = {float(settings.rtol)!r}",
            f"ATOL = {float(settings.atol)!r}",
            f"MAX_STEP = {max_step!r}",
            f"DT = {float(settings.dt)!r}  # fixed step of rk4",
            f"T_START = {float(settings.t_start)!r}",
            f"T_END = {float(settings.t_end)!r}",
            f"SAMPLES = {int(settings.samples)!r}",
            f"TRANSIENT = {float(settings.transient)!r}",
        ]
    if system.delays:  # the method of steps: the method menu's settings do not apply
        from orbitdesk.exports.delay_script import delay_head

        head = [line for line in head if not line.startswith(("METHOD =", "SOLVER =", "STIFF =", "SMOOTH =", "DT ="))]
        head += delay_head(system, p, u0)
    parts = ["\n".join(head)]
    if system.delays:
        from orbitdesk.exports.delay_script import delay_parts

        parts += delay_parts(system, u0)
    elif is_map:
        parts.append(scalar_function(system, "step", system.plain(system.f)))  # the engine's own arithmetic
    else:
        parts.append(_function("rhs", ["t", "u", "p"], system, system.f, np_printer))
        if method.stiff:
            n = system.n_states
            jac = _function("_jac_entries", ["t", "u", "p"], system, list(system.jacobian), np_printer)
            parts.append(jac + f"\n\n\ndef jac(t, u, p):\n    return numpy.array(_jac_entries(t, u, p), "
                               f"dtype=float).reshape({n}, {n})")
    if system.derived_exprs and not system.delays:
        parts.append(_function("derived", ["t", "U", "p"], system, system.derived_exprs, np_printer))
    if not system.delays:
        parts.append(_MAP_RUN if is_map else _FLOW_RUN)
    parts.append(_OUTPUT.replace("__TIME__", time_name).replace("__OUTPUT__", ascii(str(output))))
    return "\n\n\n".join(parts) + "\n"


_MAP_RUN = '''def run():
    """Iterate the map STEPS times; returns the step numbers and the states (one row per state)."""
    p = list(PARAMETERS.values())
    u = list(INITIAL)
    rows = [list(u)]
    for n in range(STEPS):
        u = step(n, u, p)
        rows.append([float(v) for v in u])
    return numpy.arange(STEPS + 1, dtype=float), numpy.array(rows, dtype=float).T'''

_FLOW_RUN = '''def rk4(fun, t0, t1, y0, dt, t_eval, args):
    """Classical fixed-step Runge-Kutta; samples between steps by cubic Hermite interpolation."""
    h = abs(dt) * (1 if t1 >= t0 else -1)
    direction = 1.0 if t1 > t0 else -1.0
    t, y = t0, numpy.asarray(y0, dtype=float)
    f = numpy.asarray(fun(t, y, *args), dtype=float)
    times, values = [t0], [y.copy()]
    j = 1
    while True:
        step = h if (t + h - t1) * numpy.sign(h) <= 0 else t1 - t
        k1 = f
        k2 = numpy.asarray(fun(t + step / 2, y + step / 2 * k1, *args), dtype=float)
        k3 = numpy.asarray(fun(t + step / 2, y + step / 2 * k2, *args), dtype=float)
        k4 = numpy.asarray(fun(t + step, y + step * k3, *args), dtype=float)
        y_new = y + step / 6 * (k1 + 2 * k2 + 2 * k3 + k4)
        t_new = t + step
        f_new = numpy.asarray(fun(t_new, y_new, *args), dtype=float)
        while j < len(t_eval) and (t_eval[j] - t_new) * direction <= 0:
            s = (t_eval[j] - t) / (t_new - t)
            h00, h10 = 2 * s**3 - 3 * s**2 + 1, s**3 - 2 * s**2 + s
            h01, h11 = -2 * s**3 + 3 * s**2, s**3 - s**2
            times.append(t_eval[j])
            values.append(h00 * y + h10 * (t_new - t) * f + h01 * y_new + h11 * (t_new - t) * f_new)
            j += 1
        t, y, f = t_new, y_new, f_new
        if abs(t - t1) <= 1e-12 * max(1.0, abs(t1)):
            break
    return numpy.array(times), numpy.array(values).T


def stopped_at_samples(t_eval, p):
    """scipy's solver (SOLVER) stopped at every output time, so each sample is the end of a step: its
    interpolant between steps is not held to the tolerance (a stiff solver's polynomial over a step of
    many forcing periods can miss by the size of the signal). t_bound is the documented end of scipy's
    OdeSolver, which never steps past it; moving it on restarts the solver where it stands."""
    import scipy.integrate

    options = {"rtol": RTOL, "atol": ATOL}
    if MAX_STEP:
        options["max_step"] = MAX_STEP
    if STIFF:
        options["jac"] = lambda t, y: jac(t, y, p)
    # models with kinks (abs, min, sign, ...) step with scipy's Python Dormand-Prince, like the original run
    solver = getattr(scipy.integrate, SOLVER)(lambda t, y: rhs(t, y, p), t_eval[0], INITIAL, t_eval[-1], **options)
    times, values = [float(t_eval[0])], [numpy.array(INITIAL, dtype=float)]
    for target in t_eval[1:]:
        solver.t_bound, solver.status = float(target), "running"
        while solver.status == "running":
            message = solver.step()
        if solver.status == "failed" or not numpy.all(numpy.isfinite(solver.y)):
            print("integration stopped early at t =", solver.t, message or "", file=sys.stderr)
            break
        times.append(float(target))
        values.append(solver.y.copy())
    return numpy.array(times), numpy.array(values, dtype=float).T


def run():
    """Integrate from T_START to T_END; returns the sample times and the states (one row per state)."""
    p = list(PARAMETERS.values())
    t_eval = numpy.linspace(T_START, T_END, SAMPLES)
    if SOLVER is None:
        time, states = rk4(rhs, T_START, T_END, INITIAL, DT, t_eval, (p,))
    elif METHOD == "dop853" and SMOOTH:
        # Dormand-Prince 8(5,3) stopped exactly at every output time (no interpolation).
        options = {"rtol": RTOL, "atol": ATOL, "nsteps": 2**31 - 1}
        if MAX_STEP:
            options["max_step"] = MAX_STEP
        solver = ode(rhs).set_integrator("dop853", **options)
        solver.set_f_params(p)
        solver.set_initial_value(numpy.asarray(INITIAL, dtype=float), T_START)
        times, values = [T_START], [list(INITIAL)]
        for target in t_eval[1:]:
            y = solver.integrate(target)
            if not solver.successful():
                print("integration stopped early at t =", solver.t, file=sys.stderr)
                break
            times.append(float(target))
            values.append(numpy.array(y, dtype=float))
        time, states = numpy.array(times), numpy.array(values, dtype=float).T
    else:
        time, states = stopped_at_samples(t_eval, p)
    if TRANSIENT > 0:
        direction = 1.0 if T_END > T_START else -1.0
        keep = (time - (T_START + direction * TRANSIENT)) * direction >= 0
        time, states = time[keep], states[:, keep]
    return time, states'''

_OUTPUT = '''def derived_columns(time, states):
    if not DERIVED:
        return []
    values = derived(time, states, list(PARAMETERS.values()))
    return [numpy.broadcast_to(numpy.asarray(v, dtype=float), time.shape) for v in values]


def main(argv):
    output = argv[1] if len(argv) > 1 else __OUTPUT__
    time, states = run()
    columns = [time, *states, *derived_columns(time, states)]
    with open(output, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["__TIME__", *STATES, *DERIVED])
        writer.writerows(numpy.column_stack(columns).tolist())
    print(f"wrote {len(time)} rows to {output}")
    try:
        import matplotlib
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        return 0
    figure, axes = plt.subplots(figsize=(8, 4.5))
    for name, values in zip(STATES, states):
        axes.plot(time, values, label=name, linewidth=1)
    axes.set_xlabel("__TIME__")
    axes.legend()
    picture = output.rsplit(".", 1)[0] + ".png"
    figure.savefig(picture, dpi=120)
    print(f"drew {picture}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))'''


__all__ = ["comment_text", "run_script"]
