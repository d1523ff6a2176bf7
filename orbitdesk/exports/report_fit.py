"""The report's section on measured data: each data set drawn over the fitted model (inline SVG drawn
here, no plotting library), the table of estimates with standard errors and 95 % intervals, the
correlations and the fit's warnings. Every name, label and number is escaped for HTML."""

from __future__ import annotations

import html
import math

import numpy as np

from orbitdesk.analyses.fitting import FitError, FitSettings, fit
from orbitdesk.analyses.sensitivity import SensitivityFailure
from orbitdesk.system.compiled_system import MAP

COLOURS = ["#1f7a80", "#b0651c", "#6f4c9b", "#3d7a2e", "#a8435a", "#39598f"]
CURVE_POINTS = 600


def _e(text) -> str:
    return html.escape(str(text), quote=True)


def _n(v, digits: int = 6) -> str:
    v = float(v)
    if not math.isfinite(v):
        return "\u2014"
    return f"{v:.{digits}g}".replace("-", "\u2212")


def _number_or_none(v) -> bool:
    return v is None or (isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v))


def saved_bounds(saved: dict) -> dict:
    """``{name: (lo, hi)}`` from the Fit panel's saved ``bounds`` rows ``[name, lo, hi]`` (bad rows skipped)."""
    out = {}
    for row in saved.get("bounds") or []:
        if isinstance(row, list) and len(row) == 3 and isinstance(row[0], str) and all(map(_number_or_none, row[1:])):
            out[row[0]] = (row[1], row[2])
    return out


def saved_weights(saved: dict) -> dict:
    """``{quantity: weight}`` from the Fit panel's saved ``weights`` rows ``[quantity, weight]``."""
    out = {}
    for row in saved.get("weights") or []:
        if (isinstance(row, list) and len(row) == 2 and isinstance(row[0], str) and _number_or_none(row[1])
                and row[1] is not None and row[1] > 0):
            out[row[0]] = float(row[1])
    return out


def fit_settings_from_project(project) -> FitSettings | None:
    """The choices saved by the Fit panel (``views["fit"]``), or None when nothing is ticked there."""
    saved = project.views.get("fit") or {}
    if not isinstance(saved, dict):
        return None
    lists = {k: [x for x in saved.get(k, []) if isinstance(x, str)] if isinstance(saved.get(k), list) else []
             for k in ("parameters", "local", "initial")}
    if not any(lists.values()):
        return None
    seg = saved.get("segments", 1)
    seg = seg if isinstance(seg, int) and not isinstance(seg, bool) and 0 < seg <= 1000 else 1
    return FitSettings(parameters=lists["parameters"], local=lists["local"], initial=lists["initial"],
                       bounds=saved_bounds(saved), weights=saved_weights(saved), multiple_shooting=seg,
                       t_start=project.solver.t_start, method=project.solver.method)


def project_vectors(project, system):
    p = system.param_vector({k: v.value for k, v in project.parameters.items() if k in system.parameters})
    u = system.initial_vector({k: v for k, v in project.initial.items() if k in system.states})
    ranges = dict(system.param_ranges)
    ranges.update({k: (v.lo, v.hi) for k, v in project.parameters.items() if k in ranges})
    return p, u, ranges


def fit_for_report(project, system):
    """Run the fit saved in the project's Fit panel choices; None (and a reason) when there is none."""
    settings = fit_settings_from_project(project)
    if settings is None:
        return None, "No fit has been set up (tick values to estimate in the Fit panel)."
    p, u, ranges = project_vectors(project, system)
    try:
        return fit(system, project.datasets, settings, p, u, ranges), ""
    except (FitError, SensitivityFailure, ValueError) as e:
        return None, f"The fit could not be run: {e}"


def _ticks(lo: float, hi: float, count: int = 5) -> list[float]:
    span = hi - lo
    if not span > 0:
        return [lo]
    raw = span / count
    mag = 10 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= raw)
    first = math.ceil(lo / step) * step
    return [first + i * step for i in range(int((hi - first) / step + 1e-9) + 1)]


