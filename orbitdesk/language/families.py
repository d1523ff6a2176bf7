"""Families of states: ``x_{i}' = ... for i in 1..N`` and ``sum(x_{j}, j in 1..N)``.

A family line stands for one ordinary line per index value; ``x_{3}`` is the ordinary name ``x_3``.
This module expands the trees of one statement for one set of index values: family members become
plain names (remembering how they were written, for messages), loop indices become numbers and sums
become chains of '+'. Index arithmetic is integer: it may use numbers, the loop indices, integer
parameters, ``+ - * / ^``, ``mod``, ``floor``, ``abs``, ``min`` and ``max``; a result that is not a
whole number is an error. Nothing here evaluates text: index trees come from our own parser.
"""

from __future__ import annotations

import re
from dataclasses import replace

from orbitdesk.language.diagnostics import ParseError
from orbitdesk.language.expression import (Binary, Call, Compare, FamilyName, If, Logic, Name, Num, Sum, Unary, children,
                         parse_expression)
from orbitdesk.language.symbolic import constant_value

MAX_FAMILY_SIZE = 10_000  # index values of one family line or one sum
MAX_EXPANDED_NODES = 400_000  # nodes one statement may grow to once its sums are written out

_FOR = re.compile(r"(?:^|(?<=\s))for\s+([A-Za-z_][A-Za-z0-9_]*)\s+in\s+(.*?)\.\.(.*)$")
_BRACES = re.compile(r"(?<=_)\{([^{}]*)\}")


def split_family_clause(code: str, eq: int):
    """Find a trailing ``for i in A..B`` after the '=' at ``eq``.

    Returns ``(code_without_clause, clause)`` where clause is None or
    ``(var, lo_text, lo_offset, hi_text, hi_offset, for_offset)`` with 0-based offsets into ``code``.
    """
    m = _FOR.search(code, eq + 1)
    if not m:
        return code, None
    return code[:m.start()], (m.group(1), m.group(2), m.start(2), m.group(3), m.start(3), m.start())


def parse_clause_bounds(clause, line_offset: int = 1):
    """Parse the two bound expressions of a clause; columns are 1-based."""
    var, lo_text, lo_at, hi_text, hi_at, _ = clause
    if not lo_text.strip():
        raise ParseError("expected the first index before '..', as in for i in 1..N",
                         line_offset + lo_at, line_offset + lo_at + 1)
    if not hi_text.strip():
        raise ParseError("expected the last index after '..', as in for i in 1..N",
                         line_offset + hi_at - 2, line_offset + hi_at)
    return (parse_expression(lo_text, line_offset + lo_at), parse_expression(hi_text, line_offset + hi_at))


def has_family_names(text: str) -> bool:
    return "_{" in text


def index_value(tree, env: dict[str, int], what: str = "an index") -> int:
    """The whole number an index (or bound) expression stands for with the indices ``env``."""
    if needs_expansion(tree):
        raise ParseError(f"{what} cannot hold family members or sums", tree.column, tree.end)
    try:
        value = constant_value(tree, {name: float(v) for name, v in env.items()})
    except ParseError as err:
        if "is not a constant" in err.message:
            name = err.message.split("'")[1]
            raise ParseError(f"'{name}' cannot be used in {what}: only numbers, loop indices and "
                             "whole-number parameters", err.column, err.end_column) from None
        raise
    if isinstance(value, bool) or abs(value - round(value)) > 1e-9 or abs(value) > 1e9:
        raise ParseError(f"{what} must be a whole number; this gives {value:g}", tree.column, tree.end)
    return int(round(value))


def index_range(lo_tree, hi_tree, env: dict[str, int]) -> range:
    lo = index_value(lo_tree, env, "a range bound")
    hi = index_value(hi_tree, env, "a range bound")
    if hi - lo + 1 > MAX_FAMILY_SIZE:
        raise ParseError(f"the range {lo}..{hi} has more than {MAX_FAMILY_SIZE:,} indices",
                         lo_tree.column, hi_tree.end)
    return range(lo, hi + 1)


def _describe(env: dict[str, int], loops: tuple[str, ...]) -> str:
    return ", ".join(f"{name} = {env[name]}" for name in loops if name in env)


def member_name(base: str, index: int, primes: int, node) -> str:
    if index < 0:
        raise ParseError(f"{base}{{{index}}}: a family index must not be negative", node.column, node.end)
    return f"{base}{index}" + "'" * primes


def resolve_lhs_name(name: str, column: int, env: dict[str, int], loops: tuple[str, ...]) -> str:
    """``x_{i+1}`` on a left side -> ``x_4`` for i = 3; plain names are returned as they are."""
    m = _BRACES.search(name)
    if not m:
        return name
    tree = parse_expression(m.group(1), column + m.start(1))
    return member_name(name[:m.start()], index_value(tree, env), 0, tree) + name[m.end():]


def expand(tree, env: dict[str, int], loops: tuple[str, ...], line: int):
    """The tree with family members named, loop indices (``loops``, values in ``env``) as numbers
    and sums written out. Iterative over the tree; sums recurse once per nesting level."""
    budget = [MAX_EXPANDED_NODES]
    return _expand(tree, env, loops, line, budget)


