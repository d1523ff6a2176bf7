"""Two-parameter loci: the curve traced by a fold or a Hopf point as two parameters move.

Unknowns end with (second parameter, first parameter); the first is bounded to the interval.

- fold:  x = (u, p2, p1);  f(u, p) = 0 and g(u, p) = 0, g the border of [[J, b], [c^T, 0]] (v, g) = (0, 1)
  (b, c the left and right null vectors at the previous point). Codimension two on the way:
  cusp, where the normal-form coefficient a = <p, B(q, q)> / <p, q> changes sign (q oriented along
  the curve), and Bogdanov-Takens, where a second eigenvalue reaches zero (the coefficient of
  lambda in det(lambda - J), the product of the other eigenvalues up to sign, changes sign).
- Hopf:  x = (u, v, kappa, p2, p1);  f = 0, (J^2 + kappa) v = 0, c.v = 1, c.(J v) = 0 (kappa = omega^2).
  Bogdanov-Takens where kappa reaches zero (the curve goes on as neutral saddles: it stops there);
  generalised Hopf where the first Lyapunov coefficient changes sign.

Jacobians by central differences; the points are corrected to the tolerance of the stepper.
"""

from __future__ import annotations

import math

import numpy as np

from orbitdesk.engine.progress import CancelToken, Reporter
from orbitdesk.system.compiled_system import MAP, CompiledSystem
from orbitdesk.analyses.continuation.arclength import SpecialPoint, StepSettings, continue_curve, newton_bordered, null_tangent
from orbitdesk.analyses.continuation.branches import check_interval, steady_branches
from orbitdesk.analyses.continuation.functions import ContinuationError, ModelFunctions
from orbitdesk.analyses.continuation.hopf import first_lyapunov_coefficient, hopf_eigenvector
from orbitdesk.analyses.continuation.results import BOGDANOV_TAKENS, CUSP, FOLD, GENERALISED_HOPF, HOPF, Locus


def fd_jacobian(residual, x, base=None):
    base = residual(x) if base is None else base
    J = np.empty((len(base), len(x)))
    for j in range(len(x)):
        h = 1e-6 * (1.0 + abs(x[j]))
        up, down = x.copy(), x.copy()
        up[j] += h
        down[j] -= h
        J[:, j] = (residual(up) - residual(down)) / (2 * h)
    return J


class _LocusBase:
    def __init__(self, funcs: ModelFunctions, p_vector, k1: int, k2: int, extra: int):
        self.funcs, self.n, self.k1, self.k2 = funcs, funcs.n, k1, k2
        self.p_vector = np.array(p_vector, dtype=float)
        self.size = self.n + extra + 2
        self.range2 = (-math.inf, math.inf)

    def params(self, x):
        pv = self.p_vector.copy()
        pv[self.k1], pv[self.k2] = x[-1], x[-2]
        return pv

    def jacobian(self, x):
        return fd_jacobian(self.residual, x)

    def out_of_bounds(self, x):
        lo2, hi2 = self.range2
        if not lo2 <= x[-2] <= hi2:
            name = self.funcs.system.parameters[self.k2]
            return f"{name} left its range [{lo2:.6g}, {hi2:.6g}]"
        return None

    def where(self, x):
        names = self.funcs.system.parameters
        return f"{names[self.k1]} = {x[-1]:.8g}, {names[self.k2]} = {x[-2]:.8g}"


