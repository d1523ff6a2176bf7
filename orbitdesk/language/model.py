"""Model text -> parsed model with diagnostics.

One statement per line; ``#`` starts a comment. The form of the left side says what a line is:
``x' = ...`` / ``x'' = ...`` (flow equations), ``x[n+1] = ...`` (map equations), ``x(0) = ...`` /
``x'(0) = ...`` / ``x[0] = ...`` (initial values), ``NAME = CONSTANT [in [LO, HI]]`` (parameters)
``NAME(ARG, ...) = EXPR`` (functions, inlined where they are called) and ``NAME = EXPR`` (derived
quantities). A line ending in ``for i in A..B`` stands for one line per index value (families of
states, see ``families``).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field, replace
from difflib import get_close_matches

import sympy as sp

from orbitdesk.language import delays
from orbitdesk.language.diagnostics import ERROR, INFO, WARNING, Diagnostic, ParseError
from orbitdesk.language.expression import (CONSTANTS, FUNCTIONS, KEYWORDS, MAX_LINE_LENGTH, NONSMOOTH_FUNCTIONS, Call, If, Name,
                         parse_expression, split_top_level_commas, walk)
from orbitdesk.language.families import expand_statements, parse_clause_bounds, split_family_clause
from orbitdesk.language.events import ModelEvent, define_events, is_event_line, parse_event_line
from orbitdesk.language.functions import define_functions, function_nonsmooth
from orbitdesk.language import noise
from orbitdesk.language.symbolic import ModelFunction, Span, constant_value, substitute, to_sympy, tree_depth, tree_size

MAX_MODEL_CHARS = 1_000_000
MAX_STATEMENTS = 5_000
MAX_ORDER = 9
MAX_EXPRESSION_SIZE = 100_000  # nodes of one equation after derived quantities are put in
# levels of one equation after derived quantities are put in: sympy differentiates, substitutes and
# prints recursively (about five frames per level), so this keeps a model's symbolic work well within
# Python's default recursion limit; generated code stays flat at any depth (system/flat_code.py)
MAX_TREE_DEPTH = 80
MAX_EXPANDED_STATEMENTS = 20_000  # statements once family lines are written out
RESERVED_NAMES = frozenset({"sum", "if"})
SUGGESTION_BUDGET = 20_000  # name comparisons spent on did-you-mean fixes per model

FLOW, MAP = "flow", "map"

_IDENT = r"[A-Za-z_][A-Za-z0-9_]*"
_FIDENT = _IDENT + r"(?:(?<=_)\{[^{}]*\})?"  # a name, or a family member such as x_{i+1}
_LHS_FORMS = [
    ("ode", re.compile(rf"^({_FIDENT})('+)$")),
    ("init", re.compile(rf"^({_FIDENT})('*)\s*\(\s*0\s*\)$")),
    ("map", re.compile(rf"^({_FIDENT})\s*\[\s*n\s*\+\s*1\s*\]$")),
    ("mapinit", re.compile(rf"^({_FIDENT})\s*\[\s*0\s*\]$")),
    ("func", re.compile(rf"^({_IDENT})\s*\(\s*({_IDENT}(?:\s*,\s*{_IDENT})*)\s*\)$")),
    ("name", re.compile(rf"^({_FIDENT})$")),
]
_RANGE = re.compile(r"\bin\s*\[(.*)\]\s*$")
_ANGLE = re.compile(rf"^(\s*)angle\s+({_IDENT}'*(?:\s*,\s*{_IDENT}'*)*)\s*$")  # angle theta, phi


def derivative_name(base: str, order: int) -> str:
    return base + "'" * order


@dataclass
class ParameterInfo:
    name: str
    value: float
    lo: float | None = None
    hi: float | None = None
    line: int = 0


@dataclass
class ParsedModel:
    text: str
    kind: str | None = None
    states: list[str] = field(default_factory=list)
    equations: dict[str, sp.Expr] = field(default_factory=dict)  # first-order right-hand sides
    parameters: dict[str, ParameterInfo] = field(default_factory=dict)
    initial: dict[str, float] = field(default_factory=dict)
    derived: dict[str, sp.Expr] = field(default_factory=dict)
    symbols: dict[str, sp.Symbol] = field(default_factory=dict)
    time_symbol: sp.Symbol | None = None
    nonsmooth: list[str] = field(default_factory=list)
    diagnostics: list[Diagnostic] = field(default_factory=list)
    functions: dict[str, ModelFunction] = field(default_factory=dict)
    function_arguments: dict[str, tuple[str, ...]] = field(default_factory=dict)  # as written
    structural: set[str] = field(default_factory=set)  # parameters that set family ranges
    equation_lines: dict[str, int] = field(default_factory=dict)
    equation_spans: dict[str, tuple[int, int, int]] = field(default_factory=dict)  # state -> line, col, end
    typed_order: dict[str, int] = field(default_factory=dict)  # base name -> order typed
    angles: list[str] = field(default_factory=list)  # states declared angles: wrapped to (-pi, pi]
    noise_sources: list[str] = field(default_factory=list)  # white-noise sources (noise.py); equations = drift
    diffusion: dict[str, dict[str, sp.Expr]] = field(default_factory=dict)  # state -> source -> coefficient
    delays: list = field(default_factory=list)  # delays.Delay: each x(t - tau) the equations use
    history: dict[str, sp.Expr] = field(default_factory=dict)  # state -> its value for t <= 0 (an expr of t)
    history_lines: dict[str, int] = field(default_factory=dict)  # state -> line of its history as written
    events: list[ModelEvent] = field(default_factory=list)  # 'when COND then ...' (events.py)

    @property
    def ok(self) -> bool:
        return not any(d.severity == ERROR for d in self.diagnostics)

    @property
    def errors(self) -> list[Diagnostic]:
        return [d for d in self.diagnostics if d.severity == ERROR]

    @property
    def stochastic(self) -> bool:
        return bool(self.diffusion)

    @property
    def autonomous(self) -> bool:
        t = self.time_symbol
        return t is None or not any(t in e.free_symbols for e in self.equations.values())


@dataclass
class _Statement:
    line: int
    form: str
    name: str
    primes: int
    lhs_col: int
    lhs_end: int
    rhs: str
    rhs_col: int
    tree: object = None
    range_trees: tuple = ()
    range_col: int = 0
    family: tuple | None = None  # (index name, first-index tree, last-index tree) of 'for i in A..B'
    arguments: tuple = ()  # of a function definition


class _Builder:
    def __init__(self, text: str):
        self.model = ParsedModel(text=text)
        self.diags = self.model.diagnostics
        self.cyclic: set[str] = set()  # definitions found in a loop (each reported once)
        self.angle_lines: list[tuple[int, int, int, str]] = []  # (line, column, end, name) of "angle NAME"
        self.event_lines: list = []  # 'when ... then ...' lines, read by events.py
        self.suggestion_budget = SUGGESTION_BUDGET
        self.history_lines, self.lag_symbols, self.lag_keys = [], {}, {}  # delays.py: x(t) = ... for t <= 0, x(t - tau)

    def add(self, line, col, end, severity, message, fix=None):
        self.diags.append(Diagnostic(line, col, max(end, col + 1), severity, message, fix))

    def suggest(self, name, candidates) -> list[str]:
        """The closest of ``candidates()`` to ``name`` (a did-you-mean fix), within a per-model budget.

        The budget bounds the name comparisons spent on one model, so thousands of unknown names
        among thousands of known ones stay quick; past it, errors simply carry no suggestion.
        """
        if self.suggestion_budget <= 0:
            return []
        names = candidates()
        self.suggestion_budget -= len(names)
        return get_close_matches(name, names, n=1, cutoff=0.6) if self.suggestion_budget >= 0 else []

    def unexpected(self, st: _Statement, exc: Exception) -> None:
        """A failure of the symbolic library on this line: an error diagnostic instead of a crash."""
        start = st.rhs_col + len(st.rhs) - len(st.rhs.lstrip())
        self.add(st.line, start, st.rhs_col + len(st.rhs.rstrip()), ERROR, unexpected_message(exc))

    # ------------------------------------------------------------ pass 1: statements
    def split_lines(self, text: str) -> list[_Statement]:
        statements = []
        lines = text.split("\n")
        if len(lines) > MAX_STATEMENTS:
            self.add(MAX_STATEMENTS + 1, 1, 2, ERROR, f"the model has more than {MAX_STATEMENTS} lines")
            lines = lines[:MAX_STATEMENTS]
        for number, raw in enumerate(lines, start=1):
            raw = raw.rstrip("\r")
            if len(raw) > MAX_LINE_LENGTH:
                self.add(number, 1, 2, ERROR, f"line is longer than {MAX_LINE_LENGTH} characters")
                continue
            code = raw.split("#", 1)[0]
            if not code.strip():
                continue
            if delays.split_history_line(self, number, code):
                continue
            angle = _ANGLE.match(code)
            if angle:
                col = len(angle.group(1)) + len("angle") + 1
                for name in angle.group(2).split(","):
                    start = code.index(name.strip(), col - 1) + 1
                    self.angle_lines.append((number, start, start + len(name.strip()), name.strip()))
                    col = start + len(name.strip())
                continue
            if is_event_line(code):
                try:
                    self.event_lines.append(parse_event_line(number, code))
                except ParseError as err:
                    self.add(number, err.column, err.end_column, ERROR, err.message, err.fix)
                continue
            if "=" not in code:
                col = len(code) - len(code.lstrip()) + 1
                self.add(number, col, len(code.rstrip()) + 1, ERROR,
                         "expected a statement such as x' = ..., x[n+1] = ..., x(0) = ..., name = ... or when COND then ...")
                continue
            eq = code.index("=")
            code, clause = split_family_clause(code, eq)
            family = None
            if clause is not None:
                try:
                    family = (clause[0], *parse_clause_bounds(clause))
                except ParseError as err:
                    self.add(number, err.column, err.end_column, ERROR, err.message, err.fix)
                    continue
            lhs_raw = code[:eq]
            lhs = lhs_raw.strip()
            lhs_col = len(lhs_raw) - len(lhs_raw.lstrip()) + 1
            lhs_end = lhs_col + len(lhs)
            if not lhs:
                self.add(number, eq + 1, eq + 2, ERROR, "missing the left side of '='")
                continue
            for form, pattern in _LHS_FORMS:
                m = pattern.match(lhs)
                if m and (m.group(1) in KEYWORDS or m.group(1) in RESERVED_NAMES):
                    self.add(number, lhs_col, lhs_col + len(m.group(1)), ERROR,
                             f"'{m.group(1)}' is a reserved word and cannot be a name; choose another")
                    break
                if m:
                    primes = len(m.group(2)) if form in ("ode", "init") else 0
                    arguments = tuple(a.strip() for a in m.group(2).split(",")) if form == "func" else ()
                    statements.append(_Statement(number, form, m.group(1), primes, lhs_col, lhs_end,
                                                 code[eq + 1:], eq + 2, family=family, arguments=arguments))
                    break
            else:
                self.add(number, lhs_col, lhs_end, ERROR,
                         f"cannot read the left side '{lhs}'; expected x', x'', x[n+1], x(0), x[0], "
                         "f(a, b) or a name")
        return statements

    def parse_rhs(self, st: _Statement) -> bool:
        text = st.rhs
        if st.form == "name":
            m = _RANGE.search(text)
            if m:
                st.range_col = st.rhs_col + m.start()
                inner, inner_col = m.group(1), st.rhs_col + m.start(1)
                parts = split_top_level_commas(inner)
                if len(parts) != 2:
                    self.add(st.line, st.range_col, st.rhs_col + m.end(), ERROR,
                             "a range is written 'in [LO, HI]'")
                    return False
                try:
                    st.range_trees = tuple(parse_expression(p, inner_col + off) for p, off in parts)
                except ParseError as err:
                    self.add(st.line, err.column, err.end_column, ERROR, err.message, err.fix)
                    return False
                text = text[:m.start()]
        if not text.strip():
            self.add(st.line, st.rhs_col, st.rhs_col + 1, ERROR, "missing the right side of '='")
            return False
        try:
            st.tree = parse_expression(text, st.rhs_col)
        except ParseError as err:
            self.add(st.line, err.column, err.end_column, ERROR, err.message, err.fix)
            return False
        return True

    # ------------------------------------------------------------ main
    def build(self) -> ParsedModel:
        text = self.model.text
        if len(text) > MAX_MODEL_CHARS:
            self.add(1, 1, 2, ERROR, f"the model is larger than {MAX_MODEL_CHARS} characters")
            return self.model
        statements = self.split_lines(text)
        for st in statements:
            self.parse_rhs(st)
        statements = expand_statements(self, statements)
        noise.mark(self, statements)
        self.classify(statements)
        if self.model.kind is None:
            if not any(d.severity == ERROR for d in self.diags):
                self.add(1, 1, 2, ERROR, "no equations yet: write x' = ... for a flow or x[n+1] = ... for a map")
            return self.model
        self.define_states(statements)
        self.define_parameters(statements)
        delays.rewrite_delays(self, statements)
        define_functions(self, statements)
        self.resolve_expressions(statements)
        delays.define_history(self)
        self.define_initial(statements)
        self.define_angles()
        define_events(self, self.event_lines, getattr(self, "integer_constants", {}))
        return self.model

    def define_angles(self):
        """``angle NAME``: the state NAME is an angle, shown and compared wrapped to (-pi, pi]."""
        m = self.model
        for line, col, end, name in self.angle_lines:
            if name not in m.states:
                close = self.suggest(name, lambda: m.states)
                fix = f"did you mean '{close[0]}'?" if close else None
                self.add(line, col, end, ERROR, f"'{name}' is not a state, so it cannot be an angle"
                         + (f"; {fix}" if fix else ""), fix)
            elif name not in m.angles:
                m.angles.append(name)

    def classify(self, statements):
        flows = [s for s in statements if s.form in ("ode", "init")]
        maps = [s for s in statements if s.form in ("map", "mapinit")]
        if flows and maps:
            first_flow, first_map = flows[0], maps[0]
            later = first_map if first_map.line > first_flow.line else first_flow
            self.add(later.line, later.lhs_col, later.lhs_end, ERROR,
                     "a model is either a flow (x' = ...) or a map (x[n+1] = ...); this line mixes the two kinds")
        eqs = [s for s in statements if s.form in ("ode", "map")]
        if eqs:
            self.model.kind = FLOW if eqs[0].form == "ode" else MAP
        self.model.time_symbol = sp.Symbol("t" if self.model.kind == FLOW else "n", real=True)

    def define_states(self, statements):
        m = self.model
        eq_form = "ode" if m.kind == FLOW else "map"
        seen: dict[str, _Statement] = {}
        for st in statements:
            if st.form != eq_form:
                continue
            if st.name in seen:
                self.add(st.line, st.lhs_col, st.lhs_end, ERROR,
                         f"a second equation for '{st.name}' (the first is on line {seen[st.name].line})")
                continue
            if st.name in FUNCTIONS or st.name in ("t", "n"):
                self.add(st.line, st.lhs_col, st.lhs_end, ERROR, f"'{st.name}' is reserved and cannot be a state")
                continue
            order = st.primes if m.kind == FLOW else 1
            if order > MAX_ORDER:
                self.add(st.line, st.lhs_col, st.lhs_end, ERROR, f"derivatives above order {MAX_ORDER} are not supported")
                continue
            seen[st.name] = st
            m.typed_order[st.name] = order
            names = [derivative_name(st.name, k) for k in range(order)] if m.kind == FLOW else [st.name]
            for name in names:
                m.states.append(name)
                m.symbols[name] = sp.Symbol(name, real=True)
                m.equation_lines[name] = st.line
                m.equation_spans[name] = (st.line, st.lhs_col, st.lhs_end)

    def define_parameters(self, statements):
        m = self.model
        constants = {"pi": math.pi, "e": math.e}
        self.redefined: set[str] = set()
        names_seen: dict[str, int] = {}
        for st in statements:
            if st.form != "name":
                continue
            if st.name in names_seen:
                self.add(st.line, st.lhs_col, st.lhs_end, ERROR,
                         f"'{st.name}' is already defined on line {names_seen[st.name]}")
                st.tree = None
                continue
            names_seen[st.name] = st.line
            reserved = "t" if m.kind == FLOW else "n"
            if st.name in FUNCTIONS or st.name == reserved:
                self.add(st.line, st.lhs_col, st.lhs_end, ERROR, f"'{st.name}' is reserved and cannot be redefined")
                st.tree = None
                continue
            if st.name in m.typed_order or st.name in m.symbols:
                self.add(st.line, st.lhs_col, st.lhs_end, ERROR, f"'{st.name}' is already a state")
                st.tree = None
                continue
            if st.name in CONSTANTS:
                self.redefined.add(st.name)
                self.add(st.line, st.lhs_col, st.lhs_end, WARNING,
                         f"this redefines the constant {st.name}; the model's value is used from here on")
        for name in self.redefined:
            constants.pop(name, None)
        for st in statements:
            if st.form != "name" or st.tree is None or not _is_constant(st.tree, constants):
                if st.form == "name" and st.range_trees and st.tree is not None:
                    self.add(st.line, st.range_col, st.range_col + 2, ERROR,
                             "a range 'in [LO, HI]' belongs to a parameter with a constant value")
                continue
            try:
                value = constant_value(st.tree, constants)
                lo = hi = None
                if st.range_trees:
                    lo, hi = (constant_value(tree, constants) for tree in st.range_trees)
            except ParseError as err:
                self.add(st.line, err.column, err.end_column, ERROR, err.message)
                st.tree = None
                continue
            m.parameters[st.name] = ParameterInfo(st.name, value, lo, hi, st.line)
            m.symbols[st.name] = sp.Symbol(st.name, real=True)
            st.form = "param"
            if lo is not None and not lo < hi:
                self.add(st.line, st.range_col, st.range_col + 2, ERROR, f"the range [{lo:g}, {hi:g}] is empty")
            elif lo is not None and not lo <= value <= hi:
                value_text = st.rhs[:st.range_col - st.rhs_col]
                start = st.rhs_col + len(value_text) - len(value_text.lstrip())
                self.add(st.line, start, st.rhs_col + len(value_text.rstrip()), WARNING,
                         f"the value {value:g} lies outside its range [{lo:g}, {hi:g}]",
                         f"widen the range or set a value inside it")

    def resolve_expressions(self, statements):
        m = self.model
        derived_statements = [s for s in statements if s.form == "name" and s.tree is not None]
        for st in derived_statements:
            m.symbols.setdefault(st.name, sp.Symbol(st.name, real=True))
        derived_names = {s.name for s in derived_statements}
        self.broken = {s.name: s.line for s in statements if s.form == "name" and s.tree is None}
        # placeholders for x^(k) where k is the typed order: "the right side of x's equation"
        self.top_placeholders: dict[str, sp.Symbol] = {}
        self.depends: dict[str, set[str]] = {}
        raw: dict[str, sp.Expr] = {}
        lines: dict[str, _Statement] = {}
        eq_form = "ode" if m.kind == FLOW else "map"
        for st in statements:
            if st.tree is None:
                continue
            if st.form == eq_form and m.equation_lines.get(
                    st.name if m.kind == MAP else derivative_name(st.name, 0)) == st.line:
                key = f"eq:{st.name}"
            elif st.form == "name" and st.name in derived_names:
                key = st.name
            else:
                continue
            expr = self.expression(st, derived_names)
            if expr is not None:
                raw[key] = expr
                lines[key] = st
        order = self.topological(raw, lines, derived_names)
        resolved: dict[str, sp.Expr] = {}
        sizes: dict = {}
        for key in order:
            expr = raw[key]
            subs = {}
            for sym in expr.free_symbols:
                dep = self.placeholder_key(sym, derived_names)
                if dep is None:
                    continue
                if dep not in resolved:
                    break  # (topological order) the definition failed or is in a loop: reported already
                subs[sym] = resolved[dep]
            else:
                self.resolve_one(key, expr, subs, lines[key], resolved, sizes)
        for key, expr in resolved.items():
            if key.startswith("eq:"):
                base = key[3:]
                order_k = m.typed_order[base]
                if m.kind == FLOW:
                    for k in range(order_k - 1):
                        m.equations[derivative_name(base, k)] = m.symbols[derivative_name(base, k + 1)]
                    top = derivative_name(base, order_k - 1)
                    m.equations[top] = noise.split(m, top, expr, m.equation_lines[top], self)
                else:
                    m.equations[base] = expr
            else:
                m.derived[key] = noise.drop(expr)
        m.equations = {s: m.equations[s] for s in m.states if s in m.equations}  # in state order

    def resolve_one(self, key, expr, subs, st, resolved, sizes):
        """Put the finished definitions ``subs`` into ``expr``; on success it joins ``resolved``."""
        where = Span(st.rhs_col + len(st.rhs) - len(st.rhs.lstrip()), st.rhs_col + len(st.rhs.rstrip()))
        try:
            value = substitute(expr, subs, where) if subs else expr
        except ParseError as err:
            self.add(st.line, err.column, err.end_column, ERROR, err.message + " once the definitions it uses are put in")
            return
        except Exception as exc:  # noqa: BLE001 - as in expression()
            self.unexpected(st, exc)
            return
        if subs and tree_size(value, sizes) > MAX_EXPRESSION_SIZE:
            self.add(st.line, where.column, where.end, ERROR,
                     f"with the definitions it uses put in, this expression has more than "
                     f"{MAX_EXPRESSION_SIZE:,} parts; simplify the chain of definitions")
            return
        if tree_depth(value) > MAX_TREE_DEPTH:
            self.add(st.line, where.column, where.end, ERROR,
                     ("with the definitions it uses put in, this" if subs else "this")
                     + f" expression is nested more than {MAX_TREE_DEPTH} levels deep (the symbolic work on it "
                       f"would recurse too deep); " + ("shorten the chain of definitions" if subs else
                                                        "split it with derived quantities"))
            return
        resolved[key] = value

    def placeholder_key(self, sym, derived_names):
        name = sym.name
        if sym in self.top_placeholders.values():
            return f"eq:{name.split(chr(39))[0]}"
        if name in derived_names and sym == self.model.symbols.get(name):  # equal, not identical: sympy caches
            return name
        return None

    def expression(self, st: _Statement, derived_names: set[str]):
        m = self.model
        deps: set[str] = set()
        kind = m.kind

        def resolve(node: Name):
            name, sub = node.name, node.subscript
            if name.startswith(noise.MARK):
                return noise.symbol(name)
            if name in self.lag_symbols:
                return self.lag_symbols[name]
            base = name.rstrip("'")
            primes = len(name) - len(base)
            if sub is not None:
                if kind == FLOW:
                    raise ParseError(f"subscripts such as [{sub}] belong to maps; this model is a flow",
                                     node.column, node.end)
                if primes:
                    raise ParseError("primes belong to flows; this model is a map", node.column, node.end)
                if sub == "n+1":
                    raise ParseError(f"{base}[n+1] can only appear on the left of '='", node.column, node.end)
                if sub == "0":
                    raise ParseError(f"{base}[0] is an initial value; use {base} or {base}[n] in expressions",
                                     node.column, node.end)
                if base not in m.typed_order:
                    raise ParseError(f"'{base}' is used as a state but has no equation {base}[n+1] = ...",
                                     node.column, node.end, f"add a line {base}[n+1] = ...")
                return m.symbols[base]
            if primes:
                if kind == MAP:
                    raise ParseError("primes belong to flows; this model is a map", node.column, node.end)
                if base not in m.typed_order:
                    raise ParseError(f"'{base}' is used as a state but has no equation {base}' = ...",
                                     node.column, node.end, f"add a line {base}' = ...")
                typed = m.typed_order[base]
                if primes < typed:
                    return m.symbols[name]
                if primes == typed:
                    deps.add(f"eq:{base}")
                    return self.top_placeholders.setdefault(base, sp.Symbol(name + "\u2020", real=True))
                raise ParseError(f"{name} is a higher derivative than the equation for {base} gives",
                                 node.column, node.end)
            if name in m.symbols and (name in m.parameters or name in m.states):
                return m.symbols[name]
            if name in derived_names:
                deps.add(name)
                return m.symbols[name]
            fixed = self.fixed_name(node)
            if fixed is not None:
                return fixed
            if name in ("t", "n"):
                other = "flows" if name == "t" else "maps"
                raise ParseError(f"'{name}' is the time of {other}; this model is a {kind}", node.column, node.end)
            if name in self.broken:
                raise ParseError(f"'{name}' cannot be used: its definition on line {self.broken[name]} has an error",
                                 node.column, node.end)
            if node.origin:
                member = re.sub(r"_(\d+)('*)$", r"_{\1}\2", name)
                raise ParseError(f"{member} is not defined: {node.origin}", node.column, node.end)
            close = self.suggest(name, lambda: [*m.states, *m.parameters, *derived_names, *CONSTANTS])
            fix = f"did you mean '{close[0]}'?" if close else None
            message = f"unknown name '{name}'" + (f"; {fix}" if fix else "")
            raise ParseError(message, node.column, node.end, fix)

        try:
            expr = to_sympy(st.tree, resolve, self.callable_functions)
        except ParseError as err:
            self.add(st.line, err.column, err.end_column, ERROR, err.message, err.fix)
            return None
        except Exception as exc:  # noqa: BLE001 - sympy's own failures become a diagnostic, never a crash
            self.unexpected(st, exc)
            return None
        self.note_nonsmooth(st.line, st.tree)
        key = f"eq:{st.name}" if st.form in ("ode", "map") else st.name
        self.depends[key] = deps
        return expr

    def fixed_name(self, node):
        """The time (t or n), pi and e as sympy objects; a function named without a call is an error;
        None for any other name."""
        m, name = self.model, node.name
        if name == m.time_symbol.name:
            return m.time_symbol
        if name in CONSTANTS and name not in self.redefined:
            return sp.pi if name == "pi" else sp.E
        if name in FUNCTIONS or name in m.functions:
            raise ParseError(f"{name} is a function; call it as {name}(...)", node.column, node.end)
        return None

    def note_nonsmooth(self, line, tree):
        """Warn at each non-smooth call or if() of ``tree``; calls of model functions pass on theirs."""
        m = self.model
        for node in walk(tree):
            if isinstance(node, Call) and node.func in m.functions:
                for func in function_nonsmooth(self, node.func):
                    if func not in m.nonsmooth:
                        m.nonsmooth.append(func)
                continue
            func = "if" if isinstance(node, If) else node.func if isinstance(node, Call) else None
            if func is None or func not in NONSMOOTH_FUNCTIONS and func != "if":
                continue
            if func not in m.nonsmooth:
                m.nonsmooth.append(func)
            self.add(line, node.column, node.column + len(func), WARNING,
                     f"{func}() is not smooth: the Jacobian is undefined where it switches, "
                     "which affects equilibria, cycles and Lyapunov exponents there")

    def topological(self, raw, lines, derived_names) -> list[str]:
        order, state = [], {}

        for start in raw:
            if start in state:
                continue
            stack = [(start, iter(sorted(self.depends.get(start, ()))))]
            state[start] = 1
            path = [start]
            depth = {start: 0}
            while stack:
                node, children = stack[-1]
                advanced = False
                for child in children:
                    if child not in raw:
                        continue
                    if state.get(child) == 1:
                        self.report_cycle(path[depth[child]:], lines)
                        continue
                    if child not in state:
                        state[child] = 1
                        depth[child] = len(path)
                        path.append(child)
                        stack.append((child, iter(sorted(self.depends.get(child, ())))))
                        advanced = True
                        break
                if not advanced:
                    stack.pop()
                    path.pop()
                    state[node] = 2
                    order.append(node)
        return [k for k in order if k not in self.cyclic]

    def report_cycle(self, cycle, lines):
        new = [key for key in cycle if key not in self.cyclic]
        if not new:
            return  # one diagnostic per definition, however many loops pass through it
        self.cyclic.update(new)
        names = [k[3:] + "'" * self.model.typed_order.get(k[3:], 0) if k.startswith("eq:") else k for k in cycle]
        loop = " -> ".join(names + [names[0]])
        for key in new:
            st = lines[key]
            self.add(st.line, st.lhs_col, st.lhs_end, ERROR, f"these definitions depend on each other in a loop: {loop}")

    def define_initial(self, statements):
        m = self.model
        constants = {name: p.value for name, p in m.parameters.items()}
        if "pi" not in self.redefined:
            constants.setdefault("pi", math.pi)
        if "e" not in self.redefined:
            constants.setdefault("e", math.e)
        init_form = "init" if m.kind == FLOW else "mapinit"
        wrong_form = "mapinit" if m.kind == FLOW else "init"
        set_by: dict[str, int] = {}
        for st in statements:
            if st.form == wrong_form:
                continue  # already reported as mixing kinds
            if st.form != init_form:
                continue
            target = derivative_name(st.name, st.primes) if m.kind == FLOW else st.name
            if target not in m.states:
                close = self.suggest(target, lambda: m.states)
                fix = f"did you mean '{close[0]}'?" if close else None
                self.add(st.line, st.lhs_col, st.lhs_end, ERROR,
                         f"initial value for '{target}', which is not a state" + (f"; {fix}" if fix else ""), fix)
                continue
            if target in set_by:
                self.add(st.line, st.lhs_col, st.lhs_end, ERROR,
                         f"a second initial value for '{target}' (the first is on line {set_by[target]})")
                continue
            if st.tree is None:
                continue
            try:
                value = constant_value(st.tree, constants, self.callable_functions)
            except ParseError as err:
                message = err.message
                if "is not a constant" in message:
                    message += "; initial values use numbers, pi, e and parameters"
                self.add(st.line, err.column, err.end_column, ERROR, message)
                continue
            set_by[target] = st.line
            m.initial[target] = value
        missing: dict[tuple, list[str]] = {}
        for name in m.states:
            if name not in m.initial:
                m.initial[name] = 0.0
                missing.setdefault(m.equation_spans[name], []).append(name)
        for (line, col, end), names in missing.items():
            forms = [f"{name}(0)" if m.kind == FLOW else f"{name}[0]" for name in names]
            if len(names) <= 2:
                for name, form in zip(names, forms):
                    self.add(line, col, end, INFO, f"no initial value for {name}; it starts at 0 (write {form} = ...)")
            else:  # a family line: one note for all its members
                self.add(line, col, end, INFO, f"no initial values for {names[0]} ... {names[-1]} "
                         f"({len(names)} states); they start at 0 (write {forms[0]} = ... for i in ...)")


def _is_constant(tree, constants) -> bool:
    """Only numbers, the given constants and built-in functions (a model function makes it derived)."""
    return all((not isinstance(node, Name) or (node.name in constants and node.subscript is None))
               and (not isinstance(node, Call) or node.func in FUNCTIONS)
               for node in walk(tree))


def parse_model(text: str) -> ParsedModel:
    """Parse model text into a ParsedModel; problems become diagnostics, never exceptions."""
    if "\x00" in text:
        line = text[:text.index("\x00")].count("\n") + 1
        col = text.index("\x00") - (text.rfind("\n", 0, text.index("\x00")) + 1) + 1
        model = ParsedModel(text=text)
        model.diagnostics.append(Diagnostic(line, col, col + 1, ERROR, "NUL character in the text"))
        return model
    try:
        model = _Builder(text).build()
    except Exception as exc:  # noqa: BLE001 - the last guard: a model that cannot be read is an error, not a crash
        model = ParsedModel(text=text)
        model.diagnostics.append(Diagnostic(1, 1, 2, ERROR, unexpected_message(exc)))
    unique = {(d.line, d.column, d.end_column, d.severity, d.message): d for d in model.diagnostics}
    model.diagnostics[:] = sorted(unique.values(), key=lambda d: (d.line, d.column))  # a family repeats its line
    return model


def unexpected_message(exc: BaseException) -> str:
    """Plain words for a failure inside the symbolic library (not a mistake in the text as such)."""
    if isinstance(exc, RecursionError):
        return "this expression is nested too deeply to be worked with; split it with derived quantities"
    if isinstance(exc, MemoryError):
        return "this expression needs more memory than is available; simplify it"
    detail = str(exc).strip().splitlines()[0][:120] if str(exc).strip() else ""
    return (f"this expression could not be worked out exactly ({type(exc).__name__}"
            + (f": {detail}" if detail else "") + "); simplify it or write its value as a number")
