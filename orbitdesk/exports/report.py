"""A self-contained HTML report of a project: model, first-order form, values, equilibria, figures and
the walkthrough notes. One file with inline CSS and images as data URIs; no external resources."""

from __future__ import annotations

import base64
import html
import math

import numpy as np

import sympy as sp

from orbitdesk.analyses.error_digits import value_with_error
from orbitdesk.engine.settings import SCHEMES
from orbitdesk.language import noise
from orbitdesk.language.model import MAP
from orbitdesk.document.walkthrough import render_note

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"

_CSS = """
:root { --ink: #222a31; --soft: #5b6670; --rule: #d9dde1; --accent: #7a4b2a; --paper: #fffefb; }
* { box-sizing: border-box; }
html { background: #f3f1ec; }
body { margin: 2.5rem auto; padding: 2.5rem 3.2rem 3rem; max-width: 58rem; background: var(--paper);
       color: var(--ink); font: 16px/1.55 "Iowan Old Style", "Palatino Linotype", Palatino, "DejaVu Serif",
       Georgia, serif; box-shadow: 0 1px 3px rgba(0,0,0,.08); }
h1 { font-size: 2rem; font-weight: 600; margin: 0 0 .25rem; letter-spacing: -.01em; }
.lede { color: var(--soft); margin: 0 0 2rem; font-style: italic; }
h2 { font-size: 1.2rem; font-weight: 600; margin: 2.4rem 0 .8rem; padding-bottom: .25rem;
     border-bottom: 1px solid var(--rule); color: var(--accent); }
h3 { font-size: 1.05rem; margin: 1.6rem 0 .4rem; }
p { margin: .5rem 0; }
pre, code, .math { font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size: .86rem; }
pre { background: #f6f4ef; border: 1px solid var(--rule); border-radius: 4px; padding: .8rem 1rem;
      overflow-x: auto; line-height: 1.45; white-space: pre-wrap; }
code { background: #f1eee7; padding: 0 .2em; border-radius: 3px; white-space: nowrap; }
table { border-collapse: collapse; margin: .6rem 0 1rem; font-size: .95rem; }
th, td { text-align: left; padding: .3rem 1.1rem .3rem 0; border-bottom: 1px solid var(--rule);
         vertical-align: top; }
th { font-weight: 600; color: var(--soft); font-size: .85rem; text-transform: uppercase; letter-spacing: .04em; }
td.num { font-variant-numeric: tabular-nums; white-space: nowrap; }
.kind { font-style: italic; }
figure { margin: 1.2rem 0; page-break-inside: avoid; break-inside: avoid; }
figure img { max-width: 100%; border: 1px solid var(--rule); border-radius: 3px; }
figcaption { color: var(--soft); font-size: .9rem; margin-top: .3rem; }
ol.steps { padding-left: 0; list-style: none; counter-reset: step; }
ol.steps > li { counter-increment: step; margin: 0 0 1.4rem; padding-left: 2.4rem; position: relative;
                page-break-inside: avoid; break-inside: avoid; }
ol.steps > li::before { content: counter(step); position: absolute; left: 0; top: .05rem; width: 1.6rem;
                        height: 1.6rem; border-radius: 50%; background: var(--accent); color: #fff;
                        font: 600 .85rem/1.6rem sans-serif; text-align: center; }
ol.steps h3 { margin-top: 0; }
.sets { color: var(--soft); font-size: .88rem; }
.muted { color: var(--soft); }
footer { margin-top: 3rem; color: var(--soft); font-size: .8rem; border-top: 1px solid var(--rule);
         padding-top: .6rem; }
@media print {
  html { background: none; }
  body { margin: 0; padding: 0; max-width: none; box-shadow: none; font-size: 11pt; background: #fff; }
  pre, code { background: #fafafa; }
  h2 { page-break-after: avoid; break-after: avoid; }
  pre { white-space: pre-wrap; }
}
@page { margin: 20mm 18mm; }
"""


def _e(text) -> str:
    return html.escape(str(text), quote=True)


_SUPERSCRIPT = str.maketrans("-0123456789", "\u207b\u2070\u00b9\u00b2\u00b3\u2074\u2075\u2076\u2077\u2078\u2079")


