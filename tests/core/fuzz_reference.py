"""The fuzz targets' reference for a model's right side at one point, independent of the generated code.

Each right side is evaluated two ways from the model's sympy tree: exactly (sympy, 30 digits) and node by
node in doubles (numpy's float64, so inf and nan travel as they do in compiled code). Exact arithmetic
decides each comparison of an if(), except where that is not what doubles can be held to: the two sides
are within a few ulps of each other (``atan(1e300) <= atan2(cosh(690), x)`` at x = 0.25 is a tie in
doubles, false exactly), the doubles decide otherwise, or a side is undefined or ill-conditioned. There
both branches are possible and every combination is an alternative answer. The model's value is right
when some alternative accepts it:

- a finite value: within 1e-6 (relative) of the exact or the doubles value, or the two disagree (an
  ill-conditioned expression, where this reference cannot judge);
- inf: the exact value is beyond the double range or undefined, or the doubles overflow too;
- nan (an undefined value): undefined exactly or in doubles, or a comparison of if() has an undefined side
  (compiled code may call the whole right side undefined there); a part at a pole (log(0), 1/0) counts as
  undefined even where the whole has a limit (x/log(x) at x = 0 is 0 in doubles).

So a wrong branch, a wrong function or a wrong sign from the printer fails unless it happens to agree
with arithmetic. ``judge(system, t, u)`` returns, per right side, the list of alternatives.
"""

from __future__ import annotations

import math
from functools import reduce

import numpy as np
import sympy as sp
from sympy.core.evalf import PrecisionExhausted

ULPS = 4  # sides of a comparison this close in doubles are a tie
CLOSE = 1e-6  # the model's value against a reference value
WELL = 1e-9  # the exact and the doubles value agree this well: the expression is well-conditioned
MAX_ALTERNATIVES = 256  # beyond this many ties (never seen) the point is not judged
BIG = 1.7976931348623157e308
HUGE = 1e300  # a part beyond this: exact arithmetic is not tried (it could need endless digits)

_UNKNOWN = object()  # a node the doubles evaluator does not know: no opinion


def _log(x, base=None):
    return np.log(x) if base is None else np.log(x) / np.log(base)


_DOUBLE_OF = {
    sp.sin: np.sin, sp.cos: np.cos, sp.tan: np.tan, sp.asin: np.arcsin, sp.acos: np.arccos, sp.atan: np.arctan,
    sp.atan2: np.arctan2, sp.sinh: np.sinh, sp.cosh: np.cosh, sp.tanh: np.tanh, sp.exp: np.exp, sp.log: _log,
    sp.Abs: np.abs, sp.sign: np.sign, sp.floor: np.floor, sp.ceiling: np.ceil,
    sp.Min: lambda *a: reduce(np.minimum, a), sp.Max: lambda *a: reduce(np.maximum, a),  # nan if any is
    sp.Mod: np.mod,  # the exact remainder of the doubles with the sign of the divisor, as the language documents:
    # at its jump (mod(0.25, 0.001), where 0.001 in doubles is just above 1/1000) that is 0.000999..., not 0
    sp.Heaviside: lambda x, *_: np.nan if np.isnan(x) else (0.0 if x < 0 else (0.5 if x == 0 else 1.0)),
}
_COMPARE = {"<": np.less, "<=": np.less_equal, ">": np.greater, ">=": np.greater_equal, "==": np.equal,
            "!=": np.not_equal}


def doubles(expr, values: dict, decided: dict, track: dict | None = None):
    """``expr`` evaluated node by node in float64 with the comparisons in ``decided`` taken as given;
    _UNKNOWN where it meets a node it does not know. ``track["huge"]`` is set when a part is beyond
    HUGE or infinite (sinh(sinh(x)) at x = 1e299: its exact value has more digits than memory holds)."""
    value = _doubles(expr, values, decided, track)
    if track is not None and value is not _UNKNOWN and not isinstance(value, bool) and not abs(value) <= HUGE:
        track["huge"] = track.get("huge", False) or not np.isnan(value)
    return value


