"""The model as LaTeX: equations as typed (x'' as \\ddot{x}, maps as x_{n+1}), parameters with their
values and ranges, derived quantities and initial values, in ``align*`` (the equations) and ``alignat*`` environments (the rest).

Right-hand sides are re-read from the model text with the whitelisting expression parser (so derived
names stay as typed instead of being substituted) and printed with ``sympy.latex``.
"""

from __future__ import annotations

import re
import unicodedata

import sympy as sp
from sympy.printing.latex import LatexPrinter

from orbitdesk.language.expression import Num, parse_expression, walk
from orbitdesk.language.model import FLOW, MAP, ParsedModel, derivative_name, parse_model
from orbitdesk.language import noise
from orbitdesk.language.symbolic import number_from_text, to_sympy
from orbitdesk.system.flat_code import rename

_GREEK_OR_PLAIN = re.compile(r"^[A-Za-z]+$")
_GREEK = re.compile(r"^(alpha|beta|gamma|delta|epsilon|zeta|eta|theta|iota|kappa|lambda|mu|nu|xi|omicron|pi|rho|sigma|"
                    r"tau|upsilon|phi|chi|psi|omega)$", re.IGNORECASE)
_TEX_SPECIAL = {"\\": r"\textbackslash{}", "{": r"\{", "}": r"\}", "$": r"\$", "&": r"\&", "#": r"\#",
                "%": r"\%", "_": r"\_", "^": r"\^{}", "~": r"\~{}"}


def latex_name(name: str) -> str:
    """A model name in LaTeX: Greek names as letters, longer names upright-italic (a word after an underscore
    too: T_amb as T with the subscript amb), x' as \\dot{x} and x_1' as \\dot{x}_{1} (the dot on the letter)."""
    base = name.rstrip("'")
    primes = len(name) - len(base)
    text = sp.latex(sp.Symbol(base))
    head, sep, tail = text.partition("_")
    if _GREEK_OR_PLAIN.match(head) and len(head) > 1:
        head = rf"\mathit{{{head}}}"
    word = re.fullmatch(r"\{([A-Za-z]{2,})\}", tail)
    if word and not _GREEK.match(word.group(1)):
        tail = rf"{{\mathit{{{word.group(1)}}}}}"
    if primes == 0:
        return head + sep + tail
    if primes <= 3:
        return {1: r"\dot", 2: r"\ddot", 3: r"\dddot"}[primes] + "{" + head + "}" + sep + tail
    return "{" + head + sep + tail + "}^{(" + str(primes) + ")}"


def _natural_order(expr: sp.Expr, names: dict, time) -> tuple[sp.Expr, dict]:
    """``expr`` with symbols renamed so that sympy, which orders names as text, lists numbered ones in counting
    order (x_2 before x_10) and the time after the other factors of a product (cos(w t), as people write it,
    not cos(t w)); and ``names`` with the LaTeX of the renamed symbols."""
    swap = {}
    for sym in getattr(expr, "free_symbols", ()):
        if sym == time:
            swap[sym] = sp.Symbol("~" + sym.name + "\u2063", **sym.assumptions0)
        elif isinstance(sym, sp.Symbol) and sym in names and re.search(r"\d", sym.name):
            padded = re.sub(r"\d+", lambda m: m.group().zfill(9), sym.name)
            swap[sym] = sp.Symbol(padded + "\u2063", **sym.assumptions0)  # (an invisible mark: no model name)
    if not swap:
        return expr, names
    return rename([expr], swap)[0], {**names, **{new: names.get(old, sp.latex(old)) for old, new in swap.items()}}


