"""Generated evaluators for the variational equations of flows and maps.

The stacked state is ``z = (u, Phi)`` with ``Phi`` an n x n matrix stored row by row after the n
states. Flows: ``dPhi/dt = J(t, u) Phi``; maps: ``Phi[k+1] = J(k, u[k]) Phi[k]``. Everything is
built with ``sympy.lambdify`` from the compiled system's trees (never from text).

``rk4_step_function`` turns any first-order right-hand side given as expressions into one
generated function that performs a whole classical Runge-Kutta step; the stages share named
intermediate values, so its size grows linearly with the model, and one call per step keeps the
interpreter overhead of long fixed-step runs low.
"""

from __future__ import annotations

import numpy as np
import sympy as sp

from .system import CompiledSystem


def matrix_symbols(n: int, prefix: str = "_m") -> sp.Matrix:
    """An n x n matrix of plain generated symbols (row-major names ``_m0, _m1, ...``)."""
    return sp.Matrix(n, n, [sp.Symbol(f"{prefix}{i}", real=True) for i in range(n * n)])


def variational_exprs(system: CompiledSystem):
    """(args, exprs): the stacked right-hand side (f, J Phi) in plain symbols.

    ``args`` is ``(t, z, p)``: time symbol, the n + n*n stacked state symbols, parameter symbols.
    For a map the expressions are the next stacked state (f(u), J(u) Phi).
    """
    t, u, p, _ = system._plain
    n = system.n_states
    jac = sp.Matrix(n, n, system.plain(list(system.jacobian)))
    phi = matrix_symbols(n)
    exprs = list(system.plain(system.f)) + list(jac * phi)
    return (t, list(u) + list(phi), list(p)), exprs


def _check_smooth(system: CompiledSystem):
    if system.nonsmooth:
        raise ValueError(f"the Jacobian is undefined where {', '.join(system.nonsmooth)}() switches; "
                         "the variational equations need a smooth model")


def variational_rhs(system: CompiledSystem, p=None):
    """``f(t, z) -> ndarray`` of the stacked flow (u' = f, Phi' = J Phi); z has n + n*n entries."""
    _check_smooth(system)
    (t, z, ps), exprs = variational_exprs(system)
    fn = sp.lambdify([t, *z, *ps], exprs, modules="math", cse=True)
    pv = tuple(float(v) for v in (system.param_values if p is None else p))

    def rhs(time, zz):
        return np.array(fn(time, *zz, *pv), dtype=float)

    return rhs


def map_with_jacobian(system: CompiledSystem, p=None):
    """``g(n, u) -> (u_next, J)``: one iteration of a map and its Jacobian (n x n) at u."""
    _check_smooth(system)
    t, u, ps, _ = system._plain
    n = system.n_states
    exprs = list(system.plain(system.f)) + list(system.plain(list(system.jacobian)))
    fn = sp.lambdify([t, *u, *ps], exprs, modules="math", cse=True)
    pv = tuple(float(v) for v in (system.param_values if p is None else p))

    def step(k, uu):
        values = fn(k, *uu, *pv)
        return np.array(values[:n], dtype=float), np.array(values[n:], dtype=float).reshape(n, n)

    return step


def map_variational_step(system: CompiledSystem, p=None):
    """``g(k, z) -> list``: the stacked map z = (u, Phi) -> (f(u), J(u) Phi), on plain lists."""
    _check_smooth(system)
    (t, z, ps), exprs = variational_exprs(system)
    fn = sp.lambdify([t, *z, *ps], exprs, modules="math", cse=True)
    pv = tuple(float(v) for v in (system.param_values if p is None else p))

    def step(k, zz):
        return fn(k, *zz, *pv)

    return step


def rk4_step_function(t: sp.Symbol, z: list, params: list, exprs: list, p_values):
    """``step(t, h, z) -> list``: one classical RK4 step of z' = exprs(t, z, params), generated.

    ``z`` are the state symbols, ``exprs`` their rates. Parameters are bound to ``p_values``.
    """
    h = sp.Symbol("_h", real=True)
    subs, reduced = sp.cse(exprs, symbols=sp.numbered_symbols("_c"))
    assignments = []

    def stage(index, time_expr, inputs):
        """Assign the stage's inputs, its shared subexpressions and its rates; return rate symbols."""
        swap = {t: sp.Symbol(f"_t{index}", real=True)}
        assignments.append((swap[t], time_expr))
        for i, (zi, value) in enumerate(zip(z, inputs)):
            if value is zi:
                continue
            swap[zi] = sp.Symbol(f"_y{index}_{i}", real=True)
            assignments.append((swap[zi], value))
        for k, (sym, expr) in enumerate(subs):
            new = sp.Symbol(f"_s{index}_{k}", real=True)
            assignments.append((new, expr.xreplace(swap)))
            swap[sym] = new
        rates = []
        for i, expr in enumerate(reduced):
            rate = sp.Symbol(f"_k{index}_{i}", real=True)
            assignments.append((rate, expr.xreplace(swap)))
            rates.append(rate)
        return rates

    k1 = stage(1, t, z)
    k2 = stage(2, t + h / 2, [zi + h / 2 * ki for zi, ki in zip(z, k1)])
    k3 = stage(3, t + h / 2, [zi + h / 2 * ki for zi, ki in zip(z, k2)])
    k4 = stage(4, t + h, [zi + h * ki for zi, ki in zip(z, k3)])
    result = [zi + h / 6 * (a + 2 * b + 2 * c + d) for zi, a, b, c, d in zip(z, k1, k2, k3, k4)]
    fn = sp.lambdify([t, h, *z, *params], result, modules="math", cse=lambda _exprs: (assignments, result))
    pv = tuple(float(v) for v in p_values)

    def step(time, dt, zz):
        return fn(time, dt, *zz, *pv)

    return step


def variational_rk4_step(system: CompiledSystem, p=None):
    """``step(t, h, z) -> list``: one RK4 step of the stacked flow (u, Phi), z as a plain list."""
    _check_smooth(system)
    (t, z, ps), exprs = variational_exprs(system)
    return rk4_step_function(t, z, ps, exprs, system.param_values if p is None else p)
