"""Delays in the model language: ``x(t - tau)`` in expressions and histories ``x(t) = EXPR for t <= 0``.

* ``x(t - D)`` for a state x (or a derivative state such as ``x'``) stands for the value of x a
  time D ago. D is a number, a parameter or an expression of them and must be positive at the
  model's values; a delay that depends on a state, a derived quantity or the time is refused with
  the reason. Several delays, and several states delayed, are allowed. Each distinct pair (state,
  D) becomes one sympy symbol named as it reads (``x(t - tau)``); the parser's trees are rewritten
  before they are turned into sympy (``rewrite_delays``), so nothing else in the parser changes.
* ``x(t) = EXPR for t <= 0`` gives the history of x before the start: EXPR is a function of t
  (with parameters and constants). Without one the initial value is held constant before the
  start. A state of a higher-order equation takes the derivative of its base's history
  (``x'`` from ``x``) unless given its own.

The model keeps its equations with the delayed symbols in them (``ParsedModel.delays``,
``ParsedModel.history``); ``compile_model`` keeps those for the delay engine and gives every
other analysis the equations with the delay dropped (the same equilibria).
"""

from __future__ import annotations

import re
from dataclasses import dataclass, replace

import sympy as sp

from orbitdesk.language.diagnostics import ERROR, WARNING, ParseError
from orbitdesk.language.expression import (CONSTANTS, Binary, Call, Compare, If, Logic, Name, Sum, Unary, children,
                                           parse_expression, walk)
from orbitdesk.language.symbolic import constant_value, float_value, to_sympy

MAX_DELAYS = 50  # distinct (state, delay) pairs in one model

_HISTORY = re.compile(r"^(\s*)([A-Za-z_][A-Za-z0-9_]*'*)\s*\(\s*t\s*\)(\s*)=")
_FOR_T = re.compile(r"\s+for\s+t\b(.*)$")
_CLAUSE = re.compile(r"^\s*<=\s*0(?:\.0*)?\s*$")


@dataclass(frozen=True)
class Delay:
    """One delayed value ``state(t - amount)`` used by the equations."""

    state: str  # the state delayed (a state name, primes included)
    amount: sp.Expr  # the delay: numbers and parameters
    value: float  # the delay at the model's parameter values
    symbol: sp.Symbol  # stands for state(t - amount) in the equations
    line: int  # where it is first written

    @property
    def label(self) -> str:
        return self.symbol.name


@dataclass
class _HistoryLine:
    line: int
    name: str
    lhs_col: int
    lhs_end: int
    rhs: str
    rhs_col: int


# ---------------------------------------------------------------- pass 1: history lines
def split_history_line(builder, number: int, code: str) -> bool:
    """``x(t) = EXPR for t <= 0``: kept for ``define_history``; True when the line was one."""
    m = _HISTORY.match(code)
    if not m:
        return False
    rest_start = m.end()
    clause = _FOR_T.search(code, rest_start)
    if clause is None:
        return False  # a function with an argument named t, or a mistake reported as such
    lhs_col = len(m.group(1)) + 1
    lhs_end = m.end() - len(m.group(3))
    if not _CLAUSE.match(clause.group(1)):
        start = clause.start() + len(clause.group(0)) - len(clause.group(0).lstrip()) + 1
        builder.add(number, start, len(code.rstrip()) + 1, ERROR,
                    "a history holds before the start: write x(t) = EXPR for t <= 0")
        return True
    builder.history_lines.append(_HistoryLine(number, m.group(2), lhs_col, lhs_end,
                                              code[rest_start:clause.start()], rest_start + 1))
    return True


# ---------------------------------------------------------------- pass 2: x(t - D) in the trees
def _rebuild(node, swap):
    """The tree with each node for which ``swap(node)`` is not None replaced (iteratively)."""
    stack = [(node, False)]
    values: list = []
    while stack:
        item, ready = stack.pop()
        new = swap(item)
        if new is not None:
            values.append(new)
            continue
        parts = children(item)
        if not parts:
            values.append(item)
            continue
        if not ready:
            stack.append((item, True))
            stack.extend((c, False) for c in reversed(parts))
            continue
        args = values[len(values) - len(parts):]
        del values[len(values) - len(parts):]
        if all(a is b for a, b in zip(args, parts)):
            values.append(item)
        elif isinstance(item, (Binary, Compare)):
            values.append(replace(item, left=args[0], right=args[1]))
        elif isinstance(item, Unary):
            values.append(replace(item, operand=args[0]))
        elif isinstance(item, (Call, Logic)):
            values.append(replace(item, args=tuple(args)))
        elif isinstance(item, If):
            values.append(replace(item, cond=args[0], then=args[1], other=args[2]))
        elif isinstance(item, Sum):
            values.append(replace(item, body=args[0]))
        else:  # pragma: no cover - every node with children is listed above
            values.append(item)
    return values[0]


