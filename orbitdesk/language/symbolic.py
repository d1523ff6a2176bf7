"""From parsed expression trees to sympy expressions and to plain numbers.

Every sympy object here is built node by node from a whitelisted tree; no text is handed to
sympy. Numeric powers are folded under a size bound so that ``9^9^9`` cannot hang the program.
Trees are folded iteratively, so very long sums do not hit Python's recursion limit.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import sympy as sp
from sympy.functions.elementary.piecewise import ExprCondPair

from orbitdesk.language.diagnostics import ParseError
from orbitdesk.language import real_hyperbolic
from orbitdesk.language.expression import FUNCTIONS, Binary, Call, Compare, If, Logic, Name, Num, Unary, children

MAX_MAGNITUDE = 1e300
MIN_MAGNITUDE = 1e-300  # smaller constants are replaced by their double (often 0.0)
EXACT_POWER_LIMIT = 64
MAX_SYMBOLIC_EXPONENT = 1000  # |exponent| of a power of an expression (sympy works in time ~ exponent)
MAX_EXACT = 10**300  # exact rationals with larger numerator or denominator become floats


def _log10(x):
    return sp.log(x, 10)


SYMPY_FUNCTIONS = {
    "sin": sp.sin, "cos": sp.cos, "tan": sp.tan, "asin": sp.asin, "acos": sp.acos, "atan": sp.atan,
    "atan2": sp.atan2, "sinh": real_hyperbolic.sinh, "cosh": real_hyperbolic.cosh, "tanh": real_hyperbolic.tanh,
    "exp": sp.exp,
    "log": sp.log, "log10": _log10, "sqrt": sp.sqrt, "abs": sp.Abs, "sign": sp.sign,
    "min": sp.Min, "max": sp.Max, "heaviside": sp.Heaviside, "mod": sp.Mod, "floor": sp.floor,
}

MATH_FUNCTIONS = {
    "sin": math.sin, "cos": math.cos, "tan": math.tan, "asin": math.asin, "acos": math.acos,
    "atan": math.atan, "atan2": math.atan2, "sinh": math.sinh, "cosh": math.cosh, "tanh": math.tanh,
    "exp": math.exp, "log": math.log, "log10": math.log10, "sqrt": math.sqrt, "abs": abs,
    "sign": lambda x: float((x > 0) - (x < 0)), "min": min, "max": max,
    "heaviside": lambda x: 0.0 if x < 0 else (0.5 if x == 0 else 1.0),
    "mod": lambda a, b: a % b, "floor": math.floor,  # float % is exact: the sawtooth a - b*floor(a/b)
}


def number_from_text(text: str) -> sp.Expr:
    """An exact sympy number for a literal: integers stay integers, decimals become rationals.

    The size is checked with ``float`` first (it reads any exponent at once), so ``1e99999999``
    is refused before an exact form with a hundred million digits is built.
    """
    value = float(text)
    if not math.isfinite(value) or abs(value) > MAX_MAGNITUDE:
        raise ValueError("too large")
    mantissa, _, exponent = text.lower().partition("e")
    whole, _, fraction = mantissa.partition(".")
    digits = (whole + fraction).lstrip("0")
    if not digits:
        return sp.Integer(0)
    if abs(value) < MIN_MAGNITUDE:
        return sp.Float(value)  # 0.0 or a denormal double: an exact 10^(-99999999) would stall sympy
    # (within the float range an exponent has at most a few digits once leading zeros are gone)
    power = int(exponent.lstrip("+-").lstrip("0") or "0") * (-1 if exponent.startswith("-") else 1)
    scale = power - len(fraction)
    if scale >= 0:
        return sp.Integer(int(digits) * 10**scale)
    exact = sp.Rational(int(digits), 10**-scale)
    return exact if exact.q < 10**12 else sp.Float(text)


def _too_large(node, what: str = "this constant") -> ParseError:
    return ParseError(f"{what} is too large to represent (over 1e300)", node.column, node.end)


_NOT_FINITE = (sp.nan, sp.zoo, sp.oo, -sp.oo)


class _FloatsOnly(ValueError):
    """sympy could not evaluate a constant exactly enough; its value in floats is ``value``."""

    def __init__(self, value: complex):
        super().__init__("evaluated in floats")
        self.value = value


def _approx(expr: sp.Expr) -> complex:
    """The value of a constant expression (in floats where sympy gives up); ValueError if undefined."""
    try:
        return _evaluate(expr)
    except _FloatsOnly as only:
        return only.value


def _evaluate(expr: sp.Expr) -> complex:
    """The value of a constant expression whose parts were all checked (so evalf is cheap).

    Where sympy cannot reach the precision it wants (``floor(cosh(690))`` needs 300 exact digits:
    PrecisionExhausted) or leaves a function unevaluated, the expression is evaluated in floats
    and ``_FloatsOnly`` carries that value; anything else sympy raises becomes ValueError.
    """
    if expr.has(*_NOT_FINITE):
        raise ValueError("not finite")
    try:
        return complex(expr.evalf(17, strict=True))  # strict: no silently cancelled digits
    except (ValueError, ZeroDivisionError, OverflowError):
        raise
    except Exception:  # noqa: BLE001 - PrecisionExhausted, unevaluated functions (TypeError), ...
        try:
            value = float_value(expr)
        except Exception:  # noqa: BLE001 - whatever the float evaluation meets, the constant is undefined
            raise ValueError("cannot be evaluated") from None
        raise _FloatsOnly(complex(value)) from None


_FLOAT_OF = {
    sp.sin: math.sin, sp.cos: math.cos, sp.tan: math.tan, sp.asin: math.asin, sp.acos: math.acos,
    sp.atan: math.atan, sp.atan2: math.atan2, sp.sinh: math.sinh, sp.cosh: math.cosh, sp.tanh: math.tanh,
    sp.exp: math.exp, sp.Abs: abs, sp.sign: MATH_FUNCTIONS["sign"], sp.floor: math.floor,
    sp.ceiling: math.ceil, sp.Mod: MATH_FUNCTIONS["mod"], sp.Min: min, sp.Max: max,
    sp.log: lambda x, base=None: math.log(x) if base is None else math.log(x, base),
    sp.Heaviside: lambda x, *_: MATH_FUNCTIONS["heaviside"](x),
    real_hyperbolic.sinh: math.sinh, real_hyperbolic.cosh: math.cosh, real_hyperbolic.tanh: math.tanh,
}


def map_tree(expr: sp.Expr, leaf, combine):
    """Bottom-up over a sympy tree without recursion, each shared part once:
    ``leaf(atom)`` for nodes without arguments, ``combine(node, values of its arguments)`` for the rest."""
    done: dict = {}
    stack = [(expr, False)]
    while stack:
        item, ready = stack.pop()
        if item in done:
            continue
        if not item.args:
            done[item] = leaf(item)
        elif ready:
            done[item] = combine(item, [done[a] for a in item.args])
        else:
            stack.append((item, True))
            stack.extend((a, False) for a in item.args if a not in done)
    return done[expr]


def float_value(expr: sp.Expr) -> float:
    """A constant sympy expression evaluated in floats.

    Used where sympy's own evaluation gives up; raises ValueError (or ArithmeticError) when a part
    is undefined, OverflowError when it is beyond the float range."""

    def leaf(item):
        if item.is_Number or item in (sp.pi, sp.E):
            return float(item)
        raise ValueError(f"{item} is not a constant")

    def combine(item, args):
        if item.is_Add:
            return math.fsum(args)
        if item.is_Mul:
            return math.prod(args)
        if item.is_Pow:
            return math.pow(*args)
        if item.func in _FLOAT_OF:
            return float(_FLOAT_OF[item.func](*args))
        raise ValueError(f"no float form of {item.func}")

    return map_tree(expr, leaf, combine)


def _checked_constant(expr: sp.Expr, node, what: str = "this constant") -> sp.Expr:
    """Refuse a constant (no symbols) that is undefined, complex or beyond 1e300; tame huge exact rationals.

    Numeric coefficients of sums and products are checked the same way, and so are the exponents
    of powers of expressions (sympy merges ``(x^64)^64`` or ``x*x*...*x`` into one power).
    """
    if not isinstance(expr, sp.Expr):
        return expr  # a condition of if() (true, false or a relation): no magnitude to check
    if expr.free_symbols:
        if isinstance(expr, sp.Piecewise):  # sympy takes a power into the branches: if(c, x, 1e12)^26 holds
            # the number 10^312 in a branch (a branch undefined where it is not taken stays: x / if(x < 1, 0, t))
            if any(_beyond_range(n) for e, _ in expr.args for n in e.atoms(sp.Number)):
                raise _too_large(node, "a branch of this if()")
            return expr
        for part in (expr, *expr.args):
            if part.is_Pow:
                _check_exponent(part.exp, node)
            elif part in _NOT_FINITE:  # where sympy made it, e.g. 0^(-x) = zoo^x
                raise ParseError("this expression is undefined: it divides by zero", node.column, node.end)
        if expr.is_Add or expr.is_Mul:
            numbers = [a for a in expr.args if a.is_Number]
            if numbers:
                tamed = {a: _checked_constant(a, node, "a numeric factor or term of this expression")
                         for a in numbers}
                if any(tamed[a] is not a for a in numbers):
                    expr = expr.func(*[tamed.get(a, a) for a in expr.args])
        powers = {part: _float_exponent(part) for part in (expr, *expr.args)
                  if part.is_Pow or isinstance(part, sp.exp)}
        changed = {part: new for part, new in powers.items() if new is not part}
        if changed:
            expr = changed[expr] if expr in changed else expr.func(*[changed.get(a, a) for a in expr.args])
        return expr
    floats_only = False
    try:
        value = _evaluate(expr)
    except _FloatsOnly as only:
        value, floats_only = only.value, True
    except (TypeError, ValueError, ZeroDivisionError, OverflowError):
        raise ParseError(f"{what} is undefined", node.column, node.end) from None
    if not (math.isfinite(value.real) and math.isfinite(value.imag)) or abs(value) > MAX_MAGNITUDE:
        raise _too_large(node, what)
    if abs(value.imag) > 1e-12 * max(1.0, abs(value.real)):
        raise ParseError(f"{what} is not a real number", node.column, node.end)
    if (floats_only or abs(value) < MIN_MAGNITUDE and expr != 0
            or expr.is_Rational and max(abs(expr.p), expr.q) > MAX_EXACT or _holds_huge_number(expr)):
        # the double: exact forms of 3^(-10^10) make sympy's mod, floor, ... hang, and a part beyond the
        # double range (sin(atan(1e300)) = 10^300/sqrt(10^600 + 1)) overflows in the generated code
        return sp.Float(value.real)
    return expr


def _beyond_range(n: sp.Number) -> bool:
    """A finite number beyond MAX_MAGNITUDE, sized without converting a whole number of many digits to a float."""
    if n.is_Rational:
        return abs(n.p) > _MAX_WHOLE * n.q
    return bool(n.is_finite) and not abs(float(n)) <= MAX_MAGNITUDE


_MAX_WHOLE = int(MAX_MAGNITUDE)


def _holds_huge_number(expr: sp.Expr) -> bool:
    """A number beyond MAX_MAGNITUDE (or an exact rational beyond MAX_EXACT) inside a constant expression,
    or a power whose exact exponent has a numerator beyond MAX_SYMBOLIC_EXPONENT: sympy's polynomial code
    (which its mod calls for a gcd) reads exp(p/q) as exp(1/q) to the power p and builds a list of that
    length, so mod(c, exp(0.325^27)), whose exponent is 13^27/40^27, never ended."""
    if expr.is_Number:
        return False  # a number alone was sized by its caller
    if any(abs(n) > MAX_MAGNITUDE or n.is_Rational and max(abs(n.p), n.q) > MAX_EXACT
           for n in expr.atoms(sp.Number)):
        return True
    return any(_huge_exact_exponent(power.as_base_exp()[1]) for power in expr.atoms(sp.Pow, sp.exp))


def _huge_exact_exponent(number: sp.Expr) -> bool:
    """An exact exponent (or coefficient in one) whose numerator is beyond MAX_SYMBOLIC_EXPONENT: sympy's
    polynomial code reads exp(p/q) as exp(1/q) to the power p and builds a list of that length."""
    return bool(number.is_Rational and abs(number.p) > MAX_SYMBOLIC_EXPONENT)


def _float_exponent(power: sp.Expr) -> sp.Expr:
    """``power`` (b^e or exp(e)) with each exact coefficient in ``e`` whose numerator is beyond
    MAX_SYMBOLIC_EXPONENT as a float (a whole one only where it multiplies a symbol).

    sympy's polynomial code (which its own mod calls for a gcd) reads exp(10^299 x) as exp(x) to the
    power 10^299 and builds a list of that length: mod(c, exp(1e299*x)) never ended, nor did mod(c, x^r)
    or mod(c, exp(x + r)) for r = 0.325^27 = 13^27/40^27. A float coefficient is not split off, and the
    model computes in doubles anyway."""
    base, exponent = power.as_base_exp()
    terms = sp.Add.make_args(exponent)
    new_terms = []
    for term in terms:
        coefficient, rest = term.as_coeff_Mul(rational=True)
        if _huge_exact_exponent(coefficient) and (rest.free_symbols or not coefficient.is_Integer):
            term = sp.Float(coefficient) if rest == 1 else sp.Mul(sp.Float(coefficient), rest, evaluate=False)
        new_terms.append(term)
    if all(a is b for a, b in zip(new_terms, terms)):
        return power
    return sp.Pow(base, sp.Add(*new_terms, evaluate=False))


def _check_exponent(exponent: sp.Expr, node) -> None:
    """Refuse a constant exponent beyond MAX_SYMBOLIC_EXPONENT on a power of an expression."""
    if exponent.free_symbols:
        return
    if exponent.is_Rational and abs(exponent.p) <= MAX_SYMBOLIC_EXPONENT * exponent.q:
        return  # the usual case (x^2, x^(1/3)), decided in integers without evaluating anything
    size = abs(_approx(exponent))
    if size > MAX_SYMBOLIC_EXPONENT:
        shown = sp.sstr(exponent) if exponent.is_Integer and size < 1e15 else f"{_approx(exponent).real:g}"
        raise ParseError(f"the exponent {shown} is too large: powers of expressions are limited to "
                         f"exponents within \u00b1{MAX_SYMBOLIC_EXPONENT}", node.column, node.end)


def _checked_power(base: sp.Expr, exponent: sp.Expr, node) -> sp.Expr:
    """base ** exponent, sized with floats before sympy builds it when both are constants.

    Exact powers are kept only for small rational exponents; otherwise a float power is used, so
    ``2^(10^10)`` or ``sqrt(2)^(10^12)`` never make sympy compute a gigantic exact number.
    """
    if base.free_symbols or exponent.free_symbols:
        _check_exponent(exponent, node)  # before sympy expands (x/3)^(10^10) into 3^(-10^10) x^(10^10)
        # a power of an if() by anything but a whole number stays one power: sympy takes it into the branches,
        # where a power of numbers is worked out exactly ((1649/250)^(31/10^6) factored its integers for 19 s;
        # found by the fuzz of edited models); a whole power of one goes in and its branches are sized
        whole = isinstance(base, sp.Piecewise) and exponent.is_Integer
        kept = not whole and (isinstance(base, sp.Piecewise) or isinstance(exponent, sp.Piecewise))
        return _checked_constant(sp.Pow(base, exponent, evaluate=not kept), node)
    b, x = _approx(base).real, _approx(exponent).real
    if b < 0 and not x.is_integer():  # cos(pi)^atan2(pi, cosh(690)): an exponent of 2e-300 left an imaginary part
        # below the constants' tolerance, and a complex number reached the evaluators (found by the fuzz)
        raise ParseError("a negative number to a power that is not whole is not a real number", node.column, node.end)
    if b == 0 and x < 0:
        raise ParseError("division by zero (0 raised to a negative power)", node.column, node.end)
    try:
        approx = abs(b) ** x
    except OverflowError:
        raise _too_large(node) from None
    if not math.isfinite(approx) or approx > MAX_MAGNITUDE:
        raise _too_large(node)
    if base.is_Number:
        exact = exponent.is_Integer and abs(int(exponent)) <= EXACT_POWER_LIMIT
        result = sp.Pow(base, exponent) if exact else sp.Pow(base.evalf(30), exponent.evalf(30))
    elif exponent.is_Rational and abs(exponent) <= EXACT_POWER_LIMIT:
        result = sp.Pow(base, exponent)
    else:
        result = sp.Pow(base.evalf(30), exponent.evalf(30))
    return _checked_constant(result, node)


def _product_bounded(items, node):
    """Refuse a product of constants that would exceed 1e300, before sympy multiplies them out."""
    logs = 0.0
    for item in items:
        if item.is_Number:
            value = abs(float(item))
            if value == 0:
                return
            logs += math.log10(value)
    if logs > math.log10(MAX_MAGNITUDE):
        raise _too_large(node)


FLOAT_EXACT = 2.0**53  # beyond this every double is an integer: floor and mod are taken in floats


def _checked_call(func: str, args, node) -> sp.Expr:
    if func in ("floor", "mod") and not any(a.free_symbols for a in args):
        values = [_approx(a).real for a in args]
        if max(abs(v) for v in values) > FLOAT_EXACT:
            # exactly, floor(cosh(690)) needs 300 digits and sympy's exact mod cancels them all away;
            # the model's numbers are doubles, so the double's floor or exact remainder is the answer
            try:
                value = MATH_FUNCTIONS[func](*values)
            except ZeroDivisionError:
                raise ParseError(f"{func}() divides by zero here", node.column, node.end) from None
            return _checked_constant(sp.Float(value), node, f"{func}() of this constant")
        if not all(a.is_Rational for a in args):
            return _checked_constant(_whole_part(func, args, values, node), node, f"{func}() of this constant")
    if func in AS_WRITTEN and any(a.free_symbols for a in args):
        return _checked_constant(_as_written(func, args, node), node)
    try:
        result = SYMPY_FUNCTIONS[func](*args)
    except ZeroDivisionError:
        raise ParseError(f"{func}() divides by zero here", node.column, node.end) from None
    except (ValueError, TypeError, ArithmeticError):
        raise ParseError(f"{func}() of this constant is undefined", node.column, node.end) from None
    return _checked_constant(result, node, f"{func}() of this constant")


AS_WRITTEN = {"mod": sp.Mod, "min": sp.Min, "max": sp.Max, "abs": sp.Abs, "sign": sp.sign, "floor": sp.floor,
              "heaviside": sp.Heaviside}
_WRITTEN_NAME = {f: name for name, f in AS_WRITTEN.items()}


def _as_written(func: str, args, node) -> sp.Expr:
    """mod(), min(), max(), abs(), sign() or floor() of expressions as written, not evaluated by sympy: its Mod
    takes a polynomial gcd of the sides, which expands them, its Min and Max factor their arguments to compare
    them (rebuilding any mod() inside), and its Abs splits its argument factor by factor with a question of sign
    for each: mod(), min() or abs() of a chain of nested roots and quotients ran for minutes (found by the
    deep-chain fuzz). Of numbers they are evaluated as before; a divisor of mod() that is zero is refused."""
    if func == "mod" and not args[1].free_symbols:
        try:
            zero = _approx(args[1]).real == 0  # (1/3)^(10^10) too
        except ValueError:
            raise ParseError("mod() is undefined here", node.column, node.end) from None
        if zero:
            raise ParseError("mod() divides by zero here", node.column, node.end)
    return AS_WRITTEN[func](*args, evaluate=False)


def _whole_part(func: str, args, values, node) -> sp.Expr:
    """floor(a) or mod(a, m) of constants that are not plain numbers, without sympy's evaluation, which works
    to ever more digits when those of the quotient cancel (mod(417, sinh(690) - cosh(690) - atan(1e300)):
    seconds to minutes): the whole part k of the quotient from its value, exact where the quotient is clear of
    an integer (k, or the value of a - k m), else the doubles' answer, as for constants beyond 2^53."""
    if func == "mod" and values[1] == 0:
        raise ParseError("mod() divides by zero here", node.column, node.end)
    q = values[0] if func == "floor" else values[0] / values[1]
    if not math.isfinite(q):
        raise _too_large(node, f"{func}() of this constant")
    k = math.floor(q)
    if min(q - k, k + 1 - q) > 1e-9 * max(1.0, abs(q)):
        if func == "floor":
            return sp.Integer(k)
        # a - k m as its value: written out, its terms could cancel in the generated code's doubles
        return sp.Float(_approx(args[0] - sp.Integer(k) * args[1]).real)
    return sp.Float(MATH_FUNCTIONS[func](*values))


