"""sinh, cosh and tanh of the model language: sympy's own, answering questions about their values from
the realness of their argument alone.

sympy decides whether sinh(u), cosh(u) or tanh(u) is real, finite or positive by splitting u into its
real and imaginary parts and reducing the imaginary part modulo pi. For an argument whose realness it
cannot see (a chain of nested roots: sqrt(1 + sqrt(1 + x)) is real only where x >= -1) the split grows
about five-fold with each root and the reduction takes a polynomial gcd of it; building
``1/(1 + tanh(u)^2)`` asks such a question (is a term infinite?) at every step. Over seven roots the
model took 26 s to read and as long again for its Jacobian, over eight 103 s (found by the deep-chain
fuzz). The model's values are real numbers (where a root of a negative number is taken, the value is
undefined, not complex), so nothing is lost: these classes answer what follows from a real argument and
leave the rest open, and their derivatives stay within them. They keep sympy's names, so every printer
writes them as before.
"""

from __future__ import annotations

import sympy as sp
from sympy.core.function import ArgumentIndexError


class _OfRealArgument:
    """Real where the argument is real; otherwise left open (sympy's own would split the argument)."""

    def _eval_is_real(self):
        return True if self.args[0].is_real else None


class sinh(_OfRealArgument, sp.sinh):  # noqa: N801 - the printers write a function by its class name
    def fdiff(self, argindex=1):
        if argindex != 1:
            raise ArgumentIndexError(self, argindex)
        return cosh(self.args[0])


class cosh(_OfRealArgument, sp.cosh):  # noqa: N801
    def fdiff(self, argindex=1):
        if argindex != 1:
            raise ArgumentIndexError(self, argindex)
        return sinh(self.args[0])

    def _eval_is_positive(self):
        return True if self.args[0].is_extended_real else None  # cosh of a real number is at least 1

    _eval_is_nonnegative = _eval_is_positive


class tanh(_OfRealArgument, sp.tanh):  # noqa: N801
    def fdiff(self, argindex=1):
        if argindex != 1:
            raise ArgumentIndexError(self, argindex)
        return sp.S.One - tanh(self.args[0]) ** 2

    def _eval_is_finite(self):
        return True if self.args[0].is_extended_real else None  # between -1 and 1


__all__ = ["cosh", "sinh", "tanh"]
