"""Events with resets: ``when COND then ASSIGN, ...`` and ``when COND then stop``.

    when x < 0 then x' = -e*x'              # an impact on a stop at x = 0
    when y > h then u = -1                  # a relay: 'u' is a parameter the event changes
    when v > vmax then stop                 # the run ends here
    when x_{i} < 0 then x_{i}' = -e*x_{i}'  for i in 1..N

An event happens when its condition becomes true: ``A < B`` (or ``<=``) when A - B falls through
zero, ``A > B`` (or ``>=``) when it rises through zero. The boundary must be a plane in the states
(both sides linear in the states, coefficients from parameters) so the engine can locate the
crossing on each step's dense output with its one root finder; a condition of t alone (``t > T``)
happens at a time known in advance. Assignments are applied together: every right side is
evaluated with the values before the event, then the left sides (states, x' of a higher-order
state, parameters) take them. ``stop`` ends the run.

This module reads event lines (``parse_event_line``, called while the model's lines are split) and
builds ``ModelEvent``s once the states, parameters and derived quantities are known
(``define_events``). Nothing here evaluates text: trees come from our own parser.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import sympy as sp

from orbitdesk.language.diagnostics import ERROR, ParseError
from orbitdesk.language.expression import EVENT_LINE as _WHEN
from orbitdesk.language.expression import is_event_line  # noqa: F401 - part of this module's interface
from orbitdesk.language.expression import (CONSTANTS, FUNCTIONS, Compare, Logic, parse_condition, parse_expression,
                                           split_top_level_commas)
from orbitdesk.language.families import (expand, index_range, needs_expansion, parse_clause_bounds, resolve_lhs_name,
                                         split_family_clause)
from orbitdesk.language.symbolic import to_sympy

_THEN = re.compile(r"(?<![A-Za-z0-9_])then(?![A-Za-z0-9_'])")
_TARGET = re.compile(r"^([A-Za-z_][A-Za-z0-9_]*(?:(?<=_)\{[^{}]*\})?)('*)$")
MAX_EVENTS = 2_000  # events of one model once family lines are written out
FORMS = "an event reads 'when CONDITION then x = ..., y = ...' or 'when CONDITION then stop'"


@dataclass
class ModelEvent:
    """One event of the model. The condition's boundary is g = 0 with g = left side - right side."""

    line: int
    rule: str  # the line as written (with the index value of a family member)
    direction: int  # +1: happens when g rises through 0 ('>'); -1: when it falls ('<')
    condition: sp.Expr  # g in the model's symbols
    normal: tuple = ()  # plane events: dg/du per state (expressions of the parameters)
    offset: sp.Expr = sp.Integer(0)  # plane events: g at u = 0 (so the plane is normal . u = -offset)
    time_rate: sp.Expr | None = None  # time events (no state in g): g = time_rate * t + time_offset
    time_offset: sp.Expr | None = None
    assignments: list = field(default_factory=list)  # (target name, 'state' | 'parameter', expression)
    stop: bool = False
    column: int = 1
    end: int = 2
    sides: tuple = ()  # (left, comparison, right) as written, in the model's symbols

    @property
    def on_time(self) -> bool:
        return self.time_rate is not None

    def to_dict(self) -> dict:
        return {"line": self.line, "rule": self.rule,
                "becomes_true": "rising" if self.direction > 0 else "falling",
                "kind": "time" if self.on_time else "plane",
                "sets": [target for target, _, _ in self.assignments], "stop": self.stop}


@dataclass
class _RawEvent:
    line: int
    rule: str
    column: int
    end: int
    condition: object  # tree
    actions: list  # (target text, column, end, tree)
    stop: bool
    family: tuple | None = None  # (index name, first tree, last tree)