def fold(node, leaf, combine):
    """Post-order fold without recursion: ``leaf(node)`` for Num/Name, ``combine(node, values)``."""
    stack = [(node, False)]
    values: list = []
    while stack:
        item, ready = stack.pop()
        if isinstance(item, (Num, Name)):
            values.append(leaf(item))
            continue
        parts = children(item)
        if ready:
            args = values[len(values) - len(parts):]
            del values[len(values) - len(parts):]
            values.append(combine(item, args))
        else:
            stack.append((item, True))
            for child in reversed(parts):
                stack.append((child, False))
    return values[0]


def _check_call(node: Call, functions=None):
    """The function exists (built in, or defined by the model in ``functions``) and gets its arguments."""
    functions = functions or {}
    if node.func not in FUNCTIONS and node.func not in functions:
        from difflib import get_close_matches

        close = get_close_matches(node.func, [*FUNCTIONS, *functions], n=1)
        fix = f"did you mean '{close[0]}'?" if close else None
        msg = f"unknown function '{node.func}'" + (f"; {fix}" if fix else "")
        raise ParseError(msg, node.column, node.column + len(node.func), fix)
    if node.func not in FUNCTIONS and functions[node.func].body is None:
        raise ParseError(f"'{node.func}' cannot be used: its definition on line {functions[node.func].line} "
                         "has an error", node.column, node.column + len(node.func))
    want = FUNCTIONS[node.func] if node.func in FUNCTIONS else len(functions[node.func].arguments)
    if len(node.args) != want:
        raise ParseError(f"{node.func}() takes {want} argument{'s' if want > 1 else ''}, "
                         f"got {len(node.args)}", node.column, node.end)


