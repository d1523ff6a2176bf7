"""From parsed expression trees to sympy expressions and to plain numbers.

Every sympy object here is built node by node from a whitelisted tree; no text is handed to
sympy. Numeric powers are folded under a size bound so that ``9^9^9`` cannot hang the program.
Trees are folded iteratively, so very long sums do not hit Python's recursion limit.
"""

from __future__ import annotations

import math
from fractions import Fraction

import sympy as sp

from .diagnostics import ParseError
from .expression import FUNCTIONS, Binary, Call, Name, Num, Unary

MAX_MAGNITUDE = 1e300
EXACT_POWER_LIMIT = 64


def _log10(x):
    return sp.log(x, 10)


SYMPY_FUNCTIONS = {
    "sin": sp.sin, "cos": sp.cos, "tan": sp.tan, "asin": sp.asin, "acos": sp.acos, "atan": sp.atan,
    "atan2": sp.atan2, "sinh": sp.sinh, "cosh": sp.cosh, "tanh": sp.tanh, "exp": sp.exp,
    "log": sp.log, "log10": _log10, "sqrt": sp.sqrt, "abs": sp.Abs, "sign": sp.sign,
    "min": sp.Min, "max": sp.Max, "heaviside": sp.Heaviside, "mod": sp.Mod, "floor": sp.floor,
}

MATH_FUNCTIONS = {
    "sin": math.sin, "cos": math.cos, "tan": math.tan, "asin": math.asin, "acos": math.acos,
    "atan": math.atan, "atan2": math.atan2, "sinh": math.sinh, "cosh": math.cosh, "tanh": math.tanh,
    "exp": math.exp, "log": math.log, "log10": math.log10, "sqrt": math.sqrt, "abs": abs,
    "sign": lambda x: float((x > 0) - (x < 0)), "min": min, "max": max,
    "heaviside": lambda x: 0.0 if x < 0 else (0.5 if x == 0 else 1.0),
    "mod": lambda a, b: a - b * math.floor(a / b), "floor": math.floor,
}


def number_from_text(text: str) -> sp.Expr:
    """An exact sympy number for a literal: integers stay integers, decimals become rationals."""
    if any(c in text for c in ".eE"):
        frac = Fraction(text)
        if abs(frac) > MAX_MAGNITUDE:
            raise ValueError("too large")
        return sp.Rational(frac.numerator, frac.denominator) if frac.denominator < 10**12 else sp.Float(text)
    return sp.Integer(int(text))


def _too_large(node) -> ParseError:
    return ParseError("this constant is too large to represent (over 1e300)", node.column, node.end)


def _checked_power(base: sp.Expr, exponent: sp.Expr, node) -> sp.Expr:
    if not (base.is_Number and exponent.is_Number):
        return sp.Pow(base, exponent)
    b, x = float(base), float(exponent)
    try:
        approx = abs(b) ** x if b != 0 or x >= 0 else math.inf
    except OverflowError:
        raise _too_large(node) from None
    except ZeroDivisionError:
        raise ParseError("zero raised to a negative power", node.column, node.end) from None
    if isinstance(approx, complex) or not math.isfinite(approx) or approx > MAX_MAGNITUDE:
        raise _too_large(node)
    if exponent.is_Integer and abs(int(exponent)) <= EXACT_POWER_LIMIT:
        return sp.Pow(base, exponent)
    return sp.Pow(sp.Float(b), sp.Float(x))


def fold(node, leaf, combine):
    """Post-order fold without recursion: ``leaf(node)`` for Num/Name, ``combine(node, values)``."""
    stack = [(node, False)]
    values: list = []
    while stack:
        item, ready = stack.pop()
        if isinstance(item, (Num, Name)):
            values.append(leaf(item))
            continue
        children = _children(item)
        if ready:
            args = values[len(values) - len(children):]
            del values[len(values) - len(children):]
            values.append(combine(item, args))
        else:
            stack.append((item, True))
            for child in reversed(children):
                stack.append((child, False))
    return values[0]


