"""Noise in flow equations: ``noise`` and ``noise(k)`` (white noise, Ito sense).

``noise`` is standard Gaussian white noise (the formal derivative of a Wiener process W, so
``x' = f + g*noise`` is the Ito equation dx = f dt + g dW). Each equation where plain ``noise``
appears has a source of its own, independent of every other; ``noise(k)`` (k a whole number or a
name) is a shared source: the same k in two equations is the same source.

Noise may only be added to the right side of a flow equation or multiplied by a factor
(``x' = f + g*noise``, ``g`` any expression of the states, parameters and time): inside a function,
a power, a condition or a product of two noise terms white noise has no meaning, and a map's steps
have no time increment for it. Those places are refused with a reason.

Here the statements' trees are checked and each noise term becomes a generated name (never typed by
a user: it holds a character names cannot have), which ``model.py`` resolves to a symbol; once the
equations are resolved, ``split`` takes each equation apart into its drift (the noise-free part, what
every deterministic analysis uses) and one diffusion coefficient per source.
"""

from __future__ import annotations

import re
from dataclasses import replace

import sympy as sp

from orbitdesk.language.diagnostics import ERROR
from orbitdesk.language.expression import Binary, Call, Compare, If, Logic, Name, Num, Sum, Unary, walk

WORD = "noise"
MARK = "\u2020noise:"  # generated names of noise terms: '\u2020' cannot be typed in a name
NOISE_FREE_NOTE = ("the model has noise; this analysis assumes determinism and uses the noise-free part "
                   "(the drift, the equations with every noise term left out)")
MAX_SOURCES = 20
_SOURCE = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$|^[0-9]+$")


def source_label(key: str) -> str:
    """What a person reads for a source: ``noise(1)`` for a shared one, ``noise in x'`` for an equation's own."""
    return f"noise{key}" if key.startswith("(") else f"noise in {key}"


def _is_noise(node) -> bool:
    return (isinstance(node, Name) and node.name == WORD and node.subscript is None) or (
        isinstance(node, Call) and node.func == WORD)


def _has_noise(node) -> bool:
    return any(_is_noise(item) for item in walk(node))


def _why_not_here(parent, node) -> str | None:
    """Why ``node`` (which holds noise) cannot stand under ``parent``, or None when it may."""
    if isinstance(parent, Unary):
        return None
    if isinstance(parent, Binary):
        other = parent.right if node is parent.left else parent.left
        if parent.op in "+-":
            return None
        if parent.op == "*" and not _has_noise(other):
            return None
        if parent.op == "/" and node is parent.left and not _has_noise(other):
            return None
        if parent.op == "/" and node is parent.right:
            return ("noise cannot divide: white noise only enters as a term added to the right side, "
                    "multiplied by a factor (x' = f + g*noise)")
        if parent.op in "*/":
            return ("a product or quotient of two noise terms has no meaning; each noise term is added "
                    "to the right side once, multiplied by a factor (x' = f + g*noise)")
        return ("noise cannot be raised to a power or be a power: white noise only enters as a term "
                "added to the right side, multiplied by a factor (x' = f + g*noise)")
    if isinstance(parent, Call):
        return (f"noise cannot sit inside {parent.func}(): white noise only enters as a term added to "
                "the right side, multiplied by a factor (x' = f + g*noise); take it out of the call")
    if isinstance(parent, (If, Compare, Logic)):
        return ("noise cannot sit inside if(): white noise only enters as a term added to the right side, "
                "multiplied by a factor; write if(COND, a, b)*noise instead")
    if isinstance(parent, Sum):
        return "noise cannot sit inside sum(...): write the sum as the factor, sum(...)*noise"
    return "noise cannot stand here"


def _source_key(node, equation: str):
    """The key of a noise node's source ('(k)' for noise(k), the equation's name for plain noise) or an error."""
    if isinstance(node, Name):
        return equation, None
    if len(node.args) != 1:
        return None, "noise(k) takes one source name, a whole number or a name, as in noise(1) or noise(ground)"
    arg = node.args[0]
    text = arg.text if isinstance(arg, Num) else arg.name if isinstance(arg, Name) and arg.subscript is None \
        and "'" not in arg.name else None
    if text is None or not _SOURCE.match(text):
        return None, "noise(k) names a shared source by a whole number or a name, as in noise(1) or noise(ground)"
    return f"({text.lstrip('0') or '0'})" if text.isdigit() else f"({text})", None


def _rewrite(node, equation, keys, report):
    """``node`` with each noise term replaced by its generated name; None after a problem, which goes
    to ``report(node, message)``."""
    if _is_noise(node):
        key, problem = _source_key(node, equation)
        if problem:
            report(node, problem)
            return None
        if key not in keys:
            if len(keys) >= MAX_SOURCES:
                report(node, f"a model can have at most {MAX_SOURCES} noise sources (Milstein's scheme works with "
                             "every pair of them); share sources with noise(k)")
                return None
            keys.append(key)
        return Name(MARK + key, node.column, node.end)
    if not _has_noise(node):
        return node
    for child in _children_with_noise(node):
        problem = _why_not_here(node, child)
        if problem:
            report(next(item for item in walk(child) if _is_noise(item)), problem)
            return None
    if isinstance(node, Unary):
        operand = _rewrite(node.operand, equation, keys, report)
        return None if operand is None else replace(node, operand=operand)
    left = _rewrite(node.left, equation, keys, report)
    right = _rewrite(node.right, equation, keys, report) if left is not None else None
    return None if right is None else replace(node, left=left, right=right)