def parse_event_line(line: int, code: str) -> _RawEvent:
    """Read ``when COND then ACTIONS [for i in A..B]`` (comment already removed); ParseError at the fault."""
    start = _WHEN.match(code).end()
    column = len(code) - len(code.lstrip()) + 1
    end = len(code.rstrip()) + 1
    then = _THEN.search(code, start)
    if then is None:
        raise ParseError(f"{FORMS}; 'then' is missing", column, end)
    code_actions, clause = split_family_clause(code, then.end() - 1)
    family = None
    if clause is not None:
        family = (clause[0], *parse_clause_bounds(clause))
    condition_text = code[start:then.start()]
    if not condition_text.strip():
        raise ParseError("expected a condition between 'when' and 'then', such as x < 0", start + 1, then.start() + 1)
    condition = parse_condition(condition_text, start + 1)
    if isinstance(condition, Logic):
        raise ParseError("an event's condition is one comparison such as x < 0; for several boundaries "
                         "write one event for each", condition.column, condition.end)
    actions, stop = [], False
    for part, offset in split_top_level_commas(code_actions[then.end():]):
        at = then.end() + offset
        col = at + len(part) - len(part.lstrip()) + 1
        text = part.strip()
        if not text:
            raise ParseError("expected an action after 'then': an assignment such as x' = -e*x', or stop",
                             col, col + 1)
        if text == "stop":
            if stop:
                raise ParseError("'stop' is written twice in this event", col, col + 4)
            stop = True
            continue
        if "=" not in text:
            raise ParseError(f"expected an assignment such as x = 0, or stop; found '{text}'", col, col + len(text))
        eq = part.index("=")
        lhs = part[:eq].strip()
        lhs_col = at + len(part[:eq]) - len(part[:eq].lstrip()) + 1
        if not lhs:
            raise ParseError("missing the name to set before '='", at + eq + 1, at + eq + 2)
        if _TARGET.match(lhs) is None:
            raise ParseError(f"an event sets a state, x' of a higher-order state or a parameter; "
                             f"cannot set '{lhs}'", lhs_col, lhs_col + len(lhs))
        rhs = part[eq + 1:]
        if not rhs.strip():
            raise ParseError("missing the value after '='", at + eq + 1, at + eq + 2)
        actions.append((lhs, lhs_col, lhs_col + len(lhs), parse_expression(rhs, at + eq + 2)))
    rule = " ".join(code.split())
    return _RawEvent(line, rule, column, end, condition, actions, stop, family)


def define_events(builder, raw_events, env: dict[str, int]) -> None:
    """Build the model's events (``builder.model.events``); problems become diagnostics."""
    m = builder.model
    for raw in raw_events:
        if m.kind != "flow":
            builder.add(raw.line, raw.column, raw.column + 4, ERROR,
                        "events belong to flows; in a map write the switch into the equation with if(COND, A, B)")
            continue
        if getattr(m, "delays", None):
            builder.add(raw.line, raw.column, raw.column + 4, ERROR,
                        "events in a model with delays (x(t - tau)) are not supported yet")
            continue
        try:
            members = _members(raw, env)
            for value, rule, condition, actions in members:
                event = _event(builder, raw, rule, condition, actions)
                if event is not None:
                    if len(m.events) >= MAX_EVENTS:
                        raise ParseError(f"written out, the model has more than {MAX_EVENTS:,} events",
                                         raw.column, raw.end)
                    m.events.append(event)
        except ParseError as err:
            builder.add(raw.line, err.column, err.end_column, ERROR, err.message, err.fix)


def _members(raw: _RawEvent, env):
    """(index value, rule, condition tree, actions) for each member of a family line, or the one event."""
    if raw.family is None:
        loops, values = (), [None]
    else:
        var, lo, hi = raw.family
        if var in env:
            raise ParseError(f"the index '{var}' is already a parameter; choose another letter", lo.column, hi.end)
        loops, values = (var,), index_range(lo, hi, env)
    out = []
    for value in values:
        scope = env if value is None else {**env, loops[0]: value}
        condition = expand(raw.condition, scope, loops, raw.line) if needs_expansion(raw.condition) or loops \
            else raw.condition
        actions = [(resolve_lhs_name(lhs, col, scope, loops), col, end,
                    expand(tree, scope, loops, raw.line) if needs_expansion(tree) or loops else tree)
                   for lhs, col, end, tree in raw.actions]
        rule = raw.rule if value is None else f"{raw.rule} ({loops[0]} = {value})"
        out.append((value, rule, condition, actions))
    return out


def _event(builder, raw, rule, condition, actions) -> ModelEvent | None:
    m = builder.model
    resolve = _resolver(builder)
    functions = getattr(builder, "callable_functions", m.functions)
    try:
        left = to_sympy(condition.left, resolve, functions)
        right = to_sympy(condition.right, resolve, functions)
    except ParseError as err:
        builder.add(raw.line, err.column, err.end_column, ERROR, err.message, err.fix)
        return None
    assert isinstance(condition, Compare)
    g = left - right
    direction = 1 if condition.op in (">", ">=") else -1
    event = ModelEvent(raw.line, rule, direction, g, stop=raw.stop, column=raw.column, end=raw.end,
                       sides=(left, condition.op, right))
    if not _boundary(builder, m, event, condition):
        return None
    seen: dict[str, int] = {}
    for target, col, end, tree in actions:
        kind = _target_kind(builder, m, raw.line, target, col, end)
        if kind is None:
            continue
        if target in seen:
            builder.add(raw.line, col, end, ERROR, f"'{target}' is set twice in this event")
            continue
        seen[target] = col
        try:
            value = to_sympy(tree, resolve, functions)
        except ParseError as err:
            builder.add(raw.line, err.column, err.end_column, ERROR, err.message, err.fix)
            continue
        event.assignments.append((target, kind, value))
    if len(event.assignments) != len(actions):
        return None
    return event


