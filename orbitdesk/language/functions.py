"""Functions a model defines: ``sat(u) = u / (1 + abs(u))``, ``spring(d, k) = k*d + k3*d^3``.

A function's body may use its arguments, the parameters, the constants, the time and other model
functions (never itself, directly or through others). Its calls are inlined where they stand (the
body with the arguments put in, see ``symbolic.to_sympy``), so Jacobians stay exact.
"""

from __future__ import annotations

import sympy as sp

from orbitdesk.language.diagnostics import ERROR, WARNING, ParseError
from orbitdesk.language.expression import CONSTANTS, FUNCTIONS, NONSMOOTH_FUNCTIONS, Call, If, walk
from orbitdesk.language.symbolic import ModelFunction, to_sympy


def _calls(tree, names) -> set[str]:
    return {node.func for node in walk(tree) if isinstance(node, Call) and node.func in names}


def _order(builder, defs) -> list:
    """Definitions in an order where each comes after the functions it calls; loops are reported."""
    names = {st.name: st for st in defs}
    deps = {st.name: _calls(st.tree, names) for st in defs}
    order, state = [], {}

    def visit(start):
        stack, path = [(start, iter(sorted(deps[start])))], [start]
        state[start] = 1
        while stack:
            node, todo = stack[-1]
            for child in todo:
                if state.get(child) == 1:
                    loop = path[path.index(child):] + [child]
                    for name in loop[:-1]:
                        st = names[name]
                        builder.add(st.line, st.lhs_col, st.lhs_end, ERROR,
                                    "these functions call each other in a loop: " + " -> ".join(loop))
                        state[name] = 3
                    continue
                if child not in state:
                    state[child] = 1
                    path.append(child)
                    stack.append((child, iter(sorted(deps[child]))))
                    break
            else:
                stack.pop()
                path.pop()
                if state[node] == 1:
                    state[node] = 2
                    order.append(node)

    for name in names:
        if name not in state:
            visit(name)
    return [names[n] for n in order if state[n] == 2]


def define_functions(builder, statements) -> None:
    """Check each ``NAME(ARGS) = BODY`` line and build its body; results go to ``model.functions``."""
    m = builder.model
    builder.function_nonsmooth = {}
    derived = {st.name for st in statements if st.form == "name"}
    defs, seen, broken = [], {}, {}
    for st in statements:
        if st.form != "func":
            continue
        problem = None
        if st.name in FUNCTIONS:
            problem = f"'{st.name}' is a built-in function and cannot be redefined"
        elif st.name in m.typed_order or st.name in m.symbols or st.name in derived:
            problem = f"'{st.name}' is already a state, parameter or derived quantity"
        elif st.name in seen:
            problem = f"'{st.name}' is already defined on line {seen[st.name]}"
        elif st.name in ("t", "n") or st.name in CONSTANTS:
            problem = f"'{st.name}' is reserved and cannot name a function"
        if problem is None:
            for arg in st.arguments:
                if arg in m.typed_order or arg in m.states:
                    problem = (f"the argument '{arg}' is a state; a function's arguments are names of its "
                               f"own (call it as {st.name}({arg}) where you use it)")
                elif st.arguments.count(arg) > 1:
                    problem = f"the argument '{arg}' is named twice"
                elif arg in FUNCTIONS or arg in CONSTANTS or arg in ("t", "n"):
                    problem = f"'{arg}' is reserved and cannot name an argument"
                if problem:
                    break
        if problem:
            builder.add(st.line, st.lhs_col, st.lhs_end, ERROR, problem)
            if st.name not in seen and st.name not in FUNCTIONS:
                broken[st.name] = ModelFunction(st.name, (), None, st.line)
            continue
        seen[st.name] = st.line
        m.function_arguments[st.name] = st.arguments
        if st.tree is not None:
            defs.append(st)
    known = set(seen)
    ordered = _order(builder, defs)
    for st in defs:
        if st not in ordered:  # in a loop: calls say the definition has an error
            broken[st.name] = ModelFunction(st.name, (), None, st.line)
    for st in ordered:
        placeholders = {a: sp.Symbol(f"{st.name}\u2039{a}\u203a", real=True) for a in st.arguments}

        def resolve(node, st=st, placeholders=placeholders):
            name = node.name
            if node.subscript is None and name in placeholders:
                return placeholders[name]
            if node.subscript is None and name in m.parameters:
                return m.symbols[name]
            if name == m.time_symbol.name:
                return m.time_symbol
            if name in CONSTANTS and name not in builder.redefined:
                return sp.pi if name == "pi" else sp.E
            base = name.rstrip("'")
            if base in m.typed_order or name in m.states or name in derived or node.subscript is not None:
                raise ParseError(f"'{name}' is not known inside the function {st.name}; pass it as an argument",
                                 node.column, node.end)
            if name in FUNCTIONS or name in known:
                raise ParseError(f"{name} is a function; call it as {name}(...)", node.column, node.end)
            close = builder.suggest(name, lambda: [*st.arguments, *m.parameters, *CONSTANTS])
            fix = f"did you mean '{close[0]}'?" if close else None
            raise ParseError(f"unknown name '{name}'" + (f"; {fix}" if fix else ""), node.column, node.end, fix)

        try:
            body = to_sympy(st.tree, resolve, {**broken, **m.functions})
        except ParseError as err:
            builder.add(st.line, err.column, err.end_column, ERROR, err.message, err.fix)
            broken[st.name] = ModelFunction(st.name, (), None, st.line)
            continue
        m.functions[st.name] = ModelFunction(st.name, tuple(placeholders.values()), body, st.line)
        kinks = []
        for node in walk(st.tree):
            func = "if" if isinstance(node, If) else node.func if isinstance(node, Call) else None
            if func in m.functions and func != st.name:
                kinks.extend(builder.function_nonsmooth.get(func, ()))
            elif func is not None and (func in NONSMOOTH_FUNCTIONS or func == "if"):
                kinks.append(func)
                builder.add(st.line, node.column, node.column + len(func), WARNING,
                            f"{func}() is not smooth: where this function is used, the Jacobian is undefined "
                            "where it switches")
        builder.function_nonsmooth[st.name] = tuple(dict.fromkeys(kinks))
    builder.callable_functions = {**broken, **m.functions}  # broken ones make calls say so


def function_nonsmooth(builder, name) -> tuple[str, ...]:
    """The non-smooth functions (and if) inside a model function, through the functions it calls."""
    return getattr(builder, "function_nonsmooth", {}).get(name, ())