def _num(value, digits: int = 6) -> str:
    """A number for reading: 6 significant digits, a true minus sign, 2.5 × 10⁻⁸ for tiny or huge ones."""
    v = float(value)
    if not math.isfinite(v):
        return "\u2014"
    if v == 0:
        return "0"
    return _typeset(f"{v:.{digits}g}")


def _typeset(text: str) -> str:
    """A number written by Python (``2.5e-08``) for reading: 2.5 × 10⁻⁸ and a true minus sign."""
    if "e" in text:
        mantissa, exponent = text.split("e")
        power = "10" + str(int(exponent)).translate(_SUPERSCRIPT)
        text = power if mantissa in ("1", "-1") else f"{mantissa} \u00d7 {power}"
        text = ("-" + text) if mantissa == "-1" else text
    return text.replace("-", "\u2212")


def _complex(z, digits: int = 4) -> str:
    z = complex(z)
    re, im = z.real, z.imag
    scale = max(abs(re), abs(im), 1e-300)
    if abs(im) <= 1e-12 * scale:
        return _num(re, digits)
    if abs(re) <= 1e-12 * scale:
        return f"{_num(im, digits)}i"
    sign = "+" if im > 0 else "\u2212"
    return f"{_num(re, digits)} {sign} {_num(abs(im), digits)}i"


def _expr(expr) -> str:
    """An expression in the model language's own notation (``^`` for powers)."""
    return sp.sstr(expr).replace("**", "^")


def _table(head: list[str] | None, rows: list[list[str]], numeric=()) -> str:
    out = ["<table>"]
    if head:
        out.append("<thead><tr>" + "".join(f"<th>{_e(h)}</th>" for h in head) + "</tr></thead>")
    out.append("<tbody>")
    for row in rows:
        cells = "".join(f'<td class="num">{c}</td>' if i in numeric else f"<td>{c}</td>"
                        for i, c in enumerate(row))
        out.append(f"<tr>{cells}</tr>")
    out.append("</tbody></table>")
    return "".join(out)


def _equilibrium_row(eq, index: int, states: list[str]) -> list[str]:
    if isinstance(eq, dict):
        state, kind = eq.get("state", {}), eq.get("kind", "")
        eig = [complex(v["re"], v["im"]) if isinstance(v, dict) else complex(v)
               for v in eq.get("eigenvalues", [])]
    else:
        state, kind, eig = getattr(eq, "state", {}), getattr(eq, "kind", ""), list(getattr(eq, "eigenvalues", []))
    point = ", ".join(f"{_e(s)} = {_num(state[s], 5)}" for s in states if s in state)
    shown = []
    for z in map(complex, eig):  # a complex pair is shown once, as a ± b i
        partner = any(abs(w - z.conjugate()) <= 1e-9 * max(1.0, abs(z)) for w in map(complex, eig))
        if z.imag < 0 and partner:
            continue
        text = _complex(z)
        if z.imag > 0 and partner:
            text = text.replace(" + ", " \u00b1 ") if " + " in text else "\u00b1" + text
        shown.append(text)
    return [str(index), point, f'<span class="kind">{_e(kind)}</span>', _e("; ".join(shown))]


VIEW_NAMES = {"timeseries": "time series", "phase_plane": "phase plane", "phase_space_3d": "3D phase space",
              "equilibria": "equilibria", "sections": "sections", "sweep": "sweep", "lyapunov": "Lyapunov exponents",
              "fit": "fit to data"}


def _step_summary(snapshot: dict, params: dict, initial: dict) -> str:
    """What a step changes from the project's values, and which views it opens."""
    parts = []
    changed = {k: v for k, v in (snapshot.get("parameters") or {}).items() if params.get(k) != v}
    if changed:
        parts.append("sets " + ", ".join(f"{_e(k)} = {_num(v)}" for k, v in changed.items()))
    changed = {k: v for k, v in (snapshot.get("initial") or {}).items() if initial.get(k) != v}
    if changed:
        parts.append("starts at " + ", ".join(f"{_e(k)} = {_num(v)}" for k, v in changed.items()))
    section = snapshot.get("section") or {}
    if "plane" in section:
        parts.append(f"cuts at {_e(section['plane'])} ({_e(section.get('direction', 'up'))})")
    elif "strobe" in section:
        parts.append(f"strobes every {_num(section['strobe'])}")
    views = [VIEW_NAMES.get(v, v) for v in snapshot.get("open_views") or []]
    if views:
        parts.append("opens " + _e(", ".join(views)))
    return "; ".join(parts)


