"""Forward sensitivities: a run together with the derivatives of its states by parameters and start.

For a flow u' = f(t, u, p) the stacked state is ``(u, S, Phi)`` with ``S = du/dp_sel`` (n x m, zero at
the start) and ``Phi = du/du(t_a)`` (n x n, the identity at the start), integrated together:

    S' = J S + df/dp_sel,      Phi' = J Phi.

For a map the same recursion is applied step by step (the chain rule through the map):
``S[k+1] = J S[k] + df/dp_sel``, ``Phi[k+1] = J Phi[k]``. J and df/dp are the compiled system's
symbolic derivatives, turned into one generated function by ``sympy.lambdify`` (never from text).

Observed quantities may be states or derived quantities h(t, u, p); ``Observer`` gives h and its
gradients by u and p at many samples at once.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import sympy as sp
from scipy.integrate import solve_ivp

from orbitdesk.engine.progress import CancelToken
from orbitdesk.system.compiled_system import MAP, UNDEFINED_ERRORS, CompiledSystem, lambdify
from orbitdesk.engine.methods import METHODS

CANCEL_EVERY = 2000  # right-hand-side calls between cancel checks


def _scipy_method(name: str) -> str:
    """The registry's scipy solver for ``name``; fixed-step and unknown methods use DOP853."""
    entry = METHODS.get(name)
    return entry.scipy_name if entry is not None and entry.scipy_name else "DOP853"


class SensitivityFailure(Exception):
    """The run could not be completed (blow-up, undefined value, step failure); a plain-words message."""


@dataclass
class SensitivityRun:
    time: np.ndarray        # (T,) the requested output times
    states: np.ndarray      # (n, T)
    dparams: np.ndarray     # (n, m, T) d u / d p_sel
    dstart: np.ndarray      # (n, n, T) d u / d u(t_a)


