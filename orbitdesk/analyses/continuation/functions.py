"""The model's functions as continuation needs them, at fixed time: f, Jacobian, parameter Jacobian,
the multilinear forms B and C, compositions of a map, and flows with their sensitivities.

Everything is generated with ``sympy.lambdify`` from the compiled system's trees (never from text),
in plain generated symbols, once per model and cached on the ``ModelFunctions`` object. The
multilinear forms are exact directional derivatives:

    B(a, b)_i    = sum_jk  d2 f_i / du_j du_k  a_j b_k
    C(a, b, c)_i = sum_jkl d3 f_i / du_j du_k du_l  a_j b_k c_l
"""

from __future__ import annotations

import math
from functools import cached_property

import numpy as np
import sympy as sp
from scipy.integrate import ode, solve_ivp

from orbitdesk.system.compiled_system import MAP, CompiledSystem, UndefinedValue, lambdify

UNDEFINED = (ValueError, ZeroDivisionError, TypeError, OverflowError)


class ContinuationError(ArithmeticError):
    """A function of the model could not be evaluated; the message says where, in plain words."""


class ModelFunctions:
    """f, J, df/dp, B, C of one compiled system, at a fixed time (t = 0 for autonomous models)."""

    def __init__(self, system: CompiledSystem):
        self.system = system
        self.n = system.n_states
        self.is_map = system.kind == MAP
        self.t = sp.Symbol("_t", real=True)
        self.u = [sp.Symbol(f"_u{i}", real=True) for i in range(self.n)]
        self.p = [sp.Symbol(f"_p{i}", real=True) for i in range(len(system.parameters))]
        swap = {system.t_symbol: self.t, **dict(zip(system.state_symbols, self.u)),
                **dict(zip(system.param_symbols, self.p))}
        self.f_exprs = [e.xreplace(swap) for e in system.f]
        self.jac_exprs = sp.Matrix(self.f_exprs).jacobian(sp.Matrix(self.u)) if self.n else sp.zeros(0, 0)

    def param_index(self, name: str) -> int:
        if name not in self.system.parameters:
            known = ", ".join(self.system.parameters) or "none"
            raise KeyError(f"unknown parameter '{name}' (parameters: {known})")
        return self.system.parameters.index(name)

    # ------------------------------------------------------------ values
    def f(self, u, p, t=0.0) -> np.ndarray:
        try:
            values = self._f(float(t), *map(float, u), *map(float, p))
        except UNDEFINED:
            raise ContinuationError(self._where(u, p, t)) from None
        return np.array(values, dtype=float)

    def jac(self, u, p, t=0.0) -> np.ndarray:
        try:
            values = self._jac(float(t), *map(float, u), *map(float, p))
        except UNDEFINED:
            raise ContinuationError(self._where(u, p, t)) from None
        return np.array(values, dtype=float).reshape(self.n, self.n)

    def fp(self, u, p, k: int, t=0.0) -> np.ndarray:
        """d f / d p_k at (u, p)."""
        try:
            values = self._fp[k](float(t), *map(float, u), *map(float, p))
        except UNDEFINED:
            raise ContinuationError(self._where(u, p, t)) from None
        return np.array(values, dtype=float)

    def B(self, u, p, a, b) -> np.ndarray:
        """The bilinear form at (u, p), for real or complex vectors."""
        return _complex_multilinear(lambda x, y: self._real_form(self._B, u, p, x, y), a, b)

    def C(self, u, p, a, b, c) -> np.ndarray:
        """The trilinear form at (u, p), for real or complex vectors."""
        return _complex_multilinear(lambda x, y, z: self._real_form(self._C, u, p, x, y, z), a, b, c)

    def _real_form(self, fn, u, p, *vectors):
        try:
            values = fn(*map(float, u), *map(float, p), *(float(v) for vec in vectors for v in vec))
        except UNDEFINED:
            raise ContinuationError(self._where(u, p, 0.0)) from None
        return np.array(values, dtype=float)

    def _where(self, u, p, t) -> str:
        try:
            text = self.system.explain_undefined(t, u, p)
        except (UndefinedValue, *UNDEFINED):
            text = None
        where = ", ".join(f"{s} = {float(v):.6g}" for s, v in zip(self.system.states, u))
        return text or f"the model is undefined at {where}"

    # ------------------------------------------------------------ generated code
    @cached_property
    def _f(self):
        return lambdify([self.t, *self.u, *self.p], self.f_exprs)

    @cached_property
    def _jac(self):
        return lambdify([self.t, *self.u, *self.p], list(self.jac_exprs))

    @cached_property
    def _fp(self):
        return [lambdify([self.t, *self.u, *self.p], [sp.diff(e, s) for e in self.f_exprs]) for s in self.p]

    @cached_property
    def _vectors(self):
        return [[sp.Symbol(f"_{name}{i}", real=True) for i in range(self.n)] for name in "abc"]

    @cached_property
    def _bilinear_exprs(self):
        a, b, _ = self._vectors
        jb = self.jac_exprs * sp.Matrix(b)
        return [sum((sp.diff(jb[i], self.u[j]) * a[j] for j in range(self.n)), sp.S.Zero) for i in range(self.n)]

    @cached_property
    def _B(self):
        a, b, _ = self._vectors
        at0 = {self.t: 0}
        return lambdify([*self.u, *self.p, *a, *b], [e.xreplace(at0) for e in self._bilinear_exprs])

    @cached_property
    def _C(self):
        a, b, c = self._vectors
        at0 = {self.t: 0}
        exprs = [sum((sp.diff(e, self.u[j]) * c[j] for j in range(self.n)), sp.S.Zero).xreplace(at0)
                 for e in self._bilinear_exprs]
        return lambdify([*self.u, *self.p, *a, *b, *c], exprs)

    @cached_property
    def _stacked_exprs(self):
        """The flow with its variational and parameter-sensitivity equations, per parameter index."""
        n = self.n
        phi = sp.Matrix(n, n, [sp.Symbol(f"_m{i}", real=True) for i in range(n * n)])
        w = [sp.Symbol(f"_w{i}", real=True) for i in range(n)]
        jphi = self.jac_exprs * phi
        jw = self.jac_exprs * sp.Matrix(w)
        return phi, w, jphi, jw

    def stacked_rhs(self, k: int | None, p):
        """``rhs(t, z)`` of z = (u, Phi, w): u' = f, Phi' = J Phi, w' = J w + df/dp_k (w omitted if k is None)."""
        key = ("stacked", k)
        cache = self.__dict__.setdefault("_stacked_cache", {})
        if key not in cache:
            phi, w, jphi, jw = self._stacked_exprs
            exprs = list(self.f_exprs) + list(jphi)
            args = [self.t, *self.u, *phi]
            if k is not None:
                exprs += [jw[i] + sp.diff(self.f_exprs[i], self.p[k]) for i in range(self.n)]
                args += w
            cache[key] = lambdify([*args, *self.p], exprs)
        fn = cache[key]
        pv = tuple(float(v) for v in p)

        def rhs(t, z):
            return fn(t, *z, *pv)

        return rhs

    # ------------------------------------------------------------ maps
    def iterate(self, u, p, k: int, param: int | None = None):
        """f^k(u) with its Jacobian and, for ``param``, its derivative in that parameter (chain rule)."""
        u = np.asarray(u, dtype=float)
        M = np.eye(self.n)
        w = np.zeros(self.n)
        for step in range(k):
            J = self.jac(u, p, step)
            if param is not None:
                w = J @ w + self.fp(u, p, param, step)
            M = J @ M
            u = self.f(u, p, step)
        return u, M, w

    # ------------------------------------------------------------ flows
    def flow(self, u0, p, t0: float, t1: float, param: int | None = None, rtol=1e-10, atol=1e-12):
        """phi(t1; t0, u0) with its state transition matrix and, for ``param``, d phi / d p."""
        n = self.n
        z0 = np.concatenate([np.asarray(u0, dtype=float), np.eye(n).ravel(), np.zeros(n if param is not None else 0)])
        z = integrate(self.stacked_rhs(param, p), z0, t0, t1, rtol, atol)
        if z is None or not np.all(np.isfinite(z)):
            raise ContinuationError(f"the integration over one period (t = {t0:.6g} to {t1:.6g}, DOP853 at rtol "
                                    f"{rtol:g}) stopped short: the state or its tangent matrix became undefined "
                                    "or too large, or the step size collapsed")
        w = z[n + n * n:] if param is not None else np.zeros(n)
        return z[:n], z[n:n + n * n].reshape(n, n), w

    def orbit(self, u0, p, t0: float, t1: float, samples: int = 200, rtol=1e-10, atol=1e-12):
        """(times, states (n, samples)) along one stretch of a flow, sampled evenly."""
        f = self._f
        pv = tuple(float(v) for v in p)

        def rhs(t, u):
            return f(t, *u, *pv)

        times = np.linspace(t0, t1, samples)
        try:
            with np.errstate(all="ignore"):
                sol = solve_ivp(rhs, (t0, t1), np.asarray(u0, dtype=float), method="DOP853", t_eval=times,
                                rtol=rtol, atol=atol)
        except UNDEFINED:
            sol = None
        if sol is None or sol.status != 0 or sol.y.shape[1] != samples:
            raise ContinuationError("the integration along the orbit failed")
        return times, sol.y


