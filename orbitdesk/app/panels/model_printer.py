"""The model language's spelling of sympy expressions (``^``, ``abs``, ``e``, ``if(...)``): the read-back
and the equilibria view print what the model means with it. Imports sympy, so the window imports this
module only when it first prints (the window shows before sympy is loaded)."""

from __future__ import annotations

import sympy as sp
from sympy.printing.str import StrPrinter

_FUNCTION_NAMES = {"Abs": "abs", "Min": "min", "Max": "max", "Mod": "mod", "Heaviside": "heaviside",
                   "DiracDelta": "\u03b4"}


class _ModelPrinter(StrPrinter):
    """Prints sympy expressions back in the model language's spelling (``^``, ``abs``, ``e``)."""

    def _print_Function(self, expr):
        name = _FUNCTION_NAMES.get(type(expr).__name__)
        if name is None:
            return super()._print_Function(expr)
        return f"{name}({self.stringify(expr.args, ', ')})"

    def _print_Heaviside(self, expr):
        return f"heaviside({self._print(expr.args[0])})"

    def _print_Min(self, expr):
        return f"min({self.stringify(expr.args, ', ')})"

    def _print_Max(self, expr):
        return f"max({self.stringify(expr.args, ', ')})"

    def _print_Exp1(self, expr):
        return "e"

    def _print_Piecewise(self, expr):
        *rest, last = expr.args
        text = self._print(last.expr) if last.cond == True else "nan"  # noqa: E712 (sympy's true)
        for pair in reversed(rest):
            text = f"if({self._print(pair.cond)}, {self._print(pair.expr)}, {text})"
        return text

    def _print_And(self, expr):
        return " and ".join(f"({self._print(a)})" if isinstance(a, sp.Or) else self._print(a) for a in expr.args)

    def _print_Or(self, expr):
        return " or ".join(self._print(a) for a in expr.args)

    def _print_Not(self, expr):
        return f"not ({self._print(expr.args[0])})"

    def _print_Float(self, expr):
        return f"{float(expr):.10g}"


_PRINTER = _ModelPrinter()


def model_str(expr) -> str:
    """One expression as the model language would write it."""
    if not isinstance(expr, sp.Basic):  # plain numbers only; text is never converted here
        expr = sp.Integer(expr) if isinstance(expr, int) else sp.Float(float(expr))
    return _PRINTER.doprint(expr).replace("**", "^")