def tex_escape(text: str) -> str:
    """Plain text safe inside a LaTeX document, on one line.

    Every TeX special character is escaped (so no control sequence such as ``\\input`` or
    ``\\write18``, no ``^^5c`` character code, no ``%`` comment and no unbalanced brace can come
    through); line ends of any kind, tabs and other spacing become one space (a blank line would end
    the paragraph inside ``\\section*{...}``); control and format characters (bidi overrides,
    zero-width marks, BOM) are dropped."""
    out = []
    for c in str(text):
        if c.isspace():
            if out and out[-1] != " ":
                out.append(" ")
        elif unicodedata.category(c) in ("Cc", "Cf", "Cs", "Co", "Cn"):
            continue
        else:
            out.append(_TEX_SPECIAL.get(c, c))
    return "".join(out).strip()


def _rhs_text(parsed: ParsedModel, line: int) -> str:
    code = parsed.text.split("\n")[line - 1].rstrip("\r").split("#", 1)[0]
    return code[code.index("=") + 1:]


def _lhs_lines(parsed: ParsedModel) -> dict[str, int]:
    """Line number of each ``NAME = ...`` statement, by name (first occurrence)."""
    out: dict[str, int] = {}
    for number, raw in enumerate(parsed.text.split("\n"), start=1):
        code = raw.split("#", 1)[0]
        if "=" in code:
            out.setdefault(code[:code.index("=")].strip(), number)
    return out


def _typed(parsed: ParsedModel, rhs: str, fallback: sp.Expr, equation: str | None = None) -> sp.Expr:
    """The right side re-read as typed (derived names kept, decimals kept as decimals); ``equation``:
    the name of the equation it belongs to (its noise terms become the symbols of ``noise``)."""
    try:
        tree = parse_expression(_strip_range(rhs))
        if equation is not None and parsed.noise_sources:
            tree = noise.marked_tree(tree, equation)

        def resolve(node):
            name = node.name
            if name.startswith(noise.MARK):
                return noise.symbol(name)
            if name in ("pi", "e") and name not in parsed.parameters:
                return sp.pi if name == "pi" else sp.E
            return parsed.symbols.get(name) or (parsed.time_symbol if name == parsed.time_symbol.name
                                                else sp.Symbol(name, real=True))

        expr = to_sympy(tree, resolve)
        decimals = {}
        for node in walk(tree):
            if isinstance(node, Num) and any(c in node.text for c in ".eE"):
                value = number_from_text(node.text)
                if value.is_Rational and not value.is_Integer:
                    decimals[value] = sp.Float(node.text)
        return expr.xreplace(decimals) if decimals else expr
    except Exception:  # noqa: BLE001  (any surprise: show the compiled form, which is equivalent)
        return fallback


def _with_noise(parsed: ParsedModel, state: str) -> sp.Expr:
    """The right side of ``state``'s equation with its noise terms (drift + sum of g * noise symbol)."""
    terms = parsed.diffusion.get(state, {})
    return parsed.equations[state] + sp.Add(*[g * noise.symbol(noise.MARK + k) for k, g in terms.items()])


def _noise_names(parsed: ParsedModel, names: dict) -> list[str]:
    """LaTeX names of the noise symbols put into ``names`` (xi(t), xi_1(t), xi_x(t)); one row per source
    saying where it acts."""
    own = [k for k in parsed.noise_sources if not k.startswith("(")]
    rows = []
    for key in parsed.noise_sources:
        if key.startswith("("):
            label = key[1:-1]
            sub = label if label.isdigit() else rf"\mathrm{{{label.replace('_', chr(92) + '_')}}}"
            text = rf"\xi_{{{sub}}}(t)"
        else:
            text = r"\xi(t)" if len(own) == 1 else rf"\xi_{{{latex_name(key.rstrip(chr(39)))}}}(t)"
        names[noise.symbol(noise.MARK + key)] = text
        where = [s for s, terms in parsed.diffusion.items() if key in terms]
        acts = ", ".join(latex_name(s + "'") for s in where)  # the left sides: the state's rate
        rows.append(rf"{text} &: \text{{{'shared by' if len(where) > 1 else 'in the equation of'} }}" + acts)
    return rows