def _children(node):
    if isinstance(node, Binary):
        return (node.left, node.right)
    if isinstance(node, Unary):
        return (node.operand,)
    return node.args


def _check_call(node: Call):
    if node.func not in FUNCTIONS:
        from difflib import get_close_matches

        close = get_close_matches(node.func, FUNCTIONS, n=1)
        fix = f"did you mean '{close[0]}'?" if close else None
        msg = f"unknown function '{node.func}'" + (f"; {fix}" if fix else "")
        raise ParseError(msg, node.column, node.column + len(node.func), fix)
    want = FUNCTIONS[node.func]
    if len(node.args) != want:
        raise ParseError(f"{node.func}() takes {want} argument{'s' if want > 1 else ''}, "
                         f"got {len(node.args)}", node.column, node.end)


class _Terms(list):
    """Operands of a chain of '+' (or '*'), collected so sympy builds one n-ary node, not n nested ones."""

    def __init__(self, op, items):
        super().__init__(items)
        self.op = op


def _materialize(value):
    if isinstance(value, _Terms):
        return sp.Add(*value) if value.op == "+" else sp.Mul(*value)
    return value


def _chain(op, left, right):
    if isinstance(left, _Terms) and left.op == op:
        left.append(right)
        return left
    return _Terms(op, [_materialize(left), right])


def to_sympy(node, resolve) -> sp.Expr:
    """Build a sympy expression; ``resolve(Name)`` returns the sympy object a name stands for."""

    def leaf(item):
        if isinstance(item, Num):
            try:
                return number_from_text(item.text)
            except ValueError:
                raise _too_large(item) from None
        return resolve(item)

    def combine(item, args):
        if isinstance(item, Binary) and item.op in "+-":
            right = _materialize(args[1])
            return _chain("+", args[0], right if item.op == "+" else -right)
        if isinstance(item, Binary) and item.op == "*":
            return _chain("*", args[0], _materialize(args[1]))
        args = [_materialize(a) for a in args]
        if isinstance(item, Unary):
            return -args[0]
        if isinstance(item, Call):
            _check_call(item)
            result = SYMPY_FUNCTIONS[item.func](*args)
            if result.is_Number and not result.is_finite:
                raise ParseError(f"{item.func}() of this constant is undefined", item.column, item.end)
            return result
        left, right = args
        if item.op == "/":
            if right.is_zero:
                raise ParseError("division by zero", item.column, item.end)
            return sp.Mul(left, sp.Pow(right, -1))
        return _checked_power(left, right, item)

    result = _materialize(fold(node, leaf, combine))
    if result.is_Number and (not result.is_finite or abs(float(result)) > MAX_MAGNITUDE):
        raise _too_large(node)
    return result


def constant_value(node, constants: dict[str, float]) -> float:
    """Evaluate a constant expression with floats; ``constants`` maps the allowed names."""

    def leaf(item):
        if isinstance(item, Num):
            value = float(item.text)
            if not math.isfinite(value) or abs(value) > MAX_MAGNITUDE:
                raise _too_large(item)
            return value
        if item.name in constants and item.subscript is None:
            return constants[item.name]
        raise ParseError(f"'{item.name}' is not a constant", item.column, item.end)

    def combine(item, args):
        try:
            if isinstance(item, Unary):
                value = -args[0]
            elif isinstance(item, Call):
                _check_call(item)
                value = float(MATH_FUNCTIONS[item.func](*args))
            elif item.op == "+":
                value = args[0] + args[1]
            elif item.op == "-":
                value = args[0] - args[1]
            elif item.op == "*":
                value = args[0] * args[1]
            elif item.op == "/":
                value = args[0] / args[1]
            else:
                value = args[0] ** args[1]
        except ZeroDivisionError:
            raise ParseError("division by zero", item.column, item.end) from None
        except (OverflowError, ValueError):
            raise ParseError("this constant expression is undefined or too large", item.column, item.end) from None
        if isinstance(value, complex) or not math.isfinite(value) or abs(value) > MAX_MAGNITUDE:
            raise ParseError("this constant expression is undefined or too large", item.column, item.end)
        return value

    return fold(node, leaf, combine)