def _lyapunov_rows(r, time_name: str) -> list[list[str]]:
    per = "per step" if r.kind == MAP else f"per unit {time_name}"
    values = [float(v) for v in r.exponents]
    errors = list(r.uncertainty) if r.uncertainty is not None else [None] * len(values)
    rows = []
    for k, (v, error) in enumerate(zip(values, errors)):
        shown = value_with_error(v, error)  # the digits the standard error supports
        rows.append([f"\u03bb{k + 1}", f"{_typeset(shown[0])} \u00b1 {_typeset(shown[1])}" if shown else _num(v, 5),
                     per + (f" (\u00b1 standard error of {r.blocks} block averages)" if shown else "")])
    if len(values) > 1 and all(math.isfinite(v) for v in values):
        rows.append(["sum", _num(sum(values), 5), per])
    if r.kaplan_yorke_dimension is not None and math.isfinite(r.kaplan_yorke_dimension):
        rows.append(["Kaplan\u2013Yorke dimension", _num(r.kaplan_yorke_dimension, 4), ""])
    method = "QR of the tangent vectors" if r.method == "qr" else "two nearby trajectories"
    over = f"{int(r.averaged_over)} steps" if r.kind == MAP else f"{_num(r.averaged_over, 4)} time units"
    rows.append(["method", _e(method), f"averaged over {over}"])
    return rows


def _sweep_rows(r) -> list[list[str]]:
    values = [float(v) for v in r.values]
    counts = [int(sum(1 for v in row if math.isfinite(float(v)))) for row in r.samples]
    rows = [["parameter", f'<span class="math">{_e(r.parameter)}</span>',
             f"{len(values)} values from {_num(values[0])} to {_num(values[-1])}" if values else ""],
            ["observed", f'<span class="math">{_e(r.observed)}</span>', _e(r.mode)],
            ["points", _num(sum(counts)), f"{_num(min(counts))} to {_num(max(counts))} per value" if counts else ""]]
    if r.lyapunov is not None:
        lam = [float(v) for v in r.lyapunov if math.isfinite(float(v))]
        if lam:
            positive = sum(1 for v in lam if v > 0)
            rows.append(["largest exponent", f"{_num(min(lam), 4)} to {_num(max(lam), 4)}",
                         f"positive (chaotic) at {positive} of {len(lam)} values"])
    return rows


def _section_rows(r) -> list[list[str]]:
    n = int(r.times.size)
    rows = [["crossings", _num(n), f"of {_num(r.requested)} asked for"]]
    for k, name in enumerate(r.state_names):
        values = [float(v) for v in r.points[k] if math.isfinite(float(v))] if n else []
        if values and min(values) != max(values):  # (not the coordinate the plane fixes)
            rows.append([f'<span class="math">{_e(name)}</span>', f"{_num(min(values), 5)} to {_num(max(values), 5)}",
                         "range on the section"])
    return rows


def _bifurcation_rows(r) -> list[list[str]]:
    """The bifurcation diagram: what was followed, then each special point where it lies."""
    what = {"steady": "steady states", "cycles": "steady states and their cycles", "cycle": "the cycle of the run",
            "response": "forced response"}.get(r.follow, r.follow)
    name = f'<span class="math">{_e(r.parameter)}</span>'
    rows = [["followed", _e(what), f"{name} from {_num(r.lo)} to {_num(r.hi)}"]]
    for s in r.specials:
        state = ", ".join(f"{k} = {_num(v, 5)}" for k, v in s.state.items())
        meaning = s.meaning(response=r.response is not None and not r.branches)
        rows.append([_e(s.describe()), f"{name} = {_num(s.value, 6)}", _e("; ".join(p for p in (state, meaning) if p))])
    if len(rows) == 1:
        rows.append(["special points", "none", "in the interval followed"])
    return rows


def _grid_row(r, what: str) -> list[str]:
    return ["grid", f"{r.xs.size} × {r.ys.size} {what}",
            f'<span class="math">{_e(r.x_name)}</span> from {_num(r.xs[0])} to {_num(r.xs[-1])}, '
            f'<span class="math">{_e(r.y_name)}</span> from {_num(r.ys[0])} to {_num(r.ys[-1])}']