class _Terms(list):
    """Operands of a chain of '+' (or '*'), collected so sympy builds one n-ary node, not n nested ones."""

    def __init__(self, op, items, node):
        super().__init__(items)
        self.op = op
        self.node = node


def _materialize(value):
    if isinstance(value, _Terms):
        if value.op == "*":
            _product_bounded(value, value.node)
        return _checked_constant(sp.Add(*value) if value.op == "+" else sp.Mul(*value), value.node)
    return value


def _chain(op, left, right, node):
    if isinstance(left, _Terms) and left.op == op:
        left.append(right)
        left.node = node
        return left
    return _Terms(op, [_materialize(left), right], node)


MAX_CONDITION_SIZE = 4000  # nodes of one condition once the if()s inside it are written out


def _piecewise(pairs, where) -> sp.Piecewise:
    """``Piecewise(*pairs)`` with every condition free of if(): see ``_fold_condition``."""
    return sp.Piecewise(*[(e, _fold_condition(c, where)) for e, c in pairs])


def _fold_condition(cond, where):
    """The condition with each if() inside it written out: R(if(c, a, b)) becomes (c and R(a)) or
    (not c and R(b)). sympy folds such a condition itself when a Piecewise is built, but decides there
    whether the pieces cover every real number by solving inequalities in the model's expressions,
    which can take without bound (minutes for a chain of a few dozen definitions): here it is plain
    substitution, and a condition that grows beyond MAX_CONDITION_SIZE nodes is refused."""
    if not isinstance(cond, sp.Basic) or not cond.has(sp.Piecewise):
        return cond
    while True:
        inner = [p for p in cond.atoms(sp.Piecewise) if not any(a.has(sp.Piecewise) for a in p.args)]
        if not inner:
            return cond
        piece = min(inner, key=sp.default_sort_key)
        parts, before = [], sp.true
        for e, c in piece.args:
            parts.append(sp.And(before, c, cond.xreplace({piece: e})))
            before = sp.And(before, sp.Not(c))
        cond = sp.Or(*parts)
        if _size_beyond(cond, MAX_CONDITION_SIZE):
            raise ParseError("this condition holds too many if() (directly or through definitions) to be "
                             "written out; split it into simpler conditions", where.column, where.end)