def rewrite_delays(builder, statements) -> None:
    """Replace each ``x(t - D)`` of the equations and derived quantities by a Name for its symbol.

    Problems become diagnostics on the statement (whose tree is then dropped)."""
    m = builder.model
    states = set(m.states) | {base + "'" * order for base, order in m.typed_order.items()}  # + highest derivatives
    for st in statements:
        if st.tree is None or st.form not in ("ode", "map", "name"):
            continue
        if not any(isinstance(node, Call) and node.func in states for node in walk(st.tree)):
            continue
        try:
            st.tree = _rebuild(st.tree, lambda node: _delayed_name(builder, st, node) if isinstance(node, Call)
                               and node.func in states else None)
        except ParseError as err:
            builder.add(st.line, err.column, err.end_column, ERROR, err.message, err.fix)
            st.tree = None


def _delayed_name(builder, st, node: Call) -> Name:
    m = builder.model
    state = node.func
    where = (node.column, node.end)
    if m.kind != "flow":
        raise ParseError(f"delayed values such as {state}(t - 1) belong to flows; this model is a map", *where)
    if len(node.args) != 1:
        raise ParseError(f"a delayed value takes one time: {state}(t - tau)", *where)
    if state not in m.states:  # the derivative the equation gives: x' = f(x'(t - tau)) is a neutral equation
        raise ParseError(f"{state}(t - ...) delays the highest derivative of {state.rstrip(chr(39))} (a neutral "
                         "equation), which is not supported; delay the states themselves", *where)
    arg = node.args[0]
    if isinstance(arg, Name) and arg.name == "t":
        raise ParseError(f"{state}(t) is the current value; write {state}", *where, f"write {state}")
    if not (isinstance(arg, Binary) and arg.op == "-" and isinstance(arg.left, Name) and arg.left.name == "t"
            and arg.left.subscript is None):
        if any(isinstance(n, Name) and n.name == "t" for n in walk(arg)):
            raise ParseError(f"a delay looks back a fixed time: write {state}(t - tau) with tau a number or "
                             "a parameter", arg.column, arg.end)
        raise ParseError(f"{state} is a state, not a function: its delayed value is written {state}(t - tau)",
                         *where)
    amount_tree = arg.right
    constants = {name: p.value for name, p in m.parameters.items()}
    for c in CONSTANTS:
        if c not in getattr(builder, "redefined", ()):
            constants.setdefault(c, float(sp.pi if c == "pi" else sp.E))
    for leaf in walk(amount_tree):
        if isinstance(leaf, Name) and leaf.name not in constants:
            if leaf.name == "t":
                why, kind = "the time", "time-dependent delays are not supported"
            elif leaf.name.rstrip("'") in m.typed_order or leaf.name in m.states:
                why, kind = f"the state {leaf.name}", "state-dependent delays are not supported"
            else:
                why, kind = f"'{leaf.name}', which is not a number or a parameter", "the delay must stay fixed"
            raise ParseError(f"the delay depends on {why}: {kind}; a delay is a number, a parameter or an "
                             "expression of them", leaf.column, leaf.end)
        if isinstance(leaf, Call) and leaf.func in m.typed_order:
            raise ParseError("a delay cannot itself be delayed: state-dependent delays are not supported",
                             leaf.column, leaf.end)
    value = constant_value(amount_tree, constants)
    if not value > 0:
        raise ParseError(f"this delay is {value:g} at the model's values; a delay must be positive",
                         amount_tree.column, amount_tree.end)

    def resolve(name_node: Name):
        if name_node.name in m.parameters:
            return m.symbols[name_node.name]
        return sp.pi if name_node.name == "pi" else sp.E

    amount = to_sympy(amount_tree, resolve)
    key = (state, amount)
    found = builder.lag_keys.get(key)
    if found is None:
        if len(builder.lag_keys) >= MAX_DELAYS:
            raise ParseError(f"more than {MAX_DELAYS} different delayed values in one model", *where)
        label = f"{state}(t - {sp.sstr(amount)})" if not (amount.is_Add) else f"{state}(t - ({sp.sstr(amount)}))"
        symbol = sp.Symbol(label, real=True)
        found = builder.lag_keys[key] = Delay(state, amount, value, symbol, st.line)
        m.delays.append(found)
        builder.lag_symbols[label] = symbol
    return Name(found.label, node.column, node.end)