REPORT_ATTRACTORS = 8  # attractors of a basin map listed by name (the largest basins), the rest counted


def _basin_rows(r) -> list[list[str]]:
    """A basin map: its grid of starts, then each attractor (largest basin first) with its share and place."""
    rows = [_grid_row(r, "starts")]
    ranked = sorted(r.attractors, key=lambda a: -float(a.get("share", 0.0)))
    for a in ranked[:REPORT_ATTRACTORS]:
        where = ", ".join(f"{k} ≈ {_num(v, 4)}" for k, v in a.get("centre", {}).items() if isinstance(v, (int, float)))
        rows.append([_e(a.get("kind", "attractor")), f"{_num(100 * float(a.get('share', 0.0)), 3)}%",
                     _e(f"of the starts; near {where}" if where else "of the starts")])
    rest = ranked[REPORT_ATTRACTORS:]
    if rest:
        rows.append([f"{len(rest)} more attractors", f"{_num(100 * sum(float(a.get('share', 0.0)) for a in rest), 3)}%",
                     "of the starts"])
    escaped = float(np.mean(np.asarray(r.labels) < 0)) if np.asarray(r.labels).size else 0.0
    if escaped:
        rows.append(["escape", f"{_num(100 * escaped, 3)}%", "ran off or failed"])
    return rows


def _parameter_map_rows(r) -> list[list[str]]:
    """A two-parameter map: its grid, then the largest exponent's range and how much of it is chaotic, or the
    periods found with how many points have each."""
    if hasattr(r, "exponent"):
        values = np.asarray(r.exponent, dtype=float)
        finite = values[np.isfinite(values)]
        rows = [_grid_row(r, "values")]
        if finite.size:
            rows.append(["largest exponent", f"{_num(finite.min(), 4)} to {_num(finite.max(), 4)}",
                         f"positive (chaotic) at {int(np.sum(finite > 1e-3))} of {values.size} points"])
        if finite.size < values.size:
            rows.append(["blew up", _num(values.size - finite.size), "points"])
        return rows
    period = np.asarray(r.period)
    rows = [_grid_row(r, "values")]
    words = {-2: "equilibrium", -1: "blew up", 0: f"no period up to {r.max_period}"}
    for k, n in sorted(((int(k), int(np.sum(period == k))) for k in np.unique(period)), key=lambda kn: -kn[1]):
        rows.append([_e(words.get(k, f"period {k}")), _num(n), f"of {period.size} points"
                     + (f" ({_e(r.unit)})" if k > 0 else "")])
    return rows


REPORTED = (("lyapunov", "lyapunov"), ("sweep", "sweep"), ("sections", "section"),
            ("bifurcation", "bifurcation"), ("basins", "basins"), ("parameter_map", "parameter_map"))
# (document kind, results key)


def document_results(doc) -> tuple[dict, dict]:
    """The kept results of a live document the report gives the numbers of (``results`` of
    ``render_report``), and for each that is stale the words saying what it was computed for (``stale``)."""
    results, stale = {}, {}
    for kind, key in REPORTED:
        result = doc.result(kind)
        if result is not None:
            results[key] = result
            words = doc.result_stale(kind) if doc.system is not None else ""
            if words:
                stale[key] = words
    return results, stale


def _results_html(results: dict, system, stale: dict | None = None) -> list[str]:
    """Numbers of the computed results the caller passes: ``{"lyapunov": LyapunovResult,
    "sweep": SweepResult, "section": SectionResult}`` (any may be missing); ``stale``: for a result
    computed for other values or another model, words that say so (``document_results``)."""
    out = []
    parts = (("lyapunov", "Lyapunov exponents", lambda r: _lyapunov_rows(r, system.time_name)),
             ("sweep", "Parameter sweep", _sweep_rows), ("section", "Section", _section_rows),
             ("bifurcation", "Bifurcation diagram", _bifurcation_rows),
             ("basins", "Basins of attraction", _basin_rows), ("parameter_map", "Two-parameter map", _parameter_map_rows))
    for key, heading, rows_of in parts:
        result = results.get(key)
        if result is None:
            continue
        out.append(f"<h3>{heading}</h3>")
        if (stale or {}).get(key):
            out.append(f'<p class="muted">{_e(stale[key])}: these numbers belong to those values, not to the '
                       f'parameters above.</p>')
        out.append(_table(None, rows_of(result), numeric=(1,)))
        notes = list(getattr(result, "warnings", []) or [])
        status = getattr(result, "status", "ok")  # (a sweep has one per value)
        if isinstance(status, str) and status != "ok" and getattr(result, "message", ""):
            notes.insert(0, result.message)
        out.extend(f'<p class="muted">{_e(note)}</p>' for note in notes)
    if out:
        out.insert(0, "<h2>Computed results</h2>")
    return out


