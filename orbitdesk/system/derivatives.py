"""Derivatives that hold almost everywhere, for Jacobians of models with non-smooth functions.

``floor``, ``sign``, ``heaviside`` and ``mod`` jump on isolated surfaces (``min``, ``max`` and ``abs``
bend there). sympy differentiates them into objects no evaluator can print (an unevaluated
``Derivative(floor(x), x)``) or into Dirac deltas. Between the jumps the derivatives are plain:
d floor(u) = 0, d sign(u) = 0, d heaviside(u) = 0, and d mod(a, m) = da - floor(a/m) dm;
d min(a, b) = heaviside(b - a) da + heaviside(a - b) db (and max() the other way round);
d abs(u) = sign(u) du (the model's values are real even where sympy cannot tell). Those are the ones
used here, so every Jacobian can be evaluated; the model's warning about non-smooth functions says
where they fail (on the jumps themselves).
"""

from __future__ import annotations

import sympy as sp


class _FlatFloor(sp.Function):
    """floor with the derivative 0 (unevaluated while differentiating)."""

    def fdiff(self, argindex=1):
        return sp.S.Zero


class _FlatSign(sp.Function):
    def fdiff(self, argindex=1):
        return sp.S.Zero


class _FlatStep(sp.Function):
    """heaviside (sympy's Heaviside may carry its value at 0 as a second argument)."""

    def fdiff(self, argindex=1):
        return sp.S.Zero


class _RealAbs(sp.Function):
    """abs of a real argument: the derivative is sign(u) (sympy, not told that u is real, would
    write re() and im() parts that no evaluator knows)."""

    def fdiff(self, argindex=1):
        return _FlatSign(self.args[0])


class _SawMod(sp.Function):
    """mod(a, m) = a - m*floor(a/m): slope 1 in a and -floor(a/m) in m between the jumps."""

    nargs = 2

    def fdiff(self, argindex=1):
        a, m = self.args
        return sp.S.One if argindex == 1 else -_FlatFloor(a / m)


class _FlatMin(sp.Function):
    """min(a, b, ...): slope 1 in the smallest argument, 0 in the others, shared where they are equal (sympy's
    own derivative builds its Heaviside evaluated, which splits the difference into real and imaginary parts:
    over a chain of nested roots that ran for minutes, found by the deep-chain fuzz)."""

    def fdiff(self, argindex=1):
        return _FlatStep(_others(self, argindex) - self.args[argindex - 1])


class _FlatMax(sp.Function):
    """max(a, b, ...): slope 1 in the largest argument, as min()."""

    def fdiff(self, argindex=1):
        return _FlatStep(self.args[argindex - 1] - _others(self, argindex))


def _others(extreme, argindex):
    """The min() or max() of the arguments but one (sympy holds max(max(a, b), c) as one Max of three)."""
    others = extreme.args[:argindex - 1] + extreme.args[argindex:]
    return others[0] if len(others) == 1 else extreme.func(*others)


_TO_FLAT = ((sp.floor, _FlatFloor), (sp.sign, _FlatSign), (sp.Heaviside, _FlatStep), (sp.Mod, _SawMod),
            (sp.Abs, _RealAbs), (sp.Min, _FlatMin), (sp.Max, _FlatMax))
_FROM_FLAT = tuple((flat, written) for written, flat in _TO_FLAT)


def _swap(expr: sp.Expr, table) -> sp.Expr:
    """``expr`` with each function of ``table`` replaced by its partner, every node rebuilt as it stands.
    Swapping a function for its twin leaves nothing to simplify, but evaluated, sympy's Min, Max, Abs and
    Heaviside (and every sum and product above them, rebuilt by ``replace``) ask questions of sign and
    realness, each a search through the whole tree below: 26 s over a chain of 36 definitions (found by the
    deep-chain fuzz). The model language builds them the same way (symbolic._as_written). Only when there
    is something to swap: switching sympy's evaluation off and on again empties its cache."""
    present = [(old, new) for old, new in table if expr.has(old)]
    if present:
        with sp.evaluate(False):
            for old, new in present:
                expr = expr.replace(old, new)
    return expr


def jacobian_almost_everywhere(exprs, symbols) -> sp.Matrix:
    """d exprs_i / d symbols_j with the derivatives above for floor, sign, heaviside and mod."""
    exprs, symbols = list(exprs), list(symbols)
    if not symbols:
        return sp.zeros(len(exprs), 0)
    flat = [_swap(e, _TO_FLAT) for e in exprs]
    rows = [[_real(_swap(sp.diff(e, s), _FROM_FLAT)) for s in symbols] for e in flat]
    return sp.Matrix(rows)


def _real(derivative: sp.Expr) -> sp.Expr:
    """A derivative that holds the imaginary unit is undefined for the real model: nan. d (-1)^x / dx =
    (-1)^x i pi (sympy's log(-1)), where (-1)^x itself is real only at whole x: the evaluators returned a
    complex number, which no Jacobian array holds."""
    return sp.nan if derivative.has(sp.I) else derivative


__all__ = ["jacobian_almost_everywhere"]