def _strip_range(text: str) -> str:
    m = re.search(r"\bin\s*\[.*\]\s*$", text)
    return text[:m.start()] if m else text


def _number(value: float) -> str:
    text = f"{value:.10g}"
    if "e" in text:
        mantissa, exponent = text.split("e")
        return rf"{mantissa} \cdot 10^{{{int(exponent)}}}"
    return text


def _rows_text(rows: list[str]) -> str:
    """Rows of the alignment, a little more room under a row with a fraction or cases (the next row's
    fraction bar otherwise touches it)."""
    out = []
    for k, row in enumerate(rows):
        out.append(row)
        if k < len(rows) - 1:
            tall = r"\frac" in row or r"\begin{cases}" in row or r"\frac" in rows[k + 1]
            out.append(" \\\\[0.6ex]\n" if tall else " \\\\\n")
    return "".join(out)


class _ModelLatex(LatexPrinter):
    """sympy's LaTeX printer, with a power of an if() (which the model language keeps as one power) in brackets."""

    def _print_Piecewise(self, expr, exp=None):
        tex = super()._print_Piecewise(expr)
        return tex if exp is None else rf"\left({tex}\right)^{{{exp}}}"


def model_latex(model, parameters: dict | None = None, initial: dict | None = None, *,
                standalone: bool = False, title: str | None = None) -> str:
    """LaTeX for a model (text, ParsedModel or CompiledSystem) with optional parameter/initial overrides."""
    parsed = getattr(model, "model", model)
    if isinstance(parsed, str):
        parsed = parse_model(parsed)
    if not isinstance(parsed, ParsedModel):
        raise TypeError("model_latex needs model text, a ParsedModel or a CompiledSystem")
    if not parsed.ok:
        raise ValueError("the model has errors; fix them before exporting")
    parameters = {**{n: p.value for n, p in parsed.parameters.items()}, **(parameters or {})}
    initial = {**parsed.initial, **(initial or {})}
    is_map = parsed.kind == MAP

    names = {sym: latex_name(name) for name, sym in parsed.symbols.items()}
    if is_map:
        for state in parsed.states:
            text = names[parsed.symbols[state]]
            names[parsed.symbols[state]] = ("{" + text + "}" if "_" in text else text) + "_{n}"

    def tex(expr):
        ordered, symbol_names = _natural_order(expr, names, parsed.time_symbol)
        return _ModelLatex({"symbol_names": symbol_names}).doprint(ordered)

    noise_rows = _noise_names(parsed, names)
    for d in parsed.delays:  # x(t - tau), the delay as the model writes it (Greek names as letters)
        names[d.symbol] = rf"{latex_name(d.state)}(t - {tex(d.amount)})"

    lines: list[str] = []
    lhs_lines = _lhs_lines(parsed)
    for base, order in parsed.typed_order.items():
        top = derivative_name(base, order - 1) if parsed.kind == FLOW else base
        typed = derivative_name(base, order) if parsed.kind == FLOW else base
        expr = _typed(parsed, _rhs_text(parsed, parsed.equation_lines[top]), _with_noise(parsed, top), typed)
        if is_map:
            text = latex_name(base)
            lhs = ("{" + text + "}" if "_" in text else text) + "_{n+1}"
        else:
            lhs = latex_name(derivative_name(base, order))
        lines.append(f"{lhs} &= {tex(expr)}")

    sections = []
    if noise_rows:
        sections.append((r"where each $\xi$ is a standard Gaussian white noise, independent of the others, read "
                         r"in the It\^o sense ($\xi\,dt = dW$, a Wiener process)", noise_rows))
    if parsed.parameters:
        rows = []
        for name, info in parsed.parameters.items():
            value = parameters[name]
            typed = _typed(parsed, _rhs_text(parsed, info.line), sp.Float(value))
            shown = _number(value)
            if value == info.value and tex(typed) not in (shown, _number(float(value))) and not typed.is_Float:
                shown = f"{tex(typed)} \\approx {shown}"  # typed as 8/3 or 2*pi: show both
            row = f"{latex_name(name)} &= {shown}"
            if info.lo is not None and info.hi is not None:
                row += rf" &&\qquad \text{{in }} [{_number(info.lo)}, {_number(info.hi)}]"
            rows.append(row)
        sections.append(("with the parameters", rows))
    if parsed.derived:
        rows = []
        for name, resolved in parsed.derived.items():
            line = lhs_lines.get(name)
            expr = _typed(parsed, _rhs_text(parsed, line), resolved) if line else resolved
            rows.append(f"{latex_name(name)} &= {tex(expr)}")
        sections.append(("with the derived quantities", rows))
    if parsed.history_lines:
        rows = [rf"{latex_name(name)}(t) &= {tex(parsed.history[name])} &&\qquad \text{{for }} t \le 0"
                for name in parsed.history_lines]
        sections.append(("with the history", rows))
    if parsed.events:
        relations = {"<": "<", "<=": r"\le", ">": ">", ">=": r"\ge"}
        rows = []
        for ev in parsed.events:
            left, op, right = ev.sides
            does = [f"{latex_name(target)} \\leftarrow {tex(expr)}" for target, _, expr in ev.assignments]
            if ev.stop:
                does.append(r"\text{stop}")
            rows.append(rf"&\text{{when }} {tex(left)} {relations[op]} {tex(right)}\text{{ becomes true:}}\quad "
                        + ",\\ ".join(does))
        sections.append(("with the events (each applied at the crossing; right sides use the values before it)",
                         rows))
    if parsed.angles:  # `angle theta`: the state lives on a circle, shown wrapped (language reference)
        sections.append((r"where the angles are read modulo $2\pi$ (and shown wrapped to $(-\pi, \pi]$)",
                         [rf"{latex_name(name)} &\equiv {latex_name(name)} + 2\pi" for name in parsed.angles]))
    rows = []
    for state in parsed.states:
        if is_map:
            text = latex_name(state)
            lhs = ("{" + text + "}" if "_" in text else text) + "_{0}"
        else:
            lhs = latex_name(state) + "(0)"
        rows.append(f"{lhs} &= {_number(initial.get(state, 0.0))}")
    sections.append(("and the initial values", rows))

    # the equations in one alignment, each part after them in its own (a sentence, then its rows): one
    # alignment for all would set the ranges (and a history's "for t <= 0") beyond the widest equation, at
    # the far side of the page; alignat keeps that column a \\qquad after the values
    body = [r"\begin{align*}", _rows_text(lines), r"\end{align*}"]
    for heading, rows in sections:
        body += [rf"\noindent {heading[:1].upper()}{heading[1:]}:", r"\begin{alignat*}{2}", _rows_text(rows),
                 r"\end{alignat*}"]
    where = (f"% OrbitDesk model: a {'map in the step n' if is_map else 'flow in time t'}, "
             f"states {', '.join(parsed.states)}")
    snippet = where + "\n" + "\n".join(body) + "\n"
    if not standalone:
        return snippet
    heading = tex_escape(title) if title else "Model"
    return ("\\documentclass[11pt]{article}\n\\usepackage{amsmath}\n"
            "\\begin{document}\n"
            f"\\section*{{{heading}}}\n"
            f"{snippet}"
            "\\end{document}\n")


def project_latex(project, *, standalone: bool = False) -> str:
    """LaTeX for a project's model with the project's stored parameter and initial values."""
    parsed = parse_model(project.model)
    if not parsed.ok:
        raise ValueError("the project's model has errors; fix them before exporting")
    params = {k: v.value for k, v in project.parameters.items() if k in parsed.parameters}
    initial = {k: v for k, v in project.initial.items() if k in parsed.states}
    return model_latex(parsed, params, initial, standalone=standalone, title=project.name)


__all__ = ["latex_name", "model_latex", "project_latex", "tex_escape"]