class FoldLocus(_LocusBase):
    def __init__(self, funcs, p_vector, k1, k2, x0):
        super().__init__(funcs, p_vector, k1, k2, 0)
        self.q_dir = None
        self.accept(x0)

    def accept(self, x):
        U, _, Vt = np.linalg.svd(self.funcs.jac(x[:self.n], self.params(x)))
        self.b, self.c = U[:, -1], Vt[-1]

    def residual(self, x):
        u, pv = x[:self.n], self.params(x)
        J = self.funcs.jac(u, pv)
        bordered = np.block([[J, self.b[:, None]], [self.c[None, :], np.zeros((1, 1))]])
        rhs = np.zeros(self.n + 1)
        rhs[-1] = 1.0
        g = np.linalg.solve(bordered, rhs)[-1]
        return np.concatenate([self.funcs.f(u, pv), [g]])

    def describe(self, x):
        return {"stable": None, "spectrum": np.linalg.eigvals(self.funcs.jac(x[:self.n], self.params(x)))}

    def tests(self, x, tangent, data, only=None):
        u, pv = x[:self.n], self.params(x)
        J = self.funcs.jac(u, pv)
        out = {}
        if only in (None, BOGDANOV_TAKENS) and self.n >= 2:
            out[BOGDANOV_TAKENS] = float(np.real(np.poly(J)[-2]))
        if only in (None, CUSP):
            U, _, Vt = np.linalg.svd(J)
            q, p = Vt[-1], U[:, -1]
            if float(q @ tangent[:self.n]) < 0:
                q = -q
            pq = float(p @ q)
            if abs(pq) > 1e-12:
                out[CUSP] = float(p @ self.funcs.B(u, pv, q, q)) / pq
        return out

    def special(self, name, x, tangent, data):
        if name == CUSP:
            u, pv = x[:self.n], self.params(x)
            U, _, Vt = np.linalg.svd(self.funcs.jac(u, pv))
            q, p = Vt[-1], U[:, -1]
            scale = 1.0 + float(np.linalg.norm(self.funcs.B(u, pv, q, q)))
            if abs(float(p @ self.funcs.B(u, pv, q, q))) > 1e-6 * scale:
                return None  # the coefficient changed sign through infinity (<p, q> = 0 at Bogdanov-Takens)
        return SpecialPoint(name, x, tangent=tangent)


class HopfLocus(_LocusBase):
    def __init__(self, funcs, p_vector, k1, k2, v0):
        super().__init__(funcs, p_vector, k1, k2, funcs.n + 1)
        self.c = v0 / float(v0 @ v0)

    def unpack(self, x):
        n = self.n
        return x[:n], x[n:2 * n], float(x[2 * n])

    def accept(self, x):
        v = self.unpack(x)[1]
        self.c = v / float(v @ v)

    def residual(self, x):
        u, v, kappa = self.unpack(x)
        pv = self.params(x)
        J = self.funcs.jac(u, pv)
        Jv = J @ v
        return np.concatenate([self.funcs.f(u, pv), J @ Jv + kappa * v, [self.c @ v - 1.0, self.c @ Jv]])

    def describe(self, x):
        return {"stable": None, "spectrum": np.linalg.eigvals(self.funcs.jac(x[:self.n], self.params(x)))}

    def lyapunov(self, x):
        u, v, kappa = self.unpack(x)
        if kappa <= 0:
            return None
        pv = self.params(x)
        omega = math.sqrt(kappa)
        q = self.funcs.jac(u, pv) @ v + 1j * omega * v
        return first_lyapunov_coefficient(self.funcs, u, pv, omega, q)

    def tests(self, x, tangent, data, only=None):
        out = {}
        if only in (None, BOGDANOV_TAKENS):
            out[BOGDANOV_TAKENS] = self.unpack(x)[2]
        if only in (None, GENERALISED_HOPF):
            l1 = self.lyapunov(x)
            if l1 is not None:
                out[GENERALISED_HOPF] = l1
        return out

    def special(self, name, x, tangent, data):
        return SpecialPoint(name, x, tangent=tangent)

    def out_of_bounds(self, x):
        if self.unpack(x)[2] < 0:
            return "the Hopf curve ends at a Bogdanov-Takens point (beyond it the pair is real: a neutral saddle)"
        return super().out_of_bounds(x)