def _state_symbols(m):
    return [m.symbols[s] for s in m.states]


def _boundary(builder, m, event: ModelEvent, condition) -> bool:
    """Sort the boundary g = 0 into a plane in the states or a time; plain words when it is neither."""
    g = event.condition
    t = m.time_symbol
    states = _state_symbols(m)
    at = (condition.column, condition.end)
    normal = [sp.diff(g, s) for s in states]
    held = set(states) | {t}
    if any(c.free_symbols & held for c in normal):
        builder.add(event.line, *at, ERROR,
                    "an event's boundary must be straight: both sides linear in the states (such as x < 0 or "
                    "x - y > h, with parameters as coefficients), so the crossing can be located exactly")
        return False
    rest = g.xreplace({s: sp.Integer(0) for s in states})
    if any(c != 0 for c in normal):
        if t in rest.free_symbols:
            builder.add(event.line, *at, ERROR,
                        "an event's boundary cannot move with t when it holds states; compare the states with "
                        "parameters, or use a condition on t alone (such as t > T)")
            return False
        event.normal, event.offset = tuple(normal), rest
        return True
    rate = sp.diff(g, t)
    if rate == 0:
        builder.add(event.line, *at, ERROR,
                    "this condition holds neither states nor t, so it never changes during a run")
        return False
    if t in rate.free_symbols:
        builder.add(event.line, *at, ERROR,
                    "a condition on t alone must be linear in t, such as t > T, so its time is known")
        return False
    event.time_rate, event.time_offset = rate, g.xreplace({t: sp.Integer(0)})
    return True


def _target_kind(builder, m, line, target, col, end) -> str | None:
    if target in m.states:
        return "state"
    if target in m.parameters:
        if target in m.structural:
            builder.add(line, col, end, ERROR, f"'{target}' sets the size of a family, so an event cannot change it")
            return None
        return "parameter"
    base = target.rstrip("'")
    if base in m.typed_order:
        builder.add(line, col, end, ERROR,
                    f"{target} is given by the equation of {base}; an event sets the states "
                    f"({', '.join(s for s in m.states if s.rstrip(chr(39)) == base)})")
    elif target in m.derived or target in builder.broken:
        builder.add(line, col, end, ERROR, f"'{target}' is a derived quantity; an event sets states and parameters")
    elif target in m.functions or target in FUNCTIONS or target in CONSTANTS or target in ("t", "n"):
        builder.add(line, col, end, ERROR, f"'{target}' cannot be set by an event; set a state or a parameter")
    else:
        close = builder.suggest(target, lambda: [*m.states, *m.parameters])
        fix = f"did you mean '{close[0]}'?" if close else None
        builder.add(line, col, end, ERROR, f"'{target}' is neither a state nor a parameter"
                    + (f"; {fix}" if fix else ""), fix)
    return None


def _resolver(builder):
    m = builder.model

    def resolve(node):
        name = node.name
        if node.subscript is not None:
            raise ParseError(f"subscripts such as [{node.subscript}] belong to maps", node.column, node.end)
        if name in m.states or name in m.parameters:
            return m.symbols[name]
        base = name.rstrip("'")
        if base in m.typed_order and len(name) - len(base) == m.typed_order[base]:
            top = base + "'" * (m.typed_order[base] - 1)
            if top in m.equations:
                return m.equations[top]
            raise ParseError(f"'{name}' cannot be used: the equation of {base} has an error", node.column, node.end)
        if name in m.derived:
            return m.derived[name]
        if name in builder.broken or name in getattr(builder, "cyclic", ()):
            raise ParseError(f"'{name}' cannot be used: its definition has an error", node.column, node.end)
        fixed = builder.fixed_name(node)
        if fixed is not None:
            return fixed
        if node.origin:
            raise ParseError(f"{name} is not defined: {node.origin}", node.column, node.end)
        close = builder.suggest(name, lambda: [*m.states, *m.parameters, *m.derived, *CONSTANTS])
        fix = f"did you mean '{close[0]}'?" if close else None
        raise ParseError(f"unknown name '{name}'" + (f"; {fix}" if fix else ""), node.column, node.end, fix)

    return resolve


__all__ = ["ModelEvent", "is_event_line", "parse_event_line", "define_events", "MAX_EVENTS"]