def _size_beyond(expr, limit: int) -> bool:
    for count, _ in enumerate(sp.preorder_traversal(expr)):
        if count >= limit:
            return True
    return False


_RELATIONS = {"<": sp.StrictLessThan, "<=": sp.LessThan, ">": sp.StrictGreaterThan, ">=": sp.GreaterThan}
_LOGIC = {"and": sp.And, "or": sp.Or, "not": sp.Not}
_DECIDE = {"<": lambda a, b: a < b, "<=": lambda a, b: a <= b, ">": lambda a, b: a > b, ">=": lambda a, b: a >= b}


def _relation(op: str, left: sp.Expr, right: sp.Expr):
    """``left op right``. Between two constants that sympy leaves open, decided here in the numbers the
    model computes with: ``1 < tanh(1140)`` (the two differ in the 990th digit) stays open in sympy, which
    then, building the if() around it, works without bound to decide it."""
    relation = _RELATIONS[op](left, right)
    if isinstance(relation, sp.Rel) and not relation.free_symbols:
        try:
            a, b = _approx(left).real, _approx(right).real
        except (ValueError, TypeError, ArithmeticError):
            return relation  # checked constants are defined; should one not be, sympy's relation says what it can
        return sp.true if _DECIDE[op](a, b) else sp.false
    return relation