def locus(system: CompiledSystem, kind: str, param: str, param2: str, lo: float, hi: float, p=None, guess=None,
          initial=None, range2=None, settings: StepSettings | None = None, cancel: CancelToken | None = None,
          progress=None) -> Locus:
    """The fold or Hopf curve through the special point found on the branch in ``param`` nearest its value.

    ``range2`` bounds the second parameter (default: its slider range, else 10 units around its value)."""
    system.refuse_delays("continuation in two parameters")
    if kind not in (FOLD, HOPF):
        raise ValueError("a locus follows a fold or a Hopf point")
    if system.kind == MAP:
        raise ValueError("loci are computed for flows' equilibria")
    lo, hi = check_interval(system, param, lo, hi)
    check_interval(system, param2, 0.0, 1.0)
    report = Reporter(progress, cancel)
    funcs = ModelFunctions(system)
    k1, k2 = funcs.param_index(param), funcs.param_index(param2)
    pv = (system.param_values if p is None else np.asarray(p, dtype=float)).astype(float).copy()
    branches = steady_branches(system, param, lo, hi, pv, guess=guess, initial=initial, cancel=cancel,
                               progress=report.part(0.0, 0.2))
    found = [s for b in branches.branches for s in b.special if s.type == kind]
    if not found:
        raise ContinuationError(f"no {kind} point on the branches of {param} in [{lo:.6g}, {hi:.6g}] at "
                                f"{param2} = {pv[k2]:.6g} to start the locus from")
    start = min(found, key=lambda s: abs(s.value - pv[k1]))
    u = np.asarray(start.internal["x"][:-1], dtype=float)
    if kind == FOLD:
        x0 = np.concatenate([u, [pv[k2], start.value]])
        problem = FoldLocus(funcs, pv, k1, k2, x0)
    else:
        omega, q = hopf_eigenvector(funcs.jac(u, _with(pv, k1, start.value)))
        v = q.real / np.linalg.norm(q.real)
        x0 = np.concatenate([u, v, [omega ** 2, pv[k2], start.value]])
        problem = HopfLocus(funcs, pv, k1, k2, v)
    problem.range2 = _range2(system, param2, pv[k2], range2)
    size = max(abs(hi - lo), 1.0 + float(np.max(np.abs(x0[:funcs.n]))), abs(problem.range2[1] - problem.range2[0]))
    settings = settings or StepSettings(ds=abs(hi - lo) / 200, ds_min=abs(hi - lo) * 1e-9,
                                        ds_max=max(abs(hi - lo) / 30, size / 40), max_points=300)
    fixed = np.zeros(len(x0))
    fixed[-2] = 1.0
    x0c, _ = newton_bordered(problem, x0, fixed, settings)
    if x0c is None:
        raise ContinuationError(f"the {kind} point could not be put on its locus")
    problem.accept(x0c)
    curve = continue_curve(problem, x0c, null_tangent(problem, x0c), lo, hi, settings, both=True, cancel=cancel,
                           progress=report.part(0.2, 0.8))
    xs = np.array(curve.xs)
    special = []
    for s in curve.special:
        s.x = np.where(np.abs(s.x) < 1e-13 * max(1.0, float(np.max(np.abs(s.x)))), 0.0, s.x) + 0.0
        special.append({"type": s.type, "values": {param: float(s.x[-1]), param2: float(s.x[-2])},
                        "state": {name: float(v) for name, v in zip(system.states, s.x[:funcs.n])}})
    report(1.0)
    return Locus(kind, (param, param2), list(system.states), np.vstack([xs[:, -1], xs[:, -2]]),
                 xs[:, :funcs.n].T, special, list(curve.reasons))


def _range2(system, name, value, given):
    if given is not None:
        lo2, hi2 = sorted(map(float, given))
    else:
        lo2, hi2 = system.param_ranges.get(name, (None, None))
        width = 10 * max(1.0, abs(value))
        lo2 = value - width if lo2 is None else min(lo2, value)
        hi2 = value + width if hi2 is None else max(hi2, value)
    if not lo2 <= value <= hi2:
        raise ValueError(f"the value {value:.6g} of {name} lies outside its range [{lo2:.6g}, {hi2:.6g}]")
    return lo2, hi2


def _with(pv, k, value):
    out = pv.copy()
    out[k] = value
    return out