def _solver(rhs, y0, t0, rtol, atol):
    solver = ode(rhs).set_integrator("dop853", rtol=rtol, atol=atol, nsteps=200000)
    solver.set_initial_value(np.asarray(y0, dtype=float), t0)
    return solver


def integrate(rhs, y0, t0: float, t1: float, rtol=1e-10, atol=1e-12):
    """The state at t1 by DOP853 (scipy's ode), or None when the integration fails."""
    if t1 == t0:
        return np.asarray(y0, dtype=float)
    solver = _solver(rhs, y0, t0, rtol, atol)
    try:
        with np.errstate(all="ignore"):
            y = solver.integrate(t1)
    except UNDEFINED:
        return None
    return y if solver.successful() else None


def _complex_multilinear(real_form, *vectors):
    """Evaluate a real multilinear form on complex vectors by expanding into real and imaginary parts."""
    parts = [(np.real(v).astype(float), np.imag(v).astype(float)) for v in map(np.asarray, vectors)]
    if not any(np.any(im) for _, im in parts):
        return real_form(*(re for re, _ in parts))
    total = 0j
    for choice in range(2 ** len(parts)):
        picks, factor = [], 1 + 0j
        for k, (re, im) in enumerate(parts):
            if choice >> k & 1:
                if not np.any(im):
                    break
                picks.append(im)
                factor *= 1j
            else:
                picks.append(re)
        else:
            total = total + factor * real_form(*picks)
    return np.asarray(total, dtype=complex)


def peak_to_peak(values: np.ndarray) -> float:
    """max - min of an evenly sampled periodic signal, with each extreme refined by a parabola."""
    return extreme(values, max) - extreme(values, min)


def extreme(values, pick) -> float:
    """The max (``pick=max``) or min of one evenly sampled closed period, refined by a parabola."""
    values = np.asarray(values, dtype=float)
    k = int(np.argmax(values) if pick is max else np.argmin(values))
    m = len(values) - 1  # the last sample repeats the first (one closed period)
    a, b, c = values[(k - 1) % m], values[k % m], values[(k + 1) % m]
    denom = a - 2 * b + c
    if denom == 0 or not math.isfinite(denom):
        return float(b)
    return float(b - (a - c) ** 2 / (8 * denom))