class Sensitivities:
    """Evaluators of the stacked system for the parameters ``selected`` (indices into system.parameters)."""

    def __init__(self, system: CompiledSystem, selected: list[int]):
        system.refuse_delays("sensitivities")
        if system.nonsmooth:
            raise ValueError(f"the model is not smooth where {', '.join(system.nonsmooth)}() switches, so its "
                             "sensitivities are undefined there; fitting needs a smooth model")
        self.system = system
        self.selected = list(selected)
        self.n = system.n_states
        self.m = len(self.selected)

    @cached_property
    def _stacked(self):
        system, n, m = self.system, self.n, self.m
        t, u, p, _ = system._plain
        jac = sp.Matrix(n, n, system.plain(list(system.jacobian)))
        pj = system.param_jacobian
        fp = sp.Matrix(n, m, lambda i, j: system.plain([pj[i, self.selected[j]]])[0]) if m else sp.zeros(n, 0)
        s = sp.Matrix(n, m, [sp.Symbol(f"_s{i}", real=True) for i in range(n * m)]) if m else sp.zeros(n, 0)
        phi = sp.Matrix(n, n, [sp.Symbol(f"_m{i}", real=True) for i in range(n * n)])
        exprs = list(system.plain(system.f)) + list(jac * s + fp) + list(jac * phi)
        z = list(u) + list(s) + list(phi)
        return lambdify([t, *z, *p], exprs)

    def start(self, u0) -> np.ndarray:
        n, m = self.n, self.m
        return np.concatenate([np.asarray(u0, dtype=float), np.zeros(n * m), np.eye(n).ravel()])

    def _split(self, Z: np.ndarray, times) -> SensitivityRun:
        n, m = self.n, self.m
        T = Z.shape[1]
        return SensitivityRun(np.asarray(times, dtype=float), Z[:n],
                              Z[n:n + n * m].reshape(n, m, T), Z[n + n * m:].reshape(n, n, T))

    def run(self, u0, p, t_start: float, times, *, rtol: float = 1e-8, atol: float = 1e-10,
            method: str = "dop853", cancel: CancelToken | None = None) -> SensitivityRun:
        """States and sensitivities at ``times`` (increasing, >= t_start) from ``u0`` at ``t_start``."""
        times = np.asarray(times, dtype=float)
        z0 = self.start(u0)
        pv = tuple(float(v) for v in p)
        fn = self._stacked
        if self.system.kind == MAP:
            return self._split(self._iterate(fn, z0, pv, int(round(t_start)), times, cancel), times)
        calls = [0]

        def rhs(tt, zz):
            calls[0] += 1
            if cancel is not None and calls[0] % CANCEL_EVERY == 0:
                cancel.check()
            try:
                return fn(tt, *zz, *pv)
            except UNDEFINED_ERRORS:
                raise SensitivityFailure(f"an expression of the model is undefined at {self.system.time_name} "
                                         f"= {tt:.6g}") from None

        if times.size == 0:
            return self._split(np.empty((z0.size, 0)), times)
        t_end = float(times[-1])
        if t_end == t_start:
            return self._split(np.repeat(z0[:, None], times.size, axis=1), times)
        with np.errstate(all="ignore"):
            sol = solve_ivp(rhs, (float(t_start), t_end), z0, method=_scipy_method(method),
                            t_eval=times, rtol=rtol, atol=atol)
        if sol.status != 0 or sol.y.shape[1] != times.size or not np.all(np.isfinite(sol.y)):
            raise SensitivityFailure(f"the model could not be integrated to {self.system.time_name} = {t_end:.6g} "
                                     f"({sol.message})")
        return self._split(sol.y, times)

    def _iterate(self, fn, z0, pv, n0: int, times, cancel) -> np.ndarray:
        steps = np.round(times).astype(int)
        out = np.empty((z0.size, steps.size))
        z = [float(v) for v in z0]
        k, j = n0, 0
        while j < steps.size and steps[j] == k:
            out[:, j] = z
            j += 1
        while j < steps.size:
            if cancel is not None and k % CANCEL_EVERY == 0:
                cancel.check()
            try:
                z = fn(k, *z, *pv)
            except UNDEFINED_ERRORS:
                raise SensitivityFailure(f"an expression of the map is undefined at n = {k}") from None
            k += 1
            if not all(abs(v) < 1e150 for v in z[:self.n]):
                raise SensitivityFailure(f"the orbit escapes to infinity at n = {k}")
            while j < steps.size and steps[j] == k:
                out[:, j] = z
                j += 1
        if not np.all(np.isfinite(out)):
            raise SensitivityFailure("the sensitivities overflow: the orbit is too unstable over this record")
        return out


class Observer:
    """Values of observed quantities (states or derived quantities) and their gradients by u and p."""

    def __init__(self, system: CompiledSystem, quantities: list[str]):
        self.system = system
        self.quantities = list(quantities)
        for q in self.quantities:
            if q not in system.states and q not in system.derived_names:
                raise KeyError(q)

    @cached_property
    def _derived(self):
        system = self.system
        t, u, p, _ = system._plain
        out = {}
        for q in self.quantities:
            if q in system.states:
                continue
            expr = system.plain([system.derived_exprs[system.derived_names.index(q)]])[0]
            exprs = [expr] + [sp.diff(expr, s) for s in u] + [sp.diff(expr, s) for s in p]
            out[q] = lambdify([t, *u, *p], exprs, modules="numpy")
        return out

    def observe(self, q: str, run: SensitivityRun, p) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(values (T,), d/du (n, T), d/dp (n_params, T)) of quantity ``q`` along ``run``."""
        system, T = self.system, run.time.size
        n, P = system.n_states, len(system.parameters)
        if q in system.states:
            i = system.states.index(q)
            du = np.zeros((n, T))
            du[i] = 1.0
            return run.states[i], du, np.zeros((P, T))
        with np.errstate(all="ignore"):
            values = self._derived[q](run.time, *run.states, *np.asarray(p, dtype=float))  # numpy's numbers
        arr = np.array([np.broadcast_to(np.asarray(v, dtype=float), (T,)) for v in values])
        return arr[0], arr[1:1 + n], arr[1 + n:]
