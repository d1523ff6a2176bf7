"""The model's functions as continuation needs them, at fixed time: f, Jacobian, parameter Jacobian,
the multilinear forms B and C, compositions of a map, and flows with their sensitivities.

f, J and df/dp are the model's kernels (``codegen.py``: ``CompiledSystem.rhs``/``jac`` and the
sensitivity kernel's df/dp); compositions of a map and flows over a period with their state
transition matrix and parameter derivative are forward sensitivities (``analyses/sensitivity.py``:
the sensitivity kernel run by the engine's loops), orbits are runs of the engine's loops. Only the
multilinear forms, the exact directional derivatives

    B(a, b)_i    = sum_jk  d2 f_i / du_j du_k  a_j b_k
    C(a, b, c)_i = sum_jkl d3 f_i / du_j du_k du_l  a_j b_k c_l

that the normal forms need (no kernel holds second or third derivatives), are generated here with
``lambdify`` from the compiled system's trees (never from text), in plain generated symbols, once per
model and cached on the ``ModelFunctions`` object.
"""

from __future__ import annotations

import math
from functools import cached_property

import numpy as np
import sympy as sp

from orbitdesk.system.compiled_system import MAP, CompiledSystem, UndefinedValue, lambdify
from orbitdesk.system.flat_code import rename

UNDEFINED = (ValueError, ZeroDivisionError, TypeError, OverflowError)
RUNS = 1e6  # right-hand-side evaluations a continuation's many runs are estimated at: worth the compiler


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
        self._swap = swap
        self.f_exprs = rename(system.f, swap)
        self._sensitivities = {}

    def param_index(self, name: str) -> int:
        if name not in self.system.parameters:
            known = ", ".join(self.system.parameters) or "none"
            raise KeyError(f"unknown parameter '{name}' (parameters: {known})")
        return self.system.parameters.index(name)

    # ------------------------------------------------------------ values
    def f(self, u, p, t=0.0) -> np.ndarray:
        try:
            return self.system.rhs(float(t), u, p)
        except UndefinedValue as err:
            raise ContinuationError(str(err)) from None

    def jac(self, u, p, t=0.0) -> np.ndarray:
        try:
            J = self.system.jac(float(t), u, p)
        except UndefinedValue:
            J = None
        if J is None or not np.all(np.isfinite(J)) and np.all(np.isfinite(u)) and np.all(np.isfinite(p)):
            raise ContinuationError(self._where(u, p, t))
        return J

    def fp(self, u, p, k: int, t=0.0) -> np.ndarray:
        """d f / d p_k at (u, p): the sensitivity kernel's forcing (its sensitivities S zero)."""
        from orbitdesk.engine import compiled

        n, P = self.n, len(self.p)
        engine = compiled.engine_for(self.system)
        z = np.zeros(n * (P + 1))
        z[:n] = u
        out = np.empty(z.size)
        with np.errstate(all="ignore"):
            engine.entry("evaluate")(compiled.sensitivity_kernel(engine, self.system), P, float(t), z,
                                     np.ascontiguousarray(p, dtype=float), out)
        column = out[n:].reshape(n, P)[:, k]
        if not np.all(np.isfinite(column)) and np.all(np.isfinite(u)) and np.all(np.isfinite(p)):
            raise ContinuationError(self._where(u, p, t))
        return column.copy()

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

    # ------------------------------------------------------------ generated code (the normal forms)
    @cached_property
    def jac_exprs(self) -> sp.Matrix:
        """The almost-everywhere Jacobian in this object's symbols (codegen's sparse one)."""
        from orbitdesk.system.codegen import dense_jacobian

        return sp.Matrix(rename(dense_jacobian(self.system), self._swap)).reshape(self.n, self.n)

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

    # ------------------------------------------------------------ maps and flows: forward sensitivities
    def _sensitivity_run(self, u0, p, t0, t1, param: int | None, failure: str):
        """The state at t1 (a step count for a map) with its derivatives by the start and by the
        parameter ``param`` (zeros when None): ``Sensitivities`` (the sensitivity kernel in the engine's
        loops, Dormand-Prince 8(5,3) at rtol 1e-10 for a flow)."""
        from orbitdesk.analyses.sensitivity import SensitivityFailure, Sensitivities

        selected = () if param is None else (param,)
        runs = self._sensitivities.get(selected)
        if runs is None:
            runs = self._sensitivities[selected] = Sensitivities(self.system, list(selected), kinks=True)
        try:
            run = runs.run(np.asarray(u0, dtype=float), p, t0, np.array([t1], dtype=float), rtol=1e-10,
                           atol=1e-12, method="dop853")
        except SensitivityFailure as err:
            raise ContinuationError(f"{failure} ({err})") from None
        w = run.dparams[:, 0, -1] if param is not None else np.zeros(self.n)
        return run.states[:, -1], run.dstart[:, :, -1], w

    def iterate(self, u, p, k: int, param: int | None = None):
        """f^k(u) with its Jacobian and, for ``param``, its derivative in that parameter (chain rule)."""
        return self._sensitivity_run(u, p, 0, k, param, "the map could not be iterated")

    def flow(self, u0, p, t0: float, t1: float, param: int | None = None):
        """phi(t1; t0, u0) with its state transition matrix and, for ``param``, d phi / d p."""
        return self._sensitivity_run(u0, p, t0, t1, param, f"the integration over one period (t = {t0:.6g} to "
                                     f"{t1:.6g}, DOP853 at rtol 1e-10) stopped short")

    def orbit(self, u0, p, t0: float, t1: float, samples: int = 200, rtol=1e-10, atol=1e-12):
        """(times, states (n, samples)) along one stretch of a flow, sampled evenly."""
        times = np.linspace(t0, t1, samples)
        return times, self._run(u0, p, t0, t1, times, rtol, atol, "the integration along the orbit failed")

    def end(self, u0, p, t0: float, t1: float, rtol=1e-10, atol=1e-12) -> np.ndarray:
        """phi(t1; t0, u0), the state alone."""
        if t1 == t0:
            return np.asarray(u0, dtype=float)
        return self._run(u0, p, t0, t1, np.array([t1]), rtol, atol, "the run blew up")[:, -1]

    def _run(self, u0, p, t0, t1, grid, rtol, atol, failure: str) -> np.ndarray:
        """A run of the engine's loops (Dormand-Prince 8(5,3)) sampled at ``grid``."""
        from orbitdesk.engine import compiled, drivers

        engine = compiled.engine_for_work(self.system, RUNS)
        with np.errstate(all="ignore"):
            out = drivers.flow_run(engine, "dop853", float(t0), float(t1), np.asarray(u0, dtype=float),
                                   np.asarray(p, dtype=float), rtol, atol, grid=grid, bound=1e150)
        if out.code != 0 or out.time.size != len(grid) or not np.all(np.isfinite(out.states)):
            raise ContinuationError(failure)
        return out.states


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