@dataclass(frozen=True)
class ModelFunction:
    """A function the model defines, ``sat(u) = u/(1 + abs(u))``: its body over placeholder arguments."""

    name: str
    arguments: tuple  # placeholder symbols, one per argument
    body: sp.Expr | None  # None: the definition has an error (calls say so)
    line: int = 0


def to_sympy(node, resolve, functions=None) -> sp.Expr:
    """Build a sympy expression; ``resolve(Name)`` returns the sympy object a name stands for.

    ``functions`` maps the names of model-defined functions to ModelFunction; their calls are
    inlined (the body with the arguments put in), so derivatives of the result stay exact.
    """

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
            return _chain("+", args[0], right if item.op == "+" else -right, item)
        if isinstance(item, Binary) and item.op == "*":
            return _chain("*", args[0], _materialize(args[1]), item)
        args = [_materialize(a) for a in args]
        if isinstance(item, Unary):
            return -args[0]
        if isinstance(item, Compare):
            return _relation(item.op, *args)
        if isinstance(item, Logic):
            return _LOGIC[item.op](*args)
        if isinstance(item, If):
            return _checked_constant(_piecewise([(args[1], args[0]), (args[2], True)], item), item)
        if isinstance(item, Call):
            _check_call(item, functions)
            if item.func in FUNCTIONS:
                return _checked_call(item.func, args, item)
            definition = functions[item.func]
            return substitute(definition.body, dict(zip(definition.arguments, args)), item)
        left, right = args
        if item.op == "/":
            if right.is_zero:
                raise ParseError("division by zero", item.column, item.end)
            return _chain("*", left, _checked_power(right, sp.Integer(-1), item), item)
        return _checked_power(left, right, item)

    return _checked_constant(_materialize(fold(node, leaf, combine)), node)


