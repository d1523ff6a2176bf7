"""Derivatives that hold almost everywhere, for Jacobians of models with non-smooth functions.

``floor``, ``sign``, ``heaviside`` and ``mod`` jump on isolated surfaces. sympy differentiates them
into objects no evaluator can print (an unevaluated ``Derivative(floor(x), x)``) or into Dirac
deltas. Between the jumps the derivatives are plain: d floor(u) = 0, d sign(u) = 0,
d heaviside(u) = 0, and d mod(a, m) = da - floor(a/m) dm; d abs(u) = sign(u) du (the model's values
are real even where sympy cannot tell). Those are the ones used here, so every
Jacobian can be evaluated; the model's warning about non-smooth functions says where they fail
(on the jumps themselves).
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
        return sp.sign(self.args[0])


class _SawMod(sp.Function):
    """mod(a, m) = a - m*floor(a/m): slope 1 in a and -floor(a/m) in m between the jumps."""

    nargs = 2

    def fdiff(self, argindex=1):
        a, m = self.args
        return sp.S.One if argindex == 1 else -sp.floor(a / m)


_TO_FLAT = ((sp.floor, _FlatFloor), (sp.sign, _FlatSign), (sp.Heaviside, _FlatStep), (sp.Mod, _SawMod),
            (sp.Abs, _RealAbs))
_FROM_FLAT = ((_FlatFloor, sp.floor), (_FlatSign, sp.sign), (_FlatStep, sp.Heaviside), (_SawMod, sp.Mod),
              (_RealAbs, sp.Abs))


def _swap(expr: sp.Expr, table) -> sp.Expr:
    for old, new in table:
        if expr.has(old):
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