def _doubles(expr, values: dict, decided: dict, track):
    if expr in decided:
        return decided[expr]
    if _undefined_condition(expr, decided):
        return np.float64(np.nan)
    if expr is sp.true or expr is sp.false:
        return bool(expr)
    if expr in values:
        return np.float64(values[expr])
    if expr.is_Number or expr in (sp.pi, sp.E):
        if expr in (sp.nan, sp.zoo):
            return np.float64(np.nan)
        return np.float64(float(expr))
    if isinstance(expr, sp.Piecewise):  # the first branch whose condition holds; nan past the last
        for pair in expr.args:
            cond = doubles(pair.cond, values, decided, track)
            if cond is _UNKNOWN:
                return _UNKNOWN
            if cond:
                return doubles(pair.expr, values, decided, track)
        return np.float64(np.nan)
    args = [doubles(a, values, decided, track) for a in expr.args]
    if any(a is _UNKNOWN for a in args):
        return _UNKNOWN
    if isinstance(expr, sp.Rel):
        return bool(_COMPARE[expr.rel_op](args[0], args[1]))
    if isinstance(expr, sp.And):
        return all(args)
    if isinstance(expr, sp.Or):
        return any(args)
    if isinstance(expr, sp.Not):
        return not args[0]
    if expr.is_Add:
        return np.float64(sum(args[1:], args[0]))
    if expr.is_Mul:
        return np.float64(math.prod(args[1:], start=args[0]))
    if track is not None and (isinstance(expr, sp.log) and args[0] == 0 or expr.is_Pow and args[0] == 0 and args[1] < 0):
        track["pole"] = True  # log(0) or 1/0 on the way, even where the whole has a limit (0/log(0) is 0 in
        # doubles): undefined in the reals, which the plain-Python evaluators say
    if expr.is_Pow or isinstance(expr, sp.exp):
        value = np.exp(args[0]) if isinstance(expr, sp.exp) else (
            np.sqrt(args[0]) if float(args[1]) == 0.5 else np.power(*args))
        if value == 0 and track is not None and all(a != 0 and np.isfinite(a) for a in args):
            track["huge"] = True  # an underflow: 0.25^cosh(690) exactly has an exponent of -6e299, which
            # sympy's mod of it expands into a 10^299-digit fraction; doubles judge alone
        return value
    for kind in type(expr).__mro__:  # the model's sinh, cosh and tanh are sympy's, by subclass
        if kind in _DOUBLE_OF:
            return np.float64(_DOUBLE_OF[kind](*args))
    return _UNKNOWN


def exact(expr, values: dict, decided: dict):
    """``expr`` at 30 digits with the comparisons in ``decided`` replaced by their truth: a float (inf
    beyond the double range), None where it is undefined (nan, complex, division by zero), _UNKNOWN where
    sympy leaves it unevaluated."""
    if _undefined_condition(expr, decided):
        return None
    track = {}
    doubles(expr, values, decided, track)
    if track.get("pole"):
        return None
    if track.get("huge"):
        return _UNKNOWN  # sin(sinh(1e299)) exactly needs some 1e299 digits; doubles judge alone
    try:  # deciding a comparison can rebuild min(x, asin(pi)), which sympy refuses: undefined in the reals
        replaced = expr.xreplace({r: sp.true if v else sp.false for r, v in decided.items()})
        value = replaced.xreplace({k: sp.Float(float(v), 30) for k, v in values.items()}).evalf(30)
    except (TypeError, ValueError, ZeroDivisionError):  # e.g. an undecided comparison with an undefined value
        return None
    except (OverflowError, RecursionError, MemoryError, PrecisionExhausted):  # floor(cosh(690)) needs 300 digits
        return _UNKNOWN
    if value in (sp.nan, sp.zoo) or value.has(sp.nan, sp.zoo, sp.I):
        return None
    if not value.is_Number or value in (sp.oo, -sp.oo):  # oo: log(0), a pole, never merely beyond the range
        return None if value.is_real is False or value in (sp.oo, -sp.oo) else _UNKNOWN
    number = float(value)
    return number if math.isfinite(number) else None