# ---------------------------------------------------------------- pass 3: histories
def define_history(builder) -> None:
    """Check the ``x(t) = EXPR for t <= 0`` lines and build each history (sympy, in t and parameters)."""
    m = builder.model
    lines = builder.history_lines
    if not lines:
        _derivative_histories(m)
        return
    t = m.time_symbol
    parameters = {m.symbols[name] for name in m.parameters}
    seen: dict[str, int] = {}
    for h in lines:
        if m.kind != "flow":
            builder.add(h.line, h.lhs_col, h.lhs_end, ERROR, "a history x(t) = ... for t <= 0 belongs to flows")
            continue
        if h.name not in m.states:
            close = builder.suggest(h.name, lambda: m.states)
            fix = f"did you mean '{close[0]}'?" if close else None
            builder.add(h.line, h.lhs_col, h.lhs_end, ERROR,
                        f"a history for '{h.name}', which is not a state" + (f"; {fix}" if fix else ""), fix)
            continue
        if h.name in seen:
            builder.add(h.line, h.lhs_col, h.lhs_end, ERROR,
                        f"a second history for '{h.name}' (the first is on line {seen[h.name]})")
            continue
        seen[h.name] = h.line
        if not h.rhs.strip():
            builder.add(h.line, h.rhs_col, h.rhs_col + 1, ERROR, "missing the history's expression")
            continue

        def resolve(node: Name):
            if node.subscript is None and node.name == "t":
                return t
            if node.name in m.parameters:
                return m.symbols[node.name]
            if node.name in CONSTANTS and node.name not in builder.redefined:
                return sp.pi if node.name == "pi" else sp.E
            if node.name in m.derived and m.derived[node.name].free_symbols <= parameters:
                return m.derived[node.name]  # a quantity of the parameters alone
            what = "a state" if node.name in m.states else "not a parameter"
            raise ParseError(f"a history is a function of t and the parameters; '{node.name}' is {what}",
                             node.column, node.end)

        try:
            tree = parse_expression(h.rhs, h.rhs_col)
            expr = to_sympy(tree, resolve, builder.callable_functions)
        except ParseError as err:
            builder.add(h.line, err.column, err.end_column, ERROR, err.message, err.fix)
            continue
        except Exception as exc:  # noqa: BLE001 - as in the model's other expressions
            from orbitdesk.language.model import unexpected_message

            builder.add(h.line, h.rhs_col, h.rhs_col + len(h.rhs), ERROR, unexpected_message(exc))
            continue
        m.history[h.name] = expr
        m.history_lines[h.name] = h.line
        value = history_start_value(m, expr)
        if value is None:
            builder.add(h.line, h.rhs_col, h.rhs_col + len(h.rhs.rstrip()), ERROR,
                        "the history is undefined at t = 0")
            continue
        m.initial.setdefault(h.name, value)  # x(0) written out is used instead (a jump at the start)
    if not m.delays and m.history:
        first = min(m.history_lines.values())
        builder.add(first, 1, 2, WARNING, "no equation uses a delayed value such as x(t - tau), so the history "
                    "is not used")
    _derivative_histories(m)


def _derivative_histories(m) -> None:
    """``x'`` takes d/dt of x's history (and so on up the order) unless it has its own."""
    for base, order in m.typed_order.items():
        for k in range(1, order):
            lower, name = base + "'" * (k - 1), base + "'" * k
            if name not in m.history and lower in m.history:
                m.history[name] = sp.diff(m.history[lower], m.time_symbol)
                value = history_start_value(m, m.history[name])
                if value is not None:
                    m.initial.setdefault(name, value)


def history_start_value(m, expr) -> float | None:
    """The history's value at t = 0 with the model's parameter values (None: undefined)."""
    values = {m.time_symbol: sp.Integer(0), **{m.symbols[n]: sp.Float(p.value) for n, p in m.parameters.items()}}
    try:
        value = float_value(expr.xreplace(values))
    except (ValueError, ArithmeticError, TypeError):
        return None
    return value if value == value and abs(value) != float("inf") else None


def drop_delays(model, expr: sp.Expr) -> sp.Expr:
    """``expr`` with each delayed value replaced by the current value (equilibria do not see delays)."""
    if not model.delays:
        return expr
    return expr.xreplace({d.symbol: model.symbols[d.state] for d in model.delays})


__all__ = ["Delay", "MAX_DELAYS", "define_history", "drop_delays", "history_start_value", "rewrite_delays",
           "split_history_line"]