def svg_plot(curves, points, xlabel: str, ylabel: str, width: int = 640, height: int = 280) -> str:
    """An inline SVG chart: ``curves`` [(x, y, colour)] as lines, ``points`` [(x, y, colour)] as circles."""
    xs = [np.asarray(c[0], float) for c in curves + points]
    ys = [np.asarray(c[1], float) for c in curves + points]
    xa, ya = np.concatenate(xs), np.concatenate(ys)
    ok = np.isfinite(xa) & np.isfinite(ya)
    if not ok.any():
        return ""
    x0, x1 = float(xa[ok].min()), float(xa[ok].max())
    y0, y1 = float(ya[ok].min()), float(ya[ok].max())
    if x1 == x0:
        x0, x1 = x0 - 1, x1 + 1
    pad = 0.05 * (y1 - y0 or 1.0)
    y0, y1 = y0 - pad, y1 + pad
    left, right, top, bottom = 62, 14, 12, 42
    pw, ph = width - left - right, height - top - bottom

    def X(v):
        return left + (np.asarray(v, float) - x0) / (x1 - x0) * pw

    def Y(v):
        return top + (y1 - np.asarray(v, float)) / (y1 - y0) * ph

    out = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height}" width="{width}" '
           f'height="{height}" role="img" font-family="sans-serif" font-size="11">',
           f'<rect x="{left}" y="{top}" width="{pw}" height="{ph}" fill="none" stroke="#9aa3ab"/>']
    for t in _ticks(x0, x1):
        px = float(X(t))
        out.append(f'<line x1="{px:.1f}" y1="{top + ph}" x2="{px:.1f}" y2="{top + ph + 4}" stroke="#9aa3ab"/>'
                   f'<text x="{px:.1f}" y="{top + ph + 16}" text-anchor="middle" fill="#444">{_e(_n(t, 4))}</text>')
    for t in _ticks(y0, y1):
        py = float(Y(t))
        out.append(f'<line x1="{left - 4}" y1="{py:.1f}" x2="{left + pw}" y2="{py:.1f}" stroke="#e4e7ea"/>'
                   f'<text x="{left - 6}" y="{py + 4:.1f}" text-anchor="end" fill="#444">{_e(_n(t, 4))}</text>')
    out.append(f'<text x="{left + pw / 2:.1f}" y="{height - 6}" text-anchor="middle" fill="#222">{_e(xlabel)}</text>')
    out.append(f'<text x="14" y="{top + ph / 2:.1f}" text-anchor="middle" fill="#222" '
               f'transform="rotate(-90 14 {top + ph / 2:.1f})">{_e(ylabel)}</text>')
    for x, y, colour in points:
        px, py = X(x), Y(y)
        keep = np.isfinite(px) & np.isfinite(py)
        circles = "".join(f'<circle cx="{a:.1f}" cy="{b:.1f}" r="2.2"/>' for a, b in zip(px[keep], py[keep]))
        out.append(f'<g fill="none" stroke="{colour}" stroke-width="1">{circles}</g>')
    for x, y, colour in curves:
        px, py = X(x), Y(y)
        keep = np.isfinite(px) & np.isfinite(py)
        path = " ".join(f"{a:.1f},{b:.1f}" for a, b in zip(px[keep], py[keep]))
        out.append(f'<polyline points="{path}" fill="none" stroke="{colour}" stroke-width="1.6"/>')
    out.append("</svg>")
    return "".join(out)


def _model_curves(system, dataset, values: dict, t_start: float):
    """The model with a data set's fitted values on a fine grid over the record: {quantity: (t, y)}."""
    from orbitdesk.engine.runs import RunSettings, simulate

    p = system.param_vector({k: v for k, v in values["parameters"].items() if k in system.parameters})
    u = system.initial_vector({k: v for k, v in values["initial"].items() if k in system.states})
    if system.kind == MAP:
        run = simulate(system, RunSettings(steps=int(dataset.time[-1])), u, p)
    else:
        run = simulate(system, RunSettings(t_start=t_start, t_end=float(dataset.time[-1]), samples=CURVE_POINTS), u, p)
    out = {}
    for q in dataset.quantities():
        try:
            out[q] = (run.time, run.series(q))
        except KeyError:
            continue
    return out