def _undefined_condition(expr, decided: dict) -> bool:
    """A comparison inside ``expr`` is taken as undefined (None: one of its sides is)."""
    return None in decided.values() and any(decided.get(r, False) is None for r in expr.atoms(sp.Rel))


def _tie(a, b) -> bool:
    return a == b or abs(a - b) <= ULPS * math.ulp(max(abs(a), abs(b)))


def _well(e, d) -> bool:
    """The exact and the doubles value of a part agree: its value in doubles can be trusted."""
    return (e is not None and e is not _UNKNOWN and d is not _UNKNOWN and math.isfinite(e) and
            math.isfinite(d) and abs(e - d) <= WELL * max(abs(e), abs(d), 1e-300))


def _possible(rel, values: dict, decided: dict) -> list[bool]:
    """The truth values a comparison may have in doubles, given the comparisons inside it."""
    sides = [(exact(side, values, decided), doubles(side, values, decided)) for side in rel.args]
    if any(e is None or d is not _UNKNOWN and not math.isfinite(d) for e, d in sides):
        # an undefined side (or an infinite one: log(0) or an overflow): compiled code may call the whole
        # right side undefined or go on
        return [True, False, None]
    if not all(_well(e, d) for e, d in sides):
        return [True, False]  # beyond the range or ill-conditioned: either branch
    (ea, da), (eb, db) = sides
    truth = bool(_COMPARE[rel.rel_op](ea, eb))
    if _tie(ea, eb) or _tie(float(da), float(db)) or truth != bool(_COMPARE[rel.rel_op](da, db)):
        return [True, False]
    return [truth]


def _assignments(relations, values: dict):
    """Every consistent choice of truth values, innermost comparisons first; None past MAX_ALTERNATIVES."""
    order = sorted(relations, key=lambda r: len(r.atoms(sp.Rel)))
    found = [{}]
    for rel in order:
        grown = []
        for decided in found:
            inner = {r: v for r, v in decided.items() if r in rel.atoms(sp.Rel)}
            grown += [{**decided, rel: truth} for truth in _possible(rel, values, inner)]
        if len(grown) > MAX_ALTERNATIVES:
            return None
        found = grown
    return found


def judge(system, t, u) -> list[list[tuple]] | None:
    """Per right side of ``system`` at (t, u) with its own parameters, the alternatives (exact, doubles);
    None when there are too many ties to judge."""
    values = {system.t_symbol: t, **dict(zip(system.state_symbols, u)),
              **dict(zip(system.param_symbols, system.param_values))}
    relations = set().union(*(expr.atoms(sp.Rel) for expr in system.f))
    with np.errstate(all="ignore"):
        choices = _assignments(relations, values)
        if choices is None:
            return None
        return [[(exact(expr, values, decided), doubles(expr, values, decided)) for decided in choices]
                for expr in system.f]


def accepts(alternatives, value: float) -> bool:
    """Some alternative (exact, doubles) of one right side makes ``value`` a right answer in doubles."""
    for e, d in alternatives:
        if e is _UNKNOWN or d is _UNKNOWN:
            return True
        d = float(d)
        if math.isnan(value):
            if e is None or math.isnan(d):
                return True
        elif math.isinf(value):
            if e is None or abs(e) > BIG or not math.isfinite(d):
                return True
        else:
            if e is not None and abs(e) <= BIG and abs(value - e) <= CLOSE * max(abs(e), abs(value), 1e-12):
                return True
            if math.isfinite(d) and abs(value - d) <= CLOSE * max(abs(d), abs(value), 1e-12):
                return True
            if not _well(e, d):
                return True  # ill-conditioned: the reference cannot judge a finite value
    return False