def marked_tree(tree, equation: str):
    """``tree`` (an equation's right side as typed) with its noise terms as generated names, for
    printers that re-read the text (the LaTeX export); ValueError where the checker would refuse it."""
    def report(_node, message):
        raise ValueError(message)

    return _rewrite(tree, equation, [], report)


def _children_with_noise(node):
    if isinstance(node, Binary):
        kids = (node.left, node.right)
    elif isinstance(node, Unary):
        kids = (node.operand,)
    elif isinstance(node, (Call, Logic)):
        kids = node.args
    elif isinstance(node, If):
        kids = (node.cond, node.then, node.other)
    elif isinstance(node, Compare):
        kids = (node.left, node.right)
    elif isinstance(node, Sum):
        kids = (node.body,)
    else:
        kids = ()
    return [k for k in kids if _has_noise(k)]


def mark(builder, statements) -> None:
    """Check every noise term of ``statements`` and give it its generated name (model.py's hook).

    A model that defines ``noise`` itself (a parameter, a quantity, a function) keeps its own meaning.
    """
    if any(st.name == WORD for st in statements if st.form in ("name", "func", "ode", "map")):
        return
    keys = builder.model.noise_sources
    for st in statements:
        if st.tree is None or not any(_is_noise(item) for item in walk(st.tree)):
            continue
        spot = next(item for item in walk(st.tree) if _is_noise(item))
        if st.form == "map":
            builder.add(st.line, spot.column, spot.end, ERROR,
                        "noise belongs to flows (x' = ...): a map's step has no time increment for white noise; "
                        "for random steps in a map, use a flow or leave the noise out")
            st.tree = None
            continue
        if st.form != "ode":
            builder.add(st.line, spot.column, spot.end, ERROR,
                        "noise can only be written in the equations themselves (x' = ... + g*noise), "
                        "not in a definition, an initial value or a function")
            st.tree = None
            continue
        def report(node, message, st=st):
            builder.add(st.line, node.column, node.end, ERROR, message)

        st.tree = _rewrite(st.tree, st.name + "'" * st.primes, keys, report)


def symbol(name: str) -> sp.Symbol | None:
    """The symbol of a generated noise name (the resolver's hook), None for any other name."""
    return sp.Symbol(name, real=True) if name.startswith(MARK) else None


def split(model, state: str, expr, line: int, builder) -> sp.Expr:
    """The drift of ``expr`` (the right side of ``state``'s equation); its diffusion coefficients go to
    ``model.diffusion[state]`` (one per source). A term that is not linear in the noise is reported."""
    found = sorted((s for s in expr.free_symbols if s.name.startswith(MARK)), key=lambda s: s.name)
    if not found:
        return expr
    other = "delays" if model.delays else "events (when ...)" if getattr(builder, "event_lines", None) else None
    if other:
        span = model.equation_spans.get(state, (line, 1, 2))
        builder.add(span[0], span[1], span[2], ERROR,
                    f"noise and {other} in one model are not supported: the realisations' fixed-step schemes "
                    "do not handle them; leave out the noise or the " + other.split(" ")[0])
        return expr.xreplace({s: sp.Integer(0) for s in found})
    zero = {s: sp.Integer(0) for s in found}
    coefficients = {}
    for s in found:
        g = sp.diff(expr, s)
        if any(other.name.startswith(MARK) for other in g.free_symbols):
            span = model.equation_spans.get(state, (line, 1, 2))
            builder.add(span[0], span[1], span[2], ERROR,
                        "this equation multiplies two noise terms (perhaps through another equation's "
                        "right side); each noise term must enter once, multiplied by a factor")
            return expr.xreplace(zero)
        if g != 0:
            coefficients[s.name[len(MARK):]] = g
    if coefficients:
        model.diffusion[state] = coefficients
    return expr.xreplace(zero)


def terms_text(system, i: int, show=str) -> str:
    """`` + g*noise(k)`` for each source acting on state ``i`` of a compiled system (plain ``noise`` for an
    equation's own source), ``show`` printing each coefficient: how read-backs and reports write them."""
    out = ""
    for key, g in zip(system.noise_sources, system.diffusion[i] if system.noise_sources else ()):
        if g == 0:
            continue
        word = f"noise{key}" if key.startswith("(") else "noise"
        out += f" + {word}" if g == 1 else f" + ({show(g)})*{word}" if g.is_Add else f" + {show(g)}*{word}"
    return out


def drop(expr):
    """``expr`` without its noise terms (a derived quantity that uses a noisy right side)."""
    if not hasattr(expr, "free_symbols"):
        return expr
    zero = {s: sp.Integer(0) for s in expr.free_symbols if s.name.startswith(MARK)}
    return expr.xreplace(zero) if zero else expr


def system_noise(model, states) -> dict:
    """The compiled system's noise fields: the sources that act somewhere and G (n x m, sympy, the
    model's symbols: row per state, column per source)."""
    sources = [k for k in model.noise_sources if any(k in row for row in model.diffusion.values())]
    return {"noise_sources": sources,
            "diffusion": [[model.diffusion.get(s, {}).get(k, sp.Integer(0)) for k in sources] for s in states]}


__all__ = ["WORD", "MARK", "NOISE_FREE_NOTE", "mark", "marked_tree", "terms_text", "symbol", "split", "drop", "system_noise", "source_label"]
