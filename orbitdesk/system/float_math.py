"""The ``math`` functions that can overflow, with the results of IEEE doubles.

Python's ``math`` raises OverflowError where a value is too large for a double; compiled kernels and
numpy give ±inf and carry on, so ``1/pow(b, x)`` with b^x beyond 1e308 is 0 there (the true value
underflows), and an undefined value only where the reals have none. The plain-Python evaluators (the
kernels' twin in engine/compiled.py, ``compiled_system``'s scalar evaluators and ``lambdify``) take
these names instead of ``math``'s, so every path agrees: an overflow is infinite, not undefined.
Domain errors (log of a negative number, a negative base to a fractional power) still raise.
"""
from __future__ import annotations

import math

import numpy as np


def _overflowed(ufunc, *args) -> float:
    """``ufunc`` on doubles as IEEE arithmetic gives it (a Python integer too large for a double is
    ±inf, as it would be had it been computed in doubles)."""
    values = []
    for a in args:
        try:
            values.append(np.float64(a))
        except OverflowError:
            values.append(np.float64(math.inf if a > 0 else -math.inf))
    with np.errstate(all="ignore"):
        return float(ufunc(*values))


def exp(x):
    try:
        return math.exp(x)
    except OverflowError:
        return _overflowed(np.exp, x)


def sinh(x):
    try:
        return math.sinh(x)
    except OverflowError:
        return _overflowed(np.sinh, x)


def cosh(x):
    try:
        return math.cosh(x)
    except OverflowError:
        return _overflowed(np.cosh, x)


def pow(x, y):  # noqa: A001 - the printer writes powers as pow(), as math does
    try:
        return math.pow(x, y)
    except OverflowError:
        return _overflowed(np.power, x, y)


NAMES = {"exp": exp, "sinh": sinh, "cosh": cosh, "pow": pow}

__all__ = ["NAMES", "cosh", "exp", "pow", "sinh"]