def render_report(project, system, figures: dict | None = None, equilibria=None, results: dict | None = None,
                  fit=None, stale: dict | None = None) -> str:
    """The report as HTML text. ``figures`` maps a caption to PNG bytes (drawn by the caller);
    ``equilibria`` is a list of Equilibrium objects or their ``to_dict()`` forms, or None; ``results``
    holds the other computed results whose numbers go in (see ``_results_html``; ``document_results`` reads
    them and ``stale`` from a live document); ``fit`` a FitResult for
    the project's data sets (None: the fit saved in the project is run, if any)."""
    figures = dict(figures or {})
    for title, data in figures.items():
        if not isinstance(data, (bytes, bytearray)) or not bytes(data[:8]) == PNG_SIGNATURE:
            raise ValueError(f"the figure '{title}' is not PNG image data")
    is_map = system.kind == MAP
    t = system.time_name
    params = {name: float(v) for name, v in zip(system.parameters, system.param_values)}
    params.update({k: v.value for k, v in project.parameters.items() if k in params})
    initial = {name: float(v) for name, v in zip(system.states, system.initial)}
    initial.update({k: v for k, v in project.initial.items() if k in initial})

    what = "map, iterated in the step n" if is_map else "flow in time t"
    out = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
           f"<title>{_e(project.name)}</title>",
           '<meta name="viewport" content="width=device-width, initial-scale=1">',
           f"<style>{_CSS}</style></head><body>",
           f"<h1>{_e(project.name)}</h1>",
           f'<p class="lede">A {what} with {len(system.states)} state{"s" if len(system.states) != 1 else ""} '
           f'({_e(", ".join(system.states))}) and {len(system.parameters)} '
           f'parameter{"s" if len(system.parameters) != 1 else ""}.</p>']
    if project.notes.strip():
        out.append(render_note(project.notes))

    out.append("<h2>The model as typed</h2>")
    out.append(f"<pre>{_e(project.model.rstrip())}</pre>")

    out.append("<h2>First-order form</h2>")
    rows = []
    for i, (state, expr) in enumerate(zip(system.states, system.f_delayed or system.f)):  # a delay model with its delays
        lhs = f"{state}[n+1]" if is_map else f"d({state})/d{t}" if "'" in state else f"d{state}/d{t}"
        rhs = _expr(expr) + noise.terms_text(system, i, _expr)
        rows.append([f'<span class="math">{_e(lhs)}</span>', f'<span class="math">= {_e(rhs)}</span>'])
    out.append(_table(None, rows))
    if system.stochastic:
        out.append('<p class="muted">noise: standard Gaussian white noise in the Itô sense (x\' = f + g noise is '
                   'dx = f dt + g dW); equilibria and other analyses that assume determinism use the noise-free part.</p>')

    if system.parameters:
        out.append("<h2>Parameters</h2>")
        rows = []
        for name in system.parameters:
            lo, hi = system.param_ranges.get(name, (None, None))
            setting = project.parameters.get(name)
            if setting is not None and setting.lo is not None and setting.hi is not None:
                lo, hi = setting.lo, setting.hi
            rng = f"{_num(lo)} to {_num(hi)}" if lo is not None and hi is not None else '<span class="muted">—</span>'
            rows.append([f'<span class="math">{_e(name)}</span>', _num(params[name]), rng])
        out.append(_table(["name", "value", "slider range"], rows, numeric=(1,)))

    out.append("<h2>Initial values</h2>")
    rows = [[f'<span class="math">{_e(s + ("[0]" if is_map else "(0)"))}</span>', _num(initial[s])]
            for s in system.states]
    out.append(_table(["state", "value"], rows, numeric=(1,)))

    if system.derived_names:
        out.append("<h2>Derived quantities</h2>")
        rows = [[f'<span class="math">{_e(n)}</span>', f'<span class="math">= {_e(_expr(e))}</span>']
                for n, e in zip(system.derived_names, system.derived_delayed or system.derived_exprs)]
        out.append(_table(["name", "definition"], rows))

    events = getattr(system.model, "events", None) or []
    if events:
        out.append("<h2>Events</h2>")
        rows = [[str(ev.line), f'<span class="math">{_e(ev.rule)}</span>',
                 f"at {_e(t)} = {_e(_expr(-ev.time_offset / ev.time_rate))}" if ev.on_time else
                 f'<span class="math">{_e(_expr(ev.sides[0]))}</span> '
                 f'{"rises above" if ev.direction > 0 else "falls below"} '
                 f'<span class="math">{_e(_expr(ev.sides[2]))}</span>'] for ev in events]
        out.append(_table(["line", "event", "happens when"], rows, numeric=(0,)))
        out.append('<p class="muted">Each crossing is located on the integrator\'s dense output; the right sides are '
                   "worked out with the values from before the event, then all are set, and the run restarts.</p>")

    s = project.solver
    if is_map:
        run = f"{s.steps} iterations"
    elif system.stochastic:
        run = (f"{s.realisations} realisations from seed {s.seed}, from {t} = {_num(s.t_start)} to {_num(s.t_end)}, "
               f"{_e(SCHEMES[s.scheme])} with the fixed step {_num(s.dt)}, {s.samples} samples")
        if s.transient:
            run += f", first {_num(s.transient)} discarded as transient"
    else:
        method = s.method_info.label
        if system.delays:
            from orbitdesk.engine.delay import METHOD_LABEL, uses_history

            method = f"{METHOD_LABEL}, {uses_history(system)}"
        run = (f"from {t} = {_num(s.t_start)} to {_num(s.t_end)}, {s.samples} samples, method {_e(method)}"
               + (f" (step {_num(s.dt)})" if not s.method_info.adaptive and not system.delays else
                  f", tolerances {_num(s.rtol)} relative / {_num(s.atol)} absolute"))
        if s.transient:
            run += f", first {_num(s.transient)} discarded as transient"
    out.append(f'<p class="muted">Run: {run}.</p>')

    if equilibria is not None:
        out.append("<h2>" + ("Fixed points" if is_map else "Equilibria") + "</h2>")
        if len(equilibria):
            rows = [_equilibrium_row(eq, i + 1, system.states) for i, eq in enumerate(equilibria)]
            values = "multipliers" if is_map else "rightmost characteristic roots" if system.delays else "eigenvalues"
            out.append(_table(["#", "where", "kind", values], rows,
                              numeric=(0,)))
        else:
            out.append('<p class="muted">None found in the search box.</p>')
        for note in getattr(equilibria, "notes", []) or []:
            out.append(f'<p class="muted">{_e(note)}</p>')

    out.extend(_results_html(results or {}, system, stale))

    if getattr(project, "datasets", None):
        from orbitdesk.exports.report_fit import fit_for_report, fit_section
        reason = ""
        if fit is None:
            fit, reason = fit_for_report(project, system)
        out.append(fit_section(project, system, fit, reason))

    if figures:
        out.append("<h2>Figures</h2>")
        for title, data in figures.items():
            uri = "data:image/png;base64," + base64.b64encode(bytes(data)).decode("ascii")
            out.append(f'<figure><img src="{uri}" alt="{_e(title)}"><figcaption>{_e(title)}</figcaption></figure>')

    if project.walkthrough:
        out.append("<h2>Walkthrough</h2>")
        out.append('<ol class="steps">')
        for step in project.walkthrough:
            summary = _step_summary(step.snapshot, params, initial)
            out.append(f"<li><h3>{_e(step.title)}</h3>{render_note(step.note)}"
                       + (f'<p class="sets">{summary[:1].upper() + summary[1:]}.</p>' if summary else "")
                       + "</li>")
        out.append("</ol>")

    out.append("<footer>Made with OrbitDesk. Results are outputs of the model above, computed numerically."
               "</footer>")
    out.append("</body></html>")
    return "\n".join(out) + "\n"


__all__ = ["render_report"]