def _expand(tree, env, loops, line, budget):
    stack = [(tree, False)]
    values: list = []
    while stack:
        item, ready = stack.pop()
        budget[0] -= 1
        if budget[0] < 0:
            raise ParseError(f"written out, this expression has more than {MAX_EXPANDED_NODES:,} parts",
                             tree.column, tree.end)
        if isinstance(item, Num):
            values.append(item)
        elif isinstance(item, Name):
            if item.subscript is None and item.name in loops and item.name in env:
                values.append(Num(str(env[item.name]), item.column, item.end))
            else:
                values.append(item)
        elif isinstance(item, FamilyName):
            index = index_value(item.index, env)
            name = member_name(item.base, index, item.primes, item)
            written = f"{item.base}{{{item.index_text}}}" + "'" * item.primes
            where = _describe(env, loops)
            origin = f"{where} in line {line} reads {written}" if where else None
            values.append(Name(name, item.column, item.end, origin=origin))
        elif isinstance(item, Sum):
            values.append(_expand_sum(item, env, loops, line, budget))
        else:
            parts = children(item)
            if ready:
                args = values[len(values) - len(parts):]
                del values[len(values) - len(parts):]
                values.append(_with_children(item, args))
            else:
                stack.append((item, True))
                stack.extend((c, False) for c in reversed(parts))
    return values[0]


def _expand_sum(item: Sum, env, loops, line, budget):
    indices = index_range(item.lo, item.hi, env)
    if item.var in env and item.var not in loops:
        raise ParseError(f"the sum index '{item.var}' is already a parameter; choose another letter",
                         item.column, item.end)
    inner_loops = (*loops, item.var)
    total = None
    for value in indices:
        term = _expand(item.body, {**env, item.var: value}, inner_loops, line, budget)
        total = term if total is None else Binary("+", total, term, item.column, item.end)
    return total if total is not None else Num("0", item.column, item.end)


def _with_children(node, args):
    if isinstance(node, (Binary, Compare)):
        return replace(node, left=args[0], right=args[1])
    if isinstance(node, Unary):
        return replace(node, operand=args[0])
    if isinstance(node, (Call, Logic)):
        return replace(node, args=tuple(args))
    if isinstance(node, If):
        return replace(node, cond=args[0], then=args[1], other=args[2])
    return node


def needs_expansion(tree) -> bool:
    """Whether a tree holds family members, sums or (possibly) loop indices."""
    stack = [tree]
    while stack:
        node = stack.pop()
        if isinstance(node, (FamilyName, Sum)):
            return True
        stack.extend(children(node))
    return False


MAX_EXPANDED_STATEMENTS = 20_000  # statements of a model once its family lines are written out


def _integer_constants(statements) -> dict[str, int]:
    """Parameters with a whole-number constant value (``N = 40``): what ranges and indices may use."""
    found: dict[str, int] = {}
    for st in statements:
        if st.form != "name" or st.family is not None or st.tree is None or "{" in st.name:
            continue
        try:
            value = constant_value(st.tree, {"pi": 3.141592653589793, "e": 2.718281828459045})
        except (ParseError, IndexError, AttributeError):
            continue
        if not isinstance(value, bool) and abs(value - round(value)) <= 1e-9 and abs(value) <= 1e9:
            found[st.name] = int(round(value))
    return found


def _index_names(tree, inside_index: bool = False) -> set[str]:
    """Names used in the index expressions and sum bounds of ``tree`` (all names if ``inside_index``)."""
    stack, names = [(tree, inside_index)], set()
    while stack:
        node, indexing = stack.pop()
        if isinstance(node, Name):
            if indexing:
                names.add(node.name)
        elif isinstance(node, FamilyName):
            stack.append((node.index, True))
        elif isinstance(node, Sum):
            stack.extend(((node.lo, True), (node.hi, True), (node.body, indexing)))
        else:
            stack.extend((c, indexing) for c in children(node))
    return names


def expand_statements(builder, statements) -> list:
    """Write out every family line (one statement per index value) and every family member and sum.

    Problems become diagnostics through ``builder.add``; statements keep their line and columns.
    """
    env = builder.integer_constants = _integer_constants(statements)
    model = builder.model
    out = []
    for st in statements:
        trees = [t for t in (st.tree, *st.range_trees) if t is not None]
        if st.family is None and "{" not in st.name and not any(needs_expansion(t) for t in trees):
            out.append(st)
            continue
        try:
            if st.family is not None:
                var, lo, hi = st.family
                if var in env:
                    raise ParseError(f"the index '{var}' is already a parameter; choose another letter",
                                     lo.column, hi.end)
                used = _index_names(lo, True) | _index_names(hi, True)
                values, loops = index_range(lo, hi, env), (var,)
            else:
                used, values, loops = set(), [None], ()
            for tree in trees:
                used |= _index_names(tree)
            m = _BRACES.search(st.name)
            if m:
                used |= _index_names(parse_expression(m.group(1), st.lhs_col + m.start(1)), True)
            model.structural.update(name for name in used if name in env)
            for value in values:
                scope = env if value is None else {**env, loops[0]: value}
                out.append(replace(
                    st, family=None,
                    name=resolve_lhs_name(st.name, st.lhs_col, scope, loops),
                    tree=None if st.tree is None else expand(st.tree, scope, loops, st.line),
                    range_trees=tuple(expand(t, scope, loops, st.line) for t in st.range_trees)))
                if len(out) > MAX_EXPANDED_STATEMENTS:
                    raise ParseError(f"written out, the model has more than {MAX_EXPANDED_STATEMENTS:,} "
                                     "statements", st.lhs_col, st.lhs_end)
        except ParseError as err:
            builder.add(st.line, err.column, err.end_column, "error", err.message, err.fix)
            if len(out) > MAX_EXPANDED_STATEMENTS:
                break
    return out


def with_structural_value(text: str, line: int, name: str, value: float) -> str:
    """The model text with the whole-number parameter ``name`` (defined on ``line``) set to ``value``.

    A parameter that sets the size of a family changes the model itself, so a new value is written
    into its line (keeping its range and comment) and the model is read again."""
    from orbitdesk.language.written_values import with_line_value

    return with_line_value(text, line, name, str(int(round(value))))