@dataclass(frozen=True)
class Span:
    """Where to report a problem found while combining finished expressions."""

    column: int
    end: int


def substitute(expr: sp.Expr, values: dict, where: Span) -> sp.Expr:
    """``expr.xreplace(values)`` rebuilt bottom-up with the same size checks as ``to_sympy``.

    A plain xreplace lets sympy evaluate what the substitution creates (``d^(10^10)`` with
    ``d = 2``) without bound; here every rebuilt node goes through the checked constructors.
    Shared subexpressions are visited once.
    """

    def combine(item, args):
        if all(new is old for new, old in zip(args, item.args)):
            return item
        if item.is_Pow:
            return _checked_power(args[0], args[1], where)
        if item.is_Mul:
            _product_bounded(args, where)
            return _checked_constant(sp.Mul(*args), where)
        if item.is_Add:
            return _checked_constant(sp.Add(*args), where)
        if isinstance(item, sp.Piecewise):
            return _checked_constant(_piecewise([pair.args for pair in args], where), where)
        if isinstance(item, ExprCondPair):
            return ExprCondPair(args[0], _fold_condition(args[1], where))
        if item.func in _WRITTEN_NAME:
            return _checked_call(_WRITTEN_NAME[item.func], args, where)
        try:
            rebuilt = item.func(*args)
        except (ZeroDivisionError, ValueError, TypeError, ArithmeticError):
            raise ParseError(f"{item.func.__name__.lower()}() is undefined here", where.column, where.end) from None
        return _checked_constant(rebuilt, where)

    return map_tree(expr, lambda item: values.get(item, item), combine)


