"""Generated code that stays flat: shared parts, then no wide or deep line.

Python's compiler recurses once per level of an expression: a sum of a few thousand terms printed
as ``a + b + c + ...`` (a left-leaning chain) or a tower of nested square roots makes generated
source fail with "maximum recursion depth exceeded during compilation". ``flat_cse`` shares repeated
parts like ``sympy.cse`` and then gives every wide sum or product and every deep part its own
assignment, so no line of generated code is nested more than ``MAX_DEPTH`` levels or joins more
than ``MAX_WIDTH`` operands. Every generator of code from a model's trees uses it: the kernels
(``codegen``), the scalar and vector evaluators and ``lambdify`` (``compiled_system``), the ensemble
loops (``engine/jit``). The cutting walks the tree with its own stack (no recursion); how deep a
tree can be is bounded by the model language (``language/model.py``, ``MAX_TREE_DEPTH``), so
sympy's own recursive steps stay within Python's default recursion limit.
"""

from __future__ import annotations

import sympy as sp

MAX_WIDTH = 64  # operands of one sum or product on one generated line
MAX_DEPTH = 24  # levels of one generated line


def flat_cse(exprs, symbols=None):
    """``sympy.cse`` followed by cutting wide and deep parts into their own assignments.

    Returns ``(replacements, reduced)`` like ``sympy.cse``; replacements come in the order they
    must be computed."""
    single = not isinstance(exprs, (list, tuple))
    exprs = [exprs] if single else list(exprs)
    names = symbols if symbols is not None else sp.numbered_symbols("_f")
    from sympy.simplify.cse_main import opt_cse, tree_cse  # (sympy.cse's own parts)

    # what sympy.cse does with optimizations=None, in two steps, without sorting every node's arguments
    # (their order as the trees hold them is as deterministic) and without evaluating a node rebuilt
    # with names put in (see rename): minutes saved on a model of thousands of terms
    opt_subs = {part: sub for part, sub in opt_cse(exprs, order="none").items() if not _rewritten(part, sub)}
    with sp.evaluate(False):
        shared, reduced = tree_cse(exprs, names, opt_subs, order="none")
        out: list = []
        cutter = _Cutter(names, out)
        for sym, expr in shared:
            out.append((sym, cutter.cut(expr)))
        reduced = [cutter.cut(e) for e in reduced]
    return out, (reduced[0] if single else reduced)


def _rewritten(part, sub) -> bool:
    """Whether sympy's shared-part search would write ``part`` otherwise than the model's tree holds it,
    in a way doubles can tell apart (found by the fuzz of generated models):

    - a sum as -(its negation): 1/4 - v as -(v - 1/4). The two differ in the sign of an exact zero
      (v = 1/4: +0 as written, -0 negated), which atan2 and division see: atan2(1/4 - v, -1) is pi as
      written and was -pi in the generated code;
    - a power whose exponent looks negative as 1/(its base to the negated exponent): x^(log10(1.001)),
      whose exponent sympy holds as -3 + log(1001)/log(10), as 1/x^(3 - log(1001)/log(10)), which is
      1/0 at x = 0 where the power as written is 0 (the model was called undefined there).

    Sums and powers are written as the model's trees hold them."""
    if isinstance(part, sp.Add):
        return sub.func is sp.Mul and sub.args[0] == sp.S.NegativeOne
    return isinstance(part, sp.Pow)


def rename(exprs, swap: dict) -> list:
    """``exprs`` with the symbols of ``swap`` replaced, every node rebuilt as it was, not evaluated again.

    Swapping names changes nothing sympy's evaluation could simplify, but evaluating costs: each
    ``cos(3*x + 1)`` rebuilt asks for its multiple of pi and its imaginary part (milliseconds a node;
    a model with thousands of terms waited minutes for every evaluator made from it)."""
    with sp.evaluate(False):
        return [e.xreplace(swap) for e in exprs]


class _Cutter:
    def __init__(self, names, out):
        self.names, self.out = names, out
        self.done: dict = {}  # subexpression -> (replacement, depth)

    def name(self, expr):
        sym = next(self.names)
        self.out.append((sym, expr))
        return sym

    def cut(self, expr):
        """``expr`` with wide and deep parts replaced by names (post-order, no recursion)."""
        if not isinstance(expr, sp.Basic):
            return expr
        stack = [(expr, False)]
        done = self.done
        while stack:
            item, ready = stack.pop()
            if item in done:
                continue
            if not item.args or not isinstance(item, sp.Expr):
                done[item] = (item, 0) if not item.args else (item, _depth(item))
                continue
            if not ready:
                stack.append((item, True))
                stack.extend((a, False) for a in item.args if a not in done)
                continue
            parts = [done[a] for a in item.args]
            args = [p[0] for p in parts]
            depth = 1 + max(p[1] for p in parts)
            if (item.is_Add or item.is_Mul) and len(args) > MAX_WIDTH:
                chunk = -(-len(args) // MAX_WIDTH)
                args = [self.name(item.func(*args[i:i + chunk], evaluate=False))
                        for i in range(0, len(args), chunk)]
                depth = 1
            changed = any(new is not old for new, old in zip(args, item.args)) or len(args) != len(item.args)
            rebuilt = (item.func(*args, evaluate=False) if item.is_Add or item.is_Mul or item.is_Pow
                       else item.func(*args)) if changed else item
            if depth >= MAX_DEPTH:
                rebuilt, depth = self.name(rebuilt), 0
            done[item] = (rebuilt, depth)
        return done[expr][0]


def _depth(expr) -> int:
    """Levels of a non-expression node (a condition of a Piecewise, say), counted without recursion."""
    deepest, stack = 0, [(expr, 1)]
    while stack:
        item, level = stack.pop()
        deepest = max(deepest, level)
        stack.extend((a, level + 1) for a in item.args)
    return deepest


__all__ = ["MAX_DEPTH", "MAX_WIDTH", "flat_cse", "rename"]