def fit_section(project, system, result=None, reason: str = "") -> str:
    """The HTML of the section (data sets, data over the fitted model, estimates, correlations, warnings)."""
    sets = project.datasets
    out = ["<h2>Measured data and fit</h2>"]
    rows = []
    for d in sets:
        cols = ", ".join(_e(c.label) + (f" (as {_e(c.target)})" if c.target else "") for c in d.columns)
        src = _e(d.source) if d.source else '<span class="muted">entered in the project</span>'
        check = f'<span class="math">{_e(d.checksum[:16])}…</span>' if d.checksum else ""
        rows.append(f"<tr><td>{_e(d.name)}</td><td>{src}</td><td class=\"num\">{d.n_samples}</td>"
                    f"<td>{cols}</td><td>{check}</td></tr>")
    out.append("<table><thead><tr><th>data set</th><th>file</th><th>samples</th><th>columns</th>"
               "<th>SHA-256</th></tr></thead><tbody>" + "".join(rows) + "</tbody></table>")
    per = {entry["name"]: entry for entry in (result.datasets if result is not None else [])}
    p, u, _ranges = project_vectors(project, system)
    for d in sets:
        values = per.get(d.name) or {"parameters": {**system.param_dict(p), **d.parameters},
                                     "initial": {**dict(zip(system.states, map(float, u))), **d.initial}}
        try:
            curves = _model_curves(system, d, values, project.solver.t_start)
        except (ValueError, ArithmeticError):
            curves = {}
        for i, c in enumerate(d.columns):
            colour = COLOURS[i % len(COLOURS)]
            model = [(curves[c.quantity][0], curves[c.quantity][1], colour)] if c.quantity in curves else []
            svg = svg_plot(model, [(d.time, c.values, colour)], d.time_label, c.label)
            which = "the fitted model" if d.name in per else "the model with the project's values"
            out.append(f"<figure>{svg}<figcaption>{_e(d.name)}: {_e(c.label)}, measured (circles) and "
                       f"{which} (line).</figcaption></figure>")
    if result is None:
        if reason:
            out.append(f'<p class="muted">{_e(reason)}</p>')
        return "\n".join(out)
    out.append("<h3>Estimates</h3>")
    rows = []
    for e in result.estimates:
        se = _n(e.stderr, 3) if e.stderr is not None else "\u2014"
        iv = f"{_n(e.interval[0], 5)} to {_n(e.interval[1], 5)}" if e.interval else "\u2014"
        kind = "initial value" if e.kind == "initial" else "parameter"
        rows.append(f'<tr><td><span class="math">{_e(e.name)}</span></td><td>{kind}</td>'
                    f'<td class="num">{_n(e.value, 7)}</td><td class="num">{se}</td><td class="num">{iv}</td></tr>')
    out.append("<table><thead><tr><th>estimate</th><th>kind</th><th>value</th><th>std. error</th>"
               "<th>95 % interval</th></tr></thead><tbody>" + "".join(rows) + "</tbody></table>")
    rms = ", ".join(f"{_e(q)} {_n(v, 3)}" for q, v in result.residual_rms.items())
    out.append(f'<p class="muted">{_e(result.message.capitalize())} after {int(result.evaluations)} model '
               f"evaluations; residual RMS {rms}; {int(result.dof)} degrees of freedom. Standard errors from the "
               "Jacobian at the optimum, scaled by the residual variance; intervals from the t distribution.</p>")
    names = [e.name for e in result.estimates]
    if len(names) > 1:
        name_cell = '<th style="text-transform: none; letter-spacing: 0">'  # names keep their case
        head = "".join(f"{name_cell}{_e(n)}</th>" for n in names)
        body = "".join("<tr>" + name_cell + _e(n) + "</th>" + "".join(
            f'<td class="num">{_n(v, 2) if math.isfinite(v) else chr(8212)}</td>' for v in row) + "</tr>"
            for n, row in zip(names, result.correlation))
        out.append("<h3>Correlations</h3>")
        out.append(f"<table><thead><tr><th></th>{head}</tr></thead><tbody>{body}</tbody></table>")
    if result.warnings:
        out.append("<h3>Warnings</h3><ul>" + "".join(f"<li>{_e(w)}</li>" for w in result.warnings) + "</ul>")
    return "\n".join(out)


__all__ = ["fit_for_report", "fit_section", "fit_settings_from_project", "saved_bounds", "saved_weights", "svg_plot"]