def tree_depth(expr: sp.Expr) -> int:
    """Levels of ``expr`` (an atom has one)."""
    return map_tree(expr, lambda item: 1, lambda item, args: 1 + max(args))


def tree_size(expr: sp.Expr, seen: dict) -> int:
    """Number of nodes of ``expr`` written out as a tree (shared parts counted each time they occur)."""
    stack = [(expr, False)]
    while stack:
        item, ready = stack.pop()
        if item in seen:
            continue
        if not item.args:
            seen[item] = 1
        elif ready:
            seen[item] = 1 + sum(seen[a] for a in item.args)
        else:
            stack.append((item, True))
            stack.extend((a, False) for a in item.args if a not in seen)
    return seen[expr]


_FLOAT_RELATIONS = {"<": lambda a, b: a < b, "<=": lambda a, b: a <= b,
                    ">": lambda a, b: a > b, ">=": lambda a, b: a >= b}


def constant_value(node, constants: dict[str, float], functions=None) -> float:
    """Evaluate a constant expression with floats; ``constants`` maps the allowed names.

    Calls of model-defined ``functions`` (name -> ModelFunction) are evaluated through their bodies.
    """

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
        if isinstance(item, Compare):
            return _FLOAT_RELATIONS[item.op](*args)
        if isinstance(item, Logic):
            return (all(args) if item.op == "and" else any(args)) if item.op != "not" else not args[0]
        if isinstance(item, If):
            return args[1] if args[0] else args[2]
        try:
            if isinstance(item, Unary):
                value = -args[0]
            elif isinstance(item, Call) and item.func not in FUNCTIONS:
                _check_call(item, functions)
                definition = functions[item.func]
                result = definition.body.xreplace({a: sp.Float(v) for a, v in zip(definition.arguments, args)})
                value = complex(result.evalf())
                value = value.real if abs(value.imag) <= 1e-12 * max(1.0, abs(value.real)) else complex(value)
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
        except (OverflowError, ValueError, TypeError):
            raise ParseError("this constant expression is undefined or too large", item.column, item.end) from None
        if isinstance(value, complex) or not math.isfinite(value) or abs(value) > MAX_MAGNITUDE:
            raise ParseError("this constant expression is undefined or too large", item.column, item.end)
        return value

    return fold(node, leaf, combine)
